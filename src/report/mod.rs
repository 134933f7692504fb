//! Human-readable views of a finished run folder: the self-contained HTML report
//! (`twinaudit report`, [`html`]) with its inline SVG plots ([`svg`]). Reports only read the run
//! (run.json, results.jsonl, saved or re-rendered edits) and write one file.

pub mod html;
pub mod svg;
