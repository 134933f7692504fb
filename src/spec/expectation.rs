//! What the model's answer should do after an edit, stated in the spec or derived from the
//! question kind and the operation's effect on the selected regions.

use serde::{Deserialize, Serialize};

use super::{Case, Edit, QuestionKind, Role};

/// The expectation checked for one (case, edit) pair.
#[derive(Debug, Clone, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(tag = "kind", content = "answer", rename_all = "lowercase")]
pub enum Expectation {
    /// The answer must differ from the model's own answer on the original image.
    Change,
    /// The answer must equal the model's own answer on the original image.
    Same,
    /// The answer must be exactly this (after answer normalisation).
    Answer(String),
}

impl Expectation {
    /// Invariance pairs are scored held/flipped; the others moved/did not move.
    pub fn is_invariance(&self) -> bool {
        matches!(self, Expectation::Same)
    }
}

/// What an operation does to the objects it touches, as far as the question is concerned.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Effect {
    /// The objects are no longer visible (erase, cover).
    Removes,
    /// The objects now have this named colour.
    Recolours { colour: String },
    /// Each selected object gains this many copies.
    Adds { copies_each: usize },
}

/// Which roles an edit touches, for grouping results.
pub fn edit_role(case: &Case, edit: &Edit) -> &'static str {
    let (mut t, mut d) = (false, false);
    for &i in &edit.region_indices {
        match case.regions[i].role {
            Role::Target => t = true,
            Role::Distractor => d = true,
        }
    }
    match (t, d) {
        (true, false) => "target",
        (false, true) => "distractor",
        _ => "mixed",
    }
}

/// Derives the expectation for an edit that does not state one.
///
/// Rules: edits that touch only distractors keep the answer (`same`). On targets: removing k of
/// n targets of a count question gives n − k, adding c copies of each of k targets gives n + c·k;
/// removing every target of an exists question gives "no", removing some keeps it; recolouring the
/// targets of a colour question gives the new colour's name. Anything else must be stated.
/// Counting assumes every counted object is annotated as a target: a ground-truth count that
/// disagrees with the number of target regions is an error, not a guess.
pub fn derive_expectation(
    case: &Case,
    edit: &Edit,
    effect: &Effect,
) -> Result<Expectation, String> {
    if let Some(stated) = &edit.stated {
        return Ok(stated.clone());
    }
    let n = case.n_targets();
    let k = edit
        .region_indices
        .iter()
        .filter(|&&i| case.regions[i].role == Role::Target)
        .count();
    if k == 0 {
        return Ok(Expectation::Same);
    }
    let explain = |what: &str| {
        Err(format!(
            "cannot derive an expectation for {what} on a {} question; state \"expect\": \"change\", \"same\" or {{\"answer\": ...}}",
            case.kind.as_str()
        ))
    };
    if case.kind == QuestionKind::Count {
        if let Some(truth) = &case.truth {
            match truth.trim().parse::<usize>() {
                Ok(t) if t == n => {}
                Ok(t) => {
                    return Err(format!(
                        "ground-truth count is {t} but {n} regions have role target; derived counts need every counted object annotated as a target"
                    ))
                }
                Err(_) => return Err(format!("ground-truth answer {truth:?} of a count question is not a whole number")),
            }
        }
    }
    match (effect, case.kind) {
        (Effect::Removes, QuestionKind::Count) => Ok(Expectation::Answer((n - k).to_string())),
        (Effect::Removes, QuestionKind::Exists) if k == n => Ok(Expectation::Answer("no".into())),
        (Effect::Removes, QuestionKind::Exists) => Ok(Expectation::Same),
        (Effect::Adds { copies_each }, QuestionKind::Count) => {
            Ok(Expectation::Answer((n + copies_each * k).to_string()))
        }
        (Effect::Adds { .. }, QuestionKind::Exists) => Ok(Expectation::Same),
        (Effect::Recolours { colour }, QuestionKind::Colour) => {
            Ok(Expectation::Answer(colour.clone()))
        }
        (Effect::Removes, _) => explain("removing targets"),
        (Effect::Adds { .. }, _) => explain("adding targets"),
        (Effect::Recolours { .. }, _) => explain("recolouring targets"),
    }
}
