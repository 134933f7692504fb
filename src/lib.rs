//! twinaudit: counterfactual image-edit audits for VQA, counting and colour models.
//!
//! Pipeline: [`spec`] (cases, regions, edits, expectations) → [`render`] (edits on pixels) →
//! [`model`] (ONNX engine, manifests, pre/post-processing) → [`audit`] (runner, checker) →
//! [`stats`] for intervals; [`report`] turns a finished run into things people look at. [`cli`]
//! turns command lines into calls; `main.rs` only maps exit codes.

pub mod audit;
pub mod cli;
pub mod imageio;
pub mod model;
pub mod render;
pub mod report;
pub mod spec;
pub mod stats;
pub mod synth;
