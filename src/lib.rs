//! twinaudit: counterfactual image-edit audits for VQA, counting and colour models.
//!
//! Pipeline: [`spec`] (cases, regions, edits, expectations) → [`render`] (edits on pixels) →
//! [`model`] (ONNX engine, manifests, pre/post-processing) → [`audit`] (runner, checker) →
//! [`analysis`] (summary.json, comparing two runs) → [`report`] (the HTML report and contact
//! sheets) and [`pairs`] (training data); [`stats`] for intervals and paired tests. [`cli`] turns
//! command lines into calls; `main.rs` only maps exit codes.

pub mod analysis;
pub mod audit;
pub mod cli;
pub mod imageio;
pub mod model;
pub mod pairs;
pub mod render;
pub mod report;
pub mod spec;
pub mod stats;
pub mod synth;
