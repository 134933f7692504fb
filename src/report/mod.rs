//! report: turning a run into things people look at. Every report reads a finished run folder
//! through `audit::replay::RunFolder` and never writes into the run's own files.

pub mod sheet;
