//! twinaudit: counterfactual image-edit audits for VQA, counting and colour models.
//!
//! Pipeline: [`spec`] (cases, regions, edits, expectations) → [`render`] (edits on pixels) →
//! [`model`] (ONNX engine, manifests, pre/post-processing) → [`audit`] (runner, checker) →
//! [`stats`] for intervals; [`analysis`] reads finished runs back (comparing two runs);
//! [`pairs`] turns a run into training data. [`cli`] turns command lines into calls; `main.rs`
//! only maps exit codes.

pub mod analysis;
pub mod audit;
pub mod cli;
pub mod imageio;
pub mod model;
pub mod pairs;
pub mod render;
pub mod spec;
pub mod stats;
pub mod synth;
