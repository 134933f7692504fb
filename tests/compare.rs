//! `twinaudit compare` on real runs of the known-answer ONNX models (tests/data/known):
//! count_red and count_red_confounded on specs/counting.json are two models on one spec.
//!
//! Sources of the expected numbers: the discordant counts are recomputed here straight from the
//! two results.jsonl files (as JSON values, not through the library's reader), and cross-checked
//! with tests/data/known/expected_verdicts.json (hand formula, tools/fixtures/known_models.py);
//! the exact McNemar p for b = 0, c = k is 2·2^−k (binomial, hand computation).

mod common;

use std::collections::{BTreeMap, BTreeSet};
use std::path::{Path, PathBuf};

use common::{bin, config, known};
use serde_json::Value;
use twinaudit::analysis::compare::{
    compare_folders, compare_runs, CompareConfig, CompareError, CompareOptions, Comparison, Finding,
};
use twinaudit::audit::replay::RunFolder;
use twinaudit::audit::run_audit;

/// Runs an audit of `spec` with `manifest` into `dir/name` (seed from `seed`).
fn run(dir: &Path, name: &str, spec: &Path, manifest: &str, seed: u64) -> PathBuf {
    let out = dir.join(name);
    let mut cfg = config(spec, &known(manifest), &out);
    cfg.seed = seed;
    run_audit(&cfg).unwrap_or_else(|e| panic!("audit {name} failed: {e}"));
    out
}

fn counting_runs() -> (tempfile::TempDir, PathBuf, PathBuf) {
    let dir = tempfile::tempdir().unwrap();
    let spec = known("specs/counting.json");
    let a = run(dir.path(), "count_red", &spec, "count_red.manifest.json", 7);
    let b = run(
        dir.path(),
        "confounded",
        &spec,
        "count_red_confounded.manifest.json",
        7,
    );
    (dir, a, b)
}

fn options() -> CompareOptions {
    CompareOptions::new(0.95, 0.05).unwrap()
}

fn compare(a: &Path, b: &Path) -> Comparison {
    compare_runs(&CompareConfig {
        run_a: a.to_path_buf(),
        run_b: b.to_path_buf(),
        options: options(),
    })
    .unwrap_or_else(|e| panic!("compare failed: {e}"))
}

/// results.jsonl rows by pair id, as plain JSON.
fn rows(run: &Path) -> BTreeMap<String, Value> {
    std::fs::read_to_string(run.join("results.jsonl"))
        .unwrap()
        .lines()
        .map(|l| serde_json::from_str::<Value>(l).unwrap())
        .map(|v| (v["pair_id"].as_str().unwrap().to_string(), v))
        .collect()
}

type Key = (String, String, String, String);

fn key(v: &Value) -> Key {
    let s = |f: &str| v[f].as_str().unwrap().to_string();
    (s("operation"), s("role"), s("question_kind"), s("relation"))
}

/// (failed in A only, failed in B only) per group, from the raw lines of two runs.
fn discordant_by_group(a: &Path, b: &Path) -> BTreeMap<Key, (u64, u64)> {
    let (ra, rb) = (rows(a), rows(b));
    let mut out: BTreeMap<Key, (u64, u64)> = BTreeMap::new();
    for (id, va) in &ra {
        let Some(vb) = rb.get(id) else { continue };
        let e = out.entry(key(va)).or_default();
        let (fa, fb) = (va["passed"].as_bool(), vb["passed"].as_bool());
        if let (Some(pa), Some(pb)) = (fa, fb) {
            e.0 += (!pa && pb) as u64;
            e.1 += (pa && !pb) as u64;
        }
    }
    out
}

#[test]
fn two_counting_models_compare_by_the_counts_in_their_results() {
    let (_dir, a, b) = counting_runs();
    let c = compare(&a, &b);

    // Per group: b and c equal a direct count over both results.jsonl files.
    let direct = discordant_by_group(&a, &b);
    assert_eq!(c.groups.len(), direct.len());
    for g in &c.groups {
        let k = (
            g.operation.clone(),
            g.role.clone(),
            g.question_kind.as_str().to_string(),
            g.relation.clone(),
        );
        let (a_only, b_only) = direct[&k];
        let f = &g.comparison.failure;
        assert_eq!((f.n_a_only, f.n_b_only), (a_only, b_only), "{k:?}");
        assert_eq!(
            f.rate_b.count - f.rate_a.count,
            b_only - a_only,
            "{k:?}: the margins differ by the discordant cells"
        );
        let d = f.difference.unwrap();
        assert!((d.value - (b_only as f64 - a_only as f64) / f.n as f64).abs() < 1e-12);
        assert!(d.low <= d.value && d.value <= d.high);
    }

    // Overall, against the hand-computed verdicts: count_red passes all 26 pairs; the confounded
    // model fails the 13 target pairs (moved_elsewhere) and flips on the 10 distractor pairs
    // that touch an orange tile (tests/data/known/expected_verdicts.json).
    let expected: BTreeMap<String, BTreeMap<String, Value>> =
        serde_json::from_str(&std::fs::read_to_string(known("expected_verdicts.json")).unwrap())
            .unwrap();
    let fails = |model: &str| -> BTreeSet<String> {
        expected[model]
            .iter()
            .filter(|(_, e)| !matches!(e["verdict"].as_str(), Some("held" | "moved_to_expected")))
            .map(|(id, _)| id.clone())
            .collect()
    };
    let (fail_a, fail_b) = (fails("count-red"), fails("count-red-confounded"));
    let o = &c.overall.failure;
    assert_eq!(o.n, 26);
    assert_eq!(o.n_a_only, fail_a.difference(&fail_b).count() as u64);
    assert_eq!(o.n_b_only, fail_b.difference(&fail_a).count() as u64);
    assert_eq!((o.n_a_only, o.n_b_only), (0, 23));
    // Exact McNemar with b = 0, c = 23: 2 · P(X ≤ 0), X ~ Bin(23, 1/2) = 2^−22.
    let want = 2f64.powi(-22);
    assert!((o.p_exact - want).abs() / want < 1e-9, "{}", o.p_exact);
    assert_eq!(o.finding, Finding::BWorse);
    assert!(o.significant && o.p_exact_holm.is_none());

    // Holm across the groups: the smallest p is multiplied by the number of tested groups.
    let tested: Vec<_> = c
        .groups
        .iter()
        .filter(|g| g.comparison.failure.n > 0)
        .collect();
    let min = tested
        .iter()
        .min_by(|x, y| {
            x.comparison
                .failure
                .p_exact
                .total_cmp(&y.comparison.failure.p_exact)
        })
        .unwrap();
    let f = &min.comparison.failure;
    let want = (f.p_exact * tested.len() as f64).min(1.0);
    assert!((f.p_exact_holm.unwrap() - want).abs() < 1e-15);
    for g in &c.groups {
        let f = &g.comparison.failure;
        assert!(f.p_exact_holm.unwrap() >= f.p_exact);
        assert_eq!(f.significant, f.p_exact_holm.unwrap() <= 0.05);
    }

    // Clean accuracy, paired by case, straight from the lines' before_correct.
    let by_case = |run: &Path| -> BTreeMap<String, bool> {
        let mut m = BTreeMap::new();
        for v in rows(run).values() {
            if let Some(ok) = v["before_correct"].as_bool() {
                m.entry(v["case"].as_str().unwrap().to_string())
                    .or_insert(ok);
            }
        }
        m
    };
    let (ca, cb) = (by_case(&a), by_case(&b));
    let acc = &c.clean_accuracy[0].accuracy;
    assert_eq!(
        c.clean_accuracy.len(),
        1,
        "counting.json asks count questions only"
    );
    assert_eq!(acc.n, ca.len() as u64);
    let a_only = ca.iter().filter(|(k, &v)| v && !cb[*k]).count() as u64;
    let b_only = ca.iter().filter(|(k, &v)| !v && cb[*k]).count() as u64;
    assert_eq!((acc.n_a_only, acc.n_b_only), (a_only, b_only));
    assert_eq!(
        acc.rate_a.count, 5,
        "count_red answers every unedited scene right"
    );

    // Answer-level changes, counted directly.
    let (ra, rb) = (rows(&a), rows(&b));
    let after_differs = ra
        .iter()
        .filter(|(id, v)| v["after"]["answer"] != rb[*id]["after"]["answer"])
        .count() as u64;
    assert_eq!(c.pairs.n_after_answer_differs, after_differs);
    assert_eq!(c.pairs.n_verdict_differs, 23);
    assert!(c.warnings.is_empty(), "{:?}", c.warnings);
    assert_eq!(c.difference, "b_minus_a");
}

#[test]
fn a_run_compared_with_itself_shows_no_difference() {
    let (_dir, a, _b) = counting_runs();
    let c = compare(&a, &a);
    let rows = std::iter::once(&c.overall.failure)
        .chain(c.groups.iter().map(|g| &g.comparison.failure))
        .chain(c.clean_accuracy.iter().map(|r| &r.accuracy));
    for r in rows {
        assert_eq!((r.n_a_only, r.n_b_only), (0, 0));
        assert_eq!(r.rate_a, r.rate_b);
        let d = r.difference.unwrap();
        assert_eq!(d.value, 0.0);
        assert!(d.low < 0.0 && d.high > 0.0);
        assert_eq!((r.p_exact, r.p_chi2, r.p_chi2_corrected), (1.0, 1.0, 1.0));
        assert_eq!(r.chi2, None);
        assert!(!r.significant);
        assert_eq!(r.finding, Finding::NoSignificantDifference);
    }
    assert_eq!(c.pairs.n_in_both, 26);
    assert_eq!(
        (c.pairs.n_after_answer_differs, c.pairs.n_verdict_differs),
        (0, 0)
    );
    assert_eq!((c.n_rows_b_worse, c.n_rows_b_better), (0, 0));

    // A partial last line (a run still writing, or killed) is ignored and left in place:
    // comparing never writes into a run folder.
    let results = a.join("results.jsonl");
    let mut bytes = std::fs::read(&results).unwrap();
    bytes.extend_from_slice(br#"{"format_version": 1, "pair_id": "a-count/er"#);
    std::fs::write(&results, &bytes).unwrap();
    let again = compare(&a, &a);
    assert_eq!(again.run_a.n_pairs, 26);
    assert_eq!(std::fs::read(&results).unwrap(), bytes);
}

/// Run B: counting.json without case e-count, tiles_c.png unreadable (its pairs become error
/// rows), seed 8. Compared with the plain count_red run (seed 7).
#[test]
fn mismatched_pairs_errors_and_differing_inputs_are_reported() {
    let (dir, a, _b) = counting_runs();
    let root = dir.path().join("changed");
    std::fs::create_dir_all(root.join("specs")).unwrap();
    std::fs::create_dir_all(root.join("images")).unwrap();
    for entry in std::fs::read_dir(known("images")).unwrap() {
        let p = entry.unwrap().path();
        std::fs::copy(&p, root.join("images").join(p.file_name().unwrap())).unwrap();
    }
    std::fs::write(root.join("images/tiles_c.png"), b"not a png").unwrap();
    let mut spec: Value =
        serde_json::from_str(&std::fs::read_to_string(known("specs/counting.json")).unwrap())
            .unwrap();
    spec["cases"]
        .as_array_mut()
        .unwrap()
        .retain(|c| c["id"] != "e-count");
    let spec_path = root.join("specs/counting.json");
    std::fs::write(&spec_path, serde_json::to_vec_pretty(&spec).unwrap()).unwrap();
    let b = run(
        dir.path(),
        "changed_run",
        &spec_path,
        "count_red.manifest.json",
        8,
    );

    let c = compare(&a, &b);
    let ra = rows(&a);
    let of_case = |case: &str| -> Vec<String> {
        ra.values()
            .filter(|v| v["case"] == case)
            .map(|v| v["pair_id"].as_str().unwrap().to_string())
            .collect()
    };
    assert_eq!(c.pairs.only_in_a, of_case("e-count"));
    assert_eq!(c.pairs.n_only_in_a, 3);
    assert!(c.pairs.only_in_b.is_empty());
    assert_eq!(c.pairs.errors_in_b_only, of_case("c-count"));
    assert!(c.pairs.errors_in_a_only.is_empty());
    assert_eq!(c.pairs.n_in_both, 26 - 3);
    assert_eq!(c.pairs.n_judged_in_both, 26 - 3 - 2);
    assert_eq!(c.overall.failure.n, 21);
    assert_eq!(c.overall.n_errors_in_b_only, 2);
    let errors_in_groups: u64 = c
        .groups
        .iter()
        .map(|g| g.comparison.n_errors_in_b_only)
        .sum();
    assert_eq!(errors_in_groups, 2);
    assert_eq!(c.clean_accuracy[0].accuracy.n, 3, "cases a, b and d only");
    let warnings = c.warnings.join("\n");
    assert!(warnings.contains("different spec files"), "{warnings}");
    assert!(
        warnings.contains("run A used seed 7, run B seed 8"),
        "{warnings}"
    );

    let text = twinaudit::analysis::compare::render_text(&c);
    assert!(text.contains("3 only in A, 0 only in B"), "{text}");
    assert!(text.contains("error in B, judged in A: c-count/"), "{text}");
    assert!(text.contains("warning: the runs used different spec files"));
}

#[test]
fn cli_json_parses_and_matches_the_library() {
    let (_dir, a, b) = counting_runs();
    let library = compare(&a, &b);
    let out = bin()
        .arg("compare")
        .arg(&a)
        .arg(&b)
        .arg("--json")
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(0), "{out:?}");
    // Byte for byte what the library's comparison serialises to (serde_json's float parsing is
    // not exact to the last bit, so the check is on the text), and it reads back.
    let stdout = String::from_utf8(out.stdout.clone()).unwrap();
    assert_eq!(
        stdout,
        serde_json::to_string_pretty(&library).unwrap() + "\n"
    );
    let parsed: Comparison = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(parsed.groups.len(), library.groups.len());
    // The documented field names (docs/compare.md) are there as written.
    let v: Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["overall"]["failure"]["n_b_only"], 23);
    assert_eq!(v["groups"][0]["failure"]["outcome"], "failed");
    assert!(v["groups"][0]["operation"].is_string());

    // Text: every rate with its interval, the direction and the decision in words.
    let text = bin().args(["compare"]).arg(&a).arg(&b).output().unwrap();
    let text = String::from_utf8(text.stdout).unwrap();
    assert!(
        text.contains("A 0.0% [0.0, 12.9] (0/26)   B 88.5% [71.0, 96.0] (23/26)   B − A +88.5 points [66.8, 96.0]"),
        "{text}"
    );
    assert!(text.contains("significant, B worse"), "{text}");
    assert!(text.contains("not significant"), "{text}");

    // --fail-on-regression: 1 when B is significantly worse, 0 the other way round.
    let code = |x: &Path, y: &Path| {
        bin()
            .arg("compare")
            .arg(x)
            .arg(y)
            .arg("--fail-on-regression")
            .output()
            .unwrap()
            .status
            .code()
    };
    assert_eq!(code(&a, &b), Some(1));
    assert_eq!(code(&b, &a), Some(0));
    let reversed = compare(&b, &a);
    assert_eq!(reversed.overall.failure.finding, Finding::BBetter);
    let d = reversed.overall.failure.difference.unwrap();
    let e = library.overall.failure.difference.unwrap();
    assert!((d.value + e.value).abs() < 1e-12 && (d.low + e.high).abs() < 1e-12);
}

#[test]
fn folders_that_cannot_be_compared_are_refused_with_the_fix() {
    let dir = tempfile::tempdir().unwrap();
    let counting = run(
        dir.path(),
        "counting",
        &known("specs/counting.json"),
        "count_red.manifest.json",
        7,
    );
    let colour = run(
        dir.path(),
        "colour",
        &known("specs/colour.json"),
        "colour_centre.manifest.json",
        7,
    );
    let a = RunFolder::open(&counting).unwrap();
    let b = RunFolder::open(&colour).unwrap();
    let err = compare_folders(&a, &b, options()).unwrap_err();
    assert!(matches!(err, CompareError::NoMatchingPairs { .. }), "{err}");
    let msg = err.to_string();
    assert!(msg.contains(&counting.display().to_string()), "{msg}");
    assert!(msg.contains(&colour.display().to_string()), "{msg}");
    assert!(
        msg.contains("compare two runs of the same spec files"),
        "{msg}"
    );

    let empty = dir.path().join("empty");
    std::fs::create_dir(&empty).unwrap();
    let out = bin()
        .arg("compare")
        .arg(&counting)
        .arg(&empty)
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    let stderr = String::from_utf8(out.stderr).unwrap();
    assert!(stderr.contains("run B"), "{stderr}");
    assert!(stderr.contains("is not a twinaudit run folder"), "{stderr}");
    assert!(stderr.contains("twinaudit run --out"), "{stderr}");

    for (confidence, alpha, name) in [(1.0, 0.05, "confidence level"), (0.95, 0.0, "alpha")] {
        let err = CompareOptions::new(confidence, alpha).unwrap_err();
        assert!(
            err.to_string()
                .starts_with(&format!("{name} must lie strictly between 0 and 1")),
            "{err}"
        );
    }
}

/// With --placebo in both runs, placebo controls form their own row and leave the real rows as
/// they are without placebos.
#[test]
fn placebo_controls_are_compared_as_their_own_row() {
    let dir = tempfile::tempdir().unwrap();
    let spec = known("specs/counting.json");
    let with_placebo = |name: &str, manifest: &str| {
        let out = dir.path().join(name);
        let mut cfg = config(&spec, &known(manifest), &out);
        cfg.placebo = true;
        run_audit(&cfg).unwrap_or_else(|e| panic!("audit {name} failed: {e}"));
        out
    };
    let a = with_placebo("a", "count_red.manifest.json");
    let b = with_placebo("b", "count_red_confounded.manifest.json");
    let c = compare(&a, &b);
    let (_plain_dir, plain_a, plain_b) = counting_runs();
    let plain = compare(&plain_a, &plain_b);
    assert_eq!(c.overall, plain.overall);
    assert_eq!(c.groups, plain.groups);
    assert_eq!(c.run_a.n_pairs, 26);

    // The placebo row, straight from the lines that carry placebo_of.
    let placebos = |run: &Path| -> BTreeMap<String, Option<bool>> {
        rows(run)
            .into_iter()
            .filter(|(_, v)| v["placebo_of"].is_string())
            .map(|(id, v)| (id, v["passed"].as_bool()))
            .collect()
    };
    let (pa, pb) = (placebos(&a), placebos(&b));
    assert!(!pa.is_empty());
    let p = c.placebo.as_ref().expect("both runs have placebos");
    assert_eq!(
        p.n_matched,
        pa.keys().filter(|k| pb.contains_key(*k)).count() as u64
    );
    let judged: Vec<(bool, bool)> = pa
        .iter()
        .filter_map(|(id, x)| Some((x.as_ref().copied()?, pb.get(id)?.as_ref().copied()?)))
        .collect();
    assert_eq!(p.failure.n, judged.len() as u64);
    let a_only = judged.iter().filter(|(x, y)| !x && *y).count() as u64;
    let b_only = judged.iter().filter(|(x, y)| *x && !y).count() as u64;
    assert_eq!((p.failure.n_a_only, p.failure.n_b_only), (a_only, b_only));
    assert_eq!(c.run_a.n_placebos, pa.len() as u64);

    let text = twinaudit::analysis::compare::render_text(&c);
    assert!(text.contains("placebo controls (flip rate;"), "{text}");
    // A run without placebos beside one with them: not compared, and said so.
    let mixed = compare(&a, &plain_b);
    assert!(mixed.placebo.is_none());
    assert!(mixed
        .warnings
        .iter()
        .any(|w| w.contains("run A has placebo controls and run B has none")));
}
