//! Scoring one pair: the model's answers before and after an edit against the expectation.

use serde::{Deserialize, Serialize};

use crate::spec::Expectation;

/// The outcome of one (case, edit) pair.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Verdict {
    /// Change pair: the answer is the expected one (for `change`: any answer other than before).
    MovedToExpected,
    /// Change pair with an exact expected answer: the answer moved, but to something else.
    MovedElsewhere,
    /// Change pair: the answer stayed what it was.
    DidNotMove,
    /// Invariance pair: the answer stayed.
    Held,
    /// Invariance pair: the answer changed.
    Flipped,
}

impl Verdict {
    pub const ALL: [Verdict; 5] = [
        Verdict::MovedToExpected,
        Verdict::MovedElsewhere,
        Verdict::DidNotMove,
        Verdict::Held,
        Verdict::Flipped,
    ];

    pub fn passed(self) -> bool {
        matches!(self, Verdict::MovedToExpected | Verdict::Held)
    }

    pub fn as_str(self) -> &'static str {
        match self {
            Verdict::MovedToExpected => "moved_to_expected",
            Verdict::MovedElsewhere => "moved_elsewhere",
            Verdict::DidNotMove => "did_not_move",
            Verdict::Held => "held",
            Verdict::Flipped => "flipped",
        }
    }
}

/// Judges normalised answers. An exact expectation that the model already gave before the edit
/// is `did_not_move`: a model that ignores the edit must not pass a change pair by luck.
pub fn judge(expectation: &Expectation, before: &str, after: &str) -> Verdict {
    match expectation {
        Expectation::Same if after == before => Verdict::Held,
        Expectation::Same => Verdict::Flipped,
        _ if after == before => Verdict::DidNotMove,
        Expectation::Change => Verdict::MovedToExpected,
        Expectation::Answer(want) if after == want => Verdict::MovedToExpected,
        Expectation::Answer(_) => Verdict::MovedElsewhere,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn verdicts_by_hand() {
        let two = Expectation::Answer("2".into());
        assert_eq!(judge(&two, "3", "2"), Verdict::MovedToExpected);
        assert_eq!(judge(&two, "3", "1"), Verdict::MovedElsewhere);
        assert_eq!(judge(&two, "3", "3"), Verdict::DidNotMove);
        assert_eq!(judge(&two, "2", "2"), Verdict::DidNotMove);
        assert_eq!(
            judge(&Expectation::Change, "3", "1"),
            Verdict::MovedToExpected
        );
        assert_eq!(judge(&Expectation::Same, "red", "red"), Verdict::Held);
        assert_eq!(judge(&Expectation::Same, "red", "orange"), Verdict::Flipped);
    }
}
