//! Edits on pixels. One file per operation; each is registered in [`OPERATIONS`].
//!
//! Invariants: render/ does no I/O; every operation is a pure function of the image, the masks,
//! its parameters and a seed; pixels outside [`Rendered::changed`] are bit-identical to the input.
//! Adding an operation is one new file plus one line in [`OPERATIONS`].

pub mod colour;
pub mod cover;
pub mod duplicate;
pub mod erase;
pub mod exemplar;
pub mod mask;
pub mod placebo;
pub mod poisson;
pub mod quality;
pub mod recolour;
pub mod rng;
pub mod telea;

use image::RgbImage;
use serde::de::DeserializeOwned;

use crate::spec::Effect;
use mask::Mask;

/// Operation parameters as written in the spec.
pub type Params = serde_json::Map<String, serde_json::Value>;

/// Everything an operation may look at.
pub struct EditInput<'a> {
    pub image: &'a RgbImage,
    /// Union of the regions the edit acts on.
    pub mask: &'a Mask,
    /// Every region of the case, edited or not (to find free space, to avoid other objects).
    pub all_regions: &'a [Mask],
    /// Seed for any random choice; recorded per pair in results.jsonl.
    pub seed: u64,
}

/// An operation's output.
#[derive(Debug, Clone)]
pub struct Rendered {
    pub image: RgbImage,
    /// Pixels the operation was allowed to change (the mask after dilation).
    pub changed: Mask,
    /// The algorithm actually used, e.g. `telea` (recorded per pair).
    pub method: String,
    /// Masks of objects the operation added (`duplicate`'s copies); empty for other operations.
    pub added: Vec<Mask>,
}

pub trait Operation: Sync {
    /// The name used in specs (`"operation": "erase"`).
    fn name(&self) -> &'static str;
    /// Validates parameters before a run starts and says what the edit does to the question.
    fn check(&self, params: &Params) -> Result<Effect, String>;
    fn apply(&self, input: &EditInput, params: &Params) -> Result<Rendered, String>;
}

/// The registry of operations.
pub static OPERATIONS: &[&dyn Operation] = &[
    &erase::Erase,
    &cover::Cover,
    &recolour::Recolour,
    &duplicate::Duplicate,
];

pub fn find_operation(name: &str) -> Option<&'static dyn Operation> {
    OPERATIONS.iter().copied().find(|op| op.name() == name)
}

/// Names of all operations, for error messages.
pub fn operation_names() -> Vec<&'static str> {
    OPERATIONS.iter().map(|op| op.name()).collect()
}

/// Parses an operation's parameters into its own struct (unknown keys are errors).
pub(crate) fn parse_params<T: DeserializeOwned>(params: &Params) -> Result<T, String> {
    serde_json::from_value(serde_json::Value::Object(params.clone()))
        .map_err(|e| format!("bad params: {e}"))
}
