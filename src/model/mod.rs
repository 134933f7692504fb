//! The model under audit: manifests, pre- and post-processing, and the ONNX Runtime engine.
//!
//! Invariant: only this folder touches ONNX Runtime. A manifest is checked against the model
//! ([`check::check_manifest`]) before any case runs.

pub mod answers;
pub mod check;
pub mod engine;
pub mod manifest;
pub mod preprocess;
pub mod resize;
pub mod runtime;

use std::path::PathBuf;

pub use answers::Prediction;
pub use engine::Engine;
pub use manifest::Manifest;

#[derive(Debug, thiserror::Error)]
pub enum ModelError {
    #[error("{0}")]
    Runtime(#[from] runtime::RuntimeError),
    #[error("manifest {path}: {message}")]
    Manifest { path: PathBuf, message: String },
    #[error("cannot load ONNX model {path}: {message}; check the file is a valid ONNX model")]
    Load { path: PathBuf, message: String },
    #[error("model {model} does not match manifest {manifest}:\n  - {}", .mismatches.join("\n  - "))]
    Mismatch {
        model: PathBuf,
        manifest: PathBuf,
        mismatches: Vec<String>,
    },
    #[error("running model {model} failed: {message}")]
    Inference { model: PathBuf, message: String },
}
