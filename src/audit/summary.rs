//! summary.json: counts and rates with Wilson intervals, recomputed from results.jsonl rows
//! (never from partial averages), so a resumed run summarises exactly like an uninterrupted one.
//!
//! Placebo controls (`--placebo`) never enter the real rates: every count and rate outside the
//! `placebo` fields is computed from real pairs only, so adding placebos leaves them unchanged.

use std::collections::{BTreeMap, HashMap, HashSet};

use serde::{Deserialize, Serialize};

use super::checker::Verdict;
use super::results::{PairRecord, Status};
use crate::spec::QuestionKind;
use crate::stats::Rate;

pub const SUMMARY_FORMAT_VERSION: u32 = 1;

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
    /// Distractor labels ranked by the flip rate their edits cause, per question kind (pairs
    /// whose edited regions are all distractors of one label), highest first.
    pub distractor_labels: Vec<LabelRow>,
    /// One row per operation × role × question kind × relation.
    pub groups: Vec<GroupRow>,
    /// Placebo controls over the whole run; absent when the run had none.
    #[serde(default)]
    pub placebo: Option<PlaceboTotals>,
}

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

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct LabelRow {
    pub question_kind: QuestionKind,
    pub label: String,
    /// flipped / judged over every edit of this label (all operations).
    pub flip_rate: Rate,
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

pub fn summarise(all_records: &[PairRecord], confidence: f64) -> Summary {
    let (placebos, real): (Vec<&PairRecord>, Vec<&PairRecord>) =
        all_records.iter().partition(|r| r.placebo_of.is_some());
    let records = &real[..];
    let judged: Vec<&PairRecord> = records
        .iter()
        .copied()
        .filter(|r| r.status == Status::Ok)
        .collect();
    let n_failed = judged.iter().filter(|r| r.passed == Some(false)).count() as u64;

    let mut accuracy: BTreeMap<QuestionKind, (u64, u64)> = BTreeMap::new();
    let mut seen_cases = HashSet::new();
    for r in records.iter().copied() {
        if let Some(correct) = r.before_correct {
            if seen_cases.insert(r.case.as_str()) {
                let e = accuracy.entry(r.question_kind).or_default();
                e.0 += correct as u64;
                e.1 += 1;
            }
        }
    }

    let mut kind_role: BTreeMap<(QuestionKind, String), (u64, u64)> = BTreeMap::new();
    for r in &judged {
        let e = kind_role
            .entry((r.question_kind, r.role.clone()))
            .or_default();
        e.0 += (r.passed == Some(false)) as u64;
        e.1 += 1;
    }
    let by_kind_and_role = kind_role
        .into_iter()
        .map(|((question_kind, role), (fail, n))| KindRoleRow {
            question_kind,
            role,
            failure_rate: Rate::new(fail, n, confidence),
        })
        .collect();

    let mut labels: BTreeMap<(QuestionKind, String), (u64, u64)> = BTreeMap::new();
    for r in judged.iter().filter(|r| r.role == "distractor") {
        let Some(first) = r.regions.first() else {
            continue;
        };
        if r.regions.iter().all(|g| g.label == first.label) {
            let e = labels
                .entry((r.question_kind, first.label.clone()))
                .or_default();
            e.0 += (r.passed == Some(false)) as u64;
            e.1 += 1;
        }
    }
    let mut distractor_labels: Vec<LabelRow> = labels
        .into_iter()
        .map(|((question_kind, label), (flipped, n))| LabelRow {
            question_kind,
            label,
            flip_rate: Rate::new(flipped, n, confidence),
        })
        .collect();
    distractor_labels.sort_by(|a, b| {
        let key = |r: &LabelRow| r.flip_rate.value.unwrap_or(0.0);
        key(b)
            .total_cmp(&key(a))
            .then_with(|| (a.question_kind, &a.label).cmp(&(b.question_kind, &b.label)))
    });

    type Key = (String, String, QuestionKind, String);
    let key_of = |r: &PairRecord| -> Key {
        (
            r.operation.clone(),
            r.role.clone(),
            r.question_kind,
            r.relation.clone(),
        )
    };
    let mut groups: BTreeMap<Key, Vec<&PairRecord>> = BTreeMap::new();
    for r in records.iter().copied() {
        groups.entry(key_of(r)).or_default().push(r);
    }
    // A placebo belongs to the group of the real pair it copies (its own relation is `same`).
    let real_by_id: HashMap<&str, &PairRecord> =
        records.iter().map(|r| (r.pair_id.as_str(), *r)).collect();
    let mut placebo_flips: BTreeMap<Key, (u64, u64)> = BTreeMap::new();
    for p in &placebos {
        let Some(real) = p.placebo_of.as_deref().and_then(|id| real_by_id.get(id)) else {
            continue;
        };
        let e = placebo_flips.entry(key_of(real)).or_default();
        if let Some(v) = p.verdict {
            e.0 += !v.passed() as u64;
            e.1 += 1;
        }
    }
    let groups = groups
        .into_iter()
        .map(|(key, rows)| {
            let placebo_flip_rate = placebo_flips
                .get(&key)
                .map(|&(flipped, n)| Rate::new(flipped, n, confidence));
            let (operation, role, question_kind, relation) = key;
            let mut verdicts: BTreeMap<String, u64> = BTreeMap::new();
            let mut n_judged = 0;
            let mut n_fail = 0;
            for r in &rows {
                if let Some(v) = r.verdict {
                    *verdicts.entry(v.as_str().to_string()).or_default() += 1;
                    n_judged += 1;
                    n_fail += !v.passed() as u64;
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
                n_errors: rows.iter().filter(|r| r.status == Status::Error).count() as u64,
                verdicts,
                failure_rate: Rate::new(n_fail, n_judged, confidence),
                placebo_flip_rate,
            }
        })
        .collect();

    Summary {
        format_version: SUMMARY_FORMAT_VERSION,
        confidence,
        n_pairs: records.len() as u64,
        n_judged: judged.len() as u64,
        n_errors: (records.len() - judged.len()) as u64,
        failure_rate: Rate::new(n_failed, judged.len() as u64, confidence),
        original_accuracy: accuracy
            .into_iter()
            .map(|(question_kind, (c, n))| AccuracyRow {
                question_kind,
                accuracy: Rate::new(c, n, confidence),
            })
            .collect(),
        by_kind_and_role,
        distractor_labels,
        groups,
        placebo: placebo_totals(&placebos, confidence),
    }
}

fn placebo_totals(placebos: &[&PairRecord], confidence: f64) -> Option<PlaceboTotals> {
    if placebos.is_empty() {
        return None;
    }
    let judged: Vec<_> = placebos.iter().filter_map(|r| r.verdict).collect();
    let flipped = judged.iter().filter(|v| !v.passed()).count() as u64;
    Some(PlaceboTotals {
        n_pairs: placebos.len() as u64,
        n_judged: judged.len() as u64,
        n_errors: placebos
            .iter()
            .filter(|r| r.status == Status::Error)
            .count() as u64,
        flip_rate: Rate::new(flipped, judged.len() as u64, confidence),
    })
}

/// A short human-readable table of the summary.
pub fn render_text(s: &Summary) -> String {
    let mut out = String::new();
    out.push_str(&format!(
        "{} pairs: {} judged, {} errors. Failure rate {} ({:.0}% Wilson intervals)\n",
        s.n_pairs,
        s.n_judged,
        s.n_errors,
        s.failure_rate.describe(),
        100.0 * s.confidence
    ));
    if let Some(p) = &s.placebo {
        out.push_str(&format!(
            "placebo controls (same edit on free background, must hold): {} pairs, {} errors, flip rate {}\n",
            p.n_pairs,
            p.n_errors,
            p.flip_rate.describe()
        ));
    }
    for a in &s.original_accuracy {
        out.push_str(&format!(
            "original accuracy, {} questions: {}\n",
            a.question_kind.as_str(),
            a.accuracy.describe()
        ));
    }
    if !s.by_kind_and_role.is_empty() {
        out.push_str(
            "\nby question kind and edited role (distractor rows: the answer must hold)\n",
        );
        for r in &s.by_kind_and_role {
            let what = if r.role == "distractor" {
                "flip rate"
            } else {
                "failure rate"
            };
            out.push_str(&format!(
                "  {:<8} {:<11} {:<13} {}\n",
                r.question_kind.as_str(),
                r.role,
                what,
                r.failure_rate.describe()
            ));
        }
    }
    if !s.distractor_labels.is_empty() {
        out.push_str("\ndistractors ranked by the flip rate their edits cause\n");
        for r in s.distractor_labels.iter().take(6) {
            out.push_str(&format!(
                "  {:<8} {:<14} {}\n",
                r.question_kind.as_str(),
                r.label,
                r.flip_rate.describe()
            ));
        }
    }
    for line in shortcut_findings(s) {
        out.push_str(&format!("  finding: {line}\n"));
    }
    out.push_str(&format!(
        "\n{:<10} {:<11} {:<8} {:<7} {:>6}  {}\n",
        "operation",
        "role",
        "question",
        "expect",
        "pairs",
        if s.placebo.is_some() {
            "failure rate [interval] (failed/judged) | placebo flip rate"
        } else {
            "failure rate [interval] (failed/judged)"
        }
    ));
    for g in &s.groups {
        let what = if g.relation == "same" {
            "flipped"
        } else {
            "did not reach expected"
        };
        let placebo = match (&s.placebo, &g.placebo_flip_rate) {
            (None, _) => String::new(),
            (Some(_), Some(rate)) => format!(" | placebo {}", rate.describe()),
            (Some(_), None) => " | placebo none".to_string(),
        };
        out.push_str(&format!(
            "{:<10} {:<11} {:<8} {:<7} {:>6}  {} {}{}{}\n",
            g.operation,
            g.role,
            g.question_kind.as_str(),
            g.relation,
            g.n_pairs,
            g.failure_rate.describe(),
            what,
            if g.n_errors > 0 {
                format!(", {} errors", g.n_errors)
            } else {
                String::new()
            },
            placebo
        ));
    }
    out
}

/// Distractor labels whose flip rate lies wholly above some target-edit failure rate (the two
/// Wilson intervals do not overlap): editing what the question is *not* about moves the answer
/// more often than editing what it is about fails to.
pub fn shortcut_findings(s: &Summary) -> Vec<String> {
    let mut out = Vec::new();
    for d in &s.distractor_labels {
        let Some(d_low) = d.flip_rate.low else {
            continue;
        };
        let below: Vec<String> = s
            .by_kind_and_role
            .iter()
            .filter(|t| t.role == "target" && t.failure_rate.high.is_some_and(|h| h < d_low))
            .map(|t| format!("{} {}", t.question_kind.as_str(), t.failure_rate.describe()))
            .collect();
        if !below.is_empty() {
            out.push(format!(
                "{} answers flip on {} of edits to the {:?} distractor, more often than target edits fail ({}): the model likely reads the {} instead of the asked object",
                d.question_kind.as_str(),
                d.flip_rate.describe(),
                d.label,
                below.join("; "),
                d.label
            ));
        }
    }
    out
}
