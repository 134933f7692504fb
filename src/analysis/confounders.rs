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

/// The single label of a distractor-only pair, `None` for other pairs.
fn sole_distractor_label(r: &PairRecord) -> Option<&str> {
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

    fn row(kind: QuestionKind, label: &str, flipped: u64, n: u64) -> LabelRow {
        LabelRow {
            question_kind: kind,
            label: label.into(),
            flip_rate: Rate::new(flipped, n, 0.95),
            placebo_flip_rate: None,
        }
    }

    #[test]
    fn a_well_measured_label_outranks_a_lucky_one() {
        // 1/1 has Wilson interval [0.2065, 1] at 95%; 70/88 has [0.700, 0.867] (Wilson 1927 formula).
        let lucky = row(QuestionKind::Count, "tag", 1, 1);
        let measured = row(QuestionKind::Colour, "cloth", 70, 88);
        assert!(lucky.flip_rate.value > measured.flip_rate.value);
        assert!(lucky.flip_rate.low < measured.flip_rate.low);
    }
}
