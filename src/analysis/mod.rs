//! Conclusions drawn from finished run folders (read through `audit::replay::RunFolder`):
//! comparing two runs on the same pairs ([`compare`]). Every number is recomputed from
//! results.jsonl rows, never taken from a summary.json.

pub mod compare;
