//! results.jsonl: one self-describing line per (case, edit) pair (docs/results.md).
//!
//! Invariants: the file is append-only; each line is written whole and flushed before the next;
//! a pair id appears at most once. A run killed mid-line leaves a partial last line, which
//! [`read_results`] cuts off before a resume appends.

use std::collections::HashSet;
use std::fs::{File, OpenOptions};
use std::io::{BufRead, BufReader, Write};
use std::path::{Path, PathBuf};

use serde::{Deserialize, Serialize};

use super::checker::Verdict;
use crate::model::Prediction;
use crate::spec::{Expectation, QuestionKind};

pub const RESULTS_FORMAT_VERSION: u32 = 1;

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RegionRef {
    pub id: String,
    pub label: String,
    pub role: String,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Status {
    /// Both answers were obtained and judged.
    Ok,
    /// The pair could not be judged; `error` says why.
    Error,
}

/// One line of results.jsonl.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PairRecord {
    pub format_version: u32,
    /// `"<case>/<edit>"`, unique within a run.
    pub pair_id: String,
    pub case: String,
    pub edit: String,
    pub spec: String,
    pub image: String,
    pub question: String,
    pub question_kind: QuestionKind,
    pub operation: String,
    /// Algorithm actually used by the operation, e.g. `telea`.
    pub method: Option<String>,
    /// `target`, `distractor` or `mixed`: which roles the edited regions have.
    pub role: String,
    pub regions: Vec<RegionRef>,
    /// Regions annotated in the case (edited or not): the objects in the scene as far as the spec
    /// knows them. Absent in files written before the field existed.
    #[serde(default)]
    pub n_case_regions: Option<u32>,
    /// Share of the image's pixels the edit was allowed to change.
    pub area_fraction: Option<f64>,
    /// Seed for the edit's random choices.
    pub seed: u64,
    pub expectation: Expectation,
    /// True when the expectation was derived from the question kind, false when the spec stated it.
    pub expectation_derived: bool,
    /// `change` or `same`.
    pub relation: String,
    /// Ground truth for the unedited image, normalised.
    pub truth: Option<String>,
    pub status: Status,
    pub before: Option<Prediction>,
    /// Whether the answer on the unedited image equals the ground truth (absent without truth).
    pub before_correct: Option<bool>,
    pub after: Option<Prediction>,
    pub verdict: Option<Verdict>,
    pub passed: Option<bool>,
    pub error: Option<String>,
    pub warnings: Vec<String>,
    /// Edited image, relative to the run folder (with `--save-edits`).
    pub edited_image: Option<String>,
    /// For a placebo control (`--placebo`): the pair id of the real edit whose shape, size and
    /// method it repeats on free background. Absent in runs without placebos.
    #[serde(default)]
    pub placebo_of: Option<String>,
    /// Bounding boxes `[x, y, w, h]` of objects the edit added (`duplicate`'s copies); empty for
    /// other operations and absent in files written before the field existed.
    #[serde(default)]
    pub added_regions: Vec<[u32; 4]>,
}

#[derive(Debug, thiserror::Error)]
pub enum ResultsError {
    #[error("cannot read {path}: {source}")]
    Io {
        path: PathBuf,
        source: std::io::Error,
    },
    #[error("{path}:{line}: not a results line ({message}); the file was changed by hand or by another tool")]
    Parse {
        path: PathBuf,
        line: usize,
        message: String,
    },
    #[error("{path}:{line}: pair {pair_id:?} appears twice")]
    Duplicate {
        path: PathBuf,
        line: usize,
        pair_id: String,
    },
}

/// Reads every complete line; a partial last line (from a killed run) is cut off the file, so a
/// resume can append after it.
pub fn read_results(path: &Path) -> Result<Vec<PairRecord>, ResultsError> {
    read_lines(path, true)
}

/// Reads every complete line and ignores a partial last line without touching the file: for
/// readers of a finished (or still running) run, which must never write into it.
pub fn read_results_readonly(path: &Path) -> Result<Vec<PairRecord>, ResultsError> {
    read_lines(path, false)
}

fn read_lines(path: &Path, cut_partial_line: bool) -> Result<Vec<PairRecord>, ResultsError> {
    let io = |source| ResultsError::Io {
        path: path.to_path_buf(),
        source,
    };
    if !path.exists() {
        return Ok(Vec::new());
    }
    let bytes = std::fs::read(path).map_err(io)?;
    let complete = bytes.iter().rposition(|&b| b == b'\n').map_or(0, |i| i + 1);
    if cut_partial_line && complete < bytes.len() {
        let f = OpenOptions::new().write(true).open(path).map_err(io)?;
        f.set_len(complete as u64).map_err(io)?;
    }
    let mut records = Vec::new();
    let mut seen = HashSet::new();
    for (i, line) in BufReader::new(&bytes[..complete]).lines().enumerate() {
        let line = line.map_err(io)?;
        if line.trim().is_empty() {
            continue;
        }
        let record: PairRecord = serde_json::from_str(&line).map_err(|e| ResultsError::Parse {
            path: path.to_path_buf(),
            line: i + 1,
            message: e.to_string(),
        })?;
        if !seen.insert(record.pair_id.clone()) {
            return Err(ResultsError::Duplicate {
                path: path.to_path_buf(),
                line: i + 1,
                pair_id: record.pair_id,
            });
        }
        records.push(record);
    }
    Ok(records)
}

/// Appends records one whole line at a time.
pub struct ResultsWriter {
    file: File,
    path: PathBuf,
}

impl ResultsWriter {
    pub fn open_append(path: &Path) -> Result<ResultsWriter, ResultsError> {
        let file = OpenOptions::new()
            .create(true)
            .append(true)
            .open(path)
            .map_err(|source| ResultsError::Io {
                path: path.to_path_buf(),
                source,
            })?;
        Ok(ResultsWriter {
            file,
            path: path.to_path_buf(),
        })
    }

    pub fn append(&mut self, record: &PairRecord) -> Result<(), ResultsError> {
        let mut line = serde_json::to_string(record).expect("records always serialise");
        line.push('\n');
        self.file
            .write_all(line.as_bytes())
            .and_then(|_| self.file.flush())
            .map_err(|source| ResultsError::Io {
                path: self.path.clone(),
                source,
            })
    }
}
