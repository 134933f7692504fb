//! `twinaudit report`: one self-contained HTML file per run (docs/report.md), readable from disk
//! with no server and no network: inline CSS, inline SVG plots, thumbnails as PNG data URIs, no
//! script.
//!
//! Invariants: the summary is recomputed from results.jsonl at the requested confidence; every
//! string that comes from a run, a spec, a manifest or a path passes through [`escape`] exactly
//! once; every table row that stands for pairs names their results.jsonl line numbers; a pair
//! whose images cannot be read or re-created shows the reason instead of thumbnails.

use std::collections::BTreeMap;
use std::io::Cursor;
use std::path::{Path, PathBuf};

use image::RgbImage;

use super::sheet::{dashed_rect, Thumb, SHAPE_OUTLINE};
use super::svg::{interval_chart, IntervalChart, IntervalRow, Marker};
use crate::analysis::confounders::sole_distractor_label;
use crate::analysis::failures::FailureEntry;
use crate::analysis::slices::{bin_names, DIMENSIONS};
use crate::analysis::summary::group_key;
use crate::analysis::{shortcut_findings, summarise, Summary};
use crate::audit::replay::{ReplayError, RunFolder};
use crate::audit::results::PairRecord;
use crate::stats::Rate;

/// File name of the report inside the run folder when `--out` is not given.
pub const REPORT_FILE: &str = "report.html";
/// Pairs shown with thumbnails (two images each), to keep the file small.
pub const GALLERY_MAX_PAIRS: usize = 12;
/// Longest side of a thumbnail, in pixels.
pub const THUMBNAIL_PX: u32 = 128;
/// Failing pairs listed by line number under each summary row.
const LINES_PER_ROW: usize = 40;
/// Rows of the confounder plot.
const CONFOUNDER_PLOT_ROWS: usize = 15;

#[derive(Debug, thiserror::Error)]
pub enum ReportError {
    #[error(transparent)]
    Replay(#[from] ReplayError),
    #[error("cannot write the report {path}: {source}; choose another --out or check the folder's permissions")]
    Write {
        path: PathBuf,
        source: std::io::Error,
    },
}

#[derive(Debug, Clone)]
pub struct ReportConfig {
    pub run_dir: PathBuf,
    /// Where to write; `<run_dir>/report.html` when `None`.
    pub out_path: Option<PathBuf>,
    /// Confidence level of every interval in the report.
    pub confidence: f64,
}

#[derive(Debug, Clone)]
pub struct ReportOutcome {
    pub path: PathBuf,
    pub bytes: u64,
    pub summary: Summary,
    /// Gallery pairs whose images could be shown.
    pub n_gallery_pairs: usize,
}

/// HTML-escapes text for element content and double- or single-quoted attribute values.
pub fn escape(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for c in text.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            c => out.push(c),
        }
    }
    out
}

/// Standard base64 with padding (RFC 4648, section 4).
pub fn base64(bytes: &[u8]) -> String {
    const ALPHABET: &[u8; 64] = b"ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/";
    let mut out = String::with_capacity(bytes.len().div_ceil(3) * 4);
    for chunk in bytes.chunks(3) {
        let b = [
            chunk[0],
            *chunk.get(1).unwrap_or(&0),
            *chunk.get(2).unwrap_or(&0),
        ];
        let n = (u32::from(b[0]) << 16) | (u32::from(b[1]) << 8) | u32::from(b[2]);
        for i in 0..4 {
            if i <= chunk.len() {
                out.push(ALPHABET[((n >> (18 - 6 * i)) & 63) as usize] as char);
            } else {
                out.push('=');
            }
        }
    }
    out
}

/// Reads the run, recomputes its summary and writes the report.
pub fn write_report(config: &ReportConfig) -> Result<ReportOutcome, ReportError> {
    let mut run = RunFolder::open(&config.run_dir)?;
    let summary = summarise(&run.records, config.confidence);
    let (html, n_gallery_pairs) = render_report(&mut run, &summary);
    let path = config
        .out_path
        .clone()
        .unwrap_or_else(|| default_report_path(&config.run_dir));
    let write_err = |source| ReportError::Write {
        path: path.clone(),
        source,
    };
    let tmp = path.with_extension("html.part");
    std::fs::write(&tmp, html.as_bytes()).map_err(write_err)?;
    std::fs::rename(&tmp, &path).map_err(write_err)?;
    Ok(ReportOutcome {
        bytes: html.len() as u64,
        path,
        summary,
        n_gallery_pairs,
    })
}

/// The whole document, and how many gallery pairs got thumbnails.
pub fn render_report(run: &mut RunFolder, s: &Summary) -> (String, usize) {
    let mut body = String::new();
    body.push_str(&header(run, s));
    body.push_str(CAUTION);
    body.push_str(&overview(s));
    body.push_str(&summary_table(run, s));
    body.push_str(&confounders(run, s));
    body.push_str(&area_slices(run, s));
    body.push_str(&other_slices(run, s));
    body.push_str(&placebo_section(s));
    let (gallery_html, shown, n_gallery) = gallery(run, s);
    body.push_str(&failure_tables(s, &shown));
    body.push_str(&gallery_html);
    body.push_str(&format!(
        "<footer><p>Written by twinaudit {} from <code>results.jsonl</code> of this run; every interval is a {:.0}% Wilson score interval unless marked otherwise. Field meanings: docs/results.md; verdicts: docs/spec.md.</p></footer>",
        escape(env!("CARGO_PKG_VERSION")),
        100.0 * s.confidence
    ));
    let title = format!("twinaudit report: {}", run.info.model_path);
    let html = format!(
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n<title>{}</title>\n<style>{STYLE}</style>\n</head>\n<body>\n<main>\n{body}</main>\n</body>\n</html>\n",
        escape(&title)
    );
    (html, n_gallery)
}

const STYLE: &str = r#"
:root { --ink: #1d2530; --muted: #5b6675; --rule: #d5dbe3; --band: #f3f5f8; --accent: #0b6e69; --warn: #8a4b00; }
* { box-sizing: border-box; }
body { margin: 0; color: var(--ink); background: #fff; font: 15px/1.45 "DejaVu Sans", "Liberation Sans", Arial, sans-serif; }
main { max-width: 1180px; margin: 0 auto; padding: 24px 28px 48px; }
section { overflow-x: auto; }
h1 { font-size: 26px; margin: 0 0 4px; }
h2 { font-size: 20px; margin: 36px 0 8px; padding-bottom: 4px; border-bottom: 2px solid var(--accent); }
h3 { font-size: 16px; margin: 22px 0 6px; }
p.lead { color: var(--muted); margin: 0 0 14px; }
code, .mono { font-family: "DejaVu Sans Mono", "Liberation Mono", monospace; font-size: 13px; }
dl.facts { display: grid; grid-template-columns: max-content 1fr; gap: 3px 16px; margin: 10px 0; }
dl.facts dt { color: var(--muted); }
dl.facts dd { margin: 0; overflow-wrap: anywhere; }
table { border-collapse: collapse; margin: 8px 0 14px; font-size: 13.5px; }
caption { text-align: left; color: var(--muted); padding: 4px 0; caption-side: top; }
th, td { border-bottom: 1px solid var(--rule); padding: 4px 9px; text-align: left; vertical-align: top; }
th { background: var(--band); font-weight: 600; }
tbody tr:nth-child(even) td { background: #fafbfc; }
td.num { text-align: right; font-variant-numeric: tabular-nums; white-space: nowrap; }
.caution { border-left: 5px solid var(--warn); background: #fff6ea; padding: 10px 14px; margin: 18px 0; }
.finding { border-left: 5px solid var(--accent); background: #eef7f6; padding: 8px 12px; margin: 8px 0; }
details summary { cursor: pointer; color: var(--accent); }
details ul { margin: 4px 0; padding-left: 18px; max-height: 220px; overflow-y: auto; }
svg.chart { display: block; max-width: 100%; height: auto; margin: 6px 0 10px; font-family: "DejaVu Sans", Arial, sans-serif; }
svg .grid { stroke: var(--rule); stroke-width: 1; }
svg .tick, svg .axis, svg .legend { font-size: 12px; fill: var(--muted); }
svg .label, svg .value { font-size: 12.5px; fill: var(--ink); }
svg .c-title { font-size: 14px; font-weight: 600; fill: var(--ink); }
svg .whisker { stroke: var(--ink); stroke-width: 1.6; fill: none; }
svg .m-circle { fill: #ffffff; stroke: var(--accent); stroke-width: 2.5; }
svg .m-square { fill: var(--warn); stroke: var(--ink); stroke-width: 1; }
.gallery { display: grid; grid-template-columns: repeat(auto-fill, minmax(300px, 1fr)); gap: 14px; }
figure { margin: 0; border: 1px solid var(--rule); padding: 8px; background: var(--band); }
figure .pair { display: flex; gap: 6px; }
figure .pair div { text-align: center; font-size: 12px; color: var(--muted); }
figure img { display: block; image-rendering: pixelated; border: 1px solid var(--rule); background: #fff; }
figcaption { font-size: 12.5px; margin-top: 6px; overflow-wrap: anywhere; }
footer { margin-top: 40px; color: var(--muted); font-size: 13px; }
"#;

const CAUTION: &str = "<p class=\"caution\"><strong>Caution:</strong> these results are evidence about this model on these edits of these images, not a certificate of safety or of fairness. A low failure rate says the tested edits did not move the model; it says nothing about edits, scenes or questions that were not tested, and fill artifacts can move answers on their own (compare the placebo controls when the run has them).</p>\n";

fn rate_cell(r: &Rate) -> String {
    format!("<td class=\"num\">{}</td>", escape(&r.describe()))
}

fn opt_rate_cell(r: Option<&Rate>) -> String {
    r.map_or_else(|| "<td class=\"num\">none</td>".to_string(), rate_cell)
}

const PLACEBO_HEADER: &str = "placebo flip rate [interval] (flipped/judged)";

/// The placebo column's cell; nothing when the run had no placebos (the column is left out).
fn placebo_cell(s: &Summary, r: Option<&Rate>) -> String {
    if s.placebo.is_some() {
        opt_rate_cell(r)
    } else {
        String::new()
    }
}

/// Column headers, without the placebo column when the run had none.
fn headers<'a>(s: &Summary, all: &[&'a str]) -> Vec<&'a str> {
    all.iter()
        .copied()
        .filter(|h| s.placebo.is_some() || *h != PLACEBO_HEADER)
        .collect()
}

fn td(text: &str) -> String {
    format!("<td>{}</td>", escape(text))
}

fn td_num(text: &str) -> String {
    format!("<td class=\"num\">{}</td>", escape(text))
}

fn th_row(headers: &[&str]) -> String {
    let cells: String = headers
        .iter()
        .map(|h| format!("<th scope=\"col\">{}</th>", escape(h)))
        .collect();
    format!("<thead><tr>{cells}</tr></thead>")
}

fn relation_words(relation: &str) -> &'static str {
    if relation == "same" {
        "answer must hold"
    } else {
        "answer must change"
    }
}

fn header(run: &RunFolder, s: &Summary) -> String {
    let info = &run.info;
    let n_rows = run.records.len();
    let n_cases = run
        .real_records()
        .map(|r| r.case.as_str())
        .collect::<std::collections::BTreeSet<_>>()
        .len();
    let mut facts = vec![
        ("model", format!("<code>{}</code>", escape(&info.model_path))),
        (
            "model sha256",
            format!("<code>{}</code>", escape(&info.model_sha256)),
        ),
        (
            "manifest",
            format!("<code>{}</code>", escape(&info.manifest_path)),
        ),
        ("run folder", format!("<code>{}</code>", escape(&run.dir.display().to_string()))),
        ("seed", escape(&info.seed.to_string())),
        (
            "started / finished (UTC)",
            format!(
                "{} / {}",
                escape(&info.started_at),
                escape(info.finished_at.as_deref().unwrap_or("not finished"))
            ),
        ),
        (
            "pairs",
            format!(
                "{} planned, {} rows in results.jsonl ({} real pairs from {} cases: {} judged, {} errors)",
                info.n_pairs_planned, n_rows, s.n_pairs, n_cases, s.n_judged, s.n_errors
            ),
        ),
        (
            "placebo controls",
            match &s.placebo {
                Some(p) => format!(
                    "{} pairs, {} judged, {} errors",
                    p.n_pairs, p.n_judged, p.n_errors
                ),
                None => "none (run without --placebo)".into(),
            },
        ),
        ("resumes", info.n_resumes.to_string()),
        (
            "tool",
            format!(
                "{} {} (jobs {})",
                escape(&info.tool),
                escape(&info.tool_version),
                info.jobs
            ),
        ),
        (
            "intervals",
            format!("{:.0}% Wilson score intervals", 100.0 * s.confidence),
        ),
    ];
    for spec in &info.specs {
        facts.push((
            "spec file",
            format!(
                "<code>{}</code> <span class=\"mono\">sha256 {}</span>",
                escape(&spec.path),
                escape(&spec.sha256)
            ),
        ));
    }
    let dl: String = facts
        .iter()
        .map(|(k, v)| format!("<dt>{}</dt><dd>{v}</dd>", escape(k)))
        .collect();
    format!(
        "<header><h1>Audit report</h1><p class=\"lead\">Counterfactual edits and the answers of <code>{}</code></p></header>\n<section id=\"run\"><h2>Run</h2><dl class=\"facts\">{dl}</dl></section>\n",
        escape(&info.model_path)
    )
}

fn overview(s: &Summary) -> String {
    let mut out = String::from("<section id=\"overview\"><h2>Overview</h2>");
    out.push_str(&format!(
        "<p>Failure rate over all {} judged pairs: <strong>{}</strong>.</p>",
        s.n_judged,
        escape(&s.failure_rate.describe())
    ));
    if let Some(d) = s
        .placebo_corrected
        .as_ref()
        .and_then(|c| c.overall.difference)
    {
        out.push_str(&format!(
            "<p>Placebo-corrected failure rate (real failures minus placebo flips on the same pairs, Newcombe's paired interval): <strong>{}</strong>.</p>",
            escape(&d.describe())
        ));
    }
    for f in shortcut_findings(s) {
        out.push_str(&format!(
            "<p class=\"finding\"><strong>Finding:</strong> {}</p>",
            escape(&f)
        ));
    }
    out.push_str("<table id=\"accuracy-table\"><caption>Accuracy on the unedited images (one question per case)</caption>");
    out.push_str(&th_row(&[
        "question kind",
        "accuracy [interval] (correct/cases)",
    ]));
    out.push_str("<tbody>");
    for a in &s.original_accuracy {
        out.push_str(&format!(
            "<tr>{}{}</tr>",
            td(a.question_kind.as_str()),
            rate_cell(&a.accuracy)
        ));
    }
    out.push_str("</tbody></table>");
    out.push_str("<table id=\"kind-role-table\"><caption>By question kind and edited role, over all operations (distractor rows are flip rates: the answer must hold)</caption>");
    out.push_str(&th_row(&[
        "question kind",
        "edited role",
        "failure rate [interval] (failed/judged)",
    ]));
    out.push_str("<tbody>");
    for r in &s.by_kind_and_role {
        out.push_str(&format!(
            "<tr>{}{}{}</tr>",
            td(r.question_kind.as_str()),
            td(&r.role),
            rate_cell(&r.failure_rate)
        ));
    }
    out.push_str("</tbody></table></section>\n");
    out
}

/// `(line, pair id)` of the failed or unjudged real pairs that `belongs` accepts, in file order.
fn failed_lines(run: &RunFolder, belongs: impl Fn(&PairRecord) -> bool) -> Vec<(usize, String)> {
    run.records
        .iter()
        .enumerate()
        .filter(|(_, r)| r.placebo_of.is_none() && r.passed != Some(true) && belongs(r))
        .map(|(i, r)| (i + 1, r.pair_id.clone()))
        .collect()
}

fn lines_details(lines: &[(usize, String)]) -> String {
    if lines.is_empty() {
        return "<td>none</td>".into();
    }
    let items: String = lines
        .iter()
        .take(LINES_PER_ROW)
        .map(|(line, id)| format!("<li>line {line}: <code>{}</code></li>", escape(id)))
        .collect();
    let more = if lines.len() > LINES_PER_ROW {
        format!(
            "<li>and {} more (filter results.jsonl by this row's fields)</li>",
            lines.len() - LINES_PER_ROW
        )
    } else {
        String::new()
    };
    format!(
        "<td><details><summary>{} {}</summary><ul>{items}{more}</ul></details></td>",
        lines.len(),
        if lines.len() == 1 { "pair" } else { "pairs" }
    )
}

fn summary_table(run: &RunFolder, s: &Summary) -> String {
    let mut out = String::from("<section id=\"summary\"><h2>Results by operation, role and question</h2><p>A <em>same</em> row fails when the answer flipped; a <em>change</em> row fails when the answer did not reach the expected one. Each row lists its failed or unjudged pairs by results.jsonl line.</p>");
    out.push_str("<table id=\"summary-table\"><caption>One row per operation × edited role × question kind × expectation</caption>");
    out.push_str(&th_row(&headers(
        s,
        &[
            "operation",
            "edited role",
            "question kind",
            "expectation",
            "pairs",
            "errors",
            "verdicts (count)",
            "failure rate [interval] (failed/judged)",
            PLACEBO_HEADER,
            "failed or unjudged pairs",
        ],
    )));
    out.push_str("<tbody>");
    for g in &s.groups {
        let verdicts: Vec<String> = g.verdicts.iter().map(|(k, v)| format!("{k} {v}")).collect();
        let key = (
            g.operation.clone(),
            g.role.clone(),
            g.question_kind,
            g.relation.clone(),
        );
        out.push_str(&format!(
            "<tr>{}{}{}{}{}{}{}{}{}{}</tr>",
            td(&g.operation),
            td(&g.role),
            td(g.question_kind.as_str()),
            td(&format!("{} ({})", g.relation, relation_words(&g.relation))),
            td_num(&g.n_pairs.to_string()),
            td_num(&g.n_errors.to_string()),
            td(&verdicts.join(", ")),
            rate_cell(&g.failure_rate),
            placebo_cell(s, g.placebo_flip_rate.as_ref()),
            lines_details(&failed_lines(run, |r| group_key(r) == key)),
        ));
    }
    out.push_str("</tbody></table></section>\n");
    out
}

fn confounders(run: &RunFolder, s: &Summary) -> String {
    let mut out = String::from("<section id=\"confounders\"><h2>Confounder ranking</h2><p>Distractor labels ordered by how often editing them moved an answer that must hold (pairs whose edited regions are all distractors of one label). Ranked by the lower end of the interval, so a label seen in few pairs does not outrank a well-measured one. A label at the top is likely what the model reads instead of the asked object.</p>");
    if s.distractor_labels.is_empty() {
        out.push_str("<p>No distractor-only edits were judged in this run.</p></section>\n");
        return out;
    }
    let chart = IntervalChart {
        title: "Flip rate caused by editing each distractor label".into(),
        axis_label: "flip rate".into(),
        legend: vec![(Marker::Square, "distractor edits (answer must hold)".into())],
        rows: s
            .distractor_labels
            .iter()
            .take(CONFOUNDER_PLOT_ROWS)
            .map(|l| IntervalRow {
                label: format!("{}: {}", l.question_kind.as_str(), l.label),
                marker: Marker::Square,
                rate: l.flip_rate,
            })
            .collect(),
    };
    out.push_str(&interval_chart(&chart));
    out.push_str(
        "<table id=\"confounder-table\"><caption>Confounder ranking, all labels</caption>",
    );
    out.push_str(&th_row(&headers(
        s,
        &[
            "rank",
            "question kind",
            "distractor label",
            "flip rate [interval] (flipped/judged)",
            PLACEBO_HEADER,
            "flipped or unjudged pairs",
        ],
    )));
    out.push_str("<tbody>");
    for (i, l) in s.distractor_labels.iter().enumerate() {
        out.push_str(&format!(
            "<tr>{}{}{}{}{}{}</tr>",
            td_num(&(i + 1).to_string()),
            td(l.question_kind.as_str()),
            td(&l.label),
            rate_cell(&l.flip_rate),
            placebo_cell(s, l.placebo_flip_rate.as_ref()),
            lines_details(&failed_lines(run, |r| {
                r.question_kind == l.question_kind
                    && sole_distractor_label(r) == Some(l.label.as_str())
            })),
        ));
    }
    out.push_str("</tbody></table></section>\n");
    out
}

fn slice_table(run: &RunFolder, s: &Summary, dimension: &str, id: &str) -> String {
    let mut out = format!("<table id=\"{id}\">");
    out.push_str(&th_row(&headers(
        s,
        &[
            "bin",
            "expectation",
            "pairs",
            "errors",
            "failure rate [interval] (failed/judged)",
            PLACEBO_HEADER,
            "failed or unjudged pairs",
        ],
    )));
    out.push_str("<tbody>");
    for r in s.slices.iter().filter(|r| r.dimension == dimension) {
        out.push_str(&format!(
            "<tr>{}{}{}{}{}{}{}</tr>",
            td(&r.bin),
            td(&format!("{} ({})", r.relation, relation_words(&r.relation))),
            td_num(&r.n_pairs.to_string()),
            td_num(&r.n_errors.to_string()),
            rate_cell(&r.failure_rate),
            placebo_cell(s, r.placebo_flip_rate.as_ref()),
            lines_details(&failed_lines(run, |p| {
                p.relation == r.relation && bin_names(dimension, p).contains(&r.bin)
            })),
        ));
    }
    out.push_str("</tbody></table>");
    out
}

fn area_slices(run: &RunFolder, s: &Summary) -> String {
    let mut out = String::from("<section id=\"area\"><h2>Failure rate by edited area</h2><p>Area is the share of the image the edit could change (after dilation). Large fills leave more artifacts; a rate that climbs with area on <em>same</em> pairs points at the fill rather than the content.</p>");
    let rows: Vec<IntervalRow> = s
        .slices
        .iter()
        .filter(|r| r.dimension == "area_fraction")
        .map(|r| IntervalRow {
            label: format!("{} · {}", r.bin, r.relation),
            marker: if r.relation == "same" {
                Marker::Square
            } else {
                Marker::Circle
            },
            rate: r.failure_rate,
        })
        .collect();
    if rows.is_empty() {
        out.push_str("<p>No pairs.</p></section>\n");
        return out;
    }
    out.push_str(&interval_chart(&IntervalChart {
        title: "Failure rate by area fraction of the edit".into(),
        axis_label: "failure rate".into(),
        legend: vec![
            (Marker::Circle, "change: did not reach expected".into()),
            (Marker::Square, "same: flipped".into()),
        ],
        rows,
    }));
    out.push_str(&slice_table(run, s, "area_fraction", "slice-area_fraction"));
    out.push_str("</section>\n");
    out
}

fn other_slices(run: &RunFolder, s: &Summary) -> String {
    let mut out = String::from("<section id=\"slices\"><h2>Other slices</h2><p>Bins are fixed (docs/results.md). A pair that edits regions of several labels counts under each label.</p>");
    let titles = [
        (
            "n_case_regions",
            "Objects in the scene (regions annotated in the case)",
        ),
        ("label", "Edited region label"),
        ("question_words", "Question length in words"),
        ("method", "Fill method"),
    ];
    for (dimension, title) in titles {
        debug_assert!(DIMENSIONS.contains(&dimension));
        out.push_str(&format!("<h3>{}</h3>", escape(title)));
        out.push_str(&slice_table(
            run,
            s,
            dimension,
            &format!("slice-{dimension}"),
        ));
    }
    out.push_str("</section>\n");
    out
}

fn placebo_section(s: &Summary) -> String {
    let mut out = String::from("<section id=\"placebo\"><h2>Placebo-corrected rates</h2>");
    let Some(c) = &s.placebo_corrected else {
        out.push_str("<p>This run had no placebo controls. Run with <code>--placebo</code> to place the same edit on free background beside every real edit; the difference tells a real effect of the content from an effect of the fill.</p></section>\n");
        return out;
    };
    out.push_str(&format!("<p>Each placebo repeats one real edit on free background. Over pairs where both were judged, the corrected rate is the real failure rate minus the placebo flip rate on the same pairs, with Newcombe's interval for paired proportions (method 10, {:.0}%) and McNemar's exact p for the discordant pairs.</p>", 100.0 * s.confidence));
    out.push_str("<table id=\"placebo-table\"><caption>Real failure rate against placebo flip rate on the same pairs</caption>");
    out.push_str(&th_row(&[
        "operation · edited role · question kind · expectation",
        "pairs (both judged)",
        "real failure rate [interval]",
        "placebo flip rate [interval]",
        "corrected: difference [interval] (percentage points)",
        "discordant: only real failed / only placebo flipped (pairs)",
        "McNemar exact p",
    ]));
    out.push_str("<tbody>");
    let row = |group: &str, r: &crate::analysis::placebo::CorrectedRate| {
        format!(
            "<tr>{}{}{}{}{}{}{}</tr>",
            td(group),
            td_num(&r.n_pairs.to_string()),
            rate_cell(&r.real_failure_rate),
            rate_cell(&r.placebo_flip_rate),
            td_num(
                &r.difference
                    .map_or_else(|| "n/a (no pairs)".into(), |d| d.describe())
            ),
            td_num(&format!("{} / {}", r.counts.b, r.counts.c)),
            td_num(&p_value(r.mcnemar_exact_p)),
        )
    };
    out.push_str(&row("all pairs", &c.overall));
    for g in &c.groups {
        let group = format!(
            "{} · {} · {} · {}",
            g.operation,
            g.role,
            g.question_kind.as_str(),
            g.relation
        );
        out.push_str(&row(&group, &g.corrected));
    }
    out.push_str("</tbody></table></section>\n");
    out
}

/// Three decimals, or two significant digits below 0.001 (`"3.7e-5"`).
fn p_value(p: f64) -> String {
    if p >= 0.001 {
        format!("{p:.3}")
    } else {
        format!("{p:.1e}")
    }
}

fn percent(p: f32) -> String {
    format!("{:.1}%", 100.0 * f64::from(p))
}

fn failure_tables(s: &Summary, shown: &BTreeMap<String, usize>) -> String {
    let cf = &s.confident_failures;
    let mut out = format!("<section id=\"failures\"><h2>Confident failures</h2><p>Up to {} real pairs per list, ranked by the probability of the answer after the edit (highest first): the model was sure and wrong. Line numbers point into results.jsonl.</p>", cf.top_n);
    for (title, id, entries) in [
        (
            "Answers that flipped although they must hold (same pairs)",
            "failures-flipped",
            &cf.flipped,
        ),
        (
            "Answers that did not move although the edit should change them (change pairs)",
            "failures-did-not-move",
            &cf.did_not_move,
        ),
    ] {
        out.push_str(&format!("<h3>{}</h3>", escape(title)));
        if entries.is_empty() {
            out.push_str("<p>None.</p>");
            continue;
        }
        out.push_str(&format!("<table id=\"{id}\">"));
        out.push_str(&th_row(&[
            "#",
            "pair id",
            "results.jsonl line",
            "question",
            "operation / role",
            "edited labels",
            "truth",
            "before (probability)",
            "after (probability)",
            "gallery",
        ]));
        out.push_str("<tbody>");
        for (i, e) in entries.iter().enumerate() {
            out.push_str(&failure_row(i + 1, e, shown.get(&e.pair_id).copied()));
        }
        out.push_str("</tbody></table>");
    }
    out.push_str("</section>\n");
    out
}

fn failure_row(rank: usize, e: &FailureEntry, figure: Option<usize>) -> String {
    format!(
        "<tr>{}<td><code>{}</code></td>{}{}{}{}{}{}{}<td>{}</td></tr>",
        td_num(&rank.to_string()),
        escape(&e.pair_id),
        td_num(&e.results_line.to_string()),
        td(&format!("{} ({})", e.question, e.question_kind.as_str())),
        td(&format!("{} / {}", e.operation, e.role)),
        td(&e.labels.join(", ")),
        td(e.truth.as_deref().unwrap_or("unknown")),
        td(&format!(
            "{} ({})",
            e.before.answer,
            percent(e.before.probability)
        )),
        td(&format!(
            "{} ({})",
            e.after.answer,
            percent(e.after.probability)
        )),
        figure.map_or_else(
            || "none".into(),
            |i| format!("<a href=\"#g-{i}\">figure {i}</a>")
        ),
    )
}

/// A thumbnail at most [`THUMBNAIL_PX`] on its longer side (the contact sheet's box-filtered
/// [`Thumb`]), with the edited shape's bounding box framed by the sheet's dashed outline; PNG
/// as base64 with its width and height in pixels.
fn thumbnail(image: &RgbImage, bbox: [u32; 4]) -> Option<(String, u32, u32)> {
    let (w, h) = image.dimensions();
    let thumb = Thumb::fit(w, h, THUMBNAIL_PX);
    let mut small = thumb.shrink_rgb(image);
    let to_thumb =
        |v: u32, src: u32, n: u32| (u64::from(v) * u64::from(n) / u64::from(src.max(1))) as i32;
    let [bx, by, bw, bh] = bbox;
    let (x0, y0) = (
        to_thumb(bx, w, thumb.width) - 1,
        to_thumb(by, h, thumb.height) - 1,
    );
    let (x1, y1) = (
        to_thumb(bx + bw, w, thumb.width),
        to_thumb(by + bh, h, thumb.height),
    );
    dashed_rect(&mut small, x0, y0, x1 - x0 + 1, y1 - y0 + 1, SHAPE_OUTLINE);
    let mut png = Vec::new();
    small
        .write_to(&mut Cursor::new(&mut png), image::ImageFormat::Png)
        .ok()?;
    Some((base64(&png), thumb.width, thumb.height))
}

/// The gallery's HTML, the figure number of each shown pair id, and how many pairs have images.
fn gallery(run: &mut RunFolder, s: &Summary) -> (String, BTreeMap<String, usize>, usize) {
    let cf = &s.confident_failures;
    // Alternate the two lists so both kinds of failure appear within the cap.
    let mut picks: Vec<&FailureEntry> = Vec::new();
    for i in 0..cf.flipped.len().max(cf.did_not_move.len()) {
        picks.extend(cf.flipped.get(i));
        picks.extend(cf.did_not_move.get(i));
    }
    picks.truncate(GALLERY_MAX_PAIRS);
    let mut out = format!("<section id=\"gallery\"><h2>Failures gallery</h2><p>The first {} confident failures, original beside edited image ({} px thumbnails); the dashed frame marks the edited shape.</p>", picks.len(), THUMBNAIL_PX);
    if picks.is_empty() {
        out.push_str("<p>No failures to show.</p></section>\n");
        return (out, BTreeMap::new(), 0);
    }
    let by_id: BTreeMap<String, PairRecord> = run
        .records
        .iter()
        .filter(|r| picks.iter().any(|p| p.pair_id == r.pair_id))
        .map(|r| (r.pair_id.clone(), r.clone()))
        .collect();
    let mut shown = BTreeMap::new();
    let mut n_images = 0;
    out.push_str("<div class=\"gallery\">");
    for (i, e) in picks.iter().enumerate() {
        let fig = i + 1;
        shown.insert(e.pair_id.clone(), fig);
        let images = match by_id.get(&e.pair_id) {
            Some(record) => run.pair_images(record).map_err(|err| err.to_string()),
            None => Err(format!("pair {:?} is not in results.jsonl", e.pair_id)),
        };
        let pictures = match images.and_then(|p| {
            let bbox = p.shape.bounding_box();
            match (thumbnail(&p.original, bbox), thumbnail(&p.edited, bbox)) {
                (Some(a), Some(b)) => Ok((a, b, p.from_saved_edit)),
                _ => Err("the thumbnails could not be encoded".to_string()),
            }
        }) {
            Ok(((original, w, h), (edited, _, _), saved)) => {
                n_images += 1;
                let alt = |which: &str| escape(&format!("{which} image of pair {}", e.pair_id));
                format!(
                    "<div class=\"pair\"><div><img width=\"{w}\" height=\"{h}\" alt=\"{}\" src=\"data:image/png;base64,{original}\">original</div><div><img width=\"{w}\" height=\"{h}\" alt=\"{}\" src=\"data:image/png;base64,{edited}\">edited ({})</div></div>",
                    alt("original"),
                    alt("edited"),
                    if saved { "saved edit" } else { "re-rendered from the seed" }
                )
            }
            Err(message) => format!("<p>No images: {}</p>", escape(&message)),
        };
        out.push_str(&format!(
            "<figure id=\"g-{fig}\">{pictures}<figcaption><strong>Figure {fig}</strong> · <code>{}</code> · results.jsonl line {}<br>{}<br>{} / {} on {} · {}: {} ({}) → {} ({})</figcaption></figure>",
            escape(&e.pair_id),
            e.results_line,
            escape(&e.question),
            escape(&e.operation),
            escape(&e.role),
            escape(&e.labels.join(", ")),
            escape(e.verdict.as_str()),
            escape(&e.before.answer),
            percent(e.before.probability),
            escape(&e.after.answer),
            percent(e.after.probability),
        ));
    }
    out.push_str("</div></section>\n");
    (out, shown, n_images)
}

/// `<run_dir>/report.html`.
pub fn default_report_path(run_dir: &Path) -> PathBuf {
    run_dir.join(REPORT_FILE)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// RFC 4648, section 10 (test vectors).
    #[test]
    fn base64_matches_rfc_4648_test_vectors() {
        let vectors = [
            ("", ""),
            ("f", "Zg=="),
            ("fo", "Zm8="),
            ("foo", "Zm9v"),
            ("foob", "Zm9vYg=="),
            ("fooba", "Zm9vYmE="),
            ("foobar", "Zm9vYmFy"),
        ];
        for (input, want) in vectors {
            assert_eq!(base64(input.as_bytes()), want, "{input:?}");
        }
    }

    /// The five characters HTML gives meaning to in text and quoted attributes (HTML Living
    /// Standard, "Serialising HTML fragments", escaping a string; single quote as &#39;).
    #[test]
    fn escape_replaces_every_markup_character() {
        assert_eq!(
            escape(r#"<script>alert(1)</script> & "q" 'a'"#),
            "&lt;script&gt;alert(1)&lt;/script&gt; &amp; &quot;q&quot; &#39;a&#39;"
        );
        assert_eq!(escape("plain text, ü"), "plain text, ü");
    }
}
