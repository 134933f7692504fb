//! Confident failures: the real pairs whose wrong answer after the edit came with the highest
//! probability, the first place to look when reviewing a run.
//!
//! Two lists of at most [`TOP_N_FAILURES`]: `flipped` (`same` pairs whose answer changed) and
//! `did_not_move` (`change` pairs whose answer stayed), each ranked by the after answer's
//! probability, highest first, ties by pair id. Placebo controls are left out.

use serde::{Deserialize, Serialize};

use crate::audit::checker::Verdict;
use crate::audit::results::PairRecord;
use crate::spec::QuestionKind;

/// Entries kept per list.
pub const TOP_N_FAILURES: usize = 20;

#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct ConfidentFailures {
    /// Most entries per list ([`TOP_N_FAILURES`]); 0 when read from a format 1 file.
    pub top_n: usize,
    /// `same` pairs that flipped.
    pub flipped: Vec<FailureEntry>,
    /// `change` pairs with verdict `did_not_move`.
    pub did_not_move: Vec<FailureEntry>,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct AnswerAt {
    pub answer: String,
    pub probability: f32,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FailureEntry {
    pub pair_id: String,
    /// 1-based line of the pair in results.jsonl.
    pub results_line: usize,
    pub question: String,
    pub question_kind: QuestionKind,
    pub operation: String,
    pub role: String,
    /// Labels of the edited regions, in the row's order.
    pub labels: Vec<String>,
    pub truth: Option<String>,
    pub before: AnswerAt,
    pub after: AnswerAt,
    pub verdict: Verdict,
    /// Saved edit, relative to the run folder, when the run kept it.
    pub edited_image: Option<String>,
}

fn entry(line: usize, r: &PairRecord) -> Option<FailureEntry> {
    let at = |p: &crate::model::Prediction| AnswerAt {
        answer: p.answer.clone(),
        probability: p.probability,
    };
    Some(FailureEntry {
        pair_id: r.pair_id.clone(),
        results_line: line,
        question: r.question.clone(),
        question_kind: r.question_kind,
        operation: r.operation.clone(),
        role: r.role.clone(),
        labels: r.regions.iter().map(|g| g.label.clone()).collect(),
        truth: r.truth.clone(),
        before: at(r.before.as_ref()?),
        after: at(r.after.as_ref()?),
        verdict: r.verdict?,
        edited_image: r.edited_image.clone(),
    })
}

fn top(all: &[PairRecord], verdict: Verdict) -> Vec<FailureEntry> {
    let mut entries: Vec<FailureEntry> = all
        .iter()
        .enumerate()
        .filter(|(_, r)| r.placebo_of.is_none() && r.verdict == Some(verdict))
        .filter_map(|(i, r)| entry(i + 1, r))
        .collect();
    entries.sort_by(|a, b| {
        b.after
            .probability
            .total_cmp(&a.after.probability)
            .then_with(|| a.pair_id.cmp(&b.pair_id))
    });
    entries.truncate(TOP_N_FAILURES);
    entries
}

/// From every row of results.jsonl, in file order (for the line numbers).
pub(crate) fn confident_failures(all: &[PairRecord]) -> ConfidentFailures {
    ConfidentFailures {
        top_n: TOP_N_FAILURES,
        flipped: top(all, Verdict::Flipped),
        did_not_move: top(all, Verdict::DidNotMove),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::analysis::testing::{placebo, row};
    use crate::audit::checker::Verdict::{DidNotMove, Flipped, Held};

    #[test]
    fn ranked_by_after_probability_with_file_line_numbers() {
        let a = row("a/e", Flipped, &["cloth"], 0.7);
        let rows = vec![
            a.clone(),
            placebo(&a, Flipped),
            row("b/e", Flipped, &["cloth"], 0.95),
            row("c/e", Held, &["cloth"], 0.99),
            row("d/e", DidNotMove, &["bowl"], 0.6),
            row("e/e", Flipped, &["tag"], 0.95),
        ];
        let cf = confident_failures(&rows);
        let flipped: Vec<(&str, usize)> = cf
            .flipped
            .iter()
            .map(|e| (e.pair_id.as_str(), e.results_line))
            .collect();
        // Ties broken by pair id; the placebo (line 2) never listed but still counted as a line.
        assert_eq!(flipped, [("b/e", 3), ("e/e", 6), ("a/e", 1)]);
        assert_eq!(cf.did_not_move.len(), 1);
        assert_eq!(cf.did_not_move[0].results_line, 5);
        assert_eq!(cf.did_not_move[0].after.answer, "red");
        assert_eq!(cf.top_n, TOP_N_FAILURES);
    }

    #[test]
    fn lists_stop_at_top_n() {
        let rows: Vec<_> = (0..TOP_N_FAILURES + 5)
            .map(|i| row(&format!("p{i:03}/e"), Flipped, &["cloth"], i as f32 / 100.0))
            .collect();
        let cf = confident_failures(&rows);
        assert_eq!(cf.flipped.len(), TOP_N_FAILURES);
        assert_eq!(
            cf.flipped[0].pair_id,
            format!("p{:03}/e", TOP_N_FAILURES + 4)
        );
    }
}
