//! Running an audit: planning pairs, rendering edits, asking the model, judging, and writing
//! run.json, results.jsonl and (through [`crate::analysis`], the runner's last step) summary.json.
//!
//! Invariants: inputs are never modified; an existing run folder is only ever appended to
//! (with `--resume`); every pair id is written once; one bad case becomes error rows and the run
//! goes on.

pub mod checker;
pub mod plan;
pub mod replay;
pub mod results;
pub mod run_info;
pub mod runner;

use std::path::PathBuf;

pub use runner::{run_audit, RunConfig, RunOutcome};

/// summary.json moved to [`crate::analysis`]; this path stays for code written before the move.
pub use crate::analysis::summary;

#[derive(Debug, thiserror::Error)]
pub enum AuditError {
    #[error(transparent)]
    Spec(#[from] crate::spec::SpecError),
    #[error(transparent)]
    Model(#[from] crate::model::ModelError),
    #[error(transparent)]
    Results(#[from] results::ResultsError),
    #[error("output folder {0} already exists and is not empty; pass --resume to continue that run, or choose another --out")]
    OutputExists(PathBuf),
    #[error("cannot resume {dir}: {message}")]
    Resume { dir: PathBuf, message: String },
    #[error("cannot write {path}: {source}")]
    Write {
        path: PathBuf,
        source: std::io::Error,
    },
}
