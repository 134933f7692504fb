//! Edit specs: cases (an image and a question), regions (target or distractor), edits and
//! their expectations.
//!
//! Raw JSON ([`raw`]) is validated once into the types below; later stages trust that region ids
//! are unique within a case, every selector names at least one region, and every case has at
//! least one edit. Region shapes become [`Mask`](crate::render::mask::Mask)s only once the image
//! size is known ([`region::rasterise`]).

pub mod expectation;
pub mod load;
pub mod raw;
pub mod region;

use std::path::PathBuf;

use serde::{Deserialize, Serialize};

pub use expectation::{derive_expectation, Effect, Expectation};
pub use load::{load_spec, load_specs};

/// What the question asks; decides how expectations are derived.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum QuestionKind {
    Count,
    Colour,
    Exists,
    Other,
}

impl QuestionKind {
    pub fn parse(s: &str) -> Option<QuestionKind> {
        match s {
            "count" => Some(QuestionKind::Count),
            "colour" | "color" => Some(QuestionKind::Colour),
            "exists" => Some(QuestionKind::Exists),
            "other" => Some(QuestionKind::Other),
            _ => None,
        }
    }

    pub fn as_str(self) -> &'static str {
        match self {
            QuestionKind::Count => "count",
            QuestionKind::Colour => "colour",
            QuestionKind::Exists => "exists",
            QuestionKind::Other => "other",
        }
    }
}

/// Whether a region is what the question is about, or something the answer must not depend on.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Role {
    Target,
    Distractor,
}

impl Role {
    pub fn parse(s: &str) -> Option<Role> {
        match s {
            "target" => Some(Role::Target),
            "distractor" => Some(Role::Distractor),
            _ => None,
        }
    }

    pub fn as_str(self) -> &'static str {
        match self {
            Role::Target => "target",
            Role::Distractor => "distractor",
        }
    }
}

#[derive(Debug, Clone, PartialEq)]
pub enum Shape {
    /// `[x, y, w, h]`; a pixel is inside when its centre is.
    Box([f64; 4]),
    /// Vertices; a pixel is inside when its centre is (even-odd rule).
    Polygon(Vec<[f64; 2]>),
    /// Absolute path of a mask image the size of the upright image.
    MaskFile(PathBuf),
}

#[derive(Debug, Clone, PartialEq)]
pub struct Region {
    pub id: String,
    pub label: String,
    pub role: Role,
    pub shape: Shape,
}

#[derive(Debug, Clone, PartialEq)]
pub struct Edit {
    pub id: String,
    pub operation: String,
    /// Indices into the case's `regions`; never empty, no repeats, in region order.
    pub region_indices: Vec<usize>,
    /// Operation parameters, checked by the operation's own parser before a run starts.
    pub params: serde_json::Map<String, serde_json::Value>,
    /// `None` means derive from the question kind and the operation's effect.
    pub stated: Option<Expectation>,
}

#[derive(Debug, Clone, PartialEq)]
pub struct Case {
    pub id: String,
    pub image_path: PathBuf,
    /// The image path as written in the spec, for messages and results.
    pub image_ref: String,
    pub question: String,
    pub kind: QuestionKind,
    pub truth: Option<String>,
    pub regions: Vec<Region>,
    pub edits: Vec<Edit>,
}

impl Case {
    pub fn n_targets(&self) -> usize {
        self.regions
            .iter()
            .filter(|r| r.role == Role::Target)
            .count()
    }
}

#[derive(Debug, Clone, PartialEq)]
pub struct Spec {
    pub path: PathBuf,
    /// Hex sha256 of the file's bytes, recorded in run.json so a resume can tell the spec changed.
    pub sha256: String,
    pub cases: Vec<Case>,
}

#[derive(Debug, thiserror::Error)]
pub enum SpecError {
    #[error("cannot read spec {path}: {source}")]
    Read {
        path: PathBuf,
        source: std::io::Error,
    },
    #[error("{path}:{line}:{column}: malformed spec JSON: {message}")]
    Json {
        path: PathBuf,
        line: usize,
        column: usize,
        message: String,
    },
    #[error("{path}: format_version {found} is not supported (this twinaudit reads {supported}); convert the spec or upgrade twinaudit")]
    Version {
        path: PathBuf,
        found: u32,
        supported: u32,
    },
    #[error("{path}: case {case:?}: {message}")]
    Case {
        path: PathBuf,
        case: String,
        message: String,
    },
    #[error("{path}: case {case:?}, region {region:?}: {message}")]
    Region {
        path: PathBuf,
        case: String,
        region: String,
        message: String,
    },
    #[error("{path}: case {case:?}, edit {edit:?}: {message}")]
    Edit {
        path: PathBuf,
        case: String,
        edit: String,
        message: String,
    },
    #[error("{path}: no spec files (*.json) found; pass a spec file or a folder holding them")]
    NoSpecs { path: PathBuf },
    #[error("case id {case:?} appears in both {first} and {second}; case ids must be unique across a run")]
    DuplicateCase {
        case: String,
        first: PathBuf,
        second: PathBuf,
    },
}
