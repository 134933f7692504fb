//! Analysis of a run: summary.json (docs/results.md) computed from results.jsonl rows alone —
//! rates per group, slices, the confounder ranking, confident failures and placebo-corrected
//! rates — and its short text form; and comparing two runs on the same pairs ([`compare`]).
//!
//! Invariants: pure functions of the rows (no I/O), so the audit runner and `twinaudit report`
//! compute the same summary from the same file. Rows come in results.jsonl order: a row's line
//! number is its position + 1 (the writer never leaves blank lines). Placebo controls never enter a
//! real rate; they only fill the `placebo*` fields. Every ranking breaks ties by pair id or key, so
//! the summary does not depend on the order workers finished in (only line numbers do).

pub mod compare;
pub mod confounders;
pub mod failures;
pub mod placebo;
pub mod slices;
pub mod summary;
pub mod text;

pub use summary::{summarise, Summary, SUMMARY_FORMAT_VERSION};
pub use text::{render_text, shortcut_findings};

use crate::audit::results::PairRecord;
use crate::stats::Rate;

/// Failed and judged counts of a set of pairs; error rows are counted apart.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub(crate) struct Tally {
    pub failed: u64,
    pub judged: u64,
    pub errors: u64,
}

impl Tally {
    pub fn add(&mut self, r: &PairRecord) {
        match r.verdict {
            Some(v) => {
                self.judged += 1;
                self.failed += !v.passed() as u64;
            }
            None => self.errors += 1,
        }
    }

    /// failed / judged with its Wilson interval.
    pub fn rate(&self, confidence: f64) -> Rate {
        Rate::new(self.failed, self.judged, confidence)
    }
}

#[cfg(test)]
pub(crate) mod testing {
    //! Hand-made results rows for the analysis unit tests.

    use crate::audit::checker::Verdict;
    use crate::audit::results::{PairRecord, RegionRef, Status, RESULTS_FORMAT_VERSION};
    use crate::model::Prediction;
    use crate::spec::{Expectation, QuestionKind};

    fn prediction(answer: &str, probability: f32) -> Prediction {
        Prediction {
            answer: answer.into(),
            probability,
            top_k: Vec::new(),
        }
    }

    /// A judged row: `verdict` decides the relation; `labels` are distractors unless the verdict
    /// belongs to a change pair.
    pub fn row(
        pair_id: &str,
        verdict: Verdict,
        labels: &[&str],
        after_probability: f32,
    ) -> PairRecord {
        let change = matches!(
            verdict,
            Verdict::MovedToExpected | Verdict::MovedElsewhere | Verdict::DidNotMove
        );
        let role = if change { "target" } else { "distractor" };
        PairRecord {
            format_version: RESULTS_FORMAT_VERSION,
            pair_id: pair_id.into(),
            case: pair_id.split('/').next().unwrap_or(pair_id).into(),
            edit: "e".into(),
            spec: "spec.json".into(),
            image: "i.png".into(),
            question: "What colour is the bowl?".into(),
            question_kind: QuestionKind::Colour,
            operation: "erase".into(),
            method: Some("telea".into()),
            role: role.into(),
            regions: labels
                .iter()
                .enumerate()
                .map(|(i, l)| RegionRef {
                    id: format!("r{i}"),
                    label: (*l).into(),
                    role: role.into(),
                })
                .collect(),
            n_case_regions: Some(5),
            area_fraction: Some(0.03),
            seed: 1,
            expectation: if change {
                Expectation::Change
            } else {
                Expectation::Same
            },
            expectation_derived: true,
            relation: if change { "change" } else { "same" }.into(),
            truth: Some("red".into()),
            status: Status::Ok,
            before: Some(prediction("red", 0.9)),
            before_correct: Some(true),
            after: Some(prediction(
                if verdict.passed() != change {
                    "red"
                } else {
                    "blue"
                },
                after_probability,
            )),
            verdict: Some(verdict),
            passed: Some(verdict.passed()),
            error: None,
            warnings: Vec::new(),
            edited_image: None,
            placebo_of: None,
            added_regions: Vec::new(),
        }
    }

    /// The placebo control of `real`, with its own verdict (`held` or `flipped`).
    pub fn placebo(real: &PairRecord, verdict: Verdict) -> PairRecord {
        PairRecord {
            pair_id: format!("{}~placebo", real.pair_id),
            placebo_of: Some(real.pair_id.clone()),
            expectation: Expectation::Same,
            expectation_derived: false,
            relation: "same".into(),
            status: Status::Ok,
            error: None,
            verdict: Some(verdict),
            passed: Some(verdict.passed()),
            ..real.clone()
        }
    }

    /// An error row.
    pub fn error_row(pair_id: &str) -> PairRecord {
        PairRecord {
            status: Status::Error,
            after: None,
            verdict: None,
            passed: None,
            error: Some("cannot read the image".into()),
            ..row(pair_id, Verdict::Held, &["cloth"], 0.5)
        }
    }
}
