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

/// A label and question carrying markup, quotes and ampersands, for the report's escaping tests.
pub const HOSTILE_LABEL: &str = r#"<script>alert(1)</script> "orange" & 'tile'"#;
pub const HOSTILE_QUESTION: &str =
    r#"How many red tiles are there? <script>alert(1)</script> & "quotes""#;

/// The known-answer counting spec (tests/data/known/specs/counting.json) written into `dir` with
/// absolute image paths, every "orange tile" label replaced by [`HOSTILE_LABEL`] and every
/// question by [`HOSTILE_QUESTION`]. With `count_red_confounded` the orange-tile edits flip
/// (tests/data/known/EXPECTED.md), so the label reaches the confounder ranking and the failures.
pub fn hostile_counting_spec(dir: &Path) -> PathBuf {
    let text = std::fs::read_to_string(known("specs/counting.json")).unwrap();
    let mut spec: serde_json::Value = serde_json::from_str(&text).unwrap();
    for case in spec["cases"].as_array_mut().unwrap() {
        let image = known("specs").join(case["image"].as_str().unwrap());
        case["image"] = image.to_str().unwrap().into();
        case["question"] = HOSTILE_QUESTION.into();
        for region in case["regions"].as_array_mut().unwrap() {
            if region["label"] == "orange tile" {
                region["label"] = HOSTILE_LABEL.into();
            }
        }
    }
    let path = dir.join("hostile.json");
    std::fs::write(&path, serde_json::to_string_pretty(&spec).unwrap()).unwrap();
    path
}

/// Runs the hostile spec with `count_red_confounded` through the binary and writes its report;
/// returns the run folder.
pub fn hostile_run_with_report(dir: &Path) -> PathBuf {
    let spec = hostile_counting_spec(dir);
    let run = dir.join("run");
    let out = bin()
        .args(["run", "--spec", spec.to_str().unwrap(), "--model"])
        .arg(known("count_red_confounded.manifest.json"))
        .arg("--out")
        .arg(&run)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let out = bin().arg("report").arg(&run).output().unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    run
}

/// Rewrites a spec file so that each case keeps only its first edit: clean accuracy needs only
/// the unedited answers, and one edit per case keeps such runs cheap.
pub fn keep_first_edit_per_case(spec_path: &Path) {
    let mut spec: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(spec_path).unwrap()).unwrap();
    for case in spec["cases"].as_array_mut().unwrap() {
        let first = case["edits"][0].clone();
        case["edits"] = serde_json::json!([first]);
    }
    std::fs::write(spec_path, spec.to_string()).unwrap();
}
