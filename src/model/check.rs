//! Describing a model's inputs and outputs, and checking a manifest against them.

use ort::session::Session;
use ort::value::{TensorElementType, ValueType};
use serde::Serialize;

use super::manifest::{Manifest, TokenType};
use super::preprocess::Layout;

/// One input or output of an ONNX model; `-1` marks a dynamic dimension.
#[derive(Debug, Clone, Serialize)]
pub struct TensorInfo {
    pub name: String,
    pub element_type: String,
    pub shape: Option<Vec<i64>>,
}

#[derive(Debug, Clone, Serialize)]
pub struct ModelInfo {
    pub inputs: Vec<TensorInfo>,
    pub outputs: Vec<TensorInfo>,
}

/// ONNX's own names for element types (`float32` rather than ort's `f32`).
pub fn type_name(ty: TensorElementType) -> String {
    match ty {
        TensorElementType::Float32 => "float32".into(),
        TensorElementType::Float64 => "float64".into(),
        TensorElementType::Float16 => "float16".into(),
        TensorElementType::Int64 => "int64".into(),
        TensorElementType::Int32 => "int32".into(),
        TensorElementType::Int16 => "int16".into(),
        TensorElementType::Int8 => "int8".into(),
        TensorElementType::Uint8 => "uint8".into(),
        TensorElementType::Bool => "bool".into(),
        TensorElementType::String => "string".into(),
        other => other.to_string(),
    }
}

fn info(name: &str, t: &ValueType) -> TensorInfo {
    match t {
        ValueType::Tensor { ty, shape, .. } => TensorInfo {
            name: name.to_string(),
            element_type: type_name(*ty),
            shape: Some(shape.iter().copied().collect()),
        },
        other => TensorInfo {
            name: name.to_string(),
            element_type: format!("{other:?}"),
            shape: None,
        },
    }
}

pub fn describe(session: &Session) -> ModelInfo {
    ModelInfo {
        inputs: session
            .inputs()
            .iter()
            .map(|o| info(o.name(), o.dtype()))
            .collect(),
        outputs: session
            .outputs()
            .iter()
            .map(|o| info(o.name(), o.dtype()))
            .collect(),
    }
}

fn fmt_shape(shape: &[i64]) -> String {
    let dims: Vec<String> = shape
        .iter()
        .map(|d| if *d < 0 { "?".into() } else { d.to_string() })
        .collect();
    format!("[{}]", dims.join(", "))
}

/// A dimension the model fixes must equal what we feed; dynamic ones (-1) accept anything.
fn shape_matches(model: &[i64], fed: &[i64]) -> bool {
    model.len() == fed.len() && model.iter().zip(fed).all(|(m, f)| *m < 0 || m == f)
}

fn check_input(
    info: &ModelInfo,
    role: &str,
    tensor: &str,
    want_type: TensorElementType,
    fed: &[i64],
    out: &mut Vec<String>,
) {
    let Some(t) = info.inputs.iter().find(|t| t.name == tensor) else {
        let names: Vec<&str> = info.inputs.iter().map(|t| t.name.as_str()).collect();
        out.push(format!(
            "{role} tensor {tensor:?} is not an input of the model; its inputs are {names:?}"
        ));
        return;
    };
    if t.element_type != type_name(want_type) {
        out.push(format!(
            "{role} tensor {tensor:?} has element type {} in the model but the manifest feeds {}",
            t.element_type,
            type_name(want_type)
        ));
    }
    match &t.shape {
        Some(shape) if !shape_matches(shape, fed) => out.push(format!(
            "{role} tensor {tensor:?} has shape {} in the model but the manifest feeds {}",
            fmt_shape(shape),
            fmt_shape(fed)
        )),
        _ => {}
    }
}

/// Every way the manifest disagrees with the model; empty when they agree.
pub fn check_manifest(session: &Session, m: &Manifest) -> Vec<String> {
    let info = describe(session);
    let mut out = Vec::new();
    let (w, h) = (m.preprocess.width as i64, m.preprocess.height as i64);
    let image_shape = match m.preprocess.layout {
        Layout::Nchw => vec![1, 3, h, w],
        Layout::Nhwc => vec![1, h, w, 3],
    };
    check_input(
        &info,
        "image",
        &m.image_tensor,
        TensorElementType::Float32,
        &image_shape,
        &mut out,
    );
    let mut fed = vec![m.image_tensor.as_str()];
    if let Some(q) = &m.question {
        let ty = match q.element_type {
            TokenType::Int64 => TensorElementType::Int64,
            TokenType::Int32 => TensorElementType::Int32,
        };
        check_input(
            &info,
            "question",
            &q.tensor,
            ty,
            &[1, q.max_length as i64],
            &mut out,
        );
        fed.push(q.tensor.as_str());
    }
    for t in &info.inputs {
        if !fed.contains(&t.name.as_str()) {
            out.push(format!(
                "model input {:?} ({} {}) is not fed by the manifest; add it (question_input?) or use another model",
                t.name,
                t.element_type,
                t.shape.as_deref().map(fmt_shape).unwrap_or_default()
            ));
        }
    }
    match info.outputs.iter().find(|t| t.name == m.output_tensor) {
        None => {
            let names: Vec<&str> = info.outputs.iter().map(|t| t.name.as_str()).collect();
            out.push(format!(
                "output tensor {:?} is not an output of the model; its outputs are {names:?}",
                m.output_tensor
            ));
        }
        Some(t) => {
            if t.element_type != type_name(TensorElementType::Float32) {
                out.push(format!(
                    "output tensor {:?} has element type {}; twinaudit reads float32 scores",
                    t.name, t.element_type
                ));
            }
            if let Some(shape) = &t.shape {
                let n_values: i64 = shape.iter().product();
                let all_fixed = shape.iter().all(|d| *d >= 0);
                let last = shape.last().copied().unwrap_or(1);
                if (all_fixed && n_values != m.labels.len() as i64)
                    || (last >= 0 && last != m.labels.len() as i64)
                {
                    out.push(format!(
                        "output tensor {:?} has shape {} but the manifest lists {} answer labels",
                        t.name,
                        fmt_shape(shape),
                        m.labels.len()
                    ));
                }
            }
        }
    }
    out
}
