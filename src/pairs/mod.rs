//! Training pairs from a finished run: every judged edit becomes an image with its
//! counterfactual answer, written as an ImageFolder dataset with metadata (train/ and
//! validation/, each with PNGs and a metadata.jsonl; docs/pairs.md), plus pairs.json with counts.
//!
//! Invariants: the run folder is only read; labels come from the spec (expected answers and
//! ground truth), never from the model's predictions, and a pair without a sure label is skipped
//! and counted; no source image has rows in two splits; the same run, options and seed give
//! byte-identical metadata.jsonl and pairs.json files; an existing non-empty output folder is
//! never written to.

pub mod select;
pub mod write;

use std::collections::{BTreeMap, BTreeSet, HashMap};
use std::path::{Path, PathBuf};

use serde::{Deserialize, Serialize};
use sha2::{Digest, Sha256};

use crate::audit::replay::{ReplayError, RunFolder};
use crate::audit::run_info::write_json_atomic;
use crate::spec::load::hex;
use select::{select, Relation, SelectOptions, Source, Split};
use write::{write_images, write_metadata, ImageOrigin, MetadataRow};

pub const PAIRS_FORMAT_VERSION: u32 = 1;
pub const PAIRS_SUMMARY_FILE: &str = "pairs.json";

#[derive(Debug, thiserror::Error)]
pub enum PairsError {
    #[error(transparent)]
    Replay(#[from] ReplayError),
    #[error("output folder {0} already exists and is not empty; choose another --out, or delete that folder if it holds nothing you need")]
    OutputExists(PathBuf),
    #[error("{option} {message}")]
    Option {
        option: &'static str,
        message: String,
    },
    #[error("run {dir}: no pair can become a training row ({reasons}); see docs/pairs.md for what each reason means")]
    Nothing { dir: PathBuf, reasons: String },
    #[error("run {dir}: the {split} split would be empty ({why}); {what_to_do}")]
    EmptySplit {
        dir: PathBuf,
        split: &'static str,
        why: String,
        what_to_do: String,
    },
    #[error("cannot write {path}: {message}")]
    Write { path: PathBuf, message: String },
}

/// A validated `twinaudit pairs` command.
#[derive(Debug, Clone)]
pub struct PairsConfig {
    pub run_dir: PathBuf,
    pub out_dir: PathBuf,
    pub select: SelectOptions,
    /// Threads rendering edits and writing PNGs.
    pub jobs: usize,
    pub show_progress: bool,
}

impl PairsConfig {
    /// Checks what clap cannot: ranges of the numeric options.
    pub fn check(&self) -> Result<(), PairsError> {
        let f = self.select.validation_fraction;
        if !(0.0..1.0).contains(&f) {
            return Err(PairsError::Option {
                option: "--validation-fraction",
                message: format!("must lie in [0, 1) (0 writes train/ only), got {f}"),
            });
        }
        if self.select.max_per_image == Some(0) {
            return Err(PairsError::Option {
                option: "--max-per-image",
                message: "must be at least 1 (leave it out for no cap)".into(),
            });
        }
        if self.jobs == 0 {
            return Err(PairsError::Option {
                option: "--jobs",
                message: "must be at least 1".into(),
            });
        }
        Ok(())
    }
}

/// The options as recorded in pairs.json.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct OptionsRecord {
    pub seed: u64,
    pub validation_fraction: f64,
    pub originals: bool,
    pub only_failed: bool,
    pub only_wrong: bool,
    pub balance: bool,
    pub max_per_image: Option<usize>,
    pub placebo: bool,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SplitSummary {
    pub n_rows: usize,
    pub n_source_images: usize,
    pub by_relation: BTreeMap<String, usize>,
    /// Pair rows per operation (originals not counted).
    pub by_operation: BTreeMap<String, usize>,
    pub by_question_kind: BTreeMap<String, usize>,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RowFailure {
    pub file_name: String,
    pub message: String,
}

/// pairs.json: what was written and what was not, and why.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PairsSummary {
    pub format_version: u32,
    pub tool_version: String,
    pub run_dir: String,
    pub options: OptionsRecord,
    pub n_rows: usize,
    /// Keyed by split folder name; a split with no rows is absent.
    pub splits: BTreeMap<String, SplitSummary>,
    /// Pairs (and originals) with no sure label or no source image, by reason.
    pub skipped: BTreeMap<String, usize>,
    /// Pairs left out by an option, by reason.
    pub left_out: BTreeMap<String, usize>,
    /// `same` rows on images whose original the model answered wrongly (labelled with the truth).
    pub n_same_on_misanswered: usize,
    pub n_from_saved_edits: usize,
    pub n_re_rendered: usize,
    pub n_originals: usize,
    pub bytes_written: u64,
    /// Rows whose image could not be made (left out of metadata.jsonl) and source images that
    /// could not be read.
    pub failures: Vec<RowFailure>,
}

impl PairsSummary {
    pub fn n_skipped(&self) -> usize {
        self.skipped.values().sum()
    }

    pub fn n_left_out(&self) -> usize {
        self.left_out.values().sum()
    }
}

fn output_is_free(out: &Path) -> bool {
    !out.exists()
        || std::fs::read_dir(out)
            .map(|mut d| d.next().is_none())
            .unwrap_or(false)
}

/// Each case's source image: its resolved path and the sha256 of its bytes.
fn case_sources(
    run: &mut RunFolder,
) -> Result<HashMap<String, Result<Source, String>>, PairsError> {
    let cases: BTreeSet<String> = run.records.iter().map(|r| r.case.clone()).collect();
    let records = run.records.clone();
    let mut sources = HashMap::new();
    let mut by_path: HashMap<PathBuf, Result<Source, String>> = HashMap::new();
    for case_id in cases {
        let record = records
            .iter()
            .find(|r| r.case == case_id)
            .expect("case taken from the records");
        let source = match run.case_of(record) {
            Ok((case, _)) => {
                let path = case.image_path.clone();
                by_path
                    .entry(path.clone())
                    .or_insert_with(|| match std::fs::read(&path) {
                        Ok(bytes) => Ok(Source {
                            image: path.display().to_string(),
                            sha256: hex(&Sha256::digest(&bytes)),
                        }),
                        Err(e) => Err(format!(
                            "case {case_id:?}: cannot read its image {}: {e}",
                            path.display()
                        )),
                    })
                    .clone()
            }
            // The spec files themselves missing or changed stop the command (no edit can be
            // re-created); a case missing from them is that case's problem only.
            Err(e @ (ReplayError::SpecChanged { .. } | ReplayError::SpecUnavailable { .. })) => {
                return Err(e.into())
            }
            Err(e) => Err(e.to_string()),
        };
        sources.insert(case_id, source);
    }
    Ok(sources)
}

fn reasons_text(counts: &BTreeMap<String, usize>) -> String {
    counts
        .iter()
        .map(|(k, v)| format!("{k} {v}"))
        .collect::<Vec<_>>()
        .join(", ")
}

/// Builds the dataset: selects rows, writes images, metadata.jsonl per split, and pairs.json.
pub fn build_pairs(config: &PairsConfig) -> Result<PairsSummary, PairsError> {
    config.check()?;
    let out = &config.out_dir;
    if !output_is_free(out) {
        return Err(PairsError::OutputExists(out.clone()));
    }
    let mut run = RunFolder::open(&config.run_dir)?;
    let sources = case_sources(&mut run)?;
    let options = &config.select;
    let selection = select(&run.records, &sources, options);

    let mut skipped = BTreeMap::new();
    let mut left_out = BTreeMap::new();
    for (reason, n) in &selection.not_kept {
        let into = if reason.is_option() {
            &mut left_out
        } else {
            &mut skipped
        };
        into.insert(reason.as_str().to_string(), *n);
    }
    let mut all_reasons = skipped.clone();
    all_reasons.extend(left_out.clone());
    if selection.rows.is_empty() {
        return Err(PairsError::Nothing {
            dir: config.run_dir.clone(),
            reasons: if all_reasons.is_empty() {
                "results.jsonl has no pairs".into()
            } else {
                reasons_text(&all_reasons)
            },
        });
    }
    if options.validation_fraction > 0.0 {
        for split in Split::ALL {
            if !selection.rows.iter().any(|r| r.split == split) {
                let n_sources = selection
                    .rows
                    .iter()
                    .map(|r| &run.records[r.record_idx].case)
                    .filter_map(|c| sources.get(c)?.as_ref().ok().map(|s| &s.sha256))
                    .collect::<BTreeSet<_>>()
                    .len();
                let (why, what_to_do) = if n_sources < 2 {
                    (
                        format!("the kept rows come from {n_sources} source image"),
                        "pass --validation-fraction 0 to write train/ only, or audit more images"
                            .to_string(),
                    )
                } else {
                    (
                        format!(
                            "--balance dropped all its pairs: it had pairs of one relation only (not kept: {})",
                            reasons_text(&all_reasons)
                        ),
                        "leave out --balance, or audit more images".to_string(),
                    )
                };
                return Err(PairsError::EmptySplit {
                    dir: config.run_dir.clone(),
                    split: split.as_str(),
                    why,
                    what_to_do,
                });
            }
        }
    }

    std::fs::create_dir_all(out).map_err(|e| PairsError::Write {
        path: out.clone(),
        message: e.to_string(),
    })?;
    let progress = if config.show_progress {
        indicatif::ProgressBar::new(selection.rows.len() as u64)
    } else {
        indicatif::ProgressBar::hidden()
    };
    progress.set_style(
        indicatif::ProgressStyle::with_template(
            "{elapsed_precise} [{bar:30}] {pos}/{len} images ({per_sec}, eta {eta})",
        )
        .expect("static template")
        .progress_chars("=> "),
    );
    let images = write_images(
        &config.run_dir,
        &run.records,
        &selection.rows,
        out,
        config.jobs,
        &progress,
    )?;
    progress.finish_and_clear();

    let mut splits = BTreeMap::new();
    for split in Split::ALL {
        let mut lines = Vec::new();
        let mut summary = SplitSummary {
            n_rows: 0,
            n_source_images: 0,
            by_relation: BTreeMap::new(),
            by_operation: BTreeMap::new(),
            by_question_kind: BTreeMap::new(),
        };
        let mut split_sources = BTreeSet::new();
        for (row, _) in selection
            .rows
            .iter()
            .zip(&images.origins)
            .filter(|(row, origin)| row.split == split && origin.is_some())
        {
            let record = &run.records[row.record_idx];
            let Some(Ok(source)) = sources.get(&record.case) else {
                continue; // selection only keeps rows with a readable source
            };
            lines.push(MetadataRow::new(row, record, source));
            split_sources.insert(source.sha256.as_str());
            summary.n_rows += 1;
            *summary
                .by_relation
                .entry(row.relation.as_str().into())
                .or_insert(0) += 1;
            if row.relation != Relation::Original {
                *summary
                    .by_operation
                    .entry(record.operation.clone())
                    .or_insert(0) += 1;
            }
            *summary
                .by_question_kind
                .entry(record.question_kind.as_str().into())
                .or_insert(0) += 1;
        }
        if lines.is_empty() {
            continue;
        }
        summary.n_source_images = split_sources.len();
        write_metadata(out, split, &lines)?;
        splits.insert(split.as_str().to_string(), summary);
    }

    let mut failures: Vec<RowFailure> = selection
        .unreadable
        .iter()
        .map(|(case, message)| RowFailure {
            file_name: select::original_file_name(case),
            message: message.clone(),
        })
        .collect();
    for (row_idx, message) in &images.failures {
        failures.push(RowFailure {
            file_name: selection.rows[*row_idx].file_name.clone(),
            message: message.clone(),
        });
    }
    if !images.failures.is_empty() {
        skipped.insert("image_failed".into(), images.failures.len());
    }
    let n_of = |o: ImageOrigin| images.origins.iter().filter(|x| **x == Some(o)).count();
    let summary = PairsSummary {
        format_version: PAIRS_FORMAT_VERSION,
        tool_version: env!("CARGO_PKG_VERSION").into(),
        run_dir: config.run_dir.display().to_string(),
        options: OptionsRecord {
            seed: options.seed,
            validation_fraction: options.validation_fraction,
            originals: options.include_originals,
            only_failed: options.only_failed,
            only_wrong: options.only_wrong,
            balance: options.balance,
            max_per_image: options.max_per_image,
            placebo: options.include_placebo,
        },
        n_rows: splits.values().map(|s| s.n_rows).sum(),
        splits,
        skipped,
        left_out,
        n_same_on_misanswered: selection.n_same_on_misanswered,
        n_from_saved_edits: n_of(ImageOrigin::SavedEdit),
        n_re_rendered: n_of(ImageOrigin::ReRendered),
        n_originals: n_of(ImageOrigin::Original),
        bytes_written: images.bytes_written,
        failures,
    };
    let path = out.join(PAIRS_SUMMARY_FILE);
    write_json_atomic(&path, &summary).map_err(|e| PairsError::Write {
        path: path.clone(),
        message: e.to_string(),
    })?;
    Ok(summary)
}

/// The human summary `twinaudit pairs` prints.
pub fn render_text(s: &PairsSummary, out_dir: &Path) -> String {
    let mut t = format!(
        "{} rows ({:.1} MB of PNG) in {}\n",
        s.n_rows,
        s.bytes_written as f64 / 1e6,
        out_dir.display()
    );
    t.push_str(&format!(
        "  {:<11} {:>6} {:>14} {:>7} {:>6} {:>9}\n",
        "split", "rows", "source images", "change", "same", "original"
    ));
    for (name, sp) in &s.splits {
        let rel = |k: &str| sp.by_relation.get(k).copied().unwrap_or(0);
        t.push_str(&format!(
            "  {:<11} {:>6} {:>14} {:>7} {:>6} {:>9}\n",
            name,
            sp.n_rows,
            sp.n_source_images,
            rel("change"),
            rel("same"),
            rel("original")
        ));
    }
    let mut ops: BTreeMap<&str, usize> = BTreeMap::new();
    for sp in s.splits.values() {
        for (op, n) in &sp.by_operation {
            *ops.entry(op).or_insert(0) += n;
        }
    }
    let ops: Vec<String> = ops.iter().map(|(k, v)| format!("{k} {v}")).collect();
    t.push_str(&format!("  pair rows by operation: {}\n", ops.join(", ")));
    t.push_str(&format!(
        "  images: {} from saved edits, {} re-rendered from their seeds, {} originals\n",
        s.n_from_saved_edits, s.n_re_rendered, s.n_originals
    ));
    if s.n_same_on_misanswered > 0 {
        t.push_str(&format!(
            "  {} same rows are on images the model answered wrongly; they carry the ground truth\n",
            s.n_same_on_misanswered
        ));
    }
    if !s.skipped.is_empty() {
        t.push_str(&format!(
            "  not written, no sure label or no image: {} pairs or originals ({})\n",
            s.n_skipped(),
            reasons_text(&s.skipped)
        ));
    }
    if !s.left_out.is_empty() {
        t.push_str(&format!(
            "  left out by options: {} pairs ({})\n",
            s.n_left_out(),
            reasons_text(&s.left_out)
        ));
    }
    t
}
