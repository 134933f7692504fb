//! A run killed with SIGKILL part-way and resumed has every pair exactly once and the same
//! verdicts as an uninterrupted run. Workload: an invented spec repeating the committed tile
//! cases many times, so the kill lands mid-run.

mod common;

use std::collections::{BTreeMap, HashSet};
use std::path::Path;
use std::time::{Duration, Instant};

use common::{bin, known};
use twinaudit::audit::results::read_results;

const N_COPIES: usize = 150;

fn big_spec(dir: &Path) -> std::path::PathBuf {
    let text = std::fs::read_to_string(known("specs/counting.json")).unwrap();
    let base: serde_json::Value = serde_json::from_str(&text).unwrap();
    let mut cases = Vec::new();
    for copy in 0..N_COPIES {
        for case in base["cases"].as_array().unwrap() {
            let mut case = case.clone();
            case["id"] = format!("{}-{copy}", case["id"].as_str().unwrap()).into();
            let image = known("specs").join(case["image"].as_str().unwrap());
            case["image"] = image.to_str().unwrap().into();
            cases.push(case);
        }
    }
    let path = dir.join("big.json");
    std::fs::write(
        &path,
        serde_json::json!({"format_version": 1, "cases": cases}).to_string(),
    )
    .unwrap();
    path
}

fn run_args(spec: &Path, out: &Path) -> Vec<String> {
    [
        "run",
        "--spec",
        spec.to_str().unwrap(),
        "--model",
        known("count_red_confounded.manifest.json")
            .to_str()
            .unwrap(),
        "--out",
        out.to_str().unwrap(),
        "--jobs",
        "2",
        "--json",
    ]
    .iter()
    .map(|s| s.to_string())
    .collect()
}

fn line_count(path: &Path) -> usize {
    std::fs::read(path)
        .map(|b| b.iter().filter(|&&c| c == b'\n').count())
        .unwrap_or(0)
}

fn verdicts(out: &Path) -> BTreeMap<String, String> {
    read_results(&out.join("results.jsonl"))
        .unwrap()
        .into_iter()
        .map(|r| {
            (
                r.pair_id,
                r.verdict
                    .map(|v| v.as_str().to_string())
                    .unwrap_or_default(),
            )
        })
        .collect()
}

#[test]
fn killed_and_resumed_run_equals_uninterrupted_run() {
    let dir = tempfile::tempdir().unwrap();
    let spec = big_spec(dir.path());
    let n_pairs = N_COPIES * 26;

    let full = dir.path().join("full");
    let status = bin().args(run_args(&spec, &full)).output().unwrap().status;
    assert!(status.success());

    let killed = dir.path().join("killed");
    let exe = assert_cmd::cargo::cargo_bin("twinaudit");
    let mut child = std::process::Command::new(exe)
        .args(run_args(&spec, &killed))
        .stdout(std::process::Stdio::null())
        .spawn()
        .unwrap();
    let results = killed.join("results.jsonl");
    let start = Instant::now();
    while line_count(&results) < 40 && start.elapsed() < Duration::from_secs(60) {
        std::thread::sleep(Duration::from_millis(1));
    }
    child.kill().unwrap(); // SIGKILL on Unix
    child.wait().unwrap();
    let written = line_count(&results);
    assert!(
        written < n_pairs,
        "the kill came too late ({written} of {n_pairs} lines); raise N_COPIES"
    );
    assert!(
        !killed.join("summary.json").exists(),
        "a killed run has no summary yet"
    );

    let again = bin().args(run_args(&spec, &killed)).output().unwrap();
    assert_eq!(
        again.status.code(),
        Some(2),
        "without --resume an existing run folder is refused"
    );
    let mut args = run_args(&spec, &killed);
    args.push("--resume".into());
    let resumed = bin().args(&args).output().unwrap();
    assert!(
        resumed.status.success(),
        "{}",
        String::from_utf8_lossy(&resumed.stderr)
    );

    let rows = read_results(&results).unwrap();
    let ids: HashSet<&str> = rows.iter().map(|r| r.pair_id.as_str()).collect();
    assert_eq!(rows.len(), n_pairs, "every pair exactly once");
    assert_eq!(ids.len(), n_pairs);
    assert_eq!(verdicts(&killed), verdicts(&full));

    // Line numbers in results.jsonl follow the order the two workers finished in, which differs
    // between runs; everything else in the summary must be identical.
    let summary = |d: &Path| -> serde_json::Value {
        let mut v: serde_json::Value =
            serde_json::from_str(&std::fs::read_to_string(d.join("summary.json")).unwrap())
                .unwrap();
        for list in ["flipped", "did_not_move"] {
            for e in v["confident_failures"][list].as_array_mut().unwrap() {
                e["results_line"] = serde_json::Value::Null;
            }
        }
        v
    };
    assert_eq!(summary(&killed), summary(&full));
    let info: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(killed.join("run.json")).unwrap()).unwrap();
    assert_eq!(info["n_resumes"], 1);
    assert!(info["finished_at"].is_string());
}

#[test]
fn a_partial_last_line_is_cut_before_resuming() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("run");
    let ok = bin()
        .args(run_args(&known("specs/counting.json"), &out))
        .output()
        .unwrap();
    assert!(ok.status.success());
    let path = out.join("results.jsonl");
    let text = std::fs::read_to_string(&path).unwrap();
    let lines: Vec<&str> = text.lines().collect();
    // Keep 10 whole lines and half of the 11th, as a kill mid-write would.
    let mut cut = lines[..10].join("\n");
    cut.push('\n');
    cut.push_str(&lines[10][..lines[10].len() / 2]);
    std::fs::write(&path, cut).unwrap();
    let mut args = run_args(&known("specs/counting.json"), &out);
    args.push("--resume".into());
    let resumed = bin().args(&args).output().unwrap();
    assert!(
        resumed.status.success(),
        "{}",
        String::from_utf8_lossy(&resumed.stderr)
    );
    assert_eq!(read_results(&path).unwrap().len(), 26);
}

#[test]
fn resume_refuses_a_changed_model() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("run");
    let ok = bin()
        .args(run_args(&known("specs/counting.json"), &out))
        .output()
        .unwrap();
    assert!(ok.status.success());
    let out_s = out.to_str().unwrap();
    let spec = known("specs/counting.json");
    let r = bin()
        .args([
            "run",
            "--spec",
            spec.to_str().unwrap(),
            "--model",
            known("count_red.manifest.json").to_str().unwrap(),
            "--out",
            out_s,
            "--resume",
        ])
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&r.stderr);
    assert_eq!(r.status.code(), Some(2));
    assert!(
        err.contains("cannot resume") && err.contains("model file changed"),
        "{err}"
    );
}
