//! One ONNX Runtime session answering questions about images.
//!
//! `Session::run` needs `&mut self`, so each worker thread owns its own [`Engine`].

use std::path::Path;
use std::sync::Arc;

use image::RgbImage;
use ort::session::Session;
use ort::value::Tensor;

use super::answers::{activate, rank, tokenise, Prediction};
use super::manifest::{Manifest, TokenType};
use super::preprocess::image_to_tensor;
use super::{runtime, ModelError};

pub struct Engine {
    session: Session,
    manifest: Arc<Manifest>,
}

fn build_session(path: &Path, intra_threads: usize) -> ort::Result<Session> {
    let env = runtime::environment().map_err(|e| ort::Error::new(e.to_string()))?;
    let mut builder = Session::builder(env)?.with_intra_threads(intra_threads)?;
    builder.commit_from_file(path)
}

/// Opens a session on the model at `path` (used by `inspect`, which has no manifest yet).
pub fn open_session(path: &Path, intra_threads: usize) -> Result<Session, ModelError> {
    runtime::environment()?;
    if !path.is_file() {
        return Err(ModelError::Load {
            path: path.to_path_buf(),
            message: "no such file".into(),
        });
    }
    build_session(path, intra_threads).map_err(|e| ModelError::Load {
        path: path.to_path_buf(),
        message: e.to_string(),
    })
}

impl Engine {
    /// Opens the manifest's model and checks the manifest against it.
    pub fn new(manifest: Arc<Manifest>, intra_threads: usize) -> Result<Engine, ModelError> {
        let session = open_session(&manifest.onnx_path, intra_threads)?;
        let mismatches = super::check::check_manifest(&session, &manifest);
        if !mismatches.is_empty() {
            return Err(ModelError::Mismatch {
                model: manifest.onnx_path.clone(),
                manifest: manifest.path.clone(),
                mismatches,
            });
        }
        Ok(Engine { session, manifest })
    }

    pub fn manifest(&self) -> &Manifest {
        &self.manifest
    }

    /// The model's answer to `question` about `image`.
    pub fn predict(&mut self, image: &RgbImage, question: &str) -> Result<Prediction, ModelError> {
        let mut answers = self.predict_batch(&[(image, question)])?;
        Ok(answers.remove(0))
    }

    /// Answers for several (image, question) items in one run; needs a model whose batch
    /// dimension is dynamic when more than one item is given.
    pub fn predict_batch(
        &mut self,
        items: &[(&RgbImage, &str)],
    ) -> Result<Vec<Prediction>, ModelError> {
        let m = Arc::clone(&self.manifest);
        let fail = |e: ort::Error| ModelError::Inference {
            model: m.onnx_path.clone(),
            message: e.to_string(),
        };
        if items.is_empty() {
            return Ok(Vec::new());
        }
        let tensors: Vec<_> = items
            .iter()
            .map(|(image, _)| image_to_tensor(image, &m.preprocess))
            .collect();
        let views: Vec<_> = tensors.iter().map(|t| t.view()).collect();
        let pixels =
            ndarray::concatenate(ndarray::Axis(0), &views).map_err(|e| ModelError::Inference {
                model: m.onnx_path.clone(),
                message: format!("cannot batch image tensors: {e}"),
            })?;
        let mut inputs: Vec<(String, ort::session::SessionInputValue)> = vec![(
            m.image_tensor.clone(),
            Tensor::from_array(pixels).map_err(fail)?.into(),
        )];
        if let Some(q) = &m.question {
            let ids: Vec<i64> = items
                .iter()
                .flat_map(|(_, question)| tokenise(question, q))
                .collect();
            let shape = [items.len(), q.max_length];
            let value: ort::session::SessionInputValue = match q.element_type {
                TokenType::Int64 => Tensor::from_array((shape, ids)).map_err(fail)?.into(),
                TokenType::Int32 => {
                    let ids: Vec<i32> = ids.iter().map(|&i| i as i32).collect();
                    Tensor::from_array((shape, ids)).map_err(fail)?.into()
                }
            };
            inputs.push((q.tensor.clone(), value));
        }
        let outputs = self.session.run(inputs).map_err(fail)?;
        let scores = outputs
            .get(m.output_tensor.as_str())
            .ok_or_else(|| ModelError::Inference {
                model: m.onnx_path.clone(),
                message: format!(
                    "output tensor {:?} missing from the model's outputs",
                    m.output_tensor
                ),
            })?
            .try_extract_tensor::<f32>()
            .map_err(fail)?
            .1
            .to_vec();
        let n_labels = m.labels.len();
        if scores.len() != n_labels * items.len() {
            return Err(ModelError::Inference {
                model: m.onnx_path.clone(),
                message: format!(
                    "output tensor {:?} has {} values for {} item(s) but the manifest lists {} answer labels",
                    m.output_tensor,
                    scores.len(),
                    items.len(),
                    n_labels
                ),
            });
        }
        Ok(scores
            .chunks(n_labels)
            .map(|row| rank(&activate(row, m.activation), &m.labels, m.top_k))
            .collect())
    }
}
