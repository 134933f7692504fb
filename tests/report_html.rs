//! `twinaudit report` on a real run (known-answer model count_red_confounded, tests/data/known):
//! the file is self-contained, every user string is escaped, rows trace to results.jsonl lines,
//! and `--confidence` recomputes the intervals.
//!
//! Escaping reference: the HTML Living Standard's rule for text and attribute values (`&`, `<`,
//! `>`, `"` as character references; `'` as `&#39;`, common practice).

mod common;

use common::{bin, hostile_run_with_report, HOSTILE_LABEL, HOSTILE_QUESTION};
use twinaudit::audit::results::read_results;

fn escaped(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
        .replace('\'', "&#39;")
}

#[test]
fn user_strings_are_escaped_everywhere() {
    let dir = tempfile::tempdir().unwrap();
    let run = hostile_run_with_report(dir.path());
    let html = std::fs::read_to_string(run.join("report.html")).unwrap();
    for raw in [HOSTILE_LABEL, HOSTILE_QUESTION, "<script>alert(1)</script>"] {
        assert!(!html.contains(raw), "raw {raw:?} in the report");
    }
    assert!(
        !html.to_lowercase().contains("<script"),
        "no script element at all"
    );
    // The label shows in the confounder plot and table, the slices and the failures; the
    // question in the failures tables and gallery.
    let label = escaped(HOSTILE_LABEL);
    assert!(html.matches(&label).count() >= 4, "escaped label shown");
    assert!(
        html.contains(&escaped(HOSTILE_QUESTION)),
        "escaped question shown"
    );
}

#[test]
fn the_report_is_self_contained_and_traceable() {
    let dir = tempfile::tempdir().unwrap();
    let run = hostile_run_with_report(dir.path());
    let html = std::fs::read_to_string(run.join("report.html")).unwrap();
    // No fetches: no external resources, links to stylesheets, imports or URLs in CSS. The only
    // "http" is the SVG namespace name, which is never fetched.
    for banned in [
        "<link",
        "@import",
        "url(",
        "src=\"http",
        "href=\"http",
        "<iframe",
    ] {
        assert!(!html.contains(banned), "{banned} in the report");
    }
    assert_eq!(
        html.matches("http").count(),
        html.matches("xmlns=\"http://www.w3.org/2000/svg\"").count()
    );
    assert!(html.contains("id=\"summary-table\""));
    assert!(html.contains("<svg"), "plots are inline SVG");
    assert!(
        html.contains("data:image/png;base64,"),
        "thumbnails are inline"
    );
    assert!(html.contains("not a certificate"), "caution paragraph");
    // Every flipped pair is named with its results.jsonl line.
    let rows = read_results(&run.join("results.jsonl")).unwrap();
    let mut n_flipped = 0;
    for (i, r) in rows.iter().enumerate() {
        if r.passed == Some(false) {
            n_flipped += 1;
            let line = format!("line {}: <code>{}</code>", i + 1, r.pair_id);
            assert!(html.contains(&line), "{line} missing");
        }
    }
    assert!(n_flipped > 0);
    // summary.json names the same lines for its confident failures.
    let summary: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(run.join("summary.json")).unwrap()).unwrap();
    assert_eq!(summary["format_version"], 2);
    for e in summary["confident_failures"]["flipped"].as_array().unwrap() {
        let line = e["results_line"].as_u64().unwrap() as usize;
        assert_eq!(rows[line - 1].pair_id, e["pair_id"].as_str().unwrap());
    }
}

#[test]
fn confidence_recomputes_intervals_and_out_chooses_the_file() {
    let dir = tempfile::tempdir().unwrap();
    let run = hostile_run_with_report(dir.path());
    let other = dir.path().join("at-90.html");
    let out = bin()
        .arg("report")
        .arg(&run)
        .args(["--confidence", "0.9", "--json", "--out"])
        .arg(&other)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["summary"]["confidence"], 0.9);
    assert_eq!(v["summary"]["failure_rate"]["confidence"], 0.9);
    assert_eq!(v["report"], other.to_str().unwrap());
    let html = std::fs::read_to_string(&other).unwrap();
    assert!(html.contains("90% Wilson score intervals"));
    // A 90% interval is narrower than the 95% one written by the run.
    let at95: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(run.join("summary.json")).unwrap()).unwrap();
    let width = |s: &serde_json::Value| {
        s["failure_rate"]["high"].as_f64().unwrap() - s["failure_rate"]["low"].as_f64().unwrap()
    };
    assert!(width(&v["summary"]) < width(&at95));

    let bad = bin()
        .arg("report")
        .arg(&run)
        .args(["--confidence", "1.5"])
        .output()
        .unwrap();
    assert_eq!(bad.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&bad.stderr)
        .contains("--confidence must lie strictly between 0 and 1"));
}

#[test]
fn a_folder_that_is_not_a_run_is_named_in_the_error() {
    let dir = tempfile::tempdir().unwrap();
    let out = bin().arg("report").arg(dir.path()).output().unwrap();
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        err.contains(&dir.path().display().to_string())
            && err.contains("not a twinaudit run folder"),
        "{err}"
    );
}
