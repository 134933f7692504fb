//! `recolour` through a whole audit: derived expectations for colour questions and the
//! known-answer colour model `colour_centre` (tests/data/known).
//!
//! Sources: the model's answer is the prototype nearest to the centre block's mean colour
//! (tests/data/known/README.md, prototypes red (1, 0, 0), green (0, 0.6, 0), yellow (1, 1, 0),
//! white (1, 1, 1), grey (0.5, 0.5, 0.5), orange (1, 0.55, 0), ...; built and checked with
//! onnxruntime 1.32.0 by tools/fixtures/known_models.py). The recoloured tile colours are the
//! named-colour table's (docs/spec.md) at the tile's L* moved into each name's range: red
//! (242, 65, 52), orange (225, 114, 0), yellow (234, 203, 42), white (232, 232, 232), grey
//! (131, 131, 131), each nearest to its own prototype. The derived expectation (colour question,
//! recoloured target → the new colour's name; distractors only → same) is the rule in
//! docs/spec.md "Expectations".

mod common;

use common::{audit, known};
use twinaudit::audit::results::Status;
use twinaudit::spec::Expectation;

fn spec_json(image: &str) -> String {
    let mut edits: Vec<String> = ["red", "orange", "yellow", "white", "grey"]
        .iter()
        .map(|c| {
            format!(
                r#"{{"id": "recolour-{c}", "operation": "recolour", "regions": {{"ids": ["centre"]}}, "params": {{"colour": "{c}"}}}}"#
            )
        })
        .collect();
    edits.push(
        r#"{"id": "recolour-or1", "operation": "recolour", "regions": {"ids": ["or1"]}, "params": {"colour": "blue", "feather_px": 0}}"#
            .into(),
    );
    format!(
        r#"{{
  "format_version": 1,
  "cases": [{{
    "id": "green-colour",
    "image": "{image}",
    "question": "What colour is the centre tile?",
    "question_kind": "colour",
    "answer": "green",
    "regions": [
      {{"id": "centre", "label": "centre tile", "role": "target", "box": [22, 22, 20, 20]}},
      {{"id": "or1", "label": "orange tile", "role": "distractor", "box": [8, 8, 6, 6]}}
    ],
    "edits": [{}]
  }}]
}}"#,
        edits.join(",\n")
    )
}

#[test]
fn recoloured_centre_tile_reads_as_the_new_colour() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::copy(
        known("images/centre_green.png"),
        dir.path().join("centre_green.png"),
    )
    .unwrap();
    let spec = dir.path().join("recolour.json");
    std::fs::write(&spec, spec_json("centre_green.png")).unwrap();
    let (_out, _outcome, rows) = audit(&spec, &known("colour_centre.manifest.json"));
    assert_eq!(rows.len(), 6);
    for row in &rows {
        assert_eq!(row.status, Status::Ok, "{}: {:?}", row.pair_id, row.error);
        assert_eq!(row.operation, "recolour");
        assert_eq!(row.method.as_deref(), Some("lab-chroma"));
        assert!(row.expectation_derived, "{}", row.pair_id);
        assert_eq!(row.before.as_ref().unwrap().answer, "green");
        let after = &row.after.as_ref().unwrap().answer;
        let verdict = row.verdict.unwrap().as_str();
        if row.edit == "recolour-or1" {
            // Distractor only: derived "same"; the centre tile is untouched.
            assert_eq!(row.expectation, Expectation::Same);
            assert_eq!(verdict, "held");
        } else {
            let colour = row.edit.trim_start_matches("recolour-");
            assert_eq!(row.expectation, Expectation::Answer(colour.into()));
            assert_eq!(after, colour, "{}", row.pair_id);
            assert_eq!(verdict, "moved_to_expected", "{}", row.pair_id);
        }
    }
}

#[test]
fn recolour_on_a_count_question_needs_a_stated_expectation() {
    let dir = tempfile::tempdir().unwrap();
    let spec = dir.path().join("count.json");
    let text = spec_json("centre_green.png")
        .replace(
            r#""question_kind": "colour""#,
            r#""question_kind": "count""#,
        )
        .replace(r#""answer": "green""#, r#""answer": "1""#);
    std::fs::write(&spec, text).unwrap();
    let out = dir.path().join("run");
    let Err(err) = twinaudit::audit::run_audit(&common::config(
        &spec,
        &known("colour_centre.manifest.json"),
        &out,
    )) else {
        panic!("planning must fail");
    };
    let message = format!("{err:#}");
    assert!(
        message
            .contains("cannot derive an expectation for recolouring targets on a count question"),
        "{message}"
    );
    assert!(message.contains("recolour-red"), "{message}");
}

#[test]
fn tile_colours_named_in_the_header_are_what_recolour_gives() {
    use image::{Rgb, RgbImage};
    use twinaudit::render::colour::named_colour_entry;
    use twinaudit::render::mask::Mask;
    use twinaudit::render::recolour::{recolour_lab, LabRecolourParams};
    // The scene's centre tile is prototype green (0, 0.6, 0) = (0, 153, 0).
    let tile = RgbImage::from_pixel(20, 20, Rgb([0, 153, 0]));
    let mask = Mask::from_vec(20, 20, vec![true; 400]).unwrap();
    for (name, expected) in [
        ("red", [242, 65, 52]),
        ("orange", [225, 114, 0]),
        ("yellow", [234, 203, 42]),
        ("white", [232, 232, 232]),
        ("grey", [131, 131, 131]),
    ] {
        let p = LabRecolourParams::from_named(named_colour_entry(name).unwrap(), 2.0);
        let out = recolour_lab(&tile, &mask, &p);
        assert_eq!(out.get_pixel(10, 10).0, expected, "{name}");
    }
}
