//! Shared helpers for integration tests: paths to committed fixtures and a one-call audit.
#![allow(dead_code)]

use std::path::{Path, PathBuf};

use twinaudit::audit::results::{read_results, PairRecord};
use twinaudit::audit::{run_audit, RunConfig, RunOutcome};

pub fn data(rel: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests/data")
        .join(rel)
}

pub fn known(rel: &str) -> PathBuf {
    data("known").join(rel)
}

pub fn config(spec: &Path, manifest: &Path, out: &Path) -> RunConfig {
    RunConfig {
        spec_path: spec.to_path_buf(),
        manifest_path: manifest.to_path_buf(),
        out_dir: out.to_path_buf(),
        seed: 7,
        jobs: 2,
        save_edits: false,
        resume: false,
        confidence: 0.95,
        show_progress: false,
        placebo: false,
    }
}

/// Runs an audit into a fresh temporary folder and returns its outcome and rows.
pub fn audit(spec: &Path, manifest: &Path) -> (tempfile::TempDir, RunOutcome, Vec<PairRecord>) {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("run");
    let outcome =
        run_audit(&config(spec, manifest, &out)).unwrap_or_else(|e| panic!("audit failed: {e}"));
    let rows = read_results(&out.join("results.jsonl")).unwrap();
    (dir, outcome, rows)
}

pub fn bin() -> assert_cmd::Command {
    assert_cmd::Command::cargo_bin("twinaudit").unwrap()
}
