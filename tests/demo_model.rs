//! The committed demo model (models-cpu/stall-vqa) through the Rust pipeline: it is a real model
//! (clean accuracy on freshly synthesized scenes), and the bundled demo audit exposes its planted
//! colour shortcut. Thresholds and their reasons: models-cpu/stall-vqa.md ("Audit expectations").

mod common;

use std::path::{Path, PathBuf};

use twinaudit::audit::run_audit;
use twinaudit::audit::summary::Summary;
use twinaudit::synth::{synthesize, SynthConfig};

fn project(rel: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join(rel)
}

fn manifest() -> PathBuf {
    project("models-cpu/stall-vqa.manifest.json")
}

/// A held-out seed used by no training run (training: 11; model-card held-out: 12; demo: 2026).
const FRESH_SEED: u64 = 4242;

#[test]
fn committed_model_reaches_80_percent_clean_accuracy_on_fresh_scenes() {
    let dir = tempfile::tempdir().unwrap();
    let synth_dir = dir.path().join("synth");
    // Same generator options as the training split (models-cpu/stall-vqa.training.json).
    let config = SynthConfig {
        cloth_matches_bowl: Some(0.9),
        tags_match_apples: Some(0.9),
        jobs: 2,
        ..SynthConfig::new(&synth_dir, 150, FRESH_SEED)
    };
    synthesize(&config).unwrap();
    let spec_path = synth_dir.join("spec.json");
    common::keep_first_edit_per_case(&spec_path);
    let outcome = run_audit(&common::config(
        &spec_path,
        &manifest(),
        &dir.path().join("run"),
    ))
    .unwrap();
    let (mut correct, mut n) = (0, 0);
    for row in &outcome.summary.original_accuracy {
        println!(
            "{}: {}",
            row.question_kind.as_str(),
            row.accuracy.describe()
        );
        correct += row.accuracy.count;
        n += row.accuracy.n;
    }
    let accuracy = correct as f64 / n as f64;
    println!("all: {accuracy:.3} ({correct}/{n})");
    assert!(n >= 300, "enough questions to measure ({n})");
    assert!(accuracy >= 0.80, "clean accuracy {accuracy:.3} < 0.80");
}

fn rate(summary: &Summary, kind: &str, role: &str) -> twinaudit::stats::Rate {
    summary
        .by_kind_and_role
        .iter()
        .find(|r| r.question_kind.as_str() == kind && r.role == role)
        .unwrap_or_else(|| panic!("no {kind}/{role} row"))
        .failure_rate
}

#[test]
fn demo_audit_exposes_the_colour_shortcut() {
    let dir = tempfile::tempdir().unwrap();
    let outcome = run_audit(&common::config(
        &project("edit-specs"),
        &manifest(),
        &dir.path().join("run"),
    ))
    .unwrap();
    let s = &outcome.summary;
    assert_eq!(s.n_errors, 0);
    let top = &s.distractor_labels[0];
    assert_eq!(
        (top.question_kind.as_str(), top.label.as_str()),
        ("colour", "cloth"),
        "the cloth ranks first"
    );
    let cloth = top.flip_rate;
    println!(
        "colour answers, cloth edits: flip rate {}",
        cloth.describe()
    );
    for kind in ["count", "exists"] {
        let target = rate(s, kind, "target");
        println!(
            "{kind} answers, target edits: failure rate {}",
            target.describe()
        );
        // "Clearly above": the 95% Wilson intervals do not overlap.
        assert!(
            cloth.low.unwrap() > target.high.unwrap(),
            "cloth flips {} not clearly above {kind} target failures {}",
            cloth.describe(),
            target.describe()
        );
    }
    assert!(cloth.low.unwrap() >= 0.25, "{}", cloth.describe());
    assert!(twinaudit::audit::summary::shortcut_findings(s)
        .iter()
        .any(|f| f.contains("\"cloth\"")));
}

/// The cells of the first body row of the table with `id`, as text.
fn first_row_cells(html: &str, id: &str) -> Vec<String> {
    let table = &html[html
        .find(&format!("id=\"{id}\""))
        .unwrap_or_else(|| panic!("no table {id}"))..];
    let body = &table[table.find("<tbody>").unwrap()..];
    let row = &body[..body.find("</tr>").unwrap()];
    row.split("<td")
        .skip(1)
        .map(|cell| {
            let text = &cell[cell.find('>').unwrap() + 1..];
            text[..text.find("</td>").unwrap()].to_string()
        })
        .collect()
}

#[test]
fn demo_report_ranks_the_cloth_first_for_colour_questions() {
    let dir = tempfile::tempdir().unwrap();
    let run = dir.path().join("demo");
    let out = common::bin()
        .args(["demo", "--json", "--out"])
        .arg(&run)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let summary: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(run.join("summary.json")).unwrap()).unwrap();
    let top = &summary["distractor_labels"][0];
    assert_eq!(
        (top["question_kind"].as_str(), top["label"].as_str()),
        (Some("colour"), Some("cloth")),
        "summary.json ranks the cloth first"
    );

    let out = common::bin().arg("report").arg(&run).output().unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    println!("{}", String::from_utf8_lossy(&out.stdout).trim());
    let html = std::fs::read_to_string(run.join("report.html")).unwrap();
    let cells = first_row_cells(&html, "confounder-table");
    assert_eq!(&cells[..3], ["1", "colour", "cloth"], "{cells:?}");
    // The plot's first row is the same label.
    let plot = &html[html.find("<section id=\"confounders\">").unwrap()..];
    let first_label = &plot[plot.find("class=\"label\"").unwrap()..];
    let first_label = &first_label[first_label.find('>').unwrap() + 1..];
    assert!(
        first_label.starts_with("colour: cloth<"),
        "{}",
        &first_label[..40]
    );
}
