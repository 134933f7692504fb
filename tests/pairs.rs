//! `twinaudit pairs` end to end on real audits: the known-answer counting and colour models
//! (tests/data/known) on the committed specs plus a few added edits, and 24 synthesized scenes
//! (`twinaudit synth`) audited with the bundled stall-vqa model.
//!
//! Expected answers are worked out by hand from the specs' own ground truth (`answer`) and region
//! roles: erasing k of n counted targets gives n − k, c copies of each of k targets give n + c·k,
//! a recolour gives the named colour, an edit of distractors only keeps the truth
//! (docs/spec.md, "Expectations"). Layout checks follow the Hugging Face `datasets` ImageFolder
//! convention (one folder per split, metadata.jsonl with a `file_name` column); PNG files are
//! checked byte by byte against the PNG specification (W3C/ISO/IEC 15948, §5.2 signature and
//! §11.2.2 IHDR), independently of the `image` crate.

mod common;

use std::collections::{BTreeMap, BTreeSet};
use std::path::{Path, PathBuf};
use std::sync::OnceLock;

use common::{bin, config, known};
use serde_json::{json, Value};
use twinaudit::audit::replay::RunFolder;
use twinaudit::audit::results::{PairRecord, Status};
use twinaudit::audit::run_audit;
use twinaudit::pairs::select::SelectOptions;
use twinaudit::pairs::{build_pairs, PairsConfig, PairsError, PairsSummary};
use twinaudit::spec::Expectation;

const COLUMNS: [&str; 14] = [
    "file_name",
    "question",
    "question_kind",
    "answer",
    "relation",
    "pair_id",
    "source_case",
    "source_image",
    "source_sha256",
    "operation",
    "regions",
    "seed",
    "placebo",
    "model_passed",
];

fn options(seed: u64) -> SelectOptions {
    SelectOptions::with_seed(seed)
}

fn pairs_config(run: &Path, out: &Path, select: SelectOptions) -> PairsConfig {
    PairsConfig {
        run_dir: run.to_path_buf(),
        out_dir: out.to_path_buf(),
        select,
        jobs: 2,
        show_progress: false,
    }
}

/// A committed known-answer spec with image paths made absolute, so it can live elsewhere.
fn known_spec(name: &str) -> Value {
    let mut spec: Value =
        serde_json::from_str(&std::fs::read_to_string(known(&format!("specs/{name}"))).unwrap())
            .unwrap();
    for case in spec["cases"].as_array_mut().unwrap() {
        let rel = case["image"].as_str().unwrap().trim_start_matches("../");
        case["image"] = json!(known(rel).to_str().unwrap());
    }
    spec
}

fn case_mut<'a>(spec: &'a mut Value, id: &str) -> &'a mut Value {
    spec["cases"]
        .as_array_mut()
        .unwrap()
        .iter_mut()
        .find(|c| c["id"] == id)
        .unwrap()
}

/// counting.json with duplicates added to a-count, c-count's ground truth removed, and a case
/// whose image is not an image (its pairs become error rows).
fn counting_spec(dir: &Path) -> PathBuf {
    let mut spec = known_spec("counting.json");
    let edits = case_mut(&mut spec, "a-count")["edits"]
        .as_array_mut()
        .unwrap();
    edits.push(
        json!({"id": "dup-red1", "operation": "duplicate", "regions": {"ids": ["red1"]},
                      "params": {"blend": "paste"}}),
    );
    edits.push(
        json!({"id": "dup-red2-twice", "operation": "duplicate", "regions": {"ids": ["red2"]},
                      "params": {"copies": 2, "blend": "paste"}}),
    );
    case_mut(&mut spec, "c-count")
        .as_object_mut()
        .unwrap()
        .remove("answer");
    let mut broken = case_mut(&mut spec, "e-count").clone();
    broken["id"] = json!("z-broken");
    let garbage = dir.join("not-an-image.png");
    std::fs::write(&garbage, b"this is not a PNG").unwrap();
    broken["image"] = json!(garbage.to_str().unwrap());
    spec["cases"].as_array_mut().unwrap().push(broken);
    let path = dir.join("counting.json");
    std::fs::write(&path, serde_json::to_string_pretty(&spec).unwrap()).unwrap();
    path
}

/// Audits the counting spec with the confounded model (it answers 5, 3, 1, 5, 2 on tiles a–e:
/// tests/data/known/EXPECTED.md), saving edits and adding placebos.
fn counting_run(dir: &Path) -> PathBuf {
    let spec = counting_spec(dir);
    let out = dir.join("run");
    let mut cfg = config(&spec, &known("count_red_confounded.manifest.json"), &out);
    cfg.save_edits = true;
    cfg.placebo = true;
    run_audit(&cfg).unwrap();
    out
}

/// Audits a colour spec with the known-answer colour_centre model.
fn colour_run(dir: &Path, spec: &Value) -> PathBuf {
    let spec_path = dir.join("colour.json");
    std::fs::write(&spec_path, spec.to_string()).unwrap();
    let run = dir.join("run");
    run_audit(&config(
        &spec_path,
        &known("colour_centre.manifest.json"),
        &run,
    ))
    .unwrap();
    run
}

/// 24 synthesized scenes audited once per test process with stall-vqa, without saved edits (so
/// every image is re-rendered) and with placebos.
fn synth_run() -> &'static Path {
    static RUN: OnceLock<PathBuf> = OnceLock::new();
    RUN.get_or_init(|| {
        let root = Path::new(env!("CARGO_TARGET_TMPDIR")).join("pairs-synth");
        let _ = std::fs::remove_dir_all(&root);
        let scenes = root.join("scenes");
        let synth = twinaudit::synth::SynthConfig {
            jobs: 2,
            ..twinaudit::synth::SynthConfig::new(scenes.clone(), 24, 3)
        };
        twinaudit::synth::synthesize(&synth).unwrap();
        let out = root.join("run");
        let manifest =
            Path::new(env!("CARGO_MANIFEST_DIR")).join("models-cpu/stall-vqa.manifest.json");
        let mut cfg = config(&scenes.join("spec.json"), &manifest, &out);
        cfg.placebo = true;
        run_audit(&cfg).unwrap();
        out
    })
}

/// The counting run turned into pairs with originals, seed 0.
fn counting_pairs_with_originals(dir: &Path) -> (PathBuf, PathBuf, PairsSummary) {
    let run = counting_run(dir);
    let out = dir.join("pairs");
    let select = SelectOptions {
        include_originals: true,
        ..options(0)
    };
    let s = build_pairs(&pairs_config(&run, &out, select)).unwrap();
    (run, out, s)
}

fn read_lines(path: &Path) -> Vec<serde_json::Map<String, Value>> {
    std::fs::read_to_string(path)
        .unwrap_or_else(|e| panic!("{}: {e}", path.display()))
        .lines()
        .map(|l| serde_json::from_str(l).unwrap())
        .collect()
}

/// Rows of both splits, by split name.
fn rows_by_split(out: &Path) -> BTreeMap<String, Vec<serde_json::Map<String, Value>>> {
    ["train", "validation"]
        .into_iter()
        .filter(|s| out.join(s).is_dir())
        .map(|s| {
            (
                s.to_string(),
                read_lines(&out.join(s).join("metadata.jsonl")),
            )
        })
        .collect()
}

fn all_rows(out: &Path) -> Vec<serde_json::Map<String, Value>> {
    rows_by_split(out).into_values().flatten().collect()
}

fn summary(out: &Path) -> PairsSummary {
    serde_json::from_str(&std::fs::read_to_string(out.join("pairs.json")).unwrap()).unwrap()
}

/// Width and height from a PNG's bytes (PNG spec §5.2: 8-byte signature; §11.2.2: IHDR first,
/// width and height as big-endian u32 at bytes 16..24 of the file).
fn png_size(bytes: &[u8]) -> Option<(u32, u32)> {
    const SIGNATURE: [u8; 8] = [137, 80, 78, 71, 13, 10, 26, 10];
    if bytes.len() < 24 || bytes[..8] != SIGNATURE || &bytes[12..16] != b"IHDR" {
        return None;
    }
    let be = |i: usize| u32::from_be_bytes(bytes[i..i + 4].try_into().unwrap());
    Some((be(16), be(20)))
}

fn str_of<'a>(row: &'a serde_json::Map<String, Value>, key: &str) -> &'a str {
    row[key]
        .as_str()
        .unwrap_or_else(|| panic!("{key} in {row:?}"))
}

fn records(run: &Path) -> Vec<PairRecord> {
    RunFolder::open(run).unwrap().records
}

#[test]
fn layout_columns_and_images() {
    let dir = tempfile::tempdir().unwrap();
    let (run, out, s) = counting_pairs_with_originals(dir.path());
    let by_pair: BTreeMap<String, PairRecord> = records(&run)
        .into_iter()
        .map(|r| (r.pair_id.clone(), r))
        .collect();
    let by_split = rows_by_split(&out);
    assert_eq!(
        by_split.keys().collect::<Vec<_>>(),
        ["train", "validation"],
        "both split folders"
    );
    let mut listed = 0;
    for (split, rows) in &by_split {
        let text = std::fs::read_to_string(out.join(split).join("metadata.jsonl")).unwrap();
        for line in text.lines() {
            assert!(
                line.starts_with(r#"{"file_name":"#),
                "file_name first: {line}"
            );
        }
        let mut names = BTreeSet::new();
        for row in rows {
            let keys: Vec<&str> = row.keys().map(String::as_str).collect();
            let mut want = COLUMNS.to_vec();
            want.sort_unstable();
            assert_eq!(keys, want, "columns of {row:?}");
            let name = str_of(row, "file_name");
            assert!(names.insert(name.to_string()), "{name} listed twice");
            let path = out.join(split).join(name);
            let bytes = std::fs::read(&path).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
            let source = image::open(str_of(row, "source_image")).unwrap().to_rgb8();
            assert_eq!(
                png_size(&bytes),
                Some(source.dimensions()),
                "{name}: a PNG of the source image's size"
            );
            let written = image::load_from_memory(&bytes).unwrap().to_rgb8();
            match str_of(row, "relation") {
                "original" => {
                    assert!(written == source, "{name}: the unedited image");
                    assert!(row["pair_id"].is_null() && row["seed"].is_null(), "{row:?}");
                }
                _ => {
                    let record = &by_pair[str_of(row, "pair_id")];
                    let saved = image::open(run.join(record.edited_image.as_ref().unwrap()))
                        .unwrap()
                        .to_rgb8();
                    assert!(written == saved, "{name}: the run's saved edit");
                    assert_eq!(str_of(row, "seed"), record.seed.to_string());
                    assert_eq!(str_of(row, "operation"), record.operation);
                    assert_eq!(
                        row["regions"],
                        serde_json::to_value(&record.regions).unwrap()
                    );
                }
            }
        }
        // Nothing in the folder that metadata.jsonl does not list.
        let on_disk: BTreeSet<String> = std::fs::read_dir(out.join(split))
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .filter(|n| n != "metadata.jsonl")
            .collect();
        assert_eq!(on_disk, names, "{split}: files on disk = files listed");
        listed += names.len();
    }
    assert_eq!(listed, s.n_rows);
    assert_eq!(s.n_from_saved_edits + s.n_originals, s.n_rows);
    assert_eq!(s.n_re_rendered, 0);
    assert!(s.failures.is_empty(), "{:?}", s.failures);
}

#[test]
fn answers_are_the_counterfactual_answers_never_the_models() {
    let dir = tempfile::tempdir().unwrap();
    let (run, out, s) = counting_pairs_with_originals(dir.path());
    // By hand from counting.json's truths (a 3, b 2, c none here, d 4, e 0) and target counts.
    let expected: BTreeMap<&str, &str> = [
        ("a-count/erase-red1", "2"),
        ("a-count/erase-red2", "2"),
        ("a-count/erase-red3", "2"),
        ("a-count/erase-or1", "3"),
        ("a-count/erase-or2", "3"),
        ("a-count/cover-distractors", "3"),
        ("a-count/erase-red1-red3", "1"),
        ("a-count/dup-red1", "4"),       // 3 + 1·1
        ("a-count/dup-red2-twice", "5"), // 3 + 2·1
        ("b-count/erase-red1", "1"),
        ("b-count/erase-red2", "1"),
        ("b-count/erase-or1", "2"),
        ("b-count/cover-distractors", "2"),
        ("b-count/erase-red1-red2", "0"),
        ("c-count/erase-red1", "0"), // 1 target − 1: known without the case's truth
        ("d-count/erase-red1", "3"),
        ("d-count/erase-red2", "3"),
        ("d-count/erase-red3", "3"),
        ("d-count/erase-red4", "3"),
        ("d-count/erase-or1", "4"),
        ("d-count/cover-distractors", "4"),
        ("d-count/erase-red1-red4", "2"),
        ("d-count/erase-all-red", "0"),
        ("e-count/erase-or1", "0"),
        ("e-count/erase-or2", "0"),
        ("e-count/cover-distractors", "0"),
    ]
    .into_iter()
    .collect();
    let rows = all_rows(&out);
    let got: BTreeMap<&str, &str> = rows
        .iter()
        .filter(|r| r["relation"] != "original")
        .map(|r| (str_of(r, "pair_id"), str_of(r, "answer")))
        .collect();
    assert_eq!(got, expected);
    let originals: BTreeMap<&str, &str> = rows
        .iter()
        .filter(|r| r["relation"] == "original")
        .map(|r| (str_of(r, "source_case"), str_of(r, "answer")))
        .collect();
    let want: BTreeMap<&str, &str> = [
        ("a-count", "3"),
        ("b-count", "2"),
        ("d-count", "4"),
        ("e-count", "0"),
    ]
    .into_iter()
    .collect();
    assert_eq!(
        originals, want,
        "originals carry the truth; c-count has none"
    );

    // The confounded model answered 5 on tiles_a (EXPECTED.md): same rows carry the truth 3.
    let recs = records(&run);
    let before_a = recs.iter().find(|r| r.case == "a-count").unwrap();
    assert_eq!(before_a.before.as_ref().unwrap().answer, "5");
    for r in &rows {
        if r["relation"] == "same" {
            assert_eq!(
                r["model_passed"],
                json!(false),
                "{r:?}: it flipped (EXPECTED.md)"
            );
        }
    }
    assert_eq!(
        s.n_same_on_misanswered,
        rows.iter().filter(|r| r["relation"] == "same").count(),
        "the confounded model misanswers every counting image but c"
    );

    // What was not written, and why, counted from the run's own rows.
    let count = |f: &dyn Fn(&PairRecord) -> bool| recs.iter().filter(|r| f(r)).count();
    let real = |r: &PairRecord| r.placebo_of.is_none();
    let n_placebo = count(&|r| r.placebo_of.is_some());
    let n_errors = count(&|r| real(r) && r.status == Status::Error);
    let n_change =
        count(&|r| real(r) && r.status == Status::Ok && r.expectation == Expectation::Change);
    assert_eq!(n_errors, 3, "z-broken's three edits");
    assert_eq!(n_change, 1, "b-count/cover-red1");
    let want_skipped: BTreeMap<String, usize> = [
        ("error_row", n_errors),
        ("change_without_answer", n_change),
        ("same_without_truth", 1),     // c-count/cover-distractors
        ("original_without_truth", 1), // c-count
    ]
    .into_iter()
    .map(|(k, v)| (k.to_string(), v))
    .collect();
    assert_eq!(s.skipped, want_skipped);
    assert_eq!(
        s.left_out,
        [("placebo_control".to_string(), n_placebo)].into()
    );
}

#[test]
fn recolour_and_colour_truths() {
    let dir = tempfile::tempdir().unwrap();
    let mut spec = known_spec("colour.json");
    case_mut(&mut spec, "green-colour")["edits"]
        .as_array_mut()
        .unwrap()
        .push(json!({"id": "recolour-centre", "operation": "recolour",
                     "regions": {"ids": ["centre"]}, "params": {"colour": "blue"}}));
    let run = colour_run(dir.path(), &spec);
    let out = dir.path().join("pairs");
    let s = build_pairs(&pairs_config(&run, &out, options(0))).unwrap();
    let got: BTreeMap<String, String> = all_rows(&out)
        .iter()
        .map(|r| (str_of(r, "pair_id").into(), str_of(r, "answer").into()))
        .collect();
    let want: BTreeMap<String, String> = [
        ("green-colour/erase-or1", "green"),
        ("green-colour/erase-red1", "green"),
        ("green-colour/cover-distractors", "green"),
        ("green-colour/cover-centre", "grey"),    // stated
        ("green-colour/erase-centre", "grey"),    // stated
        ("green-colour/recolour-centre", "blue"), // the recolour's target colour
        ("yellow-colour/erase-red1", "yellow"),
        ("yellow-colour/erase-blue1", "yellow"),
        ("yellow-colour/cover-centre", "grey"),
    ]
    .into_iter()
    .map(|(k, v)| (k.into(), v.into()))
    .collect();
    assert_eq!(got, want);
    assert_eq!(
        s.skipped["change_without_answer"], 1,
        "yellow-colour/erase-centre"
    );
    // Two source images, fraction 0.2: each split still gets one (tiny-run rule, docs/pairs.md).
    assert_eq!(s.splits["train"].n_source_images, 1);
    assert_eq!(s.splits["validation"].n_source_images, 1);
}

#[test]
fn no_source_image_is_in_two_splits() {
    let run = synth_run();
    let dir = tempfile::tempdir().unwrap();
    for (seed, fraction) in [(0, 0.2), (1, 0.5), (2, 0.1)] {
        let out = dir.path().join(format!("pairs-{seed}"));
        let s = build_pairs(&pairs_config(
            run,
            &out,
            SelectOptions {
                validation_fraction: fraction,
                include_originals: true,
                include_placebo: true,
                ..options(seed)
            },
        ))
        .unwrap();
        let by_split = rows_by_split(&out);
        let sources = |split: &str| -> BTreeSet<String> {
            by_split[split]
                .iter()
                .map(|r| str_of(r, "source_sha256").to_string())
                .collect()
        };
        let (train, validation) = (sources("train"), sources("validation"));
        assert!(
            train.is_disjoint(&validation),
            "seed {seed}: shared sources {:?}",
            train.intersection(&validation).collect::<Vec<_>>()
        );
        // Cases of one scene share an image: none of them may straddle the split either.
        let images = |split: &str| -> BTreeSet<String> {
            by_split[split]
                .iter()
                .map(|r| str_of(r, "source_image").to_string())
                .collect()
        };
        assert!(images("train").is_disjoint(&images("validation")));
        assert_eq!(train.len() + validation.len(), 24, "every scene has rows");
        assert_eq!(s.splits["validation"].n_source_images, validation.len());
    }
}

fn metadata_bytes(out: &Path) -> Vec<(String, Vec<u8>)> {
    [
        "train/metadata.jsonl",
        "validation/metadata.jsonl",
        "pairs.json",
    ]
    .into_iter()
    .map(|f| (f.to_string(), std::fs::read(out.join(f)).unwrap()))
    .collect()
}

fn image_bytes(out: &Path) -> BTreeMap<String, Vec<u8>> {
    let mut files = BTreeMap::new();
    for split in ["train", "validation"] {
        for e in std::fs::read_dir(out.join(split)).unwrap() {
            let p = e.unwrap().path();
            if p.extension().is_some_and(|x| x == "png") {
                files.insert(
                    format!("{split}/{}", p.file_name().unwrap().to_string_lossy()),
                    std::fs::read(&p).unwrap(),
                );
            }
        }
    }
    files
}

#[test]
fn same_seed_same_bytes_and_another_seed_another_split() {
    let run = synth_run();
    let dir = tempfile::tempdir().unwrap();
    let build = |name: &str, seed: u64, jobs: usize| {
        let out = dir.path().join(name);
        let mut cfg = pairs_config(
            run,
            &out,
            SelectOptions {
                include_originals: true,
                balance: true,
                max_per_image: Some(6),
                ..options(seed)
            },
        );
        cfg.jobs = jobs;
        build_pairs(&cfg).unwrap();
        out
    };
    let a = build("a", 5, 2);
    let b = build("b", 5, 1);
    assert_eq!(
        metadata_bytes(&a),
        metadata_bytes(&b),
        "same seed, same metadata bytes"
    );
    assert!(
        image_bytes(&a) == image_bytes(&b),
        "same seed, same image bytes"
    );
    let split_of = |out: &Path| -> BTreeMap<String, String> {
        rows_by_split(out)
            .into_iter()
            .flat_map(|(split, rows)| {
                rows.into_iter()
                    .map(move |r| (str_of(&r, "source_sha256").to_string(), split.clone()))
            })
            .collect()
    };
    let c = build("c", 6, 2);
    assert_ne!(
        split_of(&a),
        split_of(&c),
        "another seed puts some source image in another split"
    );
}

#[test]
fn re_rendered_images_equal_the_saved_edits() {
    let dir = tempfile::tempdir().unwrap();
    let run = counting_run(dir.path());
    let opts = SelectOptions {
        include_originals: true,
        include_placebo: true,
        ..options(3)
    };
    let saved = dir.path().join("from-saved");
    let s_saved = build_pairs(&pairs_config(&run, &saved, opts.clone())).unwrap();
    std::fs::rename(run.join("edits"), dir.path().join("moved-edits")).unwrap();
    let rendered = dir.path().join("re-rendered");
    let s_rendered = build_pairs(&pairs_config(&run, &rendered, opts)).unwrap();
    assert_eq!(s_saved.n_re_rendered, 0);
    assert_eq!(s_rendered.n_from_saved_edits, 0);
    assert_eq!(s_rendered.n_re_rendered, s_saved.n_from_saved_edits);
    for split in ["train", "validation"] {
        let f = format!("{split}/metadata.jsonl");
        assert_eq!(
            std::fs::read(saved.join(&f)).unwrap(),
            std::fs::read(rendered.join(&f)).unwrap(),
            "{f}"
        );
    }
    assert!(image_bytes(&saved) == image_bytes(&rendered));
    let placebos = all_rows(&rendered)
        .into_iter()
        .filter(|r| r["placebo"] == json!(true))
        .collect::<Vec<_>>();
    assert!(!placebos.is_empty());
    for r in &placebos {
        assert_eq!(r["relation"], "same", "{r:?}");
        assert!(str_of(r, "file_name").ends_with("~placebo.png"), "{r:?}");
    }
}

#[test]
fn options_select_what_they_claim() {
    let dir = tempfile::tempdir().unwrap();
    let run = counting_run(dir.path());
    let recs = records(&run);
    let build = |name: &str, select: SelectOptions| {
        let out = dir.path().join(name);
        let s = build_pairs(&pairs_config(&run, &out, select)).unwrap();
        (s, rows_by_split(&out))
    };

    // Default: no placebo controls.
    let (_, default) = build("default", options(0));
    let n_default: usize = default.values().map(Vec::len).sum();
    assert!(default
        .values()
        .flatten()
        .all(|r| r["placebo"] == json!(false)));

    // --only-failed: exactly the labelled pairs the model failed.
    let (s, failed) = build(
        "failed",
        SelectOptions {
            only_failed: true,
            ..options(0)
        },
    );
    let failed_rows: Vec<_> = failed.values().flatten().collect();
    assert!(failed_rows
        .iter()
        .all(|r| r["model_passed"] == json!(false)));
    let n_passed_labelled = default
        .values()
        .flatten()
        .filter(|r| r["model_passed"] == json!(true))
        .count();
    assert!(
        n_passed_labelled > 0,
        "the confounded model passes some pairs"
    );
    assert_eq!(failed_rows.len(), n_default - n_passed_labelled);
    assert_eq!(s.left_out["model_passed"], n_passed_labelled);

    // --only-wrong: exactly the labelled pairs whose edited-image answer differs from the label.
    let (s, wrong) = build(
        "wrong",
        SelectOptions {
            only_wrong: true,
            ..options(0)
        },
    );
    let after: BTreeMap<&str, &str> = recs
        .iter()
        .filter_map(|r| Some((r.pair_id.as_str(), r.after.as_ref()?.answer.as_str())))
        .collect();
    let is_wrong =
        |r: &&serde_json::Map<String, Value>| after[str_of(r, "pair_id")] != str_of(r, "answer");
    let wrong_rows: Vec<_> = wrong.values().flatten().collect();
    assert!(wrong_rows.iter().all(is_wrong));
    let n_right = default.values().flatten().filter(|r| !is_wrong(r)).count();
    assert!(
        n_right > 0,
        "c-count/erase-red1: the model says 0, the label is 0"
    );
    assert_eq!(wrong_rows.len(), n_default - n_right);
    assert_eq!(s.left_out["model_right"], n_right);

    // --max-per-image 2: at most two pairs of each source image.
    let (s, capped) = build(
        "capped",
        SelectOptions {
            max_per_image: Some(2),
            ..options(0)
        },
    );
    let mut per_source: BTreeMap<&str, usize> = BTreeMap::new();
    for r in capped.values().flatten() {
        *per_source.entry(str_of(r, "source_sha256")).or_default() += 1;
    }
    assert!(per_source.values().all(|&n| n <= 2), "{per_source:?}");
    let n_capped: usize = capped.values().map(Vec::len).sum();
    assert_eq!(n_capped + s.left_out["over_cap"], n_default);

    // --balance: as many change as same rows in each split.
    let run_synth = synth_run();
    let out = dir.path().join("balanced");
    let s = build_pairs(&pairs_config(
        run_synth,
        &out,
        SelectOptions {
            balance: true,
            ..options(0)
        },
    ))
    .unwrap();
    for (split, rows) in rows_by_split(&out) {
        let n = |rel: &str| rows.iter().filter(|r| r["relation"] == rel).count();
        assert!(n("change") > 0, "{split}");
        assert_eq!(n("change"), n("same"), "{split}");
    }
    assert!(s.left_out["balance"] > 0);

    // --placebo keeps the controls, as same pairs labelled with the truth.
    let (_, with_placebo) = build(
        "placebo",
        SelectOptions {
            include_placebo: true,
            ..options(0)
        },
    );
    let truths: BTreeMap<&str, Option<&str>> = recs
        .iter()
        .map(|r| (r.case.as_str(), r.truth.as_deref()))
        .collect();
    let placebo_rows: Vec<_> = with_placebo
        .values()
        .flatten()
        .filter(|r| r["placebo"] == json!(true))
        .collect();
    assert!(!placebo_rows.is_empty());
    for r in placebo_rows {
        assert_eq!(r["relation"], "same");
        assert_eq!(Some(str_of(r, "answer")), truths[str_of(r, "source_case")]);
    }
}

/// `twinaudit pairs RUN --out OUT`, options to follow.
fn pairs_cmd(run: &Path, out: &Path) -> assert_cmd::Command {
    let mut cmd = bin();
    cmd.arg("pairs").arg(run).arg("--out").arg(out);
    cmd
}

#[test]
fn refusals_name_the_folder_and_what_to_do() {
    let dir = tempfile::tempdir().unwrap();
    let run = counting_run(dir.path());
    let out = dir.path().join("busy");
    std::fs::create_dir_all(&out).unwrap();
    std::fs::write(out.join("keep.txt"), "mine").unwrap();
    let assert = pairs_cmd(&run, &out).assert().code(2);
    let stderr = String::from_utf8_lossy(&assert.get_output().stderr).into_owned();
    assert!(stderr.contains(out.to_str().unwrap()), "{stderr}");
    assert!(stderr.contains("choose another --out"), "{stderr}");
    assert_eq!(
        std::fs::read_to_string(out.join("keep.txt")).unwrap(),
        "mine"
    );

    let assert = pairs_cmd(&run, &dir.path().join("x"))
        .args(["--validation-fraction", "1"])
        .assert()
        .code(2);
    let stderr = String::from_utf8_lossy(&assert.get_output().stderr).into_owned();
    assert!(
        stderr.contains("--validation-fraction must lie in [0, 1)"),
        "{stderr}"
    );

    let not_a_run = dir.path().join("empty");
    std::fs::create_dir_all(&not_a_run).unwrap();
    let err = build_pairs(&pairs_config(&not_a_run, &dir.path().join("y"), options(0)))
        .err()
        .unwrap();
    assert!(
        err.to_string().contains("not a twinaudit run folder"),
        "{err}"
    );
}

#[test]
fn one_source_image_needs_train_only() {
    let dir = tempfile::tempdir().unwrap();
    let mut spec = known_spec("colour.json");
    spec["cases"].as_array_mut().unwrap().truncate(1);
    let run = colour_run(dir.path(), &spec);
    let err = build_pairs(&pairs_config(&run, &dir.path().join("a"), options(0)))
        .err()
        .unwrap();
    assert!(matches!(err, PairsError::EmptySplit { .. }), "{err}");
    assert!(err.to_string().contains("--validation-fraction 0"), "{err}");
    assert!(!dir.path().join("a").exists(), "nothing written on refusal");

    let out = dir.path().join("b");
    let assert = pairs_cmd(&run, &out)
        .args(["--validation-fraction", "0", "--originals"])
        .assert()
        .success();
    let stdout = String::from_utf8_lossy(&assert.get_output().stdout).into_owned();
    assert!(
        stdout.contains("MB of PNG") && stdout.contains(" s\n"),
        "{stdout}"
    );
    assert!(out.join("train/metadata.jsonl").is_file());
    assert!(!out.join("validation").exists());
    let s = summary(&out);
    assert_eq!(s.splits["train"].by_relation["original"], 1);
}
