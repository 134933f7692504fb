//! Analysis of a run: summary.json (docs/results.md) computed from results.jsonl rows alone —
//! rates per group, slices, the confounder ranking, confident failures and placebo-corrected
//! rates — and its short text form.
//!
//! Invariants: pure functions of the rows (no I/O), so the audit runner and `twinaudit report`
//! compute the same summary from the same file. Rows come in results.jsonl order: a row's line
//! number is its position + 1 (the writer never leaves blank lines). Placebo controls never enter a
//! real rate; they only fill the `placebo*` fields. Every ranking breaks ties by pair id or key, so
//! the summary does not depend on the order workers finished in (only line numbers do).

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
