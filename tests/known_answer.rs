//! End-to-end audits with known-answer ONNX models through ONNX Runtime.
//!
//! Source of the expected verdicts: tests/data/known/EXPECTED.md and expected_verdicts.json,
//! computed by hand formula in numpy and cross-checked with the onnxruntime 1.32.0 Python API by
//! tools/fixtures/known_models.py (provenance.json records versions).

mod common;

use std::collections::BTreeMap;

use common::{audit, known};
use serde::Deserialize;
use twinaudit::audit::results::Status;
use twinaudit::spec::Expectation;

#[derive(Deserialize)]
struct Expected {
    before: String,
    after: String,
    expectation: Expectation,
    verdict: String,
}

fn expected(model: &str) -> BTreeMap<String, Expected> {
    let text = std::fs::read_to_string(known("expected_verdicts.json")).unwrap();
    let mut all: BTreeMap<String, BTreeMap<String, Expected>> =
        serde_json::from_str(&text).unwrap();
    all.remove(model)
        .unwrap_or_else(|| panic!("no expected verdicts for {model}"))
}

fn check(model: &str, manifest: &str, spec: &str) {
    let want = expected(model);
    let (_dir, outcome, rows) = audit(&known(spec), &known(manifest));
    assert_eq!(
        rows.len(),
        want.len(),
        "{model}: every planned pair has exactly one row"
    );
    assert_eq!(outcome.summary.n_errors, 0);
    for row in &rows {
        assert_eq!(row.status, Status::Ok, "{}: {:?}", row.pair_id, row.error);
        let w = want
            .get(&row.pair_id)
            .unwrap_or_else(|| panic!("{model}: unexpected pair {}", row.pair_id));
        let ctx = format!("{model} {}", row.pair_id);
        assert_eq!(
            row.before.as_ref().unwrap().answer,
            w.before,
            "{ctx}: answer before"
        );
        assert_eq!(
            row.after.as_ref().unwrap().answer,
            w.after,
            "{ctx}: answer after"
        );
        assert_eq!(row.expectation, w.expectation, "{ctx}: expectation");
        assert_eq!(row.verdict.unwrap().as_str(), w.verdict, "{ctx}: verdict");
    }
}

#[test]
fn counting_model_erasing_a_counted_tile_lowers_the_count_by_one() {
    check(
        "count-red",
        "count_red.manifest.json",
        "specs/counting.json",
    );
}

#[test]
fn confounded_counting_model_flips_on_exactly_the_distractor_pairs() {
    check(
        "count-red-confounded",
        "count_red_confounded.manifest.json",
        "specs/counting.json",
    );
    let want = expected("count-red-confounded");
    let flipped: Vec<&String> = want
        .iter()
        .filter(|(_, e)| e.verdict == "flipped")
        .map(|(k, _)| k)
        .collect();
    assert!(
        flipped
            .iter()
            .all(|k| k.contains("or") || k.contains("distractor")),
        "{flipped:?}"
    );
    assert_eq!(flipped.len(), 10);
}

#[test]
fn colour_model_holds_under_distractor_edits_and_reads_the_filled_centre() {
    check(
        "colour-centre",
        "colour_centre.manifest.json",
        "specs/colour.json",
    );
}

#[test]
fn question_model_with_nhwc_bgr_input_and_tokens() {
    check("vqa-joint", "vqa_joint.manifest.json", "specs/vqa.json");
}
