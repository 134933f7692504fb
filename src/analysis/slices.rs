//! Slices: failure rates of real pairs cut by one property at a time, with fixed bins so runs
//! compare (docs/results.md, "Slices").
//!
//! A placebo control counts in the bins of the real pair it copies. A pair editing regions of
//! several labels counts once under each of them, so `label` rows can add up to more pairs than
//! the run has. Rows come in a fixed order: dimension, bin (ascending; names sorted; `unknown`
//! last), relation.

use std::collections::{BTreeMap, BTreeSet};

use serde::{Deserialize, Serialize};

use super::Tally;
use crate::audit::results::PairRecord;
use crate::stats::Rate;

/// Upper edges (exclusive) of the area-fraction bins: <1%, 1-2%, 2-5%, 5-10%, 10-20%, >=20%.
pub const AREA_FRACTION_EDGES: [f64; 5] = [0.01, 0.02, 0.05, 0.10, 0.20];
const AREA_LABELS: [&str; 6] = ["<1%", "1-2%", "2-5%", "5-10%", "10-20%", ">=20%"];
/// Lower edges of the objects-in-the-scene bins: 1-3, 4-6, 7-9, 10+ annotated regions.
pub const OBJECT_EDGES: [u32; 3] = [4, 7, 10];
const OBJECT_LABELS: [&str; 4] = ["1-3", "4-6", "7-9", "10+"];
/// Lower edges of the question-length bins: 1-4, 5-6, 7-8, 9-12, 13+ words.
pub const QUESTION_WORD_EDGES: [u32; 4] = [5, 7, 9, 13];
const WORD_LABELS: [&str; 5] = ["1-4", "5-6", "7-8", "9-12", "13+"];

/// The dimensions, in row order, as named in `dimension`.
pub const DIMENSIONS: [&str; 5] = [
    "area_fraction",
    "n_case_regions",
    "label",
    "question_words",
    "method",
];

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SliceRow {
    /// One of [`DIMENSIONS`].
    pub dimension: String,
    /// The bin's name: `"2-5%"`, `"4-6"`, a label, a method, or `"unknown"` when a row lacks the value.
    pub bin: String,
    /// Numeric bins: `[bin_low, bin_high)` in the dimension's unit (fraction, regions, words);
    /// `bin_high` null for the open last bin; both null for names and `unknown`.
    pub bin_low: Option<f64>,
    pub bin_high: Option<f64>,
    /// `change` or `same`.
    pub relation: String,
    pub n_pairs: u64,
    pub n_errors: u64,
    /// As a group's: flipped / judged for `same`, not moved_to_expected / judged for `change`.
    pub failure_rate: Rate,
    /// flipped / judged over the placebo controls of this slice's pairs; absent without placebos.
    #[serde(default)]
    pub placebo_flip_rate: Option<Rate>,
}

/// Where a bin sorts within its dimension: numeric bins by index, names by name, unknown last.
#[derive(Debug, Clone, PartialEq, Eq, PartialOrd, Ord)]
enum BinOrder {
    Index(usize),
    Name(String),
    Unknown,
}

#[derive(Debug, Clone)]
struct Bin {
    order: BinOrder,
    name: String,
    low: Option<f64>,
    high: Option<f64>,
}

impl Bin {
    fn unknown() -> Bin {
        Bin {
            order: BinOrder::Unknown,
            name: "unknown".into(),
            low: None,
            high: None,
        }
    }

    fn named(name: &str) -> Bin {
        Bin {
            order: BinOrder::Name(name.to_string()),
            name: name.to_string(),
            low: None,
            high: None,
        }
    }

    /// The bin of `value` among ascending `edges`; the first bin starts at `first_low`.
    fn numeric(value: f64, edges: &[f64], names: &[&str], first_low: f64) -> Bin {
        let idx = edges.iter().take_while(|&&e| value >= e).count();
        Bin {
            order: BinOrder::Index(idx),
            name: names[idx].to_string(),
            low: Some(if idx == 0 { first_low } else { edges[idx - 1] }),
            high: edges.get(idx).copied(),
        }
    }
}

/// Words in a question: runs of non-whitespace.
pub fn question_words(question: &str) -> usize {
    question.split_whitespace().count()
}

fn bins_of(dimension: &str, r: &PairRecord) -> Vec<Bin> {
    let as_f64 = |edges: &[u32]| edges.iter().map(|&e| f64::from(e)).collect::<Vec<_>>();
    match dimension {
        "area_fraction" => vec![r.area_fraction.map_or_else(Bin::unknown, |a| {
            Bin::numeric(a, &AREA_FRACTION_EDGES, &AREA_LABELS, 0.0)
        })],
        "n_case_regions" => vec![r.n_case_regions.map_or_else(Bin::unknown, |n| {
            Bin::numeric(f64::from(n), &as_f64(&OBJECT_EDGES), &OBJECT_LABELS, 1.0)
        })],
        "label" => {
            let labels: BTreeSet<&str> = r.regions.iter().map(|g| g.label.as_str()).collect();
            if labels.is_empty() {
                vec![Bin::unknown()]
            } else {
                labels.into_iter().map(Bin::named).collect()
            }
        }
        "question_words" => vec![Bin::numeric(
            question_words(&r.question) as f64,
            &as_f64(&QUESTION_WORD_EDGES),
            &WORD_LABELS,
            1.0,
        )],
        "method" => vec![r.method.as_deref().map_or_else(Bin::unknown, Bin::named)],
        _ => Vec::new(), // not a dimension: in no bin
    }
}

/// The names of the bins a real pair falls in along `dimension` (one of [`DIMENSIONS`]; several
/// only for `label`).
pub fn bin_names(dimension: &str, r: &PairRecord) -> Vec<String> {
    bins_of(dimension, r).into_iter().map(|b| b.name).collect()
}

type SliceKey = (usize, BinOrder, String);

#[derive(Default)]
struct Acc {
    bin: Option<Bin>,
    real: Tally,
    placebo: Option<Tally>,
}

pub(crate) fn slices(
    records: &[&PairRecord],
    controls: &[(&PairRecord, &PairRecord)],
    confidence: f64,
) -> Vec<SliceRow> {
    let mut acc: BTreeMap<SliceKey, Acc> = BTreeMap::new();
    for (d, dimension) in DIMENSIONS.iter().enumerate() {
        for r in records {
            for bin in bins_of(dimension, r) {
                let e = acc
                    .entry((d, bin.order.clone(), r.relation.clone()))
                    .or_default();
                e.real.add(r);
                e.bin.get_or_insert(bin);
            }
        }
        for (r, p) in controls {
            for bin in bins_of(dimension, r) {
                // A real pair is always in `acc` by now: its placebo joins the same slice.
                if let Some(e) = acc.get_mut(&(d, bin.order, r.relation.clone())) {
                    e.placebo.get_or_insert_with(Tally::default).add(p);
                }
            }
        }
    }
    acc.into_iter()
        .map(|((d, _, relation), a)| {
            let bin = a.bin.expect("every slice has a pair");
            SliceRow {
                dimension: DIMENSIONS[d].to_string(),
                bin: bin.name,
                bin_low: bin.low,
                bin_high: bin.high,
                relation,
                n_pairs: a.real.judged + a.real.errors,
                n_errors: a.real.errors,
                failure_rate: a.real.rate(confidence),
                placebo_flip_rate: a.placebo.map(|t| t.rate(confidence)),
            }
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::analysis::testing::{error_row, placebo, row};
    use crate::audit::checker::Verdict::{DidNotMove, Flipped, Held, MovedToExpected};

    #[test]
    fn bin_edges_are_inclusive_below_and_exclusive_above() {
        let mut r = row("a/e", Held, &["cloth"], 0.9);
        for (area, want) in [
            (0.0099, "<1%"),
            (0.01, "1-2%"),
            (0.049, "2-5%"),
            (0.05, "5-10%"),
            (0.1999, "10-20%"),
            (0.2, ">=20%"),
            (1.0, ">=20%"),
        ] {
            r.area_fraction = Some(area);
            assert_eq!(bin_names("area_fraction", &r), [want], "{area}");
        }
        r.area_fraction = None;
        assert_eq!(bin_names("area_fraction", &r), ["unknown"]);
        for (n, want) in [
            (1, "1-3"),
            (3, "1-3"),
            (4, "4-6"),
            (9, "7-9"),
            (10, "10+"),
            (40, "10+"),
        ] {
            r.n_case_regions = Some(n);
            assert_eq!(bin_names("n_case_regions", &r), [want], "{n}");
        }
        for (q, want) in [
            ("Bowl colour?", "1-4"),
            ("What colour is the bowl?", "5-6"),
            ("How many  apples\tare there on the table?", "7-8"),
        ] {
            r.question = q.into();
            assert_eq!(bin_names("question_words", &r), [want], "{q:?}");
        }
        r.method = None;
        assert_eq!(bin_names("method", &r), ["unknown"]);
    }

    #[test]
    fn rows_count_each_pair_in_its_bins_and_placebos_with_their_pair() {
        let mut small = row("a/e", Flipped, &["cloth", "apple"], 0.9);
        small.area_fraction = Some(0.005);
        let mut large = row("b/e", Held, &["cloth"], 0.9);
        large.area_fraction = Some(0.3);
        let target = row("c/e", DidNotMove, &["bowl"], 0.9);
        let moved = row("d/e", MovedToExpected, &["bowl"], 0.9);
        let broken = error_row("f/e");
        let pl = placebo(&small, Flipped);
        let records = [&small, &large, &target, &moved, &broken];
        let rows = slices(&records, &[(&small, &pl)], 0.95);
        let find = |dim: &str, bin: &str, rel: &str| {
            rows.iter()
                .find(|r| r.dimension == dim && r.bin == bin && r.relation == rel)
                .unwrap_or_else(|| panic!("no {dim} {bin} {rel}"))
        };
        let lt1 = find("area_fraction", "<1%", "same");
        assert_eq!((lt1.failure_rate.count, lt1.failure_rate.n), (1, 1));
        let p = lt1.placebo_flip_rate.unwrap();
        assert_eq!((p.count, p.n), (1, 1));
        assert_eq!(
            find("area_fraction", ">=20%", "same").placebo_flip_rate,
            None
        );
        let bowl = find("label", "bowl", "change");
        assert_eq!((bowl.failure_rate.count, bowl.failure_rate.n), (1, 2));
        // The two-label pair counts under both labels; the error row is counted, not judged.
        let cloth = find("label", "cloth", "same");
        assert_eq!(
            (cloth.n_pairs, cloth.n_errors, cloth.failure_rate.n),
            (3, 1, 2)
        );
        assert_eq!(find("label", "apple", "same").n_pairs, 1);
        // Order: dimensions as listed, bins ascending.
        let dims: Vec<&str> = rows.iter().map(|r| r.dimension.as_str()).collect();
        let mut sorted = dims.clone();
        sorted.sort_by_key(|d| DIMENSIONS.iter().position(|x| x == d));
        assert_eq!(dims, sorted);
        let area: Vec<&str> = rows
            .iter()
            .filter(|r| r.dimension == "area_fraction")
            .map(|r| r.bin.as_str())
            .collect();
        assert_eq!(area, ["<1%", "2-5%", "2-5%", ">=20%"]);
    }
}
