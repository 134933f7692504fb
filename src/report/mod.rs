//! report: turning a run into things people look at: the self-contained HTML report
//! (`twinaudit report`, [`html`]) with its inline SVG plots ([`svg`]), and contact-sheet PNG pages
//! (`twinaudit sheet`, [`sheet`]). Every report reads a finished run folder through
//! `audit::replay::RunFolder` and never writes into the run's own files.

pub mod html;
pub mod sheet;
pub mod svg;
