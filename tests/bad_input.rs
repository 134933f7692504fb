//! Bad input gets a clear error naming what is at fault, never a panic, and loses no results.
//! Inputs here are written by the tests themselves (invented), next to committed fixtures.

mod common;

use std::path::Path;

use common::{bin, config, known};
use serde_json::json;
use twinaudit::audit::results::{read_results, Status};
use twinaudit::audit::run_audit;

/// A counting spec in `dir` whose image paths point at the committed tile images.
fn write_spec(dir: &Path, name: &str, spec: serde_json::Value) -> std::path::PathBuf {
    let path = dir.join(name);
    std::fs::write(&path, serde_json::to_string_pretty(&spec).unwrap()).unwrap();
    path
}

fn tile_case(
    id: &str,
    image: &Path,
    regions: serde_json::Value,
    edits: serde_json::Value,
) -> serde_json::Value {
    json!({"id": id, "image": image, "question": "How many red tiles are there?", "question_kind": "count",
           "regions": regions, "edits": edits})
}

fn image_c() -> std::path::PathBuf {
    known("images/tiles_c.png")
}

fn stderr_of(args: &[&str]) -> (i32, String, String) {
    let out = bin().args(args).output().unwrap();
    (
        out.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&out.stdout).into_owned(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

#[test]
fn malformed_json_names_file_line_and_column() {
    let dir = tempfile::tempdir().unwrap();
    let spec = dir.path().join("broken.json");
    std::fs::write(
        &spec,
        "{\n  \"format_version\": 1,\n  \"cases\": [\n    {\"id\": \"x\",, }\n  ]\n}\n",
    )
    .unwrap();
    let out = dir.path().join("run");
    let (code, _, err) = stderr_of(&[
        "run",
        "--spec",
        spec.to_str().unwrap(),
        "--model",
        known("count_red.manifest.json").to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
    ]);
    assert_eq!(code, 2, "{err}");
    assert!(
        err.contains(&format!("{}:4:16: malformed spec JSON", spec.display())),
        "{err}"
    );
    assert!(!err.contains("panicked"), "{err}");
    assert!(
        !out.exists(),
        "no output folder for a spec that does not load"
    );
}

#[test]
fn unknown_field_is_reported_with_its_position() {
    let dir = tempfile::tempdir().unwrap();
    let spec = dir.path().join("typo.json");
    std::fs::write(&spec, "{\"format_version\": 1, \"casse\": []}").unwrap();
    let e = twinaudit::spec::load_spec(&spec).unwrap_err().to_string();
    assert!(
        e.contains("typo.json:1:") && e.contains("unknown field `casse`"),
        "{e}"
    );
}

#[test]
fn unknown_region_id_names_case_and_region() {
    let dir = tempfile::tempdir().unwrap();
    let spec = write_spec(
        dir.path(),
        "s.json",
        json!({"format_version": 1, "cases": [tile_case("c1", &image_c(),
        json!([{"id": "red1", "label": "red tile", "role": "target", "box": [10, 10, 6, 6]}]),
        json!([{"id": "e1", "operation": "erase", "regions": {"ids": ["red9"]}}]))]}),
    );
    let e = twinaudit::spec::load_spec(&spec).unwrap_err().to_string();
    assert!(
        e.contains("case \"c1\", region \"red9\"") && e.contains("does not define"),
        "{e}"
    );
}

#[test]
fn unknown_role_names_case_and_region() {
    let dir = tempfile::tempdir().unwrap();
    let spec = write_spec(
        dir.path(),
        "s.json",
        json!({"format_version": 1, "cases": [tile_case("c1", &image_c(),
        json!([{"id": "red1", "label": "red tile", "role": "targte", "box": [10, 10, 6, 6]}]),
        json!([{"id": "e1", "operation": "erase", "regions": {"ids": ["red1"]}}]))]}),
    );
    let e = twinaudit::spec::load_spec(&spec).unwrap_err().to_string();
    assert!(
        e.contains("case \"c1\", region \"red1\": unknown role \"targte\""),
        "{e}"
    );

    let spec = write_spec(
        dir.path(),
        "s2.json",
        json!({"format_version": 1, "cases": [tile_case("c1", &image_c(),
        json!([{"id": "red1", "label": "red tile", "role": "target", "box": [10, 10, 6, 6]}]),
        json!([{"id": "e1", "operation": "erase", "regions": {"role": "background"}}]))]}),
    );
    let e = twinaudit::spec::load_spec(&spec).unwrap_err().to_string();
    assert!(
        e.contains("case \"c1\", edit \"e1\": unknown role \"background\""),
        "{e}"
    );
}

#[test]
fn missing_and_undecodable_images_become_error_rows_and_the_run_goes_on() {
    let dir = tempfile::tempdir().unwrap();
    let garbage = dir.path().join("garbage.png");
    std::fs::write(&garbage, b"\x89PNG\r\n\x1a\nthis is not a png").unwrap();
    let regions =
        json!([{"id": "red1", "label": "red tile", "role": "target", "box": [14, 14, 6, 6]}]);
    let edits = json!([{"id": "e1", "operation": "erase", "regions": {"ids": ["red1"]}, "params": {"radius_px": 3, "dilate_px": 1}},
                       {"id": "e2", "operation": "cover", "regions": {"ids": ["red1"]}, "expect": "change"}]);
    let spec = write_spec(
        dir.path(),
        "s.json",
        json!({"format_version": 1, "cases": [
            tile_case("missing", &dir.path().join("nowhere.png"), regions.clone(), edits.clone()),
            tile_case("garbage", &garbage, regions.clone(), edits.clone()),
            tile_case("fine", &known("images/tiles_a.png"),
                json!([{"id": "o", "label": "orange tile", "role": "distractor", "box": [40, 8, 6, 6]}]),
                json!([{"id": "e1", "operation": "erase", "regions": {"ids": ["o"]}}])),
        ]}),
    );
    let out = dir.path().join("run");
    let (code, stdout, err) = stderr_of(&[
        "run",
        "--spec",
        spec.to_str().unwrap(),
        "--model",
        known("count_red.manifest.json").to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
    ]);
    assert_eq!(code, 2, "exit code 2 when pairs errored: {err}");
    assert!(err.contains("4 of 5 pairs could not be judged"), "{err}");
    assert!(stdout.contains("5 pairs: 1 judged, 4 errors"), "{stdout}");
    let rows = read_results(&out.join("results.jsonl")).unwrap();
    assert_eq!(rows.len(), 5);
    let by_id = |id: &str| rows.iter().find(|r| r.pair_id == id).unwrap();
    let missing = by_id("missing/e1").error.clone().unwrap();
    assert!(
        missing.contains("case \"missing\"") && missing.contains("nowhere.png"),
        "{missing}"
    );
    let garbage = by_id("garbage/e2").error.clone().unwrap();
    assert!(
        garbage.contains("case \"garbage\"") && garbage.contains("cannot decode image"),
        "{garbage}"
    );
    assert_eq!(by_id("fine/e1").status, Status::Ok);
}

#[test]
fn regions_partly_outside_are_clipped_with_a_warning_wholly_outside_is_an_error() {
    let dir = tempfile::tempdir().unwrap();
    let spec = write_spec(
        dir.path(),
        "s.json",
        json!({"format_version": 1, "cases": [tile_case("c1", &known("images/tiles_c.png"),
        json!([{"id": "edge", "label": "blue tile", "role": "distractor", "box": [-4, -4, 8, 8]},
               {"id": "away", "label": "blue tile", "role": "distractor", "box": [100, 100, 6, 6]}]),
        json!([{"id": "e-edge", "operation": "cover", "regions": {"ids": ["edge"]}},
               {"id": "e-away", "operation": "cover", "regions": {"ids": ["away"]}}]))]}),
    );
    let out = dir.path().join("run");
    let outcome = run_audit(&config(&spec, &known("count_red.manifest.json"), &out)).unwrap();
    assert_eq!(outcome.summary.n_errors, 1);
    let rows = read_results(&out.join("results.jsonl")).unwrap();
    let edge = rows.iter().find(|r| r.edit == "e-edge").unwrap();
    assert_eq!(edge.status, Status::Ok);
    assert!(
        edge.warnings
            .iter()
            .any(|w| w.contains("region \"edge\" reaches outside the 64x64 image")),
        "{:?}",
        edge.warnings
    );
    let away = rows.iter().find(|r| r.edit == "e-away").unwrap();
    let e = away.error.as_deref().unwrap();
    assert!(
        e.contains("case \"c1\", edit \"e-away\"")
            && e.contains("region \"away\" lies wholly outside"),
        "{e}"
    );
}

#[test]
fn model_manifest_mismatch_fails_before_any_case_runs() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("run");
    let (code, _, err) = stderr_of(&[
        "run",
        "--spec",
        known("specs/counting.json").to_str().unwrap(),
        "--model",
        known("bad_shape.manifest.json").to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
    ]);
    assert_eq!(code, 2);
    assert!(err.contains("does not match manifest") && err.contains("tensor \"image\" has shape [1, 3, 64, 64] in the model but the manifest feeds [1, 3, 64, 32]"), "{err}");
    assert!(
        !out.exists(),
        "nothing written when the model does not match"
    );
}

#[test]
fn exif_rotated_jpeg_regions_refer_to_the_upright_image() {
    let dir = tempfile::tempdir().unwrap();
    let spec = write_spec(
        dir.path(),
        "s.json",
        json!({"format_version": 1, "cases": [
        {"id": "rotated", "image": common::data("exif/rotated_orientation6.jpg"), "question": "How many red tiles are there?",
         "question_kind": "count", "answer": "1",
         "regions": [{"id": "red", "label": "red tile", "role": "target", "box": [8, 44, 6, 6]}],
         "edits": [{"id": "erase-red", "operation": "erase", "regions": {"ids": ["red"]}, "params": {"radius_px": 3, "dilate_px": 1}}]}]}),
    );
    let out = dir.path().join("run");
    run_audit(&config(&spec, &known("count_red.manifest.json"), &out)).unwrap();
    let rows = read_results(&out.join("results.jsonl")).unwrap();
    // Upright frame per PIL.ImageOps.exif_transpose (Pillow 13.0.0; tests/data/exif/provenance.json).
    assert_eq!(rows[0].before.as_ref().unwrap().answer, "1");
    assert_eq!(
        rows[0].after.as_ref().unwrap().answer,
        "0",
        "the box must hit the tile in the upright frame"
    );
    assert_eq!(rows[0].verdict.unwrap().as_str(), "moved_to_expected");
}

#[test]
fn existing_output_folder_is_never_overwritten() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("run");
    std::fs::create_dir_all(&out).unwrap();
    std::fs::write(out.join("keep.txt"), "mine").unwrap();
    let (code, _, err) = stderr_of(&[
        "run",
        "--spec",
        known("specs/counting.json").to_str().unwrap(),
        "--model",
        known("count_red.manifest.json").to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
    ]);
    assert_eq!(code, 2);
    assert!(
        err.contains("already exists and is not empty; pass --resume"),
        "{err}"
    );
    assert_eq!(
        std::fs::read_to_string(out.join("keep.txt")).unwrap(),
        "mine"
    );
}

#[test]
fn underivable_expectation_is_an_error_before_the_run() {
    let dir = tempfile::tempdir().unwrap();
    let spec = write_spec(
        dir.path(),
        "s.json",
        json!({"format_version": 1, "cases": [
        {"id": "c1", "image": image_c(), "question": "What colour is the tile?", "question_kind": "colour",
         "regions": [{"id": "t", "label": "red tile", "role": "target", "box": [10, 10, 6, 6]}],
         "edits": [{"id": "e1", "operation": "erase", "regions": {"ids": ["t"]}}]}]}),
    );
    let out = dir.path().join("run");
    let e = run_audit(&config(&spec, &known("count_red.manifest.json"), &out))
        .unwrap_err()
        .to_string();
    assert!(e.contains("case \"c1\", edit \"e1\": cannot derive an expectation for removing targets on a colour question"), "{e}");
}

#[test]
fn unknown_operation_and_bad_params_name_the_edit() {
    let dir = tempfile::tempdir().unwrap();
    let regions =
        json!([{"id": "t", "label": "red tile", "role": "target", "box": [10, 10, 6, 6]}]);
    for (edit, needle) in [
        (
            json!({"id": "e1", "operation": "smudge", "regions": {"ids": ["t"]}}),
            "unknown operation \"smudge\"; available: erase, cover",
        ),
        (
            json!({"id": "e1", "operation": "erase", "regions": {"ids": ["t"]}, "params": {"radius": 3}}),
            "unknown field `radius`",
        ),
    ] {
        let spec = write_spec(
            dir.path(),
            "s.json",
            json!({"format_version": 1, "cases": [tile_case("c1", &image_c(), regions.clone(), json!([edit]))]}),
        );
        let out = dir.path().join("run-never");
        let e = run_audit(&config(&spec, &known("count_red.manifest.json"), &out))
            .unwrap_err()
            .to_string();
        assert!(
            e.contains("case \"c1\", edit \"e1\"") && e.contains(needle),
            "{e}"
        );
    }
}
