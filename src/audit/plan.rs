//! Turning specs into the list of pairs a run will judge, checking everything that can be
//! checked without pixels (operations, parameters, expectations) before any case runs.

use crate::model::answers::AnswerNormalisation;
use crate::render::{find_operation, operation_names, Operation};
use crate::spec::expectation::edit_role;
use crate::spec::{derive_expectation, Expectation, Spec, SpecError};

/// One (case, edit) pair to judge.
pub struct PlannedPair {
    pub pair_id: String,
    pub spec_idx: usize,
    pub case_idx: usize,
    pub edit_idx: usize,
    pub operation: &'static dyn Operation,
    /// Normalised with the model's answer rules.
    pub expectation: Expectation,
    pub expectation_derived: bool,
    /// The real edit's roles, also for its placebo (summaries group a placebo with its edit).
    pub role: &'static str,
    /// For a placebo control: the pair id of the real edit it copies.
    pub placebo_of: Option<String>,
}

pub fn pair_id(case: &str, edit: &str) -> String {
    format!("{case}/{edit}")
}

/// Marks a placebo's pair id; `~` cannot occur in case or edit ids, so ids stay unique.
pub const PLACEBO_SUFFIX: &str = "~placebo";

/// Puts a placebo control right after each pair: the same edit (operation and parameters) moved
/// onto free background, expected to leave the answer as it was.
pub fn with_placebos(pairs: Vec<PlannedPair>) -> Vec<PlannedPair> {
    let mut out = Vec::with_capacity(2 * pairs.len());
    for p in pairs {
        let placebo = PlannedPair {
            pair_id: format!("{}{PLACEBO_SUFFIX}", p.pair_id),
            spec_idx: p.spec_idx,
            case_idx: p.case_idx,
            edit_idx: p.edit_idx,
            operation: p.operation,
            expectation: Expectation::Same,
            expectation_derived: false,
            role: p.role,
            placebo_of: Some(p.pair_id.clone()),
        };
        out.push(p);
        out.push(placebo);
    }
    out
}

pub fn plan_pairs(
    specs: &[Spec],
    answers: &AnswerNormalisation,
) -> Result<Vec<PlannedPair>, SpecError> {
    let mut pairs = Vec::new();
    for (spec_idx, spec) in specs.iter().enumerate() {
        for (case_idx, case) in spec.cases.iter().enumerate() {
            for (edit_idx, edit) in case.edits.iter().enumerate() {
                let err = |message: String| SpecError::Edit {
                    path: spec.path.clone(),
                    case: case.id.clone(),
                    edit: edit.id.clone(),
                    message,
                };
                let operation = find_operation(&edit.operation).ok_or_else(|| {
                    err(format!(
                        "unknown operation {:?}; available: {}",
                        edit.operation,
                        operation_names().join(", ")
                    ))
                })?;
                let effect = operation.check(&edit.params).map_err(&err)?;
                let expectation = derive_expectation(case, edit, &effect).map_err(&err)?;
                let expectation = match expectation {
                    Expectation::Answer(a) => Expectation::Answer(answers.normalise(&a)),
                    other => other,
                };
                pairs.push(PlannedPair {
                    pair_id: pair_id(&case.id, &edit.id),
                    spec_idx,
                    case_idx,
                    edit_idx,
                    operation,
                    expectation,
                    expectation_derived: edit.stated.is_none(),
                    role: edit_role(case, edit),
                    placebo_of: None,
                });
            }
        }
    }
    Ok(pairs)
}
