//! Writing the dataset folder: each row's PNG (the run's saved edit when there is one, else the
//! edit re-rendered from its recorded seed; the unedited image for originals) and each split's
//! metadata.jsonl (docs/pairs.md).
//!
//! Invariants: workers write only image files, each to its own path; the main thread writes the
//! metadata files after every image, so a folder whose metadata.jsonl exists has all its images.
//! A metadata line names only an image that was written. Lines follow the rows' order (sorted by
//! file name), so the same selection gives the same bytes whatever the thread timing.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};
use std::sync::mpsc;

use image::RgbImage;
use serde::Serialize;

use super::select::{Relation, Row, Source, Split};
use super::PairsError;
use crate::audit::replay::RunFolder;
use crate::audit::results::{PairRecord, RegionRef};
use crate::spec::QuestionKind;

pub const METADATA_FILE: &str = "metadata.jsonl";

/// One line of a split's metadata.jsonl; the field order is the column order.
#[derive(Debug, Serialize)]
pub struct MetadataRow<'a> {
    pub file_name: &'a str,
    pub question: &'a str,
    pub question_kind: QuestionKind,
    pub answer: &'a str,
    pub relation: &'static str,
    pub pair_id: Option<&'a str>,
    pub source_case: &'a str,
    pub source_image: &'a str,
    pub source_sha256: &'a str,
    pub operation: Option<&'a str>,
    pub regions: &'a [RegionRef],
    /// Decimal string: pair seeds use all 64 bits, beyond the int64 that Arrow infers.
    pub seed: Option<String>,
    pub placebo: bool,
    pub model_passed: Option<bool>,
}

impl<'a> MetadataRow<'a> {
    pub fn new(row: &'a Row, record: &'a PairRecord, source: &'a Source) -> MetadataRow<'a> {
        let is_pair = row.relation != Relation::Original;
        MetadataRow {
            file_name: &row.file_name,
            question: &record.question,
            question_kind: record.question_kind,
            answer: &row.answer,
            relation: row.relation.as_str(),
            pair_id: is_pair.then_some(record.pair_id.as_str()),
            source_case: &record.case,
            source_image: &source.image,
            source_sha256: &source.sha256,
            operation: is_pair.then_some(record.operation.as_str()),
            regions: if is_pair { &record.regions } else { &[] },
            seed: is_pair.then(|| record.seed.to_string()),
            placebo: is_pair && record.placebo_of.is_some(),
            model_passed: if is_pair { record.passed } else { None },
        }
    }
}

/// Where a written image came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ImageOrigin {
    SavedEdit,
    ReRendered,
    Original,
}

/// What happened to each row's image.
#[derive(Debug, Default)]
pub struct ImageOutcome {
    /// Per row (same order): where its image came from, or `None` when it failed.
    pub origins: Vec<Option<ImageOrigin>>,
    pub bytes_written: u64,
    /// (row index, message) for every row whose image could not be made.
    pub failures: Vec<(usize, String)>,
}

pub fn split_dir(out_dir: &Path, split: Split) -> PathBuf {
    out_dir.join(split.as_str())
}

enum Message {
    Done {
        row_idx: usize,
        origin: ImageOrigin,
        bytes: u64,
    },
    Failed {
        row_idx: usize,
        message: String,
    },
    Fatal(PairsError),
}

/// The rows of one case: its pairs and, with `--originals`, its unedited image.
struct CaseWork {
    pairs: Vec<usize>,
    original: Option<usize>,
}

fn save_png(image: &RgbImage, path: &Path) -> Result<u64, PairsError> {
    let err = |message: String| PairsError::Write {
        path: path.to_path_buf(),
        message,
    };
    image
        .save_with_format(path, image::ImageFormat::Png)
        .map_err(|e| err(e.to_string()))?;
    std::fs::metadata(path)
        .map(|m| m.len())
        .map_err(|e| err(e.to_string()))
}

/// Writes every row's image with `jobs` worker threads, each reading the run folder itself (a
/// [`RunFolder`] loads its specs on first use and needs `&mut` to do so).
pub fn write_images(
    run_dir: &Path,
    records: &[PairRecord],
    rows: &[Row],
    out_dir: &Path,
    jobs: usize,
    progress: &indicatif::ProgressBar,
) -> Result<ImageOutcome, PairsError> {
    let mut by_case: BTreeMap<&str, CaseWork> = BTreeMap::new();
    for (row_idx, row) in rows.iter().enumerate() {
        let work = by_case
            .entry(records[row.record_idx].case.as_str())
            .or_insert(CaseWork {
                pairs: Vec::new(),
                original: None,
            });
        match row.relation {
            Relation::Original => work.original = Some(row_idx),
            _ => work.pairs.push(row_idx),
        }
    }
    let work: Vec<CaseWork> = by_case.into_values().collect();
    for split in Split::ALL {
        if rows.iter().any(|r| r.split == split) {
            let dir = split_dir(out_dir, split);
            std::fs::create_dir_all(&dir).map_err(|e| PairsError::Write {
                path: dir.clone(),
                message: e.to_string(),
            })?;
        }
    }

    let mut outcome = ImageOutcome {
        origins: vec![None; rows.len()],
        ..ImageOutcome::default()
    };
    let next = AtomicUsize::new(0);
    let stop = AtomicBool::new(false);
    let mut fatal = None;
    std::thread::scope(|scope| {
        let (tx, rx) = mpsc::channel::<Message>();
        for _ in 0..jobs.clamp(1, work.len().max(1)) {
            let tx = tx.clone();
            let (work, next, stop) = (&work, &next, &stop);
            scope.spawn(move || {
                let mut run = match RunFolder::open(run_dir) {
                    Ok(run) => run,
                    Err(e) => {
                        let _ = tx.send(Message::Fatal(e.into()));
                        return;
                    }
                };
                while !stop.load(Ordering::Relaxed) {
                    let Some(case_work) = work.get(next.fetch_add(1, Ordering::Relaxed)) else {
                        break;
                    };
                    for message in write_case(&mut run, records, rows, case_work, out_dir) {
                        if tx.send(message).is_err() {
                            return;
                        }
                    }
                }
            });
        }
        drop(tx);
        for message in rx {
            match message {
                Message::Done {
                    row_idx,
                    origin,
                    bytes,
                } => {
                    outcome.origins[row_idx] = Some(origin);
                    outcome.bytes_written += bytes;
                }
                Message::Failed { row_idx, message } => outcome.failures.push((row_idx, message)),
                Message::Fatal(e) => {
                    stop.store(true, Ordering::Relaxed);
                    fatal.get_or_insert(e);
                }
            }
            progress.inc(1);
        }
    });
    if let Some(e) = fatal {
        return Err(e);
    }
    outcome.failures.sort_by_key(|f| f.0);
    Ok(outcome)
}

/// Renders (or reads) and saves one case's rows; a pair that cannot be re-created is a failure
/// of that row only, a file that cannot be written stops everything.
fn write_case(
    run: &mut RunFolder,
    records: &[PairRecord],
    rows: &[Row],
    work: &CaseWork,
    out_dir: &Path,
) -> Vec<Message> {
    let mut messages = Vec::new();
    let mut original: Option<RgbImage> = None;
    let path_of = |row: &Row| split_dir(out_dir, row.split).join(&row.file_name);
    for &row_idx in &work.pairs {
        let row = &rows[row_idx];
        let images = match run.pair_images(&records[row.record_idx]) {
            Ok(images) => images,
            Err(e) => {
                messages.push(Message::Failed {
                    row_idx,
                    message: e.to_string(),
                });
                continue;
            }
        };
        match save_png(&images.edited, &path_of(row)) {
            Ok(bytes) => messages.push(Message::Done {
                row_idx,
                origin: if images.from_saved_edit {
                    ImageOrigin::SavedEdit
                } else {
                    ImageOrigin::ReRendered
                },
                bytes,
            }),
            Err(e) => {
                messages.push(Message::Fatal(e));
                return messages;
            }
        }
        original.get_or_insert(images.original);
    }
    if let Some(row_idx) = work.original {
        let row = &rows[row_idx];
        match original {
            Some(image) => match save_png(&image, &path_of(row)) {
                Ok(bytes) => messages.push(Message::Done {
                    row_idx,
                    origin: ImageOrigin::Original,
                    bytes,
                }),
                Err(e) => messages.push(Message::Fatal(e)),
            },
            None => messages.push(Message::Failed {
                row_idx,
                message: format!(
                    "case {:?}: no pair of the case could be re-created, so its original is left out too",
                    records[row.record_idx].case
                ),
            }),
        }
    }
    messages
}

/// Writes one split's metadata.jsonl from the rows whose image was written.
pub fn write_metadata(
    out_dir: &Path,
    split: Split,
    lines: &[MetadataRow],
) -> Result<PathBuf, PairsError> {
    let path = split_dir(out_dir, split).join(METADATA_FILE);
    let mut text = String::new();
    for line in lines {
        text.push_str(&serde_json::to_string(line).expect("metadata rows always serialise"));
        text.push('\n');
    }
    std::fs::write(&path, text).map_err(|e| PairsError::Write {
        path: path.clone(),
        message: e.to_string(),
    })?;
    Ok(path)
}
