//! Which rows the dataset gets: the label of every pair, the options that leave pairs out, the
//! cap per source image, the split and the balance of change and same pairs.
//!
//! Invariants: a label is never the model's answer: a `change` row is labelled with its expected
//! answer and a `same` or `original` row with the case's ground truth; a pair whose label is not
//! known is skipped and counted, never guessed. Every source image (identified by the sha256 of
//! its file, so one picture under two names is still one source) lies in exactly one split. Every
//! choice is a function of the seed and ids only (never of file order or thread timing), and the
//! rows come out sorted by split and file name.

use std::collections::{BTreeMap, BTreeSet, HashMap};

use crate::audit::results::{PairRecord, Status};
use crate::audit::runner::pair_seed;
use crate::spec::Expectation;

/// A dataset split; its folder name is [`Split::as_str`].
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum Split {
    Train,
    Validation,
}

impl Split {
    pub const ALL: [Split; 2] = [Split::Train, Split::Validation];

    pub fn as_str(self) -> &'static str {
        match self {
            Split::Train => "train",
            Split::Validation => "validation",
        }
    }
}

/// What a row's image is with respect to its source image.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum Relation {
    /// An edit that should move the answer; labelled with the expected answer.
    Change,
    /// An edit that should leave the answer as it is; labelled with the ground truth.
    Same,
    /// The unedited image (`--originals`); labelled with the ground truth.
    Original,
}

impl Relation {
    pub fn as_str(self) -> &'static str {
        match self {
            Relation::Change => "change",
            Relation::Same => "same",
            Relation::Original => "original",
        }
    }
}

/// Why a pair (or an original) has no row. `Skip*` reasons mean no sure label or no image;
/// `LeftOut*` reasons are options. Each pair is counted once, under the first reason that applies
/// in the order of this enum.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum Reason {
    /// A placebo control (kept only with `--placebo`).
    LeftOutPlacebo,
    /// The run could not judge the pair (`status: error`).
    SkipErrorRow,
    /// A `change` expectation with no specific answer: the new answer is not known.
    SkipChangeWithoutAnswer,
    /// A `same` pair of a case without ground truth.
    SkipSameWithoutTruth,
    /// The source image could not be read.
    SkipSourceUnreadable,
    /// `--only-failed`: the model passed this pair.
    LeftOutModelPassed,
    /// `--only-wrong`: the model's answer on the edited image equals the row's label.
    LeftOutModelRight,
    /// Beyond `--max-per-image` pairs of one source image.
    LeftOutOverCap,
    /// Dropped by `--balance` from the larger relation of its split.
    LeftOutBalance,
    /// `--originals` for a case without ground truth.
    SkipOriginalWithoutTruth,
}

impl Reason {
    pub fn as_str(self) -> &'static str {
        match self {
            Reason::LeftOutPlacebo => "placebo_control",
            Reason::SkipErrorRow => "error_row",
            Reason::SkipChangeWithoutAnswer => "change_without_answer",
            Reason::SkipSameWithoutTruth => "same_without_truth",
            Reason::SkipSourceUnreadable => "source_unreadable",
            Reason::LeftOutModelPassed => "model_passed",
            Reason::LeftOutModelRight => "model_right",
            Reason::LeftOutOverCap => "over_cap",
            Reason::LeftOutBalance => "balance",
            Reason::SkipOriginalWithoutTruth => "original_without_truth",
        }
    }

    /// True for reasons set by an option, false for pairs that cannot become a correct row.
    pub fn is_option(self) -> bool {
        matches!(
            self,
            Reason::LeftOutPlacebo
                | Reason::LeftOutModelPassed
                | Reason::LeftOutModelRight
                | Reason::LeftOutOverCap
                | Reason::LeftOutBalance
        )
    }
}

/// The options that decide which rows are kept (validated by `PairsConfig::check`).
#[derive(Debug, Clone, PartialEq)]
pub struct SelectOptions {
    pub seed: u64,
    /// Share of source images in validation, in [0, 1); 0 writes train only.
    pub validation_fraction: f64,
    pub include_originals: bool,
    /// Keep only pairs the audit judged failed (verdict, docs/results.md).
    pub only_failed: bool,
    /// Keep only pairs whose answer on the edited image differs from the row's label.
    pub only_wrong: bool,
    pub balance: bool,
    pub max_per_image: Option<usize>,
    pub include_placebo: bool,
}

/// Share of source images in validation when no option says otherwise.
pub const DEFAULT_VALIDATION_FRACTION: f64 = 0.2;

impl SelectOptions {
    /// Every pair with a sure label, no originals or placebos, the default split.
    pub fn with_seed(seed: u64) -> SelectOptions {
        SelectOptions {
            seed,
            validation_fraction: DEFAULT_VALIDATION_FRACTION,
            include_originals: false,
            only_failed: false,
            only_wrong: false,
            balance: false,
            max_per_image: None,
            include_placebo: false,
        }
    }
}

/// The source image of a case: its path as the run's spec resolved it and its content hash.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Source {
    pub image: String,
    pub sha256: String,
}

/// One row of the dataset. `record_idx` points into the run's records: for an original, any
/// record of its case (they share question, truth and image).
#[derive(Debug, Clone, PartialEq)]
pub struct Row {
    pub split: Split,
    pub file_name: String,
    pub record_idx: usize,
    pub relation: Relation,
    pub answer: String,
}

#[derive(Debug, Clone, PartialEq, Default)]
pub struct Selection {
    /// Sorted by split, then file name.
    pub rows: Vec<Row>,
    pub not_kept: BTreeMap<Reason, usize>,
    /// `same` rows whose unedited image the model answered wrongly: their label (the truth)
    /// differs from what the model's own `same` expectation held fixed.
    pub n_same_on_misanswered: usize,
    /// Cases a source-unreadable reason came from, with the message.
    pub unreadable: Vec<(String, String)>,
}

/// File name of a pair's image: the pair id with `/` as `~` (ids never contain `~` or `/`, and a
/// placebo's id ends in `~placebo`), so names are unique and never equal an original's.
pub fn pair_file_name(pair_id: &str) -> String {
    format!("{}.png", pair_id.replace('/', "~"))
}

/// File name of a case's unedited image.
pub fn original_file_name(case: &str) -> String {
    format!("{case}.png")
}

fn count(not_kept: &mut BTreeMap<Reason, usize>, reason: Reason) {
    *not_kept.entry(reason).or_insert(0) += 1;
}

/// A number in [0, 1) drawn from the seed, a purpose and a key (sha256, as for pair seeds).
fn unit_score(seed: u64, purpose: &str, key: &str) -> f64 {
    (pair_seed(seed, &format!("{purpose}:{key}")) >> 11) as f64 / (1u64 << 53) as f64
}

/// The label of one pair, or why it has none.
fn label(record: &PairRecord, options: &SelectOptions) -> Result<(Relation, String), Reason> {
    if record.placebo_of.is_some() && !options.include_placebo {
        return Err(Reason::LeftOutPlacebo);
    }
    if record.status == Status::Error {
        return Err(Reason::SkipErrorRow);
    }
    let labelled = match &record.expectation {
        Expectation::Answer(answer) => (Relation::Change, answer.clone()),
        Expectation::Change => return Err(Reason::SkipChangeWithoutAnswer),
        Expectation::Same => match &record.truth {
            Some(truth) => (Relation::Same, truth.clone()),
            None => return Err(Reason::SkipSameWithoutTruth),
        },
    };
    if options.only_failed && record.passed != Some(false) {
        return Err(Reason::LeftOutModelPassed);
    }
    // A verdict compares the model with itself (held, moved); this compares it with the label.
    if options.only_wrong && record.after.as_ref().map(|a| &a.answer) == Some(&labelled.1) {
        return Err(Reason::LeftOutModelRight);
    }
    Ok(labelled)
}

/// Source images in validation: those whose score lies below the fraction, so an image's split
/// depends only on its content and the seed. When that leaves a split empty although there are
/// at least two sources, the source nearest the boundary moves over (tiny runs only).
fn validation_sources(sources: &BTreeSet<&str>, options: &SelectOptions) -> BTreeSet<String> {
    if options.validation_fraction <= 0.0 {
        return BTreeSet::new();
    }
    let mut scored: Vec<(f64, &str)> = sources
        .iter()
        .map(|s| (unit_score(options.seed, "split", s), *s))
        .collect();
    scored.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(b.1)));
    let mut n_validation = scored
        .iter()
        .filter(|(u, _)| *u < options.validation_fraction)
        .count();
    if scored.len() >= 2 {
        n_validation = n_validation.clamp(1, scored.len() - 1);
    }
    scored[..n_validation]
        .iter()
        .map(|(_, s)| s.to_string())
        .collect()
}

/// Chooses every row. `sources` maps a case id to its source image, or to the message of why
/// the image could not be read.
pub fn select(
    records: &[PairRecord],
    sources: &HashMap<String, Result<Source, String>>,
    options: &SelectOptions,
) -> Selection {
    let mut selection = Selection::default();
    // (source sha256, pair candidates as (record idx, relation, answer))
    let mut by_source: BTreeMap<&str, Vec<(usize, Relation, String)>> = BTreeMap::new();
    let mut reported_unreadable = BTreeSet::new();
    for (idx, record) in records.iter().enumerate() {
        let (relation, answer) = match label(record, options) {
            Ok(labelled) => labelled,
            Err(reason) => {
                count(&mut selection.not_kept, reason);
                continue;
            }
        };
        match sources.get(&record.case) {
            Some(Ok(source)) => by_source
                .entry(source.sha256.as_str())
                .or_default()
                .push((idx, relation, answer)),
            other => {
                count(&mut selection.not_kept, Reason::SkipSourceUnreadable);
                if reported_unreadable.insert(record.case.clone()) {
                    let message = match other {
                        Some(Err(m)) => m.clone(),
                        _ => "the case is not in the run's specs".into(),
                    };
                    selection.unreadable.push((record.case.clone(), message));
                }
            }
        }
    }

    if let Some(cap) = options.max_per_image {
        for candidates in by_source.values_mut() {
            if candidates.len() > cap {
                candidates.sort_by(|a, b| {
                    let score = |i: usize| unit_score(options.seed, "cap", &records[i].pair_id);
                    score(a.0).total_cmp(&score(b.0)).then(a.0.cmp(&b.0))
                });
                for _ in cap..candidates.len() {
                    count(&mut selection.not_kept, Reason::LeftOutOverCap);
                }
                candidates.truncate(cap);
            }
        }
    }

    let source_keys: BTreeSet<&str> = by_source.keys().copied().collect();
    let validation = validation_sources(&source_keys, options);
    let mut per_split: BTreeMap<Split, Vec<(usize, Relation, String)>> = BTreeMap::new();
    for (sha, candidates) in by_source {
        let split = if validation.contains(sha) {
            Split::Validation
        } else {
            Split::Train
        };
        per_split.entry(split).or_default().extend(candidates);
    }

    if options.balance {
        for candidates in per_split.values_mut() {
            let n_of = |rel: Relation| candidates.iter().filter(|c| c.1 == rel).count();
            let keep = n_of(Relation::Change).min(n_of(Relation::Same));
            for relation in [Relation::Change, Relation::Same] {
                let mut of_relation: Vec<(f64, usize)> = candidates
                    .iter()
                    .filter(|c| c.1 == relation)
                    .map(|c| {
                        (
                            unit_score(options.seed, "balance", &records[c.0].pair_id),
                            c.0,
                        )
                    })
                    .collect();
                of_relation.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
                let dropped: BTreeSet<usize> =
                    of_relation[keep..].iter().map(|&(_, i)| i).collect();
                for _ in &dropped {
                    count(&mut selection.not_kept, Reason::LeftOutBalance);
                }
                candidates.retain(|c| !dropped.contains(&c.0));
            }
        }
    }

    for (split, candidates) in per_split {
        // Originals: one per case with at least one kept pair, from that case's first record.
        let mut cases: BTreeMap<&str, usize> = BTreeMap::new();
        for (idx, relation, answer) in candidates {
            let record = &records[idx];
            cases.entry(record.case.as_str()).or_insert(idx);
            if relation == Relation::Same && record.before_correct == Some(false) {
                selection.n_same_on_misanswered += 1;
            }
            selection.rows.push(Row {
                split,
                file_name: pair_file_name(&record.pair_id),
                record_idx: idx,
                relation,
                answer,
            });
        }
        if options.include_originals {
            for (case, idx) in cases {
                match &records[idx].truth {
                    Some(truth) => selection.rows.push(Row {
                        split,
                        file_name: original_file_name(case),
                        record_idx: idx,
                        relation: Relation::Original,
                        answer: truth.clone(),
                    }),
                    None => count(&mut selection.not_kept, Reason::SkipOriginalWithoutTruth),
                }
            }
        }
    }
    selection
        .rows
        .sort_by(|a, b| (a.split, &a.file_name).cmp(&(b.split, &b.file_name)));
    selection
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn file_names_of_pairs_placebos_and_originals_never_collide() {
        // Ids use [A-Za-z0-9._-] only (spec/load.rs), so `~` separates case from edit.
        assert_eq!(pair_file_name("a.b/c"), "a.b~c.png");
        assert_eq!(pair_file_name("a/b.c"), "a~b.c.png");
        assert_eq!(pair_file_name("a/b~placebo"), "a~b~placebo.png");
        assert_eq!(original_file_name("a"), "a.png");
        assert_ne!(pair_file_name("a/original"), original_file_name("a"));
    }

    #[test]
    fn split_scores_are_uniform_enough_and_seeded() {
        // 2,000 keys: the share below 0.2 lies within 0.2 ± 4 standard errors (sd = 0.0089).
        let below = (0..2000)
            .filter(|i| unit_score(0, "split", &format!("img-{i}")) < 0.2)
            .count();
        assert!((0.164..0.236).contains(&(below as f64 / 2000.0)), "{below}");
        assert_ne!(unit_score(0, "split", "x"), unit_score(1, "split", "x"));
        assert_eq!(unit_score(5, "split", "x"), unit_score(5, "split", "x"));
    }

    #[test]
    fn tiny_runs_get_both_splits() {
        let options = SelectOptions::with_seed(0);
        for n in 2..6 {
            let names: Vec<String> = (0..n).map(|i| format!("s{i}")).collect();
            let set: BTreeSet<&str> = names.iter().map(String::as_str).collect();
            let v = validation_sources(&set, &options);
            assert!(!v.is_empty() && v.len() < n, "{n} sources: {v:?}");
        }
        let zero = SelectOptions {
            validation_fraction: 0.0,
            ..options
        };
        let set: BTreeSet<&str> = ["a", "b"].into_iter().collect();
        assert!(validation_sources(&set, &zero).is_empty());
    }
}
