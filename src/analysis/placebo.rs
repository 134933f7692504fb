//! Placebo controls in the summary: their overall flip rate, and placebo-corrected rates.
//!
//! Each placebo copies one real pair (`placebo_of`): same shape, size and fill method, moved onto
//! background. So "did the real edit fail" and "did its placebo flip" are two outcomes on the same
//! pair, and the corrected rate is their paired difference, real failure rate − placebo flip
//! rate, with Newcombe's interval for paired proportions (method 10) and McNemar's exact p. Only
//! pairs where both the real edit and its placebo were judged count.

use std::collections::{BTreeMap, HashMap};

use serde::{Deserialize, Serialize};

use super::summary::{group_key, GroupKey};
use super::Tally;
use crate::audit::results::{PairRecord, Status};
use crate::spec::QuestionKind;
use crate::stats::paired::{mcnemar, newcombe_paired_difference, Difference, PairedCounts};
use crate::stats::Rate;

/// Counts and flip rate of the placebo controls of a run.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PlaceboTotals {
    pub n_pairs: u64,
    pub n_judged: u64,
    /// Placebos that could not be judged, mostly because no free background fits the edit.
    pub n_errors: u64,
    /// flipped / judged over every placebo.
    pub flip_rate: Rate,
}

/// A real failure rate and the placebo flip rate on the same pairs, and their difference.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CorrectedRate {
    /// Pairs whose real edit and placebo were both judged.
    pub n_pairs: u64,
    pub real_failure_rate: Rate,
    pub placebo_flip_rate: Rate,
    /// a: both failed, b: only the real edit failed, c: only the placebo flipped, d: neither.
    pub counts: PairedCounts,
    /// real_failure_rate − placebo_flip_rate with Newcombe's paired interval; null when n is 0.
    pub difference: Option<Difference>,
    /// McNemar's exact two-sided p for b against c.
    pub mcnemar_exact_p: f64,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CorrectedGroupRow {
    pub operation: String,
    pub role: String,
    pub question_kind: QuestionKind,
    pub relation: String,
    #[serde(flatten)]
    pub corrected: CorrectedRate,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PlaceboCorrected {
    /// Over every real pair with a judged placebo.
    pub overall: CorrectedRate,
    /// Per operation × role × question kind × relation, as `groups`.
    pub groups: Vec<CorrectedGroupRow>,
}

/// (real pair, its placebo) for every placebo whose real pair is in the rows, in file order.
pub(crate) fn controls(all: &[PairRecord]) -> Vec<(&PairRecord, &PairRecord)> {
    let real: HashMap<&str, &PairRecord> = all
        .iter()
        .filter(|r| r.placebo_of.is_none())
        .map(|r| (r.pair_id.as_str(), r))
        .collect();
    all.iter()
        .filter_map(|p| Some((*real.get(p.placebo_of.as_deref()?)?, p)))
        .collect()
}

pub(crate) fn placebo_totals(placebos: &[&PairRecord], confidence: f64) -> Option<PlaceboTotals> {
    if placebos.is_empty() {
        return None;
    }
    let mut t = Tally::default();
    for p in placebos {
        t.add(p);
    }
    Some(PlaceboTotals {
        n_pairs: placebos.len() as u64,
        n_judged: t.judged,
        n_errors: placebos
            .iter()
            .filter(|r| r.status == Status::Error)
            .count() as u64,
        flip_rate: t.rate(confidence),
    })
}

fn corrected(counts: PairedCounts, confidence: f64) -> CorrectedRate {
    let n = counts.n();
    CorrectedRate {
        n_pairs: n,
        real_failure_rate: Rate::new(counts.a + counts.b, n, confidence),
        placebo_flip_rate: Rate::new(counts.a + counts.c, n, confidence),
        counts,
        difference: newcombe_paired_difference(counts, confidence),
        mcnemar_exact_p: mcnemar(counts.b, counts.c).p_exact,
    }
}

pub(crate) fn placebo_corrected(
    controls: &[(&PairRecord, &PairRecord)],
    confidence: f64,
) -> Option<PlaceboCorrected> {
    if controls.is_empty() {
        return None;
    }
    let empty = PairedCounts {
        a: 0,
        b: 0,
        c: 0,
        d: 0,
    };
    let mut overall = empty;
    let mut groups: BTreeMap<GroupKey, PairedCounts> = BTreeMap::new();
    for (real, placebo) in controls {
        let (Some(rv), Some(pv)) = (real.verdict, placebo.verdict) else {
            continue;
        };
        let (failed, flipped) = (!rv.passed(), !pv.passed());
        overall.add(failed, flipped);
        groups
            .entry(group_key(real))
            .or_insert(empty)
            .add(failed, flipped);
    }
    Some(PlaceboCorrected {
        overall: corrected(overall, confidence),
        groups: groups
            .into_iter()
            .map(
                |((operation, role, question_kind, relation), counts)| CorrectedGroupRow {
                    operation,
                    role,
                    question_kind,
                    relation,
                    corrected: corrected(counts, confidence),
                },
            )
            .collect(),
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::analysis::testing::{error_row, placebo, row};
    use crate::audit::checker::Verdict::{Flipped, Held};

    /// Real and placebo rows whose paired cells are (a, b, c, d): a both failed, b only the real
    /// edit, c only the placebo, d neither.
    fn rows_with_cells(a: usize, b: usize, c: usize, d: usize) -> Vec<PairRecord> {
        let mut rows = Vec::new();
        let cells = [
            (a, Flipped, Flipped),
            (b, Flipped, Held),
            (c, Held, Flipped),
            (d, Held, Held),
        ];
        for (cell, (n, real_v, placebo_v)) in cells.into_iter().enumerate() {
            for i in 0..n {
                let real = row(&format!("c{cell}-{i}/e"), real_v, &["cloth"], 0.9);
                rows.push(placebo(&real, placebo_v));
                rows.push(real);
            }
        }
        rows
    }

    /// Newcombe R.G. (1998), Statistics in Medicine 17:2635-2650, method 10, worked example
    /// (a, b, c, d) = (20, 12, 2, 16): difference 0.2, 95% interval 0.0562 to 0.3292
    /// (shared/REFERENCES.md), reached here through real and placebo rows.
    #[test]
    fn corrected_rate_is_newcombes_paired_difference() {
        let mut rows = rows_with_cells(20, 12, 2, 16);
        // Pairs where either side was not judged stay out of the paired table.
        let real = row("z/e", Flipped, &["cloth"], 0.9);
        rows.push(PairRecord {
            verdict: None,
            passed: None,
            status: Status::Error,
            ..placebo(&real, Held)
        });
        rows.push(real);
        let broken = error_row("x/e");
        rows.push(placebo(&broken, Held));
        rows.push(broken);
        let c = placebo_corrected(&controls(&rows), 0.95).unwrap();
        let o = &c.overall;
        assert_eq!(
            o.counts,
            PairedCounts {
                a: 20,
                b: 12,
                c: 2,
                d: 16
            }
        );
        assert_eq!((o.real_failure_rate.count, o.real_failure_rate.n), (32, 50));
        assert_eq!((o.placebo_flip_rate.count, o.placebo_flip_rate.n), (22, 50));
        let d = o.difference.unwrap();
        assert!((d.value - 0.2).abs() < 1e-12, "{d:?}");
        assert!((d.low - 0.0562).abs() < 5e-5, "{d:?}");
        assert!((d.high - 0.3292).abs() < 5e-5, "{d:?}");
        // One group (erase, distractor, colour, same) holds every pair.
        assert_eq!(c.groups.len(), 1);
        assert_eq!(c.groups[0].corrected, *o);
        let totals = placebo_totals(
            &rows
                .iter()
                .filter(|r| r.placebo_of.is_some())
                .collect::<Vec<_>>(),
            0.95,
        )
        .unwrap();
        assert_eq!(
            (totals.n_pairs, totals.n_judged, totals.n_errors),
            (52, 51, 1)
        );
    }

    #[test]
    fn no_placebos_no_correction() {
        let rows = vec![row("a/e", Held, &["cloth"], 0.9)];
        assert_eq!(placebo_corrected(&controls(&rows), 0.95), None);
    }
}
