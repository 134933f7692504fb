//! McNemar's tests, the Wilson intervals inside Newcombe's paired interval, and Holm's adjustment
//! against statsmodels 0.15.0 (tests/data/stats/paired_statsmodels.json, written by
//! tools/fixtures/paired_stats_statsmodels.py; provenance inside the file).
//!
//! statsmodels has no paired Newcombe interval, so method 10 itself is checked where it reduces
//! to statsmodels' independent-samples Newcombe interval (φ = 0), and by the direction of the
//! change where φ ≠ 0. Newcombe's own worked example stays in src/stats/paired.rs.

mod common;

use serde::Deserialize;
use std::collections::BTreeMap;
use twinaudit::stats::multiple::holm_adjusted;
use twinaudit::stats::paired::{mcnemar, newcombe_paired_difference, PairedCounts};
use twinaudit::stats::wilson_interval;

#[derive(Deserialize)]
struct Fixture {
    provenance: serde_json::Value,
    tables: Vec<Table>,
    holm: Vec<Holm>,
}

#[derive(Deserialize)]
struct Table {
    name: String,
    cells: [u64; 4],
    mcnemar_exact: Test,
    mcnemar_chi2: Test,
    mcnemar_chi2_corrected: Test,
    levels: BTreeMap<String, Level>,
}

#[derive(Deserialize)]
struct Test {
    statistic: Option<f64>,
    pvalue: Option<f64>,
}

#[derive(Deserialize)]
struct Level {
    wilson_first: [f64; 2],
    wilson_second: [f64; 2],
    newcombe_independent: [f64; 2],
}

#[derive(Deserialize)]
struct Holm {
    name: String,
    p: Vec<f64>,
    adjusted: Vec<f64>,
}

fn fixture() -> Fixture {
    let text = std::fs::read_to_string(common::data("stats/paired_statsmodels.json")).unwrap();
    let f: Fixture = serde_json::from_str(&text).unwrap();
    assert_eq!(f.provenance["library"], "statsmodels");
    assert_eq!(f.provenance["library_version"], "0.15.0");
    f
}

/// Relative agreement for p-values: 1e-9 (both sides evaluate the same binomial and χ² tails,
/// statrs against SciPy; the largest measured difference is 1.8e-12, on the n = 100,000 table).
fn close_rel(ours: f64, theirs: f64, what: &str) {
    let scale = theirs.abs().max(1e-300);
    assert!(
        (ours - theirs).abs() / scale < 1e-9,
        "{what}: ours {ours:e}, statsmodels {theirs:e}"
    );
}

fn close_abs(ours: f64, theirs: f64, what: &str) {
    assert!(
        (ours - theirs).abs() < 1e-12,
        "{what}: ours {ours:e}, statsmodels {theirs:e}"
    );
}

#[test]
fn mcnemar_matches_statsmodels_exact_and_chi_square() {
    for t in fixture().tables {
        let [_, b, c, _] = t.cells;
        let ours = mcnemar(b, c);
        let name = &t.name;
        // statsmodels' exact statistic is min(b, c); its p is min(1, 2·Bin.cdf(min(b, c))).
        assert_eq!(t.mcnemar_exact.statistic, Some(b.min(c) as f64), "{name}");
        close_rel(ours.p_exact, t.mcnemar_exact.pvalue.unwrap(), name);

        if b + c == 0 {
            // No discordant pair: statsmodels returns NaN (0/0) without correction, and with it
            // (0 − 1)²/0 = ∞ with p = 0, i.e. "significant" on a table showing no difference
            // (stored as null and 0.0). We report no statistic and p = 1 for both.
            assert_eq!(t.mcnemar_chi2.statistic, None, "{name}");
            assert_eq!(t.mcnemar_chi2.pvalue, None, "{name}");
            assert_eq!(t.mcnemar_chi2_corrected.statistic, None, "{name}");
            assert_eq!(t.mcnemar_chi2_corrected.pvalue, Some(0.0), "{name}");
            assert_eq!((ours.chi2, ours.p_chi2), (None, 1.0), "{name}");
            assert_eq!((ours.chi2_corrected, ours.p_chi2_corrected), (None, 1.0));
            continue;
        }
        close_rel(ours.chi2.unwrap(), t.mcnemar_chi2.statistic.unwrap(), name);
        close_rel(ours.p_chi2, t.mcnemar_chi2.pvalue.unwrap(), name);
        if b == c {
            // A known, deliberate difference: statsmodels (like R's mcnemar.test) computes
            // (|b − c| − 1)² / (b + c) = 1 / (b + c) when b = c, so the correction pushes the
            // statistic away from 0; we floor |b − c| − 1 at 0 (statistic 0, p = 1), since a
            // continuity correction should never exceed the observed difference.
            let sm = t.mcnemar_chi2_corrected.statistic.unwrap();
            close_rel(sm, 1.0 / (b + c) as f64, name);
            assert_eq!(ours.chi2_corrected, Some(0.0), "{name}");
            assert_eq!(ours.p_chi2_corrected, 1.0, "{name}");
        } else {
            close_rel(
                ours.chi2_corrected.unwrap(),
                t.mcnemar_chi2_corrected.statistic.unwrap(),
                name,
            );
            close_rel(
                ours.p_chi2_corrected,
                t.mcnemar_chi2_corrected.pvalue.unwrap(),
                name,
            );
        }
    }
}

/// Newcombe's φ (1998, method 10): ad − bc less n/2 when above n/2, 0 from 0 to n/2, kept when
/// negative; 0 when a margin is 0. Only its sign matters here.
fn phi_sign([a, b, c, d]: [u64; 4]) -> i32 {
    let n = (a + b + c + d) as f64;
    if [a + b, c + d, a + c, b + d].contains(&0) {
        return 0;
    }
    let cross = (a * d) as f64 - (b * c) as f64;
    if cross > n / 2.0 {
        1
    } else if cross < 0.0 {
        -1
    } else {
        0
    }
}

#[test]
fn newcombe_parts_match_statsmodels_wilson_and_independent_newcombe() {
    let mut n_phi_zero = 0;
    for t in fixture().tables {
        let [a, b, c, d] = t.cells;
        let n = a + b + c + d;
        for (level, want) in &t.levels {
            let confidence: f64 = level.parse().unwrap();
            let what = format!("{} at {level}", t.name);
            let (l1, h1) = wilson_interval(a + b, n, confidence).unwrap();
            let (l2, h2) = wilson_interval(a + c, n, confidence).unwrap();
            close_abs(l1, want.wilson_first[0], &what);
            close_abs(h1, want.wilson_first[1], &what);
            close_abs(l2, want.wilson_second[0], &what);
            close_abs(h2, want.wilson_second[1], &what);

            let ours = newcombe_paired_difference(PairedCounts { a, b, c, d }, confidence).unwrap();
            let [ind_low, ind_high] = want.newcombe_independent;
            match phi_sign(t.cells) {
                0 => {
                    // Method 10 with φ = 0 is the independent square-and-add interval.
                    close_abs(ours.low, ind_low, &what);
                    close_abs(ours.high, ind_high, &what);
                    n_phi_zero += 1;
                }
                1 => assert!(
                    ours.low >= ind_low - 1e-12 && ours.high <= ind_high + 1e-12,
                    "{what}: positive correlation must not widen the interval: {ours:?} vs [{ind_low}, {ind_high}]"
                ),
                _ => assert!(
                    ours.low <= ind_low + 1e-12 && ours.high >= ind_high - 1e-12,
                    "{what}: negative correlation must not narrow the interval: {ours:?} vs [{ind_low}, {ind_high}]"
                ),
            }
        }
    }
    assert!(n_phi_zero >= 8, "the fixture must hold φ = 0 tables");
}

#[test]
fn holm_matches_statsmodels_multipletests() {
    for h in fixture().holm {
        let ours = holm_adjusted(&h.p);
        assert_eq!(ours.len(), h.adjusted.len());
        for (o, w) in ours.iter().zip(&h.adjusted) {
            close_abs(*o, *w, &h.name);
        }
    }
}
