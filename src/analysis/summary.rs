//! summary.json: counts and rates with Wilson intervals, recomputed from every results.jsonl row
//! (never from partial averages), so a resumed run summarises exactly like an uninterrupted one.
//!
//! Format 2 adds `slices`, `confident_failures`, `placebo_corrected` and per-label placebo rates;
//! every format 1 field keeps its meaning, and a format 1 file still reads (new fields empty).
//! Placebo controls never enter a real rate: adding `--placebo` changes only `placebo*` fields.

use std::collections::{BTreeMap, HashSet};

use serde::{Deserialize, Serialize};

use super::confounders::{distractor_labels, LabelRow};
use super::failures::{confident_failures, ConfidentFailures};
use super::placebo::{
    controls, placebo_corrected, placebo_totals, PlaceboCorrected, PlaceboTotals,
};
use super::slices::{slices, SliceRow};
use super::Tally;
use crate::audit::checker::Verdict;
use crate::audit::results::{PairRecord, Status};
use crate::spec::QuestionKind;
use crate::stats::Rate;

// The text form lived here before the analysis stage existed; the old paths keep working.
pub use super::text::{render_text, shortcut_findings};

pub const SUMMARY_FORMAT_VERSION: u32 = 2;

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Summary {
    pub format_version: u32,
    /// Confidence level of every interval below.
    pub confidence: f64,
    /// Real pairs (placebo controls are counted in `placebo`).
    pub n_pairs: u64,
    pub n_judged: u64,
    pub n_errors: u64,
    /// Share of judged pairs that failed their expectation.
    pub failure_rate: Rate,
    /// Answers on unedited images that equal the ground truth, one per case with a truth.
    pub original_accuracy: Vec<AccuracyRow>,
    /// Failure rates per question kind × role, over all operations: distractor rows are flip
    /// rates (a model reading a distractor flips), target rows say how often the answer failed to
    /// follow an edit of what the question asks about.
    pub by_kind_and_role: Vec<KindRoleRow>,
    /// The confounder ranking: distractor labels by the flip rate their edits cause (see
    /// [`super::confounders`] for the order).
    pub distractor_labels: Vec<LabelRow>,
    /// One row per operation × role × question kind × relation.
    pub groups: Vec<GroupRow>,
    /// Placebo controls over the whole run; absent when the run had none.
    #[serde(default)]
    pub placebo: Option<PlaceboTotals>,
    /// Failure rates by area, objects in the scene, label, question length and fill method.
    #[serde(default)]
    pub slices: Vec<SliceRow>,
    /// The most confident wrong answers after an edit.
    #[serde(default)]
    pub confident_failures: ConfidentFailures,
    /// Real failure rate minus placebo flip rate on the same pairs; absent without placebos.
    #[serde(default)]
    pub placebo_corrected: Option<PlaceboCorrected>,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct KindRoleRow {
    pub question_kind: QuestionKind,
    pub role: String,
    pub failure_rate: Rate,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct AccuracyRow {
    pub question_kind: QuestionKind,
    pub accuracy: Rate,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct GroupRow {
    pub operation: String,
    pub role: String,
    pub question_kind: QuestionKind,
    /// `change` (the answer should move) or `same` (it should hold).
    pub relation: String,
    pub n_pairs: u64,
    pub n_errors: u64,
    /// Count of each verdict among judged pairs.
    pub verdicts: BTreeMap<String, u64>,
    /// `same` pairs: flipped / judged (the flip rate). `change` pairs: not moved_to_expected / judged.
    pub failure_rate: Rate,
    /// flipped / judged over the placebo controls of this group's pairs; absent without placebos.
    #[serde(default)]
    pub placebo_flip_rate: Option<Rate>,
}

/// operation, role, question kind, relation: the key of a [`GroupRow`].
pub(crate) type GroupKey = (String, String, QuestionKind, String);

pub(crate) fn group_key(r: &PairRecord) -> GroupKey {
    (
        r.operation.clone(),
        r.role.clone(),
        r.question_kind,
        r.relation.clone(),
    )
}

/// The summary of a run's rows, given in results.jsonl order (line numbers are positions + 1).
pub fn summarise(all_records: &[PairRecord], confidence: f64) -> Summary {
    let records: Vec<&PairRecord> = all_records
        .iter()
        .filter(|r| r.placebo_of.is_none())
        .collect();
    let placebos: Vec<&PairRecord> = all_records
        .iter()
        .filter(|r| r.placebo_of.is_some())
        .collect();
    let controls = controls(all_records);
    let mut overall = Tally::default();
    for r in &records {
        overall.add(r);
    }

    Summary {
        format_version: SUMMARY_FORMAT_VERSION,
        confidence,
        n_pairs: records.len() as u64,
        n_judged: overall.judged,
        n_errors: overall.errors,
        failure_rate: overall.rate(confidence),
        original_accuracy: original_accuracy(&records, confidence),
        by_kind_and_role: by_kind_and_role(&records, confidence),
        distractor_labels: distractor_labels(&records, &controls, confidence),
        groups: groups(&records, &controls, confidence),
        placebo: placebo_totals(&placebos, confidence),
        slices: slices(&records, &controls, confidence),
        confident_failures: confident_failures(all_records),
        placebo_corrected: placebo_corrected(&controls, confidence),
    }
}

fn original_accuracy(records: &[&PairRecord], confidence: f64) -> Vec<AccuracyRow> {
    let mut accuracy: BTreeMap<QuestionKind, (u64, u64)> = BTreeMap::new();
    let mut seen_cases = HashSet::new();
    for r in records {
        if let Some(correct) = r.before_correct {
            if seen_cases.insert(r.case.as_str()) {
                let e = accuracy.entry(r.question_kind).or_default();
                e.0 += correct as u64;
                e.1 += 1;
            }
        }
    }
    accuracy
        .into_iter()
        .map(|(question_kind, (c, n))| AccuracyRow {
            question_kind,
            accuracy: Rate::new(c, n, confidence),
        })
        .collect()
}

fn by_kind_and_role(records: &[&PairRecord], confidence: f64) -> Vec<KindRoleRow> {
    let mut tallies: BTreeMap<(QuestionKind, String), Tally> = BTreeMap::new();
    for r in records.iter().filter(|r| r.status == Status::Ok) {
        tallies
            .entry((r.question_kind, r.role.clone()))
            .or_default()
            .add(r);
    }
    tallies
        .into_iter()
        .map(|((question_kind, role), t)| KindRoleRow {
            question_kind,
            role,
            failure_rate: t.rate(confidence),
        })
        .collect()
}

fn groups(
    records: &[&PairRecord],
    controls: &[(&PairRecord, &PairRecord)],
    confidence: f64,
) -> Vec<GroupRow> {
    let mut groups: BTreeMap<GroupKey, Vec<&PairRecord>> = BTreeMap::new();
    for r in records {
        groups.entry(group_key(r)).or_default().push(r);
    }
    // A placebo belongs to the group of the real pair it copies (its own relation is `same`).
    let mut placebo_flips: BTreeMap<GroupKey, Tally> = BTreeMap::new();
    for (real, placebo) in controls {
        placebo_flips
            .entry(group_key(real))
            .or_default()
            .add(placebo);
    }
    groups
        .into_iter()
        .map(|(key, rows)| {
            let placebo_flip_rate = placebo_flips.get(&key).map(|t| t.rate(confidence));
            let (operation, role, question_kind, relation) = key;
            let mut verdicts: BTreeMap<String, u64> = BTreeMap::new();
            let mut tally = Tally::default();
            for r in &rows {
                tally.add(r);
                if let Some(v) = r.verdict {
                    *verdicts.entry(v.as_str().to_string()).or_default() += 1;
                }
            }
            let relevant: &[Verdict] = if relation == "same" {
                &[Verdict::Held, Verdict::Flipped]
            } else {
                &[
                    Verdict::MovedToExpected,
                    Verdict::MovedElsewhere,
                    Verdict::DidNotMove,
                ]
            };
            for v in relevant {
                verdicts.entry(v.as_str().to_string()).or_default();
            }
            GroupRow {
                operation,
                role,
                question_kind,
                relation,
                n_pairs: rows.len() as u64,
                n_errors: tally.errors,
                verdicts,
                failure_rate: tally.rate(confidence),
                placebo_flip_rate,
            }
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::analysis::testing::{error_row, row};
    use crate::audit::checker::Verdict::{DidNotMove, Flipped, Held};

    /// A format 1 summary.json (written by twinaudit before format 2, trimmed to one row per
    /// list) still reads; the format 2 fields come back empty.
    #[test]
    fn format_1_files_still_read() {
        let v1 = r#"{"format_version": 1, "confidence": 0.95, "n_pairs": 562, "n_judged": 562, "n_errors": 0, "failure_rate": {"count": 125, "n": 562, "value": 0.22241992882562278, "low": 0.18998688074315126, "high": 0.25862192100449927, "confidence": 0.95}, "original_accuracy": [{"question_kind": "count", "accuracy": {"count": 34, "n": 60, "value": 0.5666666666666667, "low": 0.4410343877612557, "high": 0.6842760319531322, "confidence": 0.95}}], "by_kind_and_role": [{"question_kind": "count", "role": "distractor", "failure_rate": {"count": 13, "n": 192, "value": 0.06770833333333333, "low": 0.03999268563113286, "high": 0.11238290940574829, "confidence": 0.95}}], "distractor_labels": [{"question_kind": "colour", "label": "cloth", "flip_rate": {"count": 70, "n": 88, "value": 0.7954545454545454, "low": 0.6996803607394828, "high": 0.8665127362312627, "confidence": 0.95}}], "groups": [{"operation": "cover", "role": "distractor", "question_kind": "count", "relation": "same", "n_pairs": 50, "n_errors": 0, "verdicts": {"flipped": 11, "held": 39}, "failure_rate": {"count": 11, "n": 50, "value": 0.22, "low": 0.1275391597021442, "high": 0.3524154958125367, "confidence": 0.95}, "placebo_flip_rate": null}], "placebo": null}"#;
        let s: Summary = serde_json::from_str(v1).unwrap();
        assert_eq!(s.format_version, 1);
        assert_eq!(s.distractor_labels[0].label, "cloth");
        assert_eq!(s.distractor_labels[0].placebo_flip_rate, None);
        assert!(s.slices.is_empty() && s.confident_failures.flipped.is_empty());
        assert_eq!(s.placebo_corrected, None);
    }

    #[test]
    fn counts_add_up_and_the_written_file_reads_back() {
        let rows = vec![
            row("a/e", Flipped, &["cloth"], 0.9),
            row("b/e", Held, &["cloth"], 0.9),
            row("c/e", DidNotMove, &["bowl"], 0.8),
            error_row("d/e"),
        ];
        let s = summarise(&rows, 0.9);
        assert_eq!(s.format_version, SUMMARY_FORMAT_VERSION);
        assert_eq!((s.n_pairs, s.n_judged, s.n_errors), (4, 3, 1));
        assert_eq!((s.failure_rate.count, s.failure_rate.n), (2, 3));
        assert_eq!(s.confident_failures.flipped[0].results_line, 1);
        assert_eq!(s.confident_failures.did_not_move[0].results_line, 3);
        assert!(s.slices.iter().all(|r| r.failure_rate.confidence == 0.9));
        // serde_json may round a float's last bit on the way back, so compare what is not a float.
        let back: Summary = serde_json::from_str(&serde_json::to_string(&s).unwrap()).unwrap();
        assert_eq!(back.confident_failures, s.confident_failures);
        assert_eq!(back.slices.len(), s.slices.len());
        assert_eq!(back.groups[0].verdicts, s.groups[0].verdicts);
    }
}
