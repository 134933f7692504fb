//! Contact sheets (`twinaudit sheet`): PNG pages with one row per pair of a run, showing the
//! original image, the edited image with the edited shape outlined (and the objects a duplicate
//! added boxed), a per-pixel difference heat map and the pair's question, answers, expectation
//! and verdict (docs/sheet.md).
//!
//! Invariants: the run folder is only read; pages go to their own folder (default `RUN/sheet/`)
//! where only this module's files (`page-NNNN.png`, `index.json`) are ever replaced. At most
//! `jobs` pages are held in memory at once (workers take whole pages), and a page's bytes do not
//! depend on the number of workers. The verdict is always written in words; colour only repeats
//! it. Text uses the embedded DejaVu Sans (no system fonts), and a character the font lacks is
//! drawn as an empty box, never dropped. Every row names its pair id and results.jsonl line.

use std::collections::BTreeSet;
use std::io::{BufWriter, Write};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};
use std::sync::mpsc;

use image::{ImageEncoder, Rgb, RgbImage};
use serde::{Deserialize, Serialize};

use crate::audit::checker::Verdict;
use crate::audit::replay::{ReplayError, RunFolder};
use crate::audit::results::{PairRecord, Status};
use crate::audit::runner::{progress_bar, RESULTS_FILE};
use crate::audit::summary::summarise;
use crate::spec::{Expectation, QuestionKind};
use crate::stats::Rate;

mod pictures;
mod text;

pub(crate) use pictures::dashed_rect;
pub use pictures::{
    difference_map, heat_colour, outline_band, row_pictures, RowPictures, Thumb, ADDED_OUTLINE,
    SHAPE_OUTLINE,
};
use text::{fill_rect, CHIP_PX, INK};
pub use text::{TextDrawn, TextLine, TextPainter, TextStyle};

pub const SHEET_FORMAT_VERSION: u32 = 1;
/// Default output folder inside the run folder.
pub const SHEET_DIR: &str = "sheet";
pub const INDEX_FILE: &str = "index.json";
/// Most rows on one page: bounds a page's memory (about 0.9 MB of pixels a row).
pub const MAX_ROWS_PER_PAGE: usize = 100;

#[derive(Debug, thiserror::Error)]
pub enum SheetError {
    #[error(transparent)]
    Replay(#[from] ReplayError),
    #[error("rows per page must lie in 1..={MAX_ROWS_PER_PAGE}, got {0}")]
    RowsPerPage(usize),
    #[error("--limit must be at least 1, got 0")]
    Limit,
    #[error("run {dir}: no edited region has the label {label:?}; labels in this run: {known}")]
    UnknownLabel {
        dir: PathBuf,
        label: String,
        known: String,
    },
    #[error(
        "run {dir}: no pair used the operation {operation:?}; operations in this run: {known}"
    )]
    UnknownOperation {
        dir: PathBuf,
        operation: String,
        known: String,
    },
    #[error("run {dir}: no distractor label has judged edits, so there is no top confounder to show; drop --top-confounder")]
    NoConfounder { dir: PathBuf },
    #[error("{dir} holds files that are not a contact sheet ({example}); choose another --out")]
    OutputNotEmpty { dir: PathBuf, example: String },
    #[error("cannot write {path}: {message}")]
    Write { path: PathBuf, message: String },
}

fn write_err<E: std::fmt::Display>(path: &Path) -> impl Fn(E) -> SheetError + '_ {
    move |e| SheetError::Write {
        path: path.to_path_buf(),
        message: e.to_string(),
    }
}

// ---------------------------------------------------------------------------------------------
// Selection

/// Which rows of results.jsonl go on the sheet by outcome.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Outcome {
    /// `passed` is true: held, or moved to the expected answer.
    Passed,
    /// `passed` is false: flipped, moved elsewhere or did not move.
    Failed,
    /// Pairs that could not be judged (`status` error).
    Error,
}

/// Real pairs, placebo controls or both.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum PairSet {
    #[default]
    All,
    Real,
    Placebo,
}

/// Row order. Ties keep file order.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum SortKey {
    /// results.jsonl order.
    #[default]
    Line,
    /// Pair id, ascending (byte order).
    PairId,
    /// Probability of the after-edit answer, highest first; rows without one last.
    Confidence,
    /// `area_fraction`, largest first; rows without one last.
    Area,
}

impl SortKey {
    pub fn describe(self) -> &'static str {
        match self {
            SortKey::Line => "results.jsonl order",
            SortKey::PairId => "pair id",
            SortKey::Confidence => "after-edit answer's probability, highest first",
            SortKey::Area => "edited area, largest first",
        }
    }
}

/// Conditions a row must meet: all options at once, any value within one option. Empty lists
/// accept everything.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct RowFilter {
    pub verdicts: Vec<Verdict>,
    pub outcome: Option<Outcome>,
    pub operations: Vec<String>,
    /// `target`, `distractor`, `mixed`.
    pub roles: Vec<String>,
    pub kinds: Vec<QuestionKind>,
    /// A row matches when any of its edited regions has one of these labels.
    pub labels: Vec<String>,
    pub pairs: PairSet,
    /// Keep only real distractor pairs of the question kind × label with the highest flip rate
    /// (the first row of the summary's `distractor_labels`): edits of that label only.
    pub top_confounder: bool,
}

impl RowFilter {
    fn matches(&self, r: &PairRecord) -> bool {
        let any = |list: &[String], value: &str| list.is_empty() || list.iter().any(|v| v == value);
        (self.verdicts.is_empty() || r.verdict.is_some_and(|v| self.verdicts.contains(&v)))
            && match self.outcome {
                None => true,
                Some(Outcome::Passed) => r.passed == Some(true),
                Some(Outcome::Failed) => r.passed == Some(false),
                Some(Outcome::Error) => r.status == Status::Error,
            }
            && any(&self.operations, &r.operation)
            && any(&self.roles, &r.role)
            && (self.kinds.is_empty() || self.kinds.contains(&r.question_kind))
            && (self.labels.is_empty() || r.regions.iter().any(|g| self.labels.contains(&g.label)))
            && match self.pairs {
                PairSet::All => true,
                PairSet::Real => r.placebo_of.is_none(),
                PairSet::Placebo => r.placebo_of.is_some(),
            }
    }

    /// Words for the page header, e.g. "label cloth, verdict flipped, real pairs".
    pub fn describe(&self) -> String {
        let mut parts = Vec::new();
        let list = |name: &str, v: Vec<String>, parts: &mut Vec<String>| {
            if !v.is_empty() {
                parts.push(format!("{name} {}", v.join(" or ")));
            }
        };
        list(
            "verdict",
            self.verdicts
                .iter()
                .map(|v| verdict_words(Some(*v)).into())
                .collect(),
            &mut parts,
        );
        if let Some(o) = self.outcome {
            parts.push(
                match o {
                    Outcome::Passed => "passed",
                    Outcome::Failed => "failed",
                    Outcome::Error => "not judged",
                }
                .into(),
            );
        }
        list("operation", self.operations.clone(), &mut parts);
        list("role", self.roles.clone(), &mut parts);
        list(
            "question",
            self.kinds.iter().map(|k| k.as_str().into()).collect(),
            &mut parts,
        );
        list("label", self.labels.clone(), &mut parts);
        match self.pairs {
            PairSet::All => {}
            PairSet::Real => parts.push("real pairs".into()),
            PairSet::Placebo => parts.push("placebo controls".into()),
        }
        if parts.is_empty() {
            if self.top_confounder {
                "its edits".into()
            } else {
                "every pair".into()
            }
        } else {
            parts.join(", ")
        }
    }
}

/// The question kind × distractor label whose edits flip answers most often.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Confounder {
    pub question_kind: QuestionKind,
    pub label: String,
    pub flip_rate: Rate,
}

/// The rows a sheet shows, as indices into the run's records, in sheet order.
#[derive(Debug, Clone)]
pub struct Selection {
    pub indices: Vec<usize>,
    /// Rows matching the filter before `limit`.
    pub n_matching: usize,
    pub confounder: Option<Confounder>,
}

/// Filters and sorts a run's records. Labels and operations the run never used are errors (a
/// typo would otherwise give an empty sheet).
pub fn select_rows(
    dir: &Path,
    records: &[PairRecord],
    filter: &RowFilter,
    sort: SortKey,
    reverse: bool,
    limit: Option<usize>,
) -> Result<Selection, SheetError> {
    let labels: BTreeSet<&str> = records
        .iter()
        .flat_map(|r| r.regions.iter().map(|g| g.label.as_str()))
        .collect();
    if let Some(l) = filter.labels.iter().find(|l| !labels.contains(l.as_str())) {
        return Err(SheetError::UnknownLabel {
            dir: dir.to_path_buf(),
            label: l.clone(),
            known: quoted_list(&labels),
        });
    }
    let operations: BTreeSet<&str> = records.iter().map(|r| r.operation.as_str()).collect();
    if let Some(o) = filter
        .operations
        .iter()
        .find(|o| !operations.contains(o.as_str()))
    {
        return Err(SheetError::UnknownOperation {
            dir: dir.to_path_buf(),
            operation: o.clone(),
            known: quoted_list(&operations),
        });
    }
    let confounder = if filter.top_confounder {
        let summary = summarise(records, 0.95);
        let top = summary
            .distractor_labels
            .first()
            .ok_or_else(|| SheetError::NoConfounder {
                dir: dir.to_path_buf(),
            })?;
        Some(Confounder {
            question_kind: top.question_kind,
            label: top.label.clone(),
            flip_rate: top.flip_rate,
        })
    } else {
        None
    };
    // Same pairs as the summary's distractor_labels row: real distractor edits whose regions
    // all carry the label.
    let of_confounder = |r: &PairRecord| match &confounder {
        None => true,
        Some(c) => {
            r.placebo_of.is_none()
                && r.role == "distractor"
                && r.question_kind == c.question_kind
                && !r.regions.is_empty()
                && r.regions.iter().all(|g| g.label == c.label)
        }
    };
    let mut indices: Vec<usize> = (0..records.len())
        .filter(|&i| filter.matches(&records[i]) && of_confounder(&records[i]))
        .collect();
    let desc = |v: Option<f64>| v.map_or(f64::INFINITY, |x| -x);
    match sort {
        SortKey::Line => {}
        SortKey::PairId => indices.sort_by(|&a, &b| records[a].pair_id.cmp(&records[b].pair_id)),
        SortKey::Confidence => indices.sort_by(|&a, &b| {
            let p = |i: usize| desc(records[i].after.as_ref().map(|p| p.probability as f64));
            p(a).total_cmp(&p(b))
        }),
        SortKey::Area => indices.sort_by(|&a, &b| {
            desc(records[a].area_fraction).total_cmp(&desc(records[b].area_fraction))
        }),
    }
    if reverse {
        indices.reverse();
    }
    let n_matching = indices.len();
    if let Some(n) = limit {
        indices.truncate(n);
    }
    Ok(Selection {
        indices,
        n_matching,
        confounder,
    })
}

fn quoted_list(set: &BTreeSet<&str>) -> String {
    if set.is_empty() {
        return "none".into();
    }
    set.iter()
        .map(|s| format!("{s:?}"))
        .collect::<Vec<_>>()
        .join(", ")
}

/// 1-based line number in results.jsonl of every record, in file order (blank lines, which the
/// reader skips, still count).
pub fn record_line_numbers(results: &Path) -> Result<Vec<usize>, SheetError> {
    let text = std::fs::read(results).map_err(|e| SheetError::Write {
        path: results.to_path_buf(),
        message: format!("cannot read it again: {e}"),
    })?;
    Ok(text
        .split(|&b| b == b'\n')
        .enumerate()
        .filter(|(_, l)| !l.iter().all(u8::is_ascii_whitespace))
        .map(|(i, _)| i + 1)
        .collect())
}

// ---------------------------------------------------------------------------------------------
// Words

/// The verdict in words, as every row writes it.
pub fn verdict_words(v: Option<Verdict>) -> &'static str {
    match v {
        Some(Verdict::Held) => "held",
        Some(Verdict::Flipped) => "flipped",
        Some(Verdict::MovedToExpected) => "moved to expected",
        Some(Verdict::MovedElsewhere) => "moved elsewhere",
        Some(Verdict::DidNotMove) => "did not move",
        None => "not judged",
    }
}

/// Colour that repeats (never replaces) the verdict words: the row's side bar and chip.
pub fn verdict_colour(v: Option<Verdict>) -> Rgb<u8> {
    match v {
        Some(Verdict::Held) | Some(Verdict::MovedToExpected) => Rgb([47, 133, 90]),
        Some(Verdict::Flipped) => Rgb([204, 64, 46]),
        Some(Verdict::DidNotMove) => Rgb([196, 134, 18]),
        Some(Verdict::MovedElsewhere) => Rgb([138, 78, 170]),
        None => Rgb([118, 118, 124]),
    }
}

fn percent(p: f32) -> String {
    format!("{:.1}%", 100.0 * p as f64)
}

/// The text of one row, before wrapping: pair id, where it is in results.jsonl, question,
/// answers with probabilities, expectation, verdict in words, the edit and any warning or error.
pub fn row_text(record: &PairRecord, line: usize, row: usize) -> Vec<TextLine> {
    let mut out = vec![TextLine::new(TextStyle::Title, record.pair_id.clone())];
    let mut whereabouts = format!("results.jsonl line {line} · sheet row {row}");
    if let Some(of) = &record.placebo_of {
        whereabouts.push_str(&format!(" · placebo control of {of}"));
    }
    out.push(TextLine::new(TextStyle::Muted, whereabouts));
    out.push(TextLine::new(
        TextStyle::Body,
        format!(
            "question ({}): {}",
            record.question_kind.as_str(),
            record.question
        ),
    ));
    let answers = match (&record.before, &record.after) {
        (Some(b), Some(a)) => format!(
            "answer: {} {} → {} {}",
            b.answer,
            percent(b.probability),
            a.answer,
            percent(a.probability)
        ),
        (Some(b), None) => format!("answer: {} {} → none", b.answer, percent(b.probability)),
        _ => "answer: none".into(),
    };
    out.push(TextLine::new(TextStyle::Body, answers));
    let expected = match &record.expectation {
        Expectation::Same => "expected: the same answer".to_string(),
        Expectation::Change => "expected: a different answer".to_string(),
        Expectation::Answer(a) => format!("expected: {a}"),
    };
    let source = if record.expectation_derived {
        "derived from the question"
    } else {
        "stated in the spec"
    };
    let truth = record
        .truth
        .as_ref()
        .map(|t| format!(" · truth {t}"))
        .unwrap_or_default();
    out.push(TextLine::new(
        TextStyle::Body,
        format!("{expected} ({source}){truth}"),
    ));
    let words = verdict_words(record.verdict);
    let why = match record.verdict {
        Some(Verdict::Held) => "passed: the answer stayed".to_string(),
        Some(Verdict::MovedToExpected) => "passed: the answer moved as expected".to_string(),
        Some(Verdict::Flipped) => "failed: the answer should have stayed".to_string(),
        Some(Verdict::DidNotMove) => "failed: the answer should have changed".to_string(),
        Some(Verdict::MovedElsewhere) => match &record.expectation {
            Expectation::Answer(a) => format!("failed: the answer changed, but not to {a}"),
            _ => "failed: the answer changed to something else".into(),
        },
        None => "error: the pair could not be judged".into(),
    };
    out.push(TextLine {
        text: format!("verdict: {words} ({why})"),
        style: TextStyle::Strong,
        chip: Some(verdict_colour(record.verdict)),
    });
    let mut labels: Vec<&str> = Vec::new();
    for g in &record.regions {
        if !labels.contains(&g.label.as_str()) {
            labels.push(&g.label);
        }
    }
    let method = record
        .method
        .as_ref()
        .map(|m| format!(" ({m})"))
        .unwrap_or_default();
    let area = record
        .area_fraction
        .map(|a| format!(", {:.1}% of the image", 100.0 * a))
        .unwrap_or_default();
    out.push(TextLine::new(
        TextStyle::Body,
        format!(
            "edit {}: {}{} of {} [{}]{}",
            record.edit,
            record.operation,
            method,
            labels.join(", "),
            record.role,
            area
        ),
    ));
    if !record.added_regions.is_empty() {
        out.push(TextLine::new(
            TextStyle::Body,
            format!(
                "added {} object(s), boxed with dashes",
                record.added_regions.len()
            ),
        ));
    }
    if let Some(e) = &record.error {
        out.push(TextLine::new(TextStyle::Body, format!("error: {e}")));
    }
    for w in &record.warnings {
        out.push(TextLine::new(TextStyle::Muted, format!("warning: {w}")));
    }
    out
}

// ---------------------------------------------------------------------------------------------
// Page layout: a header band, then rows of [verdict bar | original | edited | difference | text].

const PAPER: Rgb<u8> = Rgb([243, 241, 236]);
const CARD: Rgb<u8> = Rgb([255, 255, 255]);
const HEADER_BG: Rgb<u8> = Rgb([38, 44, 56]);
const HEADER_INK: Rgb<u8> = Rgb([242, 238, 228]);
const HEADER_MUTED: Rgb<u8> = Rgb([178, 184, 196]);
const CELL_BG: Rgb<u8> = Rgb([226, 224, 218]);
/// Longer side of each picture in a row.
pub const CELL_PX: u32 = 200;
const MARGIN: u32 = 16;
const GAP: u32 = 10;
const BAR_W: u32 = 46;
const TEXT_W: u32 = 520;
const CAPTION_H: u32 = 18;
const ROW_PAD: u32 = 9;
/// Height of one row in pixels.
pub const ROW_H: u32 = 2 * ROW_PAD + CAPTION_H + CELL_PX;
const HEADER_H: u32 = 74;
/// Width of every page in pixels.
pub const PAGE_W: u32 = 2 * MARGIN + BAR_W + GAP + 3 * (CELL_PX + GAP) + TEXT_W;

fn cell_x(k: u32) -> u32 {
    MARGIN + BAR_W + GAP + k * (CELL_PX + GAP)
}

/// Page height for `n_rows` rows.
pub fn page_height(n_rows: usize) -> u32 {
    HEADER_H + n_rows as u32 * ROW_H + MARGIN
}

/// One row to draw: the record, its results.jsonl line and its 1-based place on the sheet.
pub struct RowInput<'a> {
    pub record: &'a PairRecord,
    pub line: usize,
    pub row: usize,
}

/// What became of a row's pictures.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum ImageSource {
    /// The edit saved by the run (`--save-edits`).
    Saved,
    /// Re-rendered from the spec with the pair's recorded seed.
    ReRendered,
    /// No pictures: `problem` says why.
    Unavailable,
}

/// A drawn row's entry in the index.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RowEntry {
    pub row: usize,
    pub pair_id: String,
    /// 1-based line in results.jsonl.
    pub line: usize,
    /// The verdict in words, as drawn.
    pub verdict: String,
    /// False for the run's error rows (`status` error), which have no verdict.
    pub judged: bool,
    pub edited_image: ImageSource,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub problem: Option<String>,
}

/// Draws one row at `y0` of `page`. Pair images come from `run` (saved edit, else re-rendered);
/// a pair whose images cannot be made gets empty cells and the reason in its text.
pub fn draw_row(
    page: &mut RgbImage,
    y0: u32,
    input: &RowInput,
    run: &mut RunFolder,
    painter: &mut TextPainter,
) -> RowEntry {
    let r = input.record;
    let mut lines = row_text(r, input.line, input.row);
    let (pictures, source, problem) = match run.pair_images(r) {
        Ok(images) => {
            let source = if images.from_saved_edit {
                ImageSource::Saved
            } else {
                ImageSource::ReRendered
            };
            match row_pictures(&images, &r.added_regions, CELL_PX) {
                Some(p) => (Pictures::Pair(p), source, None),
                None => (
                    original_only(run, r),
                    ImageSource::Unavailable,
                    Some(format!(
                        "edited image is {}×{} but the original is {}×{}",
                        images.edited.width(),
                        images.edited.height(),
                        images.original.width(),
                        images.original.height()
                    )),
                ),
            }
        }
        Err(e) => (
            original_only(run, r),
            ImageSource::Unavailable,
            Some(e.to_string()),
        ),
    };
    match (&problem, source) {
        (Some(_), _) if r.status == Status::Error => lines.push(TextLine::new(
            TextStyle::Muted,
            "no edited image: the run could not make this edit".into(),
        )),
        (Some(p), _) => lines.push(TextLine::new(
            TextStyle::Body,
            format!("no edited image: {p}"),
        )),
        (None, ImageSource::ReRendered) => lines.push(TextLine::new(
            TextStyle::Muted,
            "edited image re-rendered from the recorded seed".into(),
        )),
        _ => {}
    }

    // Card and verdict bar.
    let card_x = MARGIN as i32;
    let card_w = (PAGE_W - 2 * MARGIN) as i32;
    fill_rect(page, card_x, y0 as i32 + 3, card_w, ROW_H as i32 - 6, CARD);
    let colour = verdict_colour(r.verdict);
    fill_rect(page, card_x, y0 as i32 + 3, 6, ROW_H as i32 - 6, colour);
    let num = format!("{}", input.row);
    painter.draw(
        page,
        card_x + 12,
        (y0 + ROW_PAD + 16) as i32,
        &num,
        TextStyle::Title,
        INK,
    );
    painter.draw(
        page,
        card_x + 12,
        (y0 + ROW_PAD + 32) as i32,
        "row",
        TextStyle::Small,
        TextStyle::Small.colour(),
    );

    // Pictures with captions.
    let edited_caption = if r.added_regions.is_empty() {
        "edited, shape outlined"
    } else {
        "edited, shape and copies"
    };
    let captions = ["original", edited_caption, "difference"];
    let cell_y = y0 + ROW_PAD + CAPTION_H;
    for (k, caption) in captions.iter().enumerate() {
        let x = cell_x(k as u32);
        painter.draw(
            page,
            x as i32,
            (y0 + ROW_PAD + 12) as i32,
            caption,
            TextStyle::Small,
            TextStyle::Small.colour(),
        );
        fill_rect(
            page,
            x as i32,
            cell_y as i32,
            CELL_PX as i32,
            CELL_PX as i32,
            CELL_BG,
        );
    }
    let cells: [Option<&RgbImage>; 3] = match &pictures {
        Pictures::Pair(p) => [Some(&p.original), Some(&p.edited), Some(&p.heat)],
        Pictures::Original(o) => [Some(o), None, None],
        Pictures::None => [None, None, None],
    };
    for (k, cell) in cells.into_iter().enumerate() {
        let x = cell_x(k as u32);
        match cell {
            Some(img) => {
                let ox = (CELL_PX - img.width()) / 2;
                let oy = (CELL_PX - img.height()) / 2;
                image::imageops::replace(page, img, (x + ox) as i64, (cell_y + oy) as i64);
            }
            None => {
                painter.draw(
                    page,
                    x as i32 + 8,
                    (cell_y + CELL_PX / 2) as i32,
                    "no picture",
                    TextStyle::Muted,
                    TextStyle::Muted.colour(),
                );
            }
        }
    }

    // Text column.
    let tx = cell_x(3) as i32;
    let max_lines = ((ROW_H - 2 * ROW_PAD) / TextStyle::Body.line_height()) as usize;
    let wrapped = painter.wrap(&lines, TEXT_W - GAP, max_lines);
    let mut baseline = (y0 + ROW_PAD) as i32;
    for line in &wrapped {
        baseline += line.style.line_height() as i32;
        let mut x = tx;
        if let Some(chip) = line.chip {
            fill_rect(
                page,
                x,
                baseline - CHIP_PX as i32,
                CHIP_PX as i32,
                CHIP_PX as i32,
                chip,
            );
            x += (CHIP_PX + 6) as i32;
        }
        painter.draw(
            page,
            x,
            baseline,
            &line.text,
            line.style,
            line.style.colour(),
        );
    }

    RowEntry {
        row: input.row,
        pair_id: r.pair_id.clone(),
        line: input.line,
        verdict: verdict_words(r.verdict).into(),
        judged: r.status == Status::Ok,
        edited_image: source,
        problem,
    }
}

/// What a row can show.
enum Pictures {
    Pair(RowPictures),
    /// The edit could not be made (e.g. a placebo with no free background): the original only.
    Original(RgbImage),
    None,
}

fn original_only(run: &mut RunFolder, record: &PairRecord) -> Pictures {
    let Ok((case, _)) = run.case_of(record) else {
        return Pictures::None;
    };
    match crate::imageio::load_rgb(&case.image_path) {
        Ok(image) => {
            let thumb = Thumb::fit(image.width(), image.height(), CELL_PX);
            Pictures::Original(thumb.shrink_rgb(&image))
        }
        Err(_) => Pictures::None,
    }
}

/// The header band: title, which rows, the selection, and the legend of colours.
fn draw_header(page: &mut RgbImage, painter: &mut TextPainter, title: &str, subtitle: &str) {
    fill_rect(page, 0, 0, PAGE_W as i32, HEADER_H as i32 - 8, HEADER_BG);
    let legend_x = (PAGE_W - MARGIN - 330) as i32;
    let room = legend_x as u32 - MARGIN - 12;
    let fit = |painter: &TextPainter, s: &str, style| {
        painter.wrap(&[TextLine::new(style, s.to_string())], room, 1)[0]
            .text
            .clone()
    };
    let t = fit(painter, title, TextStyle::Header);
    painter.draw(page, MARGIN as i32, 24, &t, TextStyle::Header, HEADER_INK);
    let lines = painter.wrap(
        &[TextLine::new(TextStyle::Small, subtitle.to_string())],
        room,
        2,
    );
    for (k, line) in lines.iter().enumerate() {
        let y = 43 + k as i32 * TextStyle::Small.line_height() as i32;
        painter.draw(
            page,
            MARGIN as i32,
            y,
            &line.text,
            TextStyle::Small,
            HEADER_MUTED,
        );
    }

    // Heat ramp legend.
    let (bar_w, bar_y) = (150i32, 12i32);
    for i in 0..bar_w {
        let d = (i * 255 / (bar_w - 1)) as u8;
        fill_rect(page, legend_x + i, bar_y, 1, 10, heat_colour(d));
    }
    painter.draw(
        page,
        legend_x,
        bar_y + 22,
        "0",
        TextStyle::Small,
        HEADER_MUTED,
    );
    let top = "255 levels";
    let w = painter.measure(top, TextStyle::Small) as i32;
    painter.draw(
        page,
        legend_x + bar_w - w,
        bar_y + 22,
        top,
        TextStyle::Small,
        HEADER_MUTED,
    );
    painter.draw(
        page,
        legend_x,
        bar_y + 36,
        "difference: largest channel change",
        TextStyle::Small,
        HEADER_MUTED,
    );
    // Outline swatches.
    let sx = legend_x + 226;
    fill_rect(page, sx, bar_y, 14, 10, SHAPE_OUTLINE);
    painter.draw(
        page,
        sx + 20,
        bar_y + 10,
        "edited shape",
        TextStyle::Small,
        HEADER_INK,
    );
    dashed_rect(page, sx, bar_y + 18, 14, 10, ADDED_OUTLINE);
    painter.draw(
        page,
        sx + 20,
        bar_y + 28,
        "added copy",
        TextStyle::Small,
        HEADER_INK,
    );
}

/// One page of rows, as an image.
pub fn render_page(
    rows: &[RowInput],
    run: &mut RunFolder,
    painter: &mut TextPainter,
    title: &str,
    subtitle: &str,
    mut on_row: impl FnMut(),
) -> (RgbImage, Vec<RowEntry>) {
    let mut page = RgbImage::from_pixel(PAGE_W, page_height(rows.len()), PAPER);
    draw_header(&mut page, painter, title, subtitle);
    let mut entries = Vec::with_capacity(rows.len());
    for (i, row) in rows.iter().enumerate() {
        let y0 = HEADER_H + i as u32 * ROW_H;
        entries.push(draw_row(&mut page, y0, row, run, painter));
        on_row();
    }
    (page, entries)
}

// ---------------------------------------------------------------------------------------------
// The command

/// A validated `twinaudit sheet` request.
#[derive(Debug, Clone)]
pub struct SheetConfig {
    pub run_dir: PathBuf,
    /// Pages and index.json go here (default `RUN/sheet`).
    pub out_dir: PathBuf,
    pub filter: RowFilter,
    pub sort: SortKey,
    pub reverse: bool,
    pub rows_per_page: usize,
    /// Keep at most this many rows after sorting.
    pub limit: Option<usize>,
    /// Workers, each drawing whole pages.
    pub jobs: usize,
    pub show_progress: bool,
}

impl SheetConfig {
    pub fn new(run_dir: &Path) -> SheetConfig {
        SheetConfig {
            run_dir: run_dir.to_path_buf(),
            out_dir: run_dir.join(SHEET_DIR),
            filter: RowFilter::default(),
            sort: SortKey::Line,
            reverse: false,
            rows_per_page: 10,
            limit: None,
            jobs: 2,
            show_progress: false,
        }
    }
}

/// How the rows were chosen, as recorded in index.json.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SelectionInfo {
    pub filter: RowFilter,
    pub sort: SortKey,
    pub reverse: bool,
    pub limit: Option<usize>,
    pub rows_per_page: usize,
    /// Rows that matched the filter (before `limit`).
    pub n_matching: usize,
    /// With `top_confounder`: the label it chose.
    pub top_confounder: Option<Confounder>,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PageEntry {
    /// 1-based.
    pub page: usize,
    /// File name inside the sheet folder.
    pub file: String,
    pub rows: Vec<RowEntry>,
}

/// index.json: every page written and the pair on each of its rows (docs/sheet.md).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SheetIndex {
    pub format_version: u32,
    pub run_dir: String,
    pub results: String,
    pub selection: SelectionInfo,
    pub n_rows: usize,
    /// Judged rows drawn without the edited picture (their `problem` says why); the run's own
    /// error rows, which never had an edit, are not counted.
    pub n_rows_without_pictures: usize,
    pub pages: Vec<PageEntry>,
}

pub fn page_file_name(page: usize) -> String {
    format!("page-{page:04}.png")
}

fn is_sheet_file(name: &str) -> bool {
    name == INDEX_FILE
        || (name.starts_with("page-")
            && name.ends_with(".png")
            && name["page-".len()..name.len() - 4]
                .chars()
                .all(|c| c.is_ascii_digit()))
}

/// Makes `dir` ready: created if missing; an earlier sheet's pages and index are removed; any
/// other file stops the command (nothing is deleted then).
fn prepare_out_dir(dir: &Path) -> Result<(), SheetError> {
    if dir.exists() {
        let entries: Vec<_> = std::fs::read_dir(dir)
            .map_err(write_err(dir))?
            .filter_map(Result::ok)
            .collect();
        if let Some(other) = entries
            .iter()
            .find(|e| !is_sheet_file(&e.file_name().to_string_lossy()))
        {
            return Err(SheetError::OutputNotEmpty {
                dir: dir.to_path_buf(),
                example: other.file_name().to_string_lossy().into_owned(),
            });
        }
        for e in entries {
            std::fs::remove_file(e.path()).map_err(write_err(&e.path()))?;
        }
    }
    std::fs::create_dir_all(dir).map_err(write_err(dir))
}

fn write_png(path: &Path, image: &RgbImage) -> Result<(), SheetError> {
    let part = path.with_extension("png.part");
    let file = std::fs::File::create(&part).map_err(write_err(&part))?;
    let mut w = BufWriter::new(file);
    image::codecs::png::PngEncoder::new_with_quality(
        &mut w,
        image::codecs::png::CompressionType::Fast,
        image::codecs::png::FilterType::Adaptive,
    )
    .write_image(
        image.as_raw(),
        image.width(),
        image.height(),
        image::ExtendedColorType::Rgb8,
    )
    .map_err(write_err(&part))?;
    w.flush().map_err(write_err(&part))?;
    drop(w);
    std::fs::rename(&part, path).map_err(write_err(path))
}

enum Message {
    Row,
    Page(usize, Result<PageEntry, SheetError>),
}

/// Writes the contact sheet of a run: pages of `rows_per_page` rows and index.json. Returns the
/// index (also written to `out_dir/index.json`).
pub fn write_sheet(config: &SheetConfig) -> Result<SheetIndex, SheetError> {
    if config.rows_per_page == 0 || config.rows_per_page > MAX_ROWS_PER_PAGE {
        return Err(SheetError::RowsPerPage(config.rows_per_page));
    }
    if config.limit == Some(0) {
        return Err(SheetError::Limit);
    }
    let dir = &config.run_dir;
    let mut run = RunFolder::open(dir)?;
    let results = dir.join(RESULTS_FILE);
    let lines = record_line_numbers(&results)?;
    let selection = select_rows(
        dir,
        &run.records,
        &config.filter,
        config.sort,
        config.reverse,
        config.limit,
    )?;
    // The specs are needed for every picture (the original image and the shape): check them
    // once, so a moved or changed spec stops the command instead of emptying every row.
    if let Some(&first) = selection.indices.first() {
        let record = run.records[first].clone();
        if let Err(e @ (ReplayError::SpecUnavailable { .. } | ReplayError::SpecChanged { .. })) =
            run.case_of(&record)
        {
            return Err(e.into());
        }
    }
    prepare_out_dir(&config.out_dir)?;

    let rows: Vec<(usize, usize, usize)> = selection
        .indices
        .iter()
        .enumerate()
        .map(|(k, &i)| (i, lines.get(i).copied().unwrap_or(i + 1), k + 1))
        .collect();
    let pages: Vec<&[(usize, usize, usize)]> = rows.chunks(config.rows_per_page).collect();
    let n_pages = pages.len();
    let run_name = dir
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| dir.display().to_string());
    let chosen = match &selection.confounder {
        Some(c) => format!(
            "top confounder {:?} (distractor on {} questions, flip rate {}), ",
            c.label,
            c.question_kind.as_str(),
            c.flip_rate.describe()
        ),
        None => String::new(),
    };
    let subtitle_tail = format!(
        "{chosen}{} · sort: {}{}",
        config.filter.describe(),
        config.sort.describe(),
        if config.reverse { ", reversed" } else { "" }
    );

    let progress = progress_bar(config.show_progress, rows.len() as u64, "rows");

    let next = AtomicUsize::new(0);
    let stop = AtomicBool::new(false);
    let mut entries: Vec<Option<PageEntry>> = vec![None; n_pages];
    let mut first_error: Option<SheetError> = None;
    let records = &run.records;
    std::thread::scope(|scope| {
        let (tx, rx) = mpsc::channel::<Message>();
        for _ in 0..config.jobs.max(1).min(n_pages) {
            let tx = tx.clone();
            let (next, stop, pages, subtitle_tail, run_name) =
                (&next, &stop, &pages, &subtitle_tail, &run_name);
            let n_rows = rows.len();
            scope.spawn(move || {
                // Each worker reads the run itself: RunFolder caches specs behind `&mut`.
                let mut folder = match RunFolder::open(dir) {
                    Ok(f) => f,
                    Err(e) => {
                        let _ = tx.send(Message::Page(usize::MAX, Err(e.into())));
                        return;
                    }
                };
                let mut painter = TextPainter::new();
                while !stop.load(Ordering::Relaxed) {
                    let p = next.fetch_add(1, Ordering::Relaxed);
                    let Some(page_rows) = pages.get(p) else { break };
                    let inputs: Vec<RowInput> = page_rows
                        .iter()
                        .map(|&(i, line, row)| RowInput {
                            record: &records[i],
                            line,
                            row,
                        })
                        .collect();
                    let title =
                        format!("twinaudit sheet · {run_name} · page {} of {n_pages}", p + 1);
                    let subtitle = format!(
                        "rows {}–{} of {n_rows} · {subtitle_tail}",
                        page_rows[0].2,
                        page_rows[page_rows.len() - 1].2
                    );
                    let (image, row_entries) = render_page(
                        &inputs,
                        &mut folder,
                        &mut painter,
                        &title,
                        &subtitle,
                        || {
                            let _ = tx.send(Message::Row);
                        },
                    );
                    let file = page_file_name(p + 1);
                    let result =
                        write_png(&config.out_dir.join(&file), &image).map(|_| PageEntry {
                            page: p + 1,
                            file,
                            rows: row_entries,
                        });
                    if tx.send(Message::Page(p, result)).is_err() {
                        return;
                    }
                }
            });
        }
        drop(tx);
        for m in rx {
            match m {
                Message::Row => progress.inc(1),
                Message::Page(p, Ok(entry)) => entries[p] = Some(entry),
                Message::Page(_, Err(e)) => {
                    stop.store(true, Ordering::Relaxed);
                    first_error.get_or_insert(e);
                }
            }
        }
    });
    progress.finish_and_clear();
    if let Some(e) = first_error {
        return Err(e);
    }
    let pages: Vec<PageEntry> = entries
        .into_iter()
        .map(|e| e.expect("every page was written or an error returned"))
        .collect();
    let index = SheetIndex {
        format_version: SHEET_FORMAT_VERSION,
        run_dir: dir.display().to_string(),
        results: results.display().to_string(),
        selection: SelectionInfo {
            filter: config.filter.clone(),
            sort: config.sort,
            reverse: config.reverse,
            limit: config.limit,
            rows_per_page: config.rows_per_page,
            n_matching: selection.n_matching,
            top_confounder: selection.confounder,
        },
        n_rows: rows.len(),
        n_rows_without_pictures: pages
            .iter()
            .flat_map(|p| &p.rows)
            .filter(|r| r.judged && r.edited_image == ImageSource::Unavailable)
            .count(),
        pages,
    };
    let index_path = config.out_dir.join(INDEX_FILE);
    let json = serde_json::to_string_pretty(&index).expect("the index serialises");
    std::fs::write(&index_path, json + "\n").map_err(write_err(&index_path))?;
    Ok(index)
}

#[cfg(test)]
mod tests {
    use super::*;
    use image::GrayImage;

    #[test]
    fn thumbnails_shrink_to_fit_or_grow_by_whole_factors() {
        assert_eq!(Thumb::fit(256, 256, 200).width, 200);
        assert_eq!(Thumb::fit(400, 100, 200).height, 50);
        let t = Thumb::fit(64, 48, 200);
        assert_eq!((t.width, t.height), (192, 144));
        // Every source pixel belongs to exactly one thumbnail pixel's span when shrinking.
        let t = Thumb::fit(256, 256, 200);
        let mut covered = vec![0; 256];
        for tx in 0..t.width {
            let ((a, b), _) = t.source_span(tx, 0);
            (a..b).for_each(|x| covered[x as usize] += 1);
        }
        assert!(covered.iter().all(|&c| c == 1));
    }

    #[test]
    fn box_filter_and_max_pool_on_a_literal_image() {
        let t = Thumb::fit(4, 2, 2);
        assert_eq!((t.width, t.height), (2, 1));
        let img = RgbImage::from_raw(4, 2, (0..24).map(|v| v as u8 * 10).collect()).unwrap();
        // Left 2×2 block: red channel values 0, 30, 120, 150 → mean 75.
        assert_eq!(t.shrink_rgb(&img).get_pixel(0, 0).0[0], 75);
        let d = GrayImage::from_raw(4, 2, vec![0, 9, 0, 0, 1, 0, 0, 0]).unwrap();
        let m = t.shrink_max(&d);
        assert_eq!(m.as_raw(), &vec![9, 0]);
    }

    #[test]
    fn heat_ramp_starts_at_slate_and_brightens() {
        assert_eq!(heat_colour(0), Rgb([30, 34, 46]));
        let luma = |c: Rgb<u8>| 299 * c.0[0] as u32 + 587 * c.0[1] as u32 + 114 * c.0[2] as u32;
        assert!(luma(heat_colour(1)) > luma(heat_colour(0)));
        assert!(luma(heat_colour(255)) > luma(heat_colour(128)));
    }

    #[test]
    fn only_sheet_files_are_replaced() {
        assert!(is_sheet_file("index.json"));
        assert!(is_sheet_file("page-0012.png"));
        assert!(!is_sheet_file("page-x.png"));
        assert!(!is_sheet_file("notes.txt"));
        assert!(!is_sheet_file("results.jsonl"));
    }

    #[test]
    fn wrapping_keeps_lines_inside_the_column() {
        let painter = TextPainter::new();
        let line = TextLine::new(
            TextStyle::Body,
            "a fairly long line of words that will not fit into a narrow column at all".into(),
        );
        let wrapped = painter.wrap(&[line], 120, 20);
        assert!(wrapped.len() > 2);
        for l in &wrapped {
            assert!(painter.measure(&l.text, l.style) <= 120, "{:?}", l.text);
        }
    }

    #[test]
    fn verdict_words_are_distinct() {
        let words: BTreeSet<&str> = Verdict::ALL
            .iter()
            .map(|v| verdict_words(Some(*v)))
            .chain([verdict_words(None)])
            .collect();
        assert_eq!(words.len(), 6);
    }
}
