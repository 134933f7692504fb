//! `--placebo` end to end with the known-answer ONNX models (tests/data/known).
//!
//! Sources of the expectations:
//! - real pairs: tests/data/known/expected_verdicts.json (hand formula in numpy, cross-checked
//!   with onnxruntime by tools/fixtures/known_models.py); a placebo run must reproduce them;
//! - placebos: the scenes' background holds no red, orange or colour-tile pixel and no average
//!   of background pixels is red or orange or leaves grey (tests/data/known/README.md,
//!   "Backgrounds"), and the models only read red/orange pixels (count) or the centre block
//!   (colour), which a placebo kept clear of every region cannot reach: so every placebo holds;
//! - placebos that cannot be placed: worked out by hand from the region boxes in the specs (see
//!   each test).

mod common;

use std::collections::BTreeMap;
use std::path::Path;

use common::{config, known};
use serde::Deserialize;
use twinaudit::audit::results::{read_results, PairRecord, Status};
use twinaudit::audit::run_info::read_run_info;
use twinaudit::audit::summary::{render_text, Summary};
use twinaudit::audit::{run_audit, AuditError, RunConfig, RunOutcome};
use twinaudit::spec::Expectation;
use twinaudit::stats::paired::{newcombe_paired_difference, PairedCounts};

#[derive(Deserialize)]
struct Expected {
    verdict: String,
    after: String,
}

fn expected(model: &str) -> BTreeMap<String, Expected> {
    let text = std::fs::read_to_string(known("expected_verdicts.json")).unwrap();
    let mut all: BTreeMap<String, BTreeMap<String, Expected>> =
        serde_json::from_str(&text).unwrap();
    all.remove(model).unwrap()
}

fn run(cfg: &RunConfig) -> (RunOutcome, Vec<PairRecord>) {
    let outcome = run_audit(cfg).unwrap_or_else(|e| panic!("audit failed: {e}"));
    let rows = read_results(&cfg.out_dir.join("results.jsonl")).unwrap();
    (outcome, rows)
}

fn placebo_config(spec: &str, manifest: &str, out: &Path) -> RunConfig {
    RunConfig {
        placebo: true,
        save_edits: true,
        ..config(&known(spec), &known(manifest), out)
    }
}

/// Checks a placebo run against the expected verdicts; returns the placebo pairs that errored.
fn check_placebo_run(model: &str, manifest: &str, spec: &str) -> Vec<String> {
    let want = expected(model);
    let dir = tempfile::tempdir().unwrap();
    let (_, rows) = run(&placebo_config(spec, manifest, &dir.path().join("run")));
    let (placebos, real): (Vec<&PairRecord>, Vec<&PairRecord>) =
        rows.iter().partition(|r| r.placebo_of.is_some());
    assert_eq!(real.len(), want.len(), "{model}: one row per real pair");
    assert_eq!(
        placebos.len(),
        want.len(),
        "{model}: one placebo per real pair"
    );
    for r in &real {
        let w = &want[&r.pair_id];
        assert_eq!(r.status, Status::Ok, "{}: {:?}", r.pair_id, r.error);
        assert_eq!(
            r.verdict.unwrap().as_str(),
            w.verdict,
            "{model} {}",
            r.pair_id
        );
        assert_eq!(
            r.after.as_ref().unwrap().answer,
            w.after,
            "{model} {}",
            r.pair_id
        );
    }
    let mut errors = Vec::new();
    for p in &placebos {
        let of = p.placebo_of.as_deref().unwrap();
        assert_eq!(p.pair_id, format!("{of}~placebo"));
        assert!(want.contains_key(of), "{}", p.pair_id);
        assert_eq!(p.expectation, Expectation::Same);
        assert!(!p.expectation_derived);
        assert_eq!(p.relation, "same");
        let real = real.iter().find(|r| r.pair_id == of).unwrap();
        assert_eq!((&p.operation, &p.role), (&real.operation, &real.role));
        match p.status {
            Status::Ok => {
                assert_eq!(p.verdict.unwrap().as_str(), "held", "{model} {}", p.pair_id);
                assert_eq!(p.method, real.method, "same method as the real edit");
                assert!(p.edited_image.as_deref().unwrap().ends_with("~placebo.png"));
            }
            Status::Error => {
                let message = p.error.as_deref().unwrap();
                assert!(
                    message.contains("no free background for the placebo"),
                    "{message}"
                );
                errors.push(p.pair_id.clone());
            }
        }
    }
    errors.sort();
    errors
}

#[test]
fn counting_placebos_hold_and_real_verdicts_are_unchanged() {
    // d-count's red tiles sit in the four corners ((8, 8) to (50, 50), 6×6) with an orange tile in
    // the middle: a shape spanning two opposite corners can move at most 8 px, never the 6 + 5 px
    // needed to clear its own tiles, so only those two placebos have no place.
    let errors = check_placebo_run(
        "count-red",
        "count_red.manifest.json",
        "specs/counting.json",
    );
    assert_eq!(
        errors,
        [
            "d-count/erase-all-red~placebo",
            "d-count/erase-red1-red4~placebo"
        ]
    );
    let errors = check_placebo_run(
        "count-red-confounded",
        "count_red_confounded.manifest.json",
        "specs/counting.json",
    );
    assert_eq!(
        errors,
        [
            "d-count/erase-all-red~placebo",
            "d-count/erase-red1-red4~placebo"
        ]
    );
}

#[test]
fn colour_placebos_hold_and_real_verdicts_are_unchanged() {
    // The 20×20 centre tile (22..41) grown by erase's 3 + 1 + 1 = 5 px margin leaves no 20-px
    // band on any side and even its rounded corners reach a shape in an image corner
    // (pixel (19, 19) is √18 ≈ 4.24 px from (22, 22)); cover's margin 2 + 1 + 1 = 4 is below
    // that, so a cover placebo fits in the free image corner.
    let errors = check_placebo_run(
        "colour-centre",
        "colour_centre.manifest.json",
        "specs/colour.json",
    );
    assert_eq!(
        errors,
        [
            "green-colour/erase-centre~placebo",
            "yellow-colour/erase-centre~placebo"
        ]
    );
}

/// The summary with every placebo field cleared, and the confident failures' results.jsonl line
/// numbers (placebo rows sit between the real ones) and saved-edit paths (the placebo run saves
/// edits) cleared.
fn without_placebo_fields(s: &Summary) -> Summary {
    let mut s = s.clone();
    s.placebo = None;
    s.placebo_corrected = None;
    for g in &mut s.groups {
        g.placebo_flip_rate = None;
    }
    for l in &mut s.distractor_labels {
        l.placebo_flip_rate = None;
    }
    for r in &mut s.slices {
        r.placebo_flip_rate = None;
    }
    let cf = &mut s.confident_failures;
    for e in cf.flipped.iter_mut().chain(cf.did_not_move.iter_mut()) {
        e.results_line = 0;
        e.edited_image = None;
    }
    s
}

#[test]
fn placebos_leave_the_real_summary_unchanged_and_add_their_flip_rates() {
    let dir = tempfile::tempdir().unwrap();
    let spec = "specs/counting.json";
    let manifest = "count_red_confounded.manifest.json";
    let (plain, _) = run(&config(
        &known(spec),
        &known(manifest),
        &dir.path().join("plain"),
    ));
    let with_dir = dir.path().join("with");
    let (with, rows) = run(&placebo_config(spec, manifest, &with_dir));

    assert_eq!(plain.summary.placebo, None);
    assert!(plain
        .summary
        .groups
        .iter()
        .all(|g| g.placebo_flip_rate.is_none()));
    assert_eq!(plain.summary.placebo_corrected, None);
    assert!(plain
        .summary
        .slices
        .iter()
        .all(|r| r.placebo_flip_rate.is_none()));
    assert_eq!(
        without_placebo_fields(&with.summary),
        without_placebo_fields(&plain.summary)
    );

    let totals = with.summary.placebo.as_ref().unwrap();
    assert_eq!(
        (totals.n_pairs, totals.n_judged, totals.n_errors),
        (26, 24, 2)
    );
    assert_eq!((totals.flip_rate.count, totals.flip_rate.n), (0, 24));
    // Each group's placebo rate counts the judged placebos of exactly that group's pairs.
    for g in &with.summary.groups {
        let rate = g.placebo_flip_rate.as_ref().unwrap();
        let n_judged = rows
            .iter()
            .filter(|p| p.placebo_of.is_some() && p.status == Status::Ok)
            .filter(|p| {
                let real = rows
                    .iter()
                    .find(|r| Some(&r.pair_id) == p.placebo_of.as_ref())
                    .unwrap();
                (
                    &real.operation,
                    &real.role,
                    real.question_kind,
                    &real.relation,
                ) == (&g.operation, &g.role, g.question_kind, &g.relation)
            })
            .count() as u64;
        assert_eq!(
            (rate.count, rate.n),
            (0, n_judged),
            "{} {}",
            g.operation,
            g.role
        );
    }

    // The confounded model flips on orange-distractor edits (EXPECTED.md); their placebos hold,
    // which is what tells a real shortcut from an edit artifact.
    let erase_distractor = with
        .summary
        .groups
        .iter()
        .find(|g| g.operation == "erase" && g.role == "distractor")
        .unwrap();
    assert!(erase_distractor.failure_rate.count > 0);
    assert_eq!(
        erase_distractor.placebo_flip_rate.as_ref().unwrap().count,
        0
    );

    // Placebo-corrected rates pair each real edit with its own placebo (both judged). The
    // interval itself is checked against Newcombe (1998) method 10's worked example in
    // stats::paired; here the counts and the wiring.
    let corrected = with.summary.placebo_corrected.as_ref().unwrap();
    let mut want = PairedCounts {
        a: 0,
        b: 0,
        c: 0,
        d: 0,
    };
    for p in rows
        .iter()
        .filter(|p| p.placebo_of.is_some() && p.status == Status::Ok)
    {
        let real = rows
            .iter()
            .find(|r| Some(&r.pair_id) == p.placebo_of.as_ref())
            .unwrap();
        if real.status == Status::Ok {
            want.add(real.passed == Some(false), p.passed == Some(false));
        }
    }
    assert_eq!(corrected.overall.counts, want);
    assert_eq!(want.a + want.c, 0, "every placebo holds");
    assert!(want.b > 0, "the confounded model fails some real edits");
    let d = corrected.overall.difference.unwrap();
    assert_eq!(Some(d), newcombe_paired_difference(want, 0.95));
    assert!((d.value - want.b as f64 / want.n() as f64).abs() < 1e-12);
    assert_eq!(
        corrected
            .groups
            .iter()
            .map(|g| g.corrected.n_pairs)
            .sum::<u64>(),
        want.n()
    );

    let json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(with_dir.join("summary.json")).unwrap())
            .unwrap();
    assert_eq!(json["format_version"], 2);
    assert_eq!(json["placebo"]["n_pairs"], 26);
    assert!(json["placebo_corrected"]["overall"]["difference"]["low"].is_f64());
    assert!(json["groups"][0]["placebo_flip_rate"]["n"].is_u64());

    let text = render_text(&with.summary);
    assert!(text.contains("placebo controls"), "{text}");
    assert!(text.contains("| placebo 0.0% [0.0,"), "{text}");
    assert!(!render_text(&plain.summary).contains("placebo"));
}

#[test]
fn placebo_pixels_stay_away_from_every_region() {
    // The smallest margin the counting spec gives is cover's (dilate 1 + ring 2 + 1 = 4 px):
    // moved mask pixels lie more than 4 px from every region, so pixels the placebo may change
    // (the moved mask grown by dilate_px = 1) lie more than 3 px away. Every pixel within a
    // 2-px box border of a region (at most √8 ≈ 2.83 px away) is therefore bit-identical.
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("run");
    let (_, rows) = run(&placebo_config(
        "specs/counting.json",
        "count_red.manifest.json",
        &out,
    ));
    let spec: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(known("specs/counting.json")).unwrap())
            .unwrap();
    let (mut n_checked, mut n_changed) = (0, 0);
    for p in rows
        .iter()
        .filter(|r| r.placebo_of.is_some() && r.status == Status::Ok)
    {
        let case = spec["cases"]
            .as_array()
            .unwrap()
            .iter()
            .find(|c| c["id"] == p.case.as_str())
            .unwrap();
        let original = image::open(
            known("images").join(
                Path::new(case["image"].as_str().unwrap())
                    .file_name()
                    .unwrap(),
            ),
        )
        .unwrap()
        .to_rgb8();
        let edited = image::open(out.join(p.edited_image.as_ref().unwrap()))
            .unwrap()
            .to_rgb8();
        // On a flat background a fill of background reproduces it exactly; on a textured one it
        // does not, which the count below requires to happen somewhere.
        n_changed += (original != edited) as usize;
        for region in case["regions"].as_array().unwrap() {
            let b: Vec<i64> = region["box"]
                .as_array()
                .unwrap()
                .iter()
                .map(|v| v.as_i64().unwrap())
                .collect();
            let grow = 2;
            for y in (b[1] - grow).max(0)..(b[1] + b[3] + grow).min(64) {
                for x in (b[0] - grow).max(0)..(b[0] + b[2] + grow).min(64) {
                    assert_eq!(
                        original.get_pixel(x as u32, y as u32),
                        edited.get_pixel(x as u32, y as u32),
                        "{} at ({x}, {y}) near {}",
                        p.pair_id,
                        region["id"]
                    );
                }
            }
        }
        n_checked += 1;
    }
    assert_eq!(n_checked, 24);
    assert!(n_changed > 0, "no placebo changed a pixel");
}

#[test]
fn run_json_records_placebo_and_resume_refuses_to_change_it() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("run");
    let cfg = placebo_config("specs/colour.json", "colour_centre.manifest.json", &out);
    let (first, _) = run(&cfg);
    assert!(read_run_info(&out.join("run.json")).unwrap().placebo);

    let resumed = run_audit(&RunConfig {
        resume: true,
        ..cfg.clone()
    })
    .unwrap();
    assert_eq!(resumed.n_new_pairs, 0);
    assert_eq!(resumed.summary, first.summary);

    let err = run_audit(&RunConfig {
        resume: true,
        placebo: false,
        ..cfg
    })
    .map(|_| ())
    .unwrap_err();
    assert!(matches!(err, AuditError::Resume { .. }), "{err}");
    assert!(
        err.to_string()
            .contains("the run was started with --placebo, this one is without it"),
        "{err}"
    );
}

#[test]
fn old_run_json_without_the_field_reads_as_no_placebo() {
    // A run.json written before the field existed: resume must treat it as a plain run.
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("run");
    let cfg = config(
        &known("specs/colour.json"),
        &known("colour_centre.manifest.json"),
        &out,
    );
    run(&cfg);
    let path = out.join("run.json");
    let mut json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&path).unwrap()).unwrap();
    json.as_object_mut().unwrap().remove("placebo").unwrap();
    std::fs::write(&path, serde_json::to_string_pretty(&json).unwrap()).unwrap();
    assert!(!read_run_info(&path).unwrap().placebo);
    let resumed = run_audit(&RunConfig {
        resume: true,
        ..cfg
    })
    .unwrap();
    assert_eq!(resumed.n_new_pairs, 0);
}

#[test]
fn cli_flag_adds_placebos_and_reports_those_it_could_not_place() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("run");
    let assert = common::bin()
        .args(["run", "--placebo", "--jobs", "1", "--spec"])
        .arg(known("specs/colour.json"))
        .arg("--model")
        .arg(known("colour_centre.manifest.json"))
        .arg("--out")
        .arg(&out)
        .assert()
        .code(2);
    let output = assert.get_output();
    let stdout = String::from_utf8_lossy(&output.stdout);
    let stderr = String::from_utf8_lossy(&output.stderr);
    assert!(
        stdout.contains(
            "placebo controls (same edit on free background, must hold): 9 pairs, 2 errors"
        ),
        "{stdout}"
    );
    assert!(
        stderr.contains("2 of 9 placebo controls could not be judged"),
        "{stderr}"
    );
    assert_eq!(read_results(&out.join("results.jsonl")).unwrap().len(), 18);
}
