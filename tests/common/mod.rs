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

/// Invented test image: noise drawn from `pixels`, or a periodic stripe pattern (so source
/// patches match well).
pub fn image_of(w: u32, h: u32, pixels: &[u8], periodic: bool) -> image::RgbImage {
    image::RgbImage::from_fn(w, h, |x, y| {
        if periodic {
            let v = if (x + 2 * y) % 5 < 2 { 40 } else { 210 };
            image::Rgb([v, 255 - v, v / 2])
        } else {
            let i = ((y * w + x) * 3) as usize % pixels.len();
            image::Rgb([
                pixels[i],
                pixels[(i + 1) % pixels.len()],
                pixels[(i + 2) % pixels.len()],
            ])
        }
    })
}
