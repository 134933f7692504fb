//! The confounder ranking: distractor labels ordered by how often editing them moves an answer
//! that should hold. A label high on this list is what the model reads instead of the asked
//! object.
//!
//! Only pairs whose edited regions are all distractors of one label count, so each flip is
//! attributed to exactly one label. Order: the lower end of the flip-rate interval first (a label
//! seen in three pairs does not outrank one measured on ninety), then the flip rate, then
//! question kind and label.

use std::collections::BTreeMap;

use serde::{Deserialize, Serialize};

use super::Tally;
use crate::audit::results::PairRecord;
use crate::spec::QuestionKind;
use crate::stats::Rate;

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct LabelRow {
    pub question_kind: QuestionKind,
    pub label: String,
    /// flipped / judged over every edit of this label (all operations).
    pub flip_rate: Rate,
    /// flipped / judged over the placebo controls of those edits; absent without placebos.
    #[serde(default)]
    pub placebo_flip_rate: Option<Rate>,
}

/// The single label of a distractor-only pair, `None` for other pairs: the pairs the ranking
/// counts.
pub fn sole_distractor_label(r: &PairRecord) -> Option<&str> {
    let first = r.regions.first()?;
    (r.role == "distractor" && r.regions.iter().all(|g| g.label == first.label))
        .then_some(first.label.as_str())
}

pub(crate) fn distractor_labels(
    records: &[&PairRecord],
    controls: &[(&PairRecord, &PairRecord)],
    confidence: f64,
) -> Vec<LabelRow> {
    let mut real: BTreeMap<(QuestionKind, &str), Tally> = BTreeMap::new();
    for r in records.iter().filter(|r| r.verdict.is_some()) {
        if let Some(label) = sole_distractor_label(r) {
            real.entry((r.question_kind, label)).or_default().add(r);
        }
    }
    let mut placebo: BTreeMap<(QuestionKind, &str), Tally> = BTreeMap::new();
    for (r, p) in controls {
        if let Some(label) = sole_distractor_label(r) {
            placebo.entry((r.question_kind, label)).or_default().add(p);
        }
    }
    let mut rows: Vec<LabelRow> = real
        .iter()
        .map(|(key, t)| LabelRow {
            question_kind: key.0,
            label: key.1.to_string(),
            flip_rate: t.rate(confidence),
            placebo_flip_rate: placebo.get(key).map(|t| t.rate(confidence)),
        })
        .collect();
    rows.sort_by(|a, b| {
        let low = |r: &LabelRow| r.flip_rate.low.unwrap_or(0.0);
        let value = |r: &LabelRow| r.flip_rate.value.unwrap_or(0.0);
        low(b)
            .total_cmp(&low(a))
            .then_with(|| value(b).total_cmp(&value(a)))
            .then_with(|| (a.question_kind, &a.label).cmp(&(b.question_kind, &b.label)))
    });
    rows
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::analysis::testing::{placebo, row};
    use crate::audit::checker::Verdict::{Flipped, Held};

    #[test]
    fn a_well_measured_label_outranks_a_lucky_one() {
        let mut rows = Vec::new();
        for i in 0..9 {
            rows.push(row(
                &format!("c{i}/e"),
                if i < 7 { Flipped } else { Held },
                &["cloth"],
                0.9,
            ));
        }
        rows.push(row("t/e", Flipped, &["tag"], 0.9));
        for i in 0..5 {
            rows.push(row(&format!("a{i}/e"), Held, &["apple"], 0.9));
        }
        // Two labels in one edit: no single label to blame, so left out.
        rows.push(row("m/e", Flipped, &["cloth", "apple"], 0.9));
        let controls_owned: Vec<_> = rows[..2].iter().map(|r| placebo(r, Held)).collect();
        let refs: Vec<&PairRecord> = rows.iter().collect();
        let controls: Vec<_> = rows[..2].iter().zip(&controls_owned).collect();
        let ranked = distractor_labels(&refs, &controls, 0.95);
        let order: Vec<(&str, u64, u64)> = ranked
            .iter()
            .map(|r| (r.label.as_str(), r.flip_rate.count, r.flip_rate.n))
            .collect();
        // 1/1 has the higher rate (100%) but Wilson [20.7%, 100%]; 7/9 has [45.3%, 93.7%]
        // (Wilson 1927 score interval, 95%; values by the formula in stats::wilson_interval).
        assert_eq!(order, [("cloth", 7, 9), ("tag", 1, 1), ("apple", 0, 5)]);
        let p = ranked[0].placebo_flip_rate.unwrap();
        assert_eq!((p.count, p.n), (0, 2));
        assert_eq!(ranked[1].placebo_flip_rate, None);
    }
}
