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

fn check(model: &str, manifest: &str, spec: &str) -> Vec<twinaudit::audit::results::PairRecord> {
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
    rows
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
    let rows = check(
        "count-red-confounded",
        "count_red_confounded.manifest.json",
        "specs/counting.json",
    );
    // From the run itself: flips happen only on distractor edits, and exactly on those that
    // touch an orange tile (the colour this model counts as red).
    for row in &rows {
        let flipped = row.verdict.unwrap().as_str() == "flipped";
        if row.role == "distractor" {
            let touches_orange = row.regions.iter().any(|r| r.label.contains("orange"));
            assert_eq!(flipped, touches_orange, "{}", row.pair_id);
        } else {
            assert!(!flipped, "{}", row.pair_id);
        }
    }
    let n_flipped = rows
        .iter()
        .filter(|r| r.verdict.unwrap().as_str() == "flipped")
        .count();
    assert_eq!(n_flipped, 10);
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
