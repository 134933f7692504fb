//! `twinaudit compare RUN_A RUN_B`: two runs on the same pairs (two models on one spec, or one
//! model before and after a change), matched by pair id (`case/edit`). Overall and per operation ×
//! role × question kind × relation: both failure rates with Wilson intervals, the paired
//! difference B − A with Newcombe's interval, McNemar's tests, and Holm-adjusted p-values across
//! the groups. Clean accuracy is compared the same way, paired by case; placebo controls form a
//! row of their own. Format: docs/compare.md.
//!
//! Invariants: only pairs judged in both runs enter a 2×2 table (error rows are counted beside
//! it, never as passes or failures); placebo controls never enter the real rows; every
//! difference is B − A; a matched pair is grouped by run A's row.

use std::collections::{BTreeMap, BTreeSet};
use std::path::PathBuf;

use serde::{Deserialize, Serialize};

use crate::audit::replay::{ReplayError, RunFolder};
use crate::audit::results::PairRecord;
use crate::audit::run_info::SpecFile;
use crate::spec::QuestionKind;
use crate::stats::multiple::holm_adjusted;
use crate::stats::paired::{mcnemar, newcombe_paired_difference, Difference, PairedCounts};
use crate::stats::Rate;

pub const COMPARE_FORMAT_VERSION: u32 = 1;
pub const DEFAULT_ALPHA: f64 = 0.05;

#[derive(Debug, thiserror::Error)]
pub enum CompareError {
    #[error("run {which}: {error}; give a folder written by `twinaudit run --out` (it holds run.json and results.jsonl)")]
    Run {
        which: &'static str,
        error: ReplayError,
    },
    #[error("run {which} ({dir}) has no pairs yet (results.jsonl holds no real edit rows); compare it once `twinaudit run` has judged some")]
    EmptyRun { which: &'static str, dir: PathBuf },
    #[error("no pair matches: run A ({dir_a}) has {n_a} pairs, e.g. {example_a:?}, run B ({dir_b}) has {n_b}, e.g. {example_b:?}, and they share no \"case/edit\" id; compare two runs of the same spec files (see \"specs\" in each run.json)")]
    NoMatchingPairs {
        dir_a: PathBuf,
        dir_b: PathBuf,
        n_a: usize,
        n_b: usize,
        example_a: String,
        example_b: String,
    },
    #[error("{name} must lie strictly between 0 and 1, got {value}")]
    Level { name: &'static str, value: f64 },
}

/// Validated levels: `confidence` of every interval, `alpha` of every significance flag.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CompareOptions {
    confidence: f64,
    alpha: f64,
}

impl CompareOptions {
    pub fn new(confidence: f64, alpha: f64) -> Result<CompareOptions, CompareError> {
        for (name, value) in [("confidence level", confidence), ("alpha", alpha)] {
            if !(value > 0.0 && value < 1.0) {
                return Err(CompareError::Level { name, value });
            }
        }
        Ok(CompareOptions { confidence, alpha })
    }

    pub fn confidence(&self) -> f64 {
        self.confidence
    }

    pub fn alpha(&self) -> f64 {
        self.alpha
    }
}

/// What `twinaudit compare` was asked to do.
#[derive(Debug, Clone)]
pub struct CompareConfig {
    pub run_a: PathBuf,
    pub run_b: PathBuf,
    pub options: CompareOptions,
}

/// The whole comparison (the `--json` output).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Comparison {
    pub format_version: u32,
    pub run_a: RunSide,
    pub run_b: RunSide,
    /// Level of every interval.
    pub confidence: f64,
    /// A row is significant when its decision p-value is ≤ alpha.
    pub alpha: f64,
    /// Always `"b_minus_a"`: every difference is run B's rate minus run A's.
    pub difference: String,
    /// Anything that weakens the pairing: different specs or seeds, unfinished runs, ...
    pub warnings: Vec<String>,
    pub pairs: PairMatching,
    /// Failure rates over every pair judged in both runs.
    pub overall: FailureComparison,
    /// One row per operation × role × question kind × relation (run A's); p-values
    /// Holm-adjusted across the rows with at least one pair judged in both runs.
    pub groups: Vec<GroupComparison>,
    /// Unedited answers equal to the truth, paired by case, per question kind (Holm-adjusted
    /// across the kinds).
    pub clean_accuracy: Vec<AccuracyComparison>,
    /// Clean accuracy over every case with a truth, all question kinds together (one test, not
    /// adjusted); null when no case has a truth in both runs.
    #[serde(default)]
    pub clean_accuracy_all: Option<PairedComparison>,
    /// Flip rates of placebo controls matched by pair id; null unless both runs have them.
    pub placebo: Option<FailureComparison>,
    /// Rows (overall, groups, clean accuracy, placebo) where B is significantly worse.
    pub n_rows_b_worse: u64,
    /// Rows where B is significantly better.
    pub n_rows_b_better: u64,
}

/// What a run was made from, as its run.json says.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RunSide {
    pub dir: String,
    pub model_path: String,
    pub model_sha256: String,
    pub seed: u64,
    pub specs: Vec<SpecFile>,
    /// False when run.json has no `finished_at` (still running, or killed).
    pub finished: bool,
    /// Real pairs in results.jsonl (placebo controls not counted).
    pub n_pairs: u64,
    pub n_placebos: u64,
}

/// How the two runs' real pairs line up.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PairMatching {
    pub n_in_both: u64,
    pub n_only_in_a: u64,
    pub n_only_in_b: u64,
    /// Pair ids only in run A, sorted.
    pub only_in_a: Vec<String>,
    pub only_in_b: Vec<String>,
    /// Pairs in both runs and judged in both: the n of `overall`.
    pub n_judged_in_both: u64,
    /// Pairs judged in B but an error row in A, sorted.
    pub errors_in_a_only: Vec<String>,
    /// Pairs judged in A but an error row in B, sorted.
    pub errors_in_b_only: Vec<String>,
    pub n_errors_in_both: u64,
    /// Among pairs judged in both: unedited answers that differ.
    pub n_before_answer_differs: u64,
    /// Among pairs judged in both: edited answers that differ.
    pub n_after_answer_differs: u64,
    /// Among pairs judged in both: verdicts that differ.
    pub n_verdict_differs: u64,
    /// Pairs whose operation, role, question kind or relation differ between the runs.
    pub n_group_differs: u64,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Outcome {
    /// Rates count failed pairs: a positive B − A means B is worse.
    Failed,
    /// Rates count correct answers: a positive B − A means B is better.
    Correct,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Finding {
    BWorse,
    BBetter,
    NoSignificantDifference,
}

/// One outcome compared on the same pairs (or cases): the paired 2×2 table and its statistics.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PairedComparison {
    pub outcome: Outcome,
    /// Pairs (cases, for accuracy) with an outcome in both runs: the n of every number below.
    pub n: u64,
    pub rate_a: Rate,
    pub rate_b: Rate,
    /// The outcome in both runs, in A only, in B only, in neither.
    pub n_both: u64,
    pub n_a_only: u64,
    pub n_b_only: u64,
    pub n_neither: u64,
    /// `rate_b − rate_a` with Newcombe's interval (method 10); null when n is 0.
    pub difference: Option<Difference>,
    /// McNemar exact two-sided binomial p (the decision test).
    pub p_exact: f64,
    /// McNemar χ² without and with continuity correction; null without discordant pairs.
    pub chi2: Option<f64>,
    pub p_chi2: f64,
    pub chi2_corrected: Option<f64>,
    pub p_chi2_corrected: f64,
    /// `p_exact` Holm-adjusted within the row's family (groups; clean accuracy); null for a
    /// single test (overall, placebo) and for rows with n = 0.
    pub p_exact_holm: Option<f64>,
    /// The decision p (`p_exact_holm` when present, else `p_exact`) is ≤ alpha and n > 0.
    pub significant: bool,
    pub finding: Finding,
}

/// Failure (or flip) rates of two runs on matched pairs, with the pairs that could not enter.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FailureComparison {
    /// Pairs present in both runs (judged or not).
    pub n_matched: u64,
    pub n_errors_in_a_only: u64,
    pub n_errors_in_b_only: u64,
    pub n_errors_in_both: u64,
    /// Among pairs judged in both: edited answers that differ.
    pub n_after_answer_differs: u64,
    pub failure: PairedComparison,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct GroupComparison {
    pub operation: String,
    pub role: String,
    pub question_kind: QuestionKind,
    pub relation: String,
    #[serde(flatten)]
    pub comparison: FailureComparison,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct AccuracyComparison {
    pub question_kind: QuestionKind,
    pub accuracy: PairedComparison,
}

/// Opens both run folders and compares them.
pub fn compare_runs(config: &CompareConfig) -> Result<Comparison, CompareError> {
    let open =
        |which, dir| RunFolder::open(dir).map_err(|error| CompareError::Run { which, error });
    let a = open("A", &config.run_a)?;
    let b = open("B", &config.run_b)?;
    compare_folders(&a, &b, config.options)
}

/// Outcome counts of one row: the paired 2×2 table plus the pairs that could not enter it.
#[derive(Debug, Default, Clone, Copy)]
struct Tally {
    both: u64,
    a_only: u64,
    b_only: u64,
    neither: u64,
    matched: u64,
    errors_a: u64,
    errors_b: u64,
    errors_both: u64,
    after_differs: u64,
}

impl Tally {
    fn add_outcomes(&mut self, in_a: bool, in_b: bool) {
        match (in_a, in_b) {
            (true, true) => self.both += 1,
            (true, false) => self.a_only += 1,
            (false, true) => self.b_only += 1,
            (false, false) => self.neither += 1,
        }
    }

    /// One pair present in both runs.
    fn add_pair(&mut self, ra: &PairRecord, rb: &PairRecord) {
        self.matched += 1;
        match (failed(ra), failed(rb)) {
            (Some(fa), Some(fb)) => {
                self.add_outcomes(fa, fb);
                self.after_differs += after_answer(ra).ne(&after_answer(rb)) as u64;
            }
            (None, Some(_)) => self.errors_a += 1,
            (Some(_), None) => self.errors_b += 1,
            (None, None) => self.errors_both += 1,
        }
    }

    fn n(&self) -> u64 {
        self.both + self.a_only + self.b_only + self.neither
    }

    fn paired(&self, outcome: Outcome, confidence: f64) -> PairedComparison {
        let n = self.n();
        let test = mcnemar(self.a_only, self.b_only);
        // PairedCounts' difference is first − second, so B goes first for B − A.
        let counts = PairedCounts {
            a: self.both,
            b: self.b_only,
            c: self.a_only,
            d: self.neither,
        };
        PairedComparison {
            outcome,
            n,
            rate_a: Rate::new(self.both + self.a_only, n, confidence),
            rate_b: Rate::new(self.both + self.b_only, n, confidence),
            n_both: self.both,
            n_a_only: self.a_only,
            n_b_only: self.b_only,
            n_neither: self.neither,
            difference: newcombe_paired_difference(counts, confidence),
            p_exact: test.p_exact,
            chi2: test.chi2,
            p_chi2: test.p_chi2,
            chi2_corrected: test.chi2_corrected,
            p_chi2_corrected: test.p_chi2_corrected,
            p_exact_holm: None,
            significant: false,
            finding: Finding::NoSignificantDifference,
        }
    }

    fn failure_comparison(&self, confidence: f64) -> FailureComparison {
        FailureComparison {
            n_matched: self.matched,
            n_errors_in_a_only: self.errors_a,
            n_errors_in_b_only: self.errors_b,
            n_errors_in_both: self.errors_both,
            n_after_answer_differs: self.after_differs,
            failure: self.paired(Outcome::Failed, confidence),
        }
    }
}

/// Whether a judged pair failed its expectation; `None` for an error row.
fn failed(r: &PairRecord) -> Option<bool> {
    r.verdict.map(|v| !v.passed())
}

fn after_answer(r: &PairRecord) -> Option<&str> {
    r.after.as_ref().map(|p| p.answer.as_str())
}

fn before_answer(r: &PairRecord) -> Option<&str> {
    r.before.as_ref().map(|p| p.answer.as_str())
}

/// Sets the decision of a row from its decision p-value.
fn decide(row: &mut PairedComparison, p_holm: Option<f64>, alpha: f64) {
    row.p_exact_holm = p_holm;
    let p = p_holm.unwrap_or(row.p_exact);
    row.significant = row.n > 0 && p <= alpha;
    let higher_b = row.difference.is_some_and(|d| d.value > 0.0);
    let lower_b = row.difference.is_some_and(|d| d.value < 0.0);
    row.finding = match (row.significant, row.outcome) {
        (false, _) => Finding::NoSignificantDifference,
        (true, Outcome::Failed) if higher_b => Finding::BWorse,
        (true, Outcome::Failed) if lower_b => Finding::BBetter,
        (true, Outcome::Correct) if higher_b => Finding::BBetter,
        (true, Outcome::Correct) if lower_b => Finding::BWorse,
        (true, _) => Finding::NoSignificantDifference,
    };
}

/// Holm-adjusts the rows with n > 0 as one family and decides every row.
fn decide_family<'a>(rows: impl Iterator<Item = &'a mut PairedComparison>, alpha: f64) {
    let mut rows: Vec<&mut PairedComparison> = rows.collect();
    let tested: Vec<usize> = (0..rows.len()).filter(|&i| rows[i].n > 0).collect();
    let raw: Vec<f64> = tested.iter().map(|&i| rows[i].p_exact).collect();
    let adjusted = holm_adjusted(&raw);
    for (row_idx, row) in rows.iter_mut().enumerate() {
        let p_holm = tested
            .iter()
            .position(|&i| i == row_idx)
            .map(|k| adjusted[k]);
        decide(row, p_holm, alpha);
    }
}

type GroupKey = (String, String, QuestionKind, String);

fn group_key(r: &PairRecord) -> GroupKey {
    (
        r.operation.clone(),
        r.role.clone(),
        r.question_kind,
        r.relation.clone(),
    )
}

/// Real pairs (`placebo == false`) or placebo controls by pair id.
fn rows_by_id(run: &RunFolder, placebo: bool) -> BTreeMap<&str, &PairRecord> {
    run.records
        .iter()
        .filter(|r| r.placebo_of.is_some() == placebo)
        .map(|r| (r.pair_id.as_str(), r))
        .collect()
}

fn run_side(run: &RunFolder) -> RunSide {
    let n_placebos = run
        .records
        .iter()
        .filter(|r| r.placebo_of.is_some())
        .count();
    RunSide {
        dir: run.dir.display().to_string(),
        model_path: run.info.model_path.clone(),
        model_sha256: run.info.model_sha256.clone(),
        seed: run.info.seed,
        specs: run.info.specs.clone(),
        finished: run.info.finished_at.is_some(),
        n_pairs: (run.records.len() - n_placebos) as u64,
        n_placebos: n_placebos as u64,
    }
}

/// Per case: the question kind and whether the unedited answer equals the truth (first real row
/// of the case that says).
fn clean_outcomes(run: &RunFolder) -> BTreeMap<&str, (QuestionKind, bool)> {
    let mut out = BTreeMap::new();
    for r in run.records.iter().filter(|r| r.placebo_of.is_none()) {
        if let Some(correct) = r.before_correct {
            out.entry(r.case.as_str())
                .or_insert((r.question_kind, correct));
        }
    }
    out
}

/// Compares two opened run folders.
pub fn compare_folders(
    a: &RunFolder,
    b: &RunFolder,
    options: CompareOptions,
) -> Result<Comparison, CompareError> {
    let confidence = options.confidence;
    let alpha = options.alpha;
    let real_a = rows_by_id(a, false);
    let real_b = rows_by_id(b, false);
    for (which, run, rows) in [("A", a, &real_a), ("B", b, &real_b)] {
        if rows.is_empty() {
            return Err(CompareError::EmptyRun {
                which,
                dir: run.dir.clone(),
            });
        }
    }
    if !real_a.keys().any(|id| real_b.contains_key(id)) {
        let first = |rows: &BTreeMap<&str, &PairRecord>| {
            rows.keys()
                .next()
                .map(|s| s.to_string())
                .unwrap_or_default()
        };
        return Err(CompareError::NoMatchingPairs {
            dir_a: a.dir.clone(),
            dir_b: b.dir.clone(),
            n_a: real_a.len(),
            n_b: real_b.len(),
            example_a: first(&real_a),
            example_b: first(&real_b),
        });
    }

    let mut pairs = PairMatching {
        n_in_both: 0,
        n_only_in_a: 0,
        n_only_in_b: 0,
        only_in_a: real_a
            .keys()
            .filter(|id| !real_b.contains_key(*id))
            .map(|s| s.to_string())
            .collect(),
        only_in_b: real_b
            .keys()
            .filter(|id| !real_a.contains_key(*id))
            .map(|s| s.to_string())
            .collect(),
        n_judged_in_both: 0,
        errors_in_a_only: Vec::new(),
        errors_in_b_only: Vec::new(),
        n_errors_in_both: 0,
        n_before_answer_differs: 0,
        n_after_answer_differs: 0,
        n_verdict_differs: 0,
        n_group_differs: 0,
    };
    pairs.n_only_in_a = pairs.only_in_a.len() as u64;
    pairs.n_only_in_b = pairs.only_in_b.len() as u64;

    let mut overall = Tally::default();
    let mut groups: BTreeMap<GroupKey, Tally> = BTreeMap::new();
    for (id, ra) in &real_a {
        let Some(rb) = real_b.get(id) else {
            continue;
        };
        pairs.n_in_both += 1;
        overall.add_pair(ra, rb);
        groups.entry(group_key(ra)).or_default().add_pair(ra, rb);
        pairs.n_group_differs += (group_key(ra) != group_key(rb)) as u64;
        match (failed(ra), failed(rb)) {
            (Some(_), Some(_)) => {
                pairs.n_judged_in_both += 1;
                pairs.n_before_answer_differs += (before_answer(ra) != before_answer(rb)) as u64;
                pairs.n_after_answer_differs += (after_answer(ra) != after_answer(rb)) as u64;
                pairs.n_verdict_differs += (ra.verdict != rb.verdict) as u64;
            }
            (None, Some(_)) => pairs.errors_in_a_only.push(id.to_string()),
            (Some(_), None) => pairs.errors_in_b_only.push(id.to_string()),
            (None, None) => pairs.n_errors_in_both += 1,
        }
    }

    let mut overall = overall.failure_comparison(confidence);
    decide(&mut overall.failure, None, alpha);
    let mut groups: Vec<GroupComparison> = groups
        .into_iter()
        .map(
            |((operation, role, question_kind, relation), tally)| GroupComparison {
                operation,
                role,
                question_kind,
                relation,
                comparison: tally.failure_comparison(confidence),
            },
        )
        .collect();
    decide_family(groups.iter_mut().map(|g| &mut g.comparison.failure), alpha);

    let clean_a = clean_outcomes(a);
    let clean_b = clean_outcomes(b);
    let mut by_kind: BTreeMap<QuestionKind, Tally> = BTreeMap::new();
    let mut all_kinds = Tally::default();
    for (case, (kind, correct_a)) in &clean_a {
        if let Some((_, correct_b)) = clean_b.get(case) {
            by_kind
                .entry(*kind)
                .or_default()
                .add_outcomes(*correct_a, *correct_b);
            all_kinds.add_outcomes(*correct_a, *correct_b);
        }
    }
    let clean_accuracy_all = (!by_kind.is_empty()).then(|| {
        let mut row = all_kinds.paired(Outcome::Correct, confidence);
        decide(&mut row, None, alpha);
        row
    });
    let mut clean_accuracy: Vec<AccuracyComparison> = by_kind
        .into_iter()
        .map(|(question_kind, tally)| AccuracyComparison {
            question_kind,
            accuracy: tally.paired(Outcome::Correct, confidence),
        })
        .collect();
    decide_family(clean_accuracy.iter_mut().map(|r| &mut r.accuracy), alpha);

    let placebo_a = rows_by_id(a, true);
    let placebo_b = rows_by_id(b, true);
    let placebo = if placebo_a.is_empty() || placebo_b.is_empty() {
        None
    } else {
        let mut tally = Tally::default();
        for (id, ra) in &placebo_a {
            if let Some(rb) = placebo_b.get(id) {
                tally.add_pair(ra, rb);
            }
        }
        let mut row = tally.failure_comparison(confidence);
        decide(&mut row.failure, None, alpha);
        Some(row)
    };

    let findings: Vec<Finding> = std::iter::once(&overall.failure)
        .chain(groups.iter().map(|g| &g.comparison.failure))
        .chain(clean_accuracy.iter().map(|r| &r.accuracy))
        .chain(clean_accuracy_all.iter())
        .chain(placebo.iter().map(|p| &p.failure))
        .map(|r| r.finding)
        .collect();
    let count = |f: Finding| findings.iter().filter(|&&x| x == f).count() as u64;

    Ok(Comparison {
        format_version: COMPARE_FORMAT_VERSION,
        run_a: run_side(a),
        run_b: run_side(b),
        confidence,
        alpha,
        difference: "b_minus_a".to_string(),
        warnings: warnings(a, b, &pairs, &placebo_a, &placebo_b),
        pairs,
        overall,
        groups,
        clean_accuracy,
        clean_accuracy_all,
        placebo,
        n_rows_b_worse: count(Finding::BWorse),
        n_rows_b_better: count(Finding::BBetter),
    })
}

fn warnings(
    a: &RunFolder,
    b: &RunFolder,
    pairs: &PairMatching,
    placebo_a: &BTreeMap<&str, &PairRecord>,
    placebo_b: &BTreeMap<&str, &PairRecord>,
) -> Vec<String> {
    let mut out = Vec::new();
    let hashes = |run: &RunFolder| -> BTreeSet<String> {
        run.info.specs.iter().map(|s| s.sha256.clone()).collect()
    };
    if hashes(a) != hashes(b) {
        let list = |run: &RunFolder| -> String {
            let names: Vec<String> = run
                .info
                .specs
                .iter()
                .map(|s| format!("{} ({:.12})", s.path, s.sha256))
                .collect();
            names.join(", ")
        };
        out.push(format!(
            "the runs used different spec files (A: {}; B: {}): a pair id may name a different edit in each run",
            list(a),
            list(b)
        ));
    }
    if a.info.seed != b.info.seed {
        out.push(format!(
            "run A used seed {}, run B seed {}: the edits' random choices differ, so a matched pair's edited image may differ between the runs",
            a.info.seed, b.info.seed
        ));
    }
    if pairs.n_group_differs > 0 {
        out.push(format!(
            "{} matched pairs have a different operation, role, question kind or relation in run B; they are grouped by run A's row",
            pairs.n_group_differs
        ));
    }
    for (which, run) in [("A", a), ("B", b)] {
        if run.info.finished_at.is_none() {
            out.push(format!(
                "run {which} ({}) has not finished (run.json has no finished_at): it is compared on the pairs written so far",
                run.dir.display()
            ));
        }
    }
    if placebo_a.is_empty() != placebo_b.is_empty() {
        let (with, without) = if placebo_a.is_empty() {
            ("B", "A")
        } else {
            ("A", "B")
        };
        out.push(format!(
            "run {with} has placebo controls and run {without} has none: placebos are not compared (run both with --placebo)"
        ));
    }
    out
}

/// `"3/26 (11.5%)"`.
fn share(count: u64, n: u64) -> String {
    if n == 0 {
        format!("{count}/0")
    } else {
        format!("{count}/{n} ({:.1}%)", 100.0 * count as f64 / n as f64)
    }
}

/// `"1 pair"`, `"14 pairs"`.
fn count_of(n: u64, noun: &str) -> String {
    if n == 1 {
        format!("1 {noun}")
    } else {
        format!("{n} {noun}s")
    }
}

/// A p-value with enough digits to be compared with alpha.
fn format_p(p: f64) -> String {
    if p < 1e-4 {
        format!("{p:.1e}")
    } else {
        format!("{p:.4}")
    }
}

fn finding_words(row: &PairedComparison) -> &'static str {
    match row.finding {
        Finding::BWorse => "significant, B worse",
        Finding::BBetter => "significant, B better",
        Finding::NoSignificantDifference => "not significant",
    }
}

/// Two lines for a paired row: the two rates and the difference, then the test.
fn paired_lines(row: &PairedComparison, indent: &str) -> String {
    let (verb, noun) = match row.outcome {
        Outcome::Failed => ("failed", "pair"),
        Outcome::Correct => ("correct", "case"),
    };
    let difference = row
        .difference
        .map_or_else(|| "n/a".to_string(), |d| d.describe());
    let p = match row.p_exact_holm {
        Some(h) => format!(
            "McNemar exact p {}, Holm-adjusted {}",
            format_p(row.p_exact),
            format_p(h)
        ),
        None => format!("McNemar exact p {}", format_p(row.p_exact)),
    };
    format!(
        "{indent}A {}   B {}   B − A {}\n{indent}{verb} in A only {}, in B only {} (of {}); {}: {}\n",
        row.rate_a.describe(),
        row.rate_b.describe(),
        difference,
        row.n_a_only,
        row.n_b_only,
        count_of(row.n, noun),
        p,
        finding_words(row)
    )
}

fn side_line(which: &str, s: &RunSide) -> String {
    let model = std::path::Path::new(&s.model_path).file_name().map_or_else(
        || s.model_path.clone(),
        |f| f.to_string_lossy().into_owned(),
    );
    format!(
        "run {which}: {}  model {} (sha256 {:.12}), seed {}, {} pairs{}{}\n",
        s.dir,
        model,
        s.model_sha256,
        s.seed,
        s.n_pairs,
        if s.n_placebos > 0 {
            format!(" + {} placebo controls", s.n_placebos)
        } else {
            String::new()
        },
        if s.finished { "" } else { ", not finished" }
    )
}

fn id_list(ids: &[String]) -> String {
    const SHOWN: usize = 5;
    let mut s = ids
        .iter()
        .take(SHOWN)
        .map(String::as_str)
        .collect::<Vec<_>>()
        .join(", ");
    if ids.len() > SHOWN {
        s.push_str(&format!(", ... ({} more)", ids.len() - SHOWN));
    }
    s
}

/// The human-readable report.
pub fn render_text(c: &Comparison) -> String {
    let mut out = String::new();
    out.push_str(&side_line("A", &c.run_a));
    out.push_str(&side_line("B", &c.run_b));
    out.push_str(&format!(
        "differences are B − A in percentage points with {:.0}% Newcombe intervals; rates with {:.0}% Wilson intervals; significant means McNemar exact p ≤ {} (Holm-adjusted within the group and accuracy tables)\n",
        100.0 * c.confidence,
        100.0 * c.confidence,
        c.alpha
    ));
    for w in &c.warnings {
        out.push_str(&format!("warning: {w}\n"));
    }
    let p = &c.pairs;
    out.push_str(&format!(
        "\npairs matched by case/edit: {} in both runs, {} only in A, {} only in B\n",
        p.n_in_both, p.n_only_in_a, p.n_only_in_b
    ));
    if !p.only_in_a.is_empty() {
        out.push_str(&format!("  only in A: {}\n", id_list(&p.only_in_a)));
    }
    if !p.only_in_b.is_empty() {
        out.push_str(&format!("  only in B: {}\n", id_list(&p.only_in_b)));
    }
    out.push_str(&format!(
        "judged in both: {} pairs; error rows in A only {}, in B only {}, in both {}\n",
        p.n_judged_in_both,
        p.errors_in_a_only.len(),
        p.errors_in_b_only.len(),
        p.n_errors_in_both
    ));
    if !p.errors_in_a_only.is_empty() {
        out.push_str(&format!(
            "  error in A, judged in B: {}\n",
            id_list(&p.errors_in_a_only)
        ));
    }
    if !p.errors_in_b_only.is_empty() {
        out.push_str(&format!(
            "  error in B, judged in A: {}\n",
            id_list(&p.errors_in_b_only)
        ));
    }
    let n = p.n_judged_in_both;
    out.push_str(&format!(
        "answers on pairs judged in both: unedited answer differs on {}, edited answer on {}, verdict on {}\n",
        share(p.n_before_answer_differs, n),
        share(p.n_after_answer_differs, n),
        share(p.n_verdict_differs, n)
    ));

    out.push_str("\noverall failure rate (failed / judged in both runs)\n");
    out.push_str(&paired_lines(&c.overall.failure, "  "));

    if !c.clean_accuracy.is_empty() {
        out.push_str(
            "\nclean accuracy (unedited answer equals the truth, one per case; B − A > 0: B more accurate)\n",
        );
        if let Some(all) = &c.clean_accuracy_all {
            out.push_str("  all questions\n");
            out.push_str(&paired_lines(all, "    "));
        }
        for r in &c.clean_accuracy {
            out.push_str(&format!("  {} questions\n", r.question_kind.as_str()));
            out.push_str(&paired_lines(&r.accuracy, "    "));
        }
    }

    if let Some(pl) = &c.placebo {
        out.push_str(&format!(
            "\nplacebo controls (flip rate; {} matched, {} judged in both)\n",
            pl.n_matched, pl.failure.n
        ));
        out.push_str(&paired_lines(&pl.failure, "  "));
    }

    let n_tested = c
        .groups
        .iter()
        .filter(|g| g.comparison.failure.n > 0)
        .count();
    out.push_str(&format!(
        "\nby operation / role / question kind / expected relation (failure rate; for \"same\" rows the flip rate; Holm over {n_tested} groups)\n"
    ));
    for g in &c.groups {
        let f = &g.comparison;
        let mut extra = Vec::new();
        if f.n_errors_in_a_only + f.n_errors_in_b_only + f.n_errors_in_both > 0 {
            extra.push(format!(
                "error rows in A only {}, in B only {}, in both {}",
                f.n_errors_in_a_only, f.n_errors_in_b_only, f.n_errors_in_both
            ));
        }
        extra.push(format!(
            "edited answer differs on {}",
            share(f.n_after_answer_differs, f.failure.n)
        ));
        out.push_str(&format!(
            "  {} / {} / {} / {}: {} in both runs; {}\n",
            g.operation,
            g.role,
            g.question_kind.as_str(),
            g.relation,
            count_of(f.n_matched, "pair"),
            extra.join("; ")
        ));
        out.push_str(&paired_lines(&f.failure, "    "));
    }
    out.push_str(&format!(
        "\nB is significantly worse in {} row(s) and significantly better in {} row(s) (overall, groups, clean accuracy, placebo)\n",
        c.n_rows_b_worse, c.n_rows_b_better
    ));
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    fn row(outcome: Outcome, a_only: u64, b_only: u64) -> PairedComparison {
        let t = Tally {
            a_only,
            b_only,
            neither: 3,
            ..Tally::default()
        };
        t.paired(outcome, 0.95)
    }

    /// The direction of a finding depends on what the rates count: more failures in B is worse,
    /// more correct answers in B is better. 0 vs 8 discordant pairs: exact p = 2^−7.
    #[test]
    fn findings_follow_the_outcome_direction() {
        let cases = [
            (Outcome::Failed, 0, 8, Finding::BWorse),
            (Outcome::Failed, 8, 0, Finding::BBetter),
            (Outcome::Correct, 0, 8, Finding::BBetter),
            (Outcome::Correct, 8, 0, Finding::BWorse),
            (Outcome::Failed, 2, 3, Finding::NoSignificantDifference),
        ];
        for (outcome, a_only, b_only, want) in cases {
            let mut r = row(outcome, a_only, b_only);
            decide(&mut r, None, 0.05);
            assert_eq!(r.finding, want, "{outcome:?} {a_only} {b_only}");
        }
    }

    /// Holm within a family: rows with n = 0 are left out of the count and get no adjusted p.
    #[test]
    fn empty_rows_stay_out_of_the_family() {
        let mut rows = [
            row(Outcome::Failed, 0, 8),
            Tally::default().paired(Outcome::Failed, 0.95),
            row(Outcome::Failed, 0, 7),
        ];
        decide_family(rows.iter_mut(), 0.05);
        let p = |k: u32| 2.0 * 0.5f64.powi(k as i32);
        assert!((rows[0].p_exact_holm.unwrap() - 2.0 * p(8)).abs() < 1e-12);
        assert!((rows[2].p_exact_holm.unwrap() - p(7).max(2.0 * p(8))).abs() < 1e-12);
        assert_eq!(rows[1].p_exact_holm, None);
        assert!(!rows[1].significant);
    }
}
