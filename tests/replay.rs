//! Reading a run folder back: edits re-created from the specs equal the ones the run saved.

mod common;

use common::{config, known};
use twinaudit::audit::replay::{ReplayError, RunFolder};
use twinaudit::audit::run_audit;
use twinaudit::audit::RunConfig;

/// Every operation of the known-answer specs, with and without placebos: re-rendering with the
/// recorded seed gives exactly the bytes the run saved (determinism, docs/results.md `seed`).
#[test]
fn re_rendered_edits_equal_the_saved_ones() {
    for (spec, manifest) in [
        ("specs/counting.json", "count_red.manifest.json"),
        ("specs/colour.json", "colour_centre.manifest.json"),
    ] {
        let dir = tempfile::tempdir().unwrap();
        let out = dir.path().join("run");
        let cfg = RunConfig {
            save_edits: true,
            placebo: true,
            ..config(&known(spec), &known(manifest), &out)
        };
        run_audit(&cfg).unwrap();
        let saved = RunFolder::open(&out).unwrap();
        let records = saved.records.clone();
        assert!(records.len() >= 4, "{spec}: too few pairs to mean anything");
        // The same run without its saved files forces re-rendering.
        std::fs::rename(out.join("edits"), dir.path().join("moved-edits")).unwrap();
        let mut bare = RunFolder::open(&out).unwrap();
        for r in records.iter().filter(|r| r.edited_image.is_some()) {
            let rendered = bare.pair_images(r).unwrap();
            assert!(!rendered.from_saved_edit);
            let on_disk = image::open(
                dir.path().join("moved-edits").join(
                    r.edited_image
                        .as_ref()
                        .unwrap()
                        .strip_prefix("edits/")
                        .unwrap(),
                ),
            )
            .unwrap()
            .to_rgb8();
            assert!(
                rendered.edited == on_disk,
                "{spec} {}: re-rendered edit differs from the saved one",
                r.pair_id
            );
            assert!(rendered.shape.n_inside() > 0);
        }
    }
}

#[test]
fn a_changed_spec_is_refused_by_name() {
    let dir = tempfile::tempdir().unwrap();
    let spec = dir.path().join("colour.json");
    std::fs::copy(known("specs/colour.json"), &spec).unwrap();
    let out = dir.path().join("run");
    run_audit(&config(&spec, &known("colour_centre.manifest.json"), &out)).unwrap();
    let mut text = std::fs::read_to_string(&spec).unwrap();
    text.push('\n');
    std::fs::write(&spec, text).unwrap();
    let mut run = RunFolder::open(&out).unwrap();
    let record = run.records[0].clone();
    let err = match run.pair_images(&record) {
        Err(e) => e,
        Ok(_) => panic!("a changed spec must not be replayed"),
    };
    assert!(matches!(err, ReplayError::SpecChanged { .. }));
    assert!(err.to_string().contains("colour.json"), "{err}");
}

#[test]
fn a_folder_without_a_run_is_named() {
    let dir = tempfile::tempdir().unwrap();
    let err = match RunFolder::open(dir.path()) {
        Err(e) => e.to_string(),
        Ok(_) => panic!("an empty folder is not a run"),
    };
    assert!(err.contains("not a twinaudit run folder"), "{err}");
    assert!(err.contains("run.json"), "{err}");
}
