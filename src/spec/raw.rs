//! Edit-spec JSON as written by users, before validation. Field names here are the file format
//! (docs/spec.md, docs/spec.schema.json); change them only with a `format_version` bump.

use serde::{Deserialize, Serialize};

pub const SPEC_FORMAT_VERSION: u32 = 1;

#[derive(Debug, Clone, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct RawSpec {
    pub format_version: u32,
    /// Free text for humans.
    #[serde(default)]
    pub description: Option<String>,
    pub cases: Vec<RawCase>,
}

#[derive(Debug, Clone, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct RawCase {
    pub id: String,
    /// Image path, relative to the spec file.
    pub image: String,
    pub question: String,
    pub question_kind: String,
    /// Ground-truth answer to the question on the unedited image.
    #[serde(default)]
    pub answer: Option<String>,
    #[serde(default)]
    pub regions: Vec<RawRegion>,
    #[serde(default)]
    pub edits: Vec<RawEdit>,
}

#[derive(Debug, Clone, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct RawRegion {
    pub id: String,
    pub label: String,
    pub role: String,
    /// `[x, y, w, h]` in pixels of the upright image.
    #[serde(default, rename = "box")]
    pub bbox: Option<[f64; 4]>,
    /// `[[x, y], ...]` in pixels of the upright image; at least three points.
    #[serde(default)]
    pub polygon: Option<Vec<[f64; 2]>>,
    /// Mask image path relative to the spec file; non-zero pixels are inside.
    #[serde(default)]
    pub mask: Option<String>,
}

/// Which regions an edit acts on: exactly one of the three keys.
#[derive(Debug, Clone, Default, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct RawSelector {
    #[serde(default)]
    pub ids: Option<Vec<String>>,
    #[serde(default)]
    pub role: Option<String>,
    #[serde(default)]
    pub label: Option<String>,
}

#[derive(Debug, Clone, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct RawEdit {
    pub id: String,
    pub operation: String,
    pub regions: RawSelector,
    #[serde(default)]
    pub params: serde_json::Map<String, serde_json::Value>,
    #[serde(default)]
    pub expect: Option<RawExpect>,
}

/// `"derived"`, `"change"`, `"same"` or `{"answer": "..."}`.
#[derive(Debug, Clone, Deserialize, Serialize)]
#[serde(untagged)]
pub enum RawExpect {
    Word(String),
    Answer { answer: String },
}
