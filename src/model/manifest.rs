//! Model manifests: how to feed an ONNX classifier and read its answer (docs/model-manifest.md).

use std::collections::HashMap;
use std::path::{Path, PathBuf};

use serde::{Deserialize, Serialize};

use super::answers::AnswerNormalisation;
use super::preprocess::{ChannelOrder, ImagePreprocess, Layout, ResizeMode};
use super::resize::ResizeFilter;
use super::ModelError;

pub const MANIFEST_FORMAT_VERSION: u32 = 1;

#[derive(Debug, Clone, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct RawManifest {
    pub format_version: u32,
    pub name: String,
    /// ONNX file, relative to the manifest.
    pub onnx: String,
    pub image_input: RawImageInput,
    #[serde(default)]
    pub question_input: Option<RawQuestionInput>,
    /// For image-only models: the one question the model answers (informational).
    #[serde(default)]
    pub fixed_question: Option<String>,
    pub output: RawOutput,
    #[serde(default)]
    pub answers: AnswerNormalisation,
    /// How many of the most probable answers to record per image.
    #[serde(default = "default_top_k")]
    pub top_k: usize,
}

fn default_top_k() -> usize {
    3
}

#[derive(Debug, Clone, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct RawImageInput {
    pub tensor: String,
    pub width: u32,
    pub height: u32,
    /// `nchw` or `nhwc`.
    pub layout: String,
    /// `rgb` or `bgr`.
    pub channels: String,
    /// `stretch` or `letterbox`.
    pub resize: String,
    /// Letterbox padding colour, RGB 0..255.
    #[serde(default)]
    pub pad_rgb: Option<[u8; 3]>,
    /// `bilinear` (default) or `bicubic`, computed as Pillow does.
    #[serde(default)]
    pub filter: Option<String>,
    /// Multiplies the 0..255 pixel value before mean and std.
    pub scale: f32,
    #[serde(default)]
    pub mean: Option<[f32; 3]>,
    #[serde(default)]
    pub std: Option<[f32; 3]>,
}

#[derive(Debug, Clone, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct RawQuestionInput {
    pub tensor: String,
    /// Word list, one token per line; a token's id is its line number counted from 0.
    pub vocabulary: String,
    #[serde(default = "yes")]
    pub lowercase: bool,
    pub max_length: usize,
    pub pad_id: i64,
    pub unknown_id: i64,
    /// `int64` (default) or `int32`.
    #[serde(default)]
    pub element_type: Option<String>,
}

fn yes() -> bool {
    true
}

#[derive(Debug, Clone, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct RawOutput {
    pub tensor: String,
    #[serde(default)]
    pub labels: Option<Vec<String>>,
    /// Answer list file, one label per line, relative to the manifest.
    #[serde(default)]
    pub labels_file: Option<String>,
    /// `softmax`, `sigmoid` or `none` (the output already holds probabilities).
    pub activation: String,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum TokenType {
    Int64,
    Int32,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Activation {
    Softmax,
    Sigmoid,
    None,
}

#[derive(Debug, Clone)]
pub struct QuestionInput {
    pub tensor: String,
    pub vocabulary: HashMap<String, i64>,
    pub lowercase: bool,
    pub max_length: usize,
    pub pad_id: i64,
    pub unknown_id: i64,
    pub element_type: TokenType,
}

#[derive(Debug, Clone)]
pub struct Manifest {
    pub path: PathBuf,
    pub name: String,
    pub onnx_path: PathBuf,
    pub image_tensor: String,
    pub preprocess: ImagePreprocess,
    pub question: Option<QuestionInput>,
    pub fixed_question: Option<String>,
    pub output_tensor: String,
    /// Answer labels, already normalised.
    pub labels: Vec<String>,
    pub activation: Activation,
    pub answers: AnswerNormalisation,
    pub top_k: usize,
    /// The manifest file as parsed, recorded in run.json.
    pub raw: RawManifest,
}

impl Manifest {
    pub fn load(path: &Path) -> Result<Manifest, ModelError> {
        let text = std::fs::read_to_string(path).map_err(|e| ModelError::Manifest {
            path: path.to_path_buf(),
            message: format!("cannot read: {e}"),
        })?;
        let raw: RawManifest = serde_json::from_str(&text).map_err(|e| ModelError::Manifest {
            path: path.to_path_buf(),
            message: format!(
                "malformed JSON at line {}, column {}: {e}",
                e.line(),
                e.column()
            ),
        })?;
        Manifest::validate(path, raw)
    }

    fn validate(path: &Path, raw: RawManifest) -> Result<Manifest, ModelError> {
        let err = |m: String| ModelError::Manifest {
            path: path.to_path_buf(),
            message: m,
        };
        if raw.format_version != MANIFEST_FORMAT_VERSION {
            return Err(err(format!(
                "format_version {} is not supported (this twinaudit reads {MANIFEST_FORMAT_VERSION})",
                raw.format_version
            )));
        }
        let dir = path.parent().unwrap_or(Path::new("."));
        let im = &raw.image_input;
        if im.width == 0 || im.height == 0 || im.width > 8192 || im.height > 8192 {
            return Err(err(format!(
                "image_input size {}x{} must be within 1..8192",
                im.width, im.height
            )));
        }
        let layout = match im.layout.to_ascii_lowercase().as_str() {
            "nchw" => Layout::Nchw,
            "nhwc" => Layout::Nhwc,
            other => {
                return Err(err(format!(
                    "image_input.layout {other:?}: use \"nchw\" or \"nhwc\""
                )))
            }
        };
        let channel_order = match im.channels.to_ascii_lowercase().as_str() {
            "rgb" => ChannelOrder::Rgb,
            "bgr" => ChannelOrder::Bgr,
            other => {
                return Err(err(format!(
                    "image_input.channels {other:?}: use \"rgb\" or \"bgr\""
                )))
            }
        };
        let resize = match im.resize.as_str() {
            "stretch" => ResizeMode::Stretch,
            "letterbox" => ResizeMode::Letterbox {
                pad_rgb: im.pad_rgb.unwrap_or([0, 0, 0]),
            },
            other => {
                return Err(err(format!(
                    "image_input.resize {other:?}: use \"stretch\" or \"letterbox\""
                )))
            }
        };
        let filter = match im.filter.as_deref().unwrap_or("bilinear") {
            "bilinear" => ResizeFilter::Bilinear,
            "bicubic" => ResizeFilter::Bicubic,
            other => {
                return Err(err(format!(
                    "image_input.filter {other:?}: use \"bilinear\" or \"bicubic\""
                )))
            }
        };
        let std = im.std.unwrap_or([1.0; 3]);
        if std.iter().any(|s| !s.is_finite() || *s == 0.0) || !im.scale.is_finite() {
            return Err(err(
                "image_input.std must be finite and non-zero, scale finite".into(),
            ));
        }
        let preprocess = ImagePreprocess {
            width: im.width,
            height: im.height,
            layout,
            channel_order,
            resize,
            filter,
            scale: im.scale,
            mean: im.mean.unwrap_or([0.0; 3]),
            std,
        };
        preprocess
            .validate()
            .map_err(|e| err(format!("image_input: {e}")))?;
        let question = match &raw.question_input {
            None => None,
            Some(q) => {
                let vocab_path = dir.join(&q.vocabulary);
                let text = std::fs::read_to_string(&vocab_path).map_err(|e| {
                    err(format!(
                        "cannot read question_input.vocabulary {}: {e}",
                        vocab_path.display()
                    ))
                })?;
                let vocabulary = text
                    .lines()
                    .enumerate()
                    .filter(|(_, t)| !t.is_empty())
                    .map(|(i, t)| (t.to_string(), i as i64))
                    .collect();
                let element_type = match q.element_type.as_deref().unwrap_or("int64") {
                    "int64" => TokenType::Int64,
                    "int32" => TokenType::Int32,
                    other => {
                        return Err(err(format!(
                            "question_input.element_type {other:?}: use \"int64\" or \"int32\""
                        )))
                    }
                };
                if q.max_length == 0 || q.max_length > 4096 {
                    return Err(err(
                        "question_input.max_length must be within 1..4096".into()
                    ));
                }
                Some(QuestionInput {
                    tensor: q.tensor.clone(),
                    vocabulary,
                    lowercase: q.lowercase,
                    max_length: q.max_length,
                    pad_id: q.pad_id,
                    unknown_id: q.unknown_id,
                    element_type,
                })
            }
        };
        let labels: Vec<String> = match (&raw.output.labels, &raw.output.labels_file) {
            (Some(l), None) => l.clone(),
            (None, Some(f)) => {
                let p = dir.join(f);
                std::fs::read_to_string(&p)
                    .map_err(|e| {
                        err(format!(
                            "cannot read output.labels_file {}: {e}",
                            p.display()
                        ))
                    })?
                    .lines()
                    .filter(|l| !l.trim().is_empty())
                    .map(str::to_string)
                    .collect()
            }
            _ => {
                return Err(err(
                    "output needs exactly one of labels or labels_file".into()
                ))
            }
        };
        if labels.is_empty() {
            return Err(err("output has no answer labels".into()));
        }
        let labels: Vec<String> = labels.iter().map(|l| raw.answers.normalise(l)).collect();
        let activation = match raw.output.activation.as_str() {
            "softmax" => Activation::Softmax,
            "sigmoid" => Activation::Sigmoid,
            "none" => Activation::None,
            other => {
                return Err(err(format!(
                    "output.activation {other:?}: use softmax, sigmoid or none"
                )))
            }
        };
        Ok(Manifest {
            path: path.to_path_buf(),
            name: raw.name.clone(),
            onnx_path: dir.join(&raw.onnx),
            image_tensor: im.tensor.clone(),
            preprocess,
            question,
            fixed_question: raw.fixed_question.clone(),
            output_tensor: raw.output.tensor.clone(),
            labels,
            activation,
            answers: raw.answers.clone(),
            top_k: raw.top_k.max(1),
            raw,
        })
    }
}
