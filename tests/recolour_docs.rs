//! docs/spec.md against the code: the named-colour table equals `NAMED_COLOURS` (with the sRGB
//! each value converts to), and every `cover` / `recolour` example in the document passes the
//! operation's parameter check.
//!
//! Source: docs/spec.md as committed; sRGB values through `lab_to_srgb`, which
//! tests/colour_conversions.rs checks against colour-science 0.4.7.

use std::path::Path;

use serde_json::Value;
use twinaudit::render::colour::{lab_to_srgb, NAMED_COLOURS};
use twinaudit::render::find_operation;

fn spec_md() -> String {
    std::fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join("docs/spec.md"))
        .expect("docs/spec.md")
}

fn number(cell: &str) -> f64 {
    cell.trim()
        .replace('−', "-")
        .parse()
        .unwrap_or_else(|e| panic!("{cell:?}: {e}"))
}

#[test]
fn named_colour_table_in_docs_matches_the_code() {
    let text = spec_md();
    let mut rows = 0;
    for entry in &NAMED_COLOURS {
        let prefix = format!("| {} |", entry.name);
        let line = text
            .lines()
            .find(|l| l.starts_with(&prefix))
            .unwrap_or_else(|| panic!("docs/spec.md has no table row for {}", entry.name));
        let cells: Vec<&str> = line.trim_matches('|').split('|').map(str::trim).collect();
        assert_eq!(cells.len(), 6, "{line}");
        let lab = [number(cells[1]), number(cells[2]), number(cells[3])];
        assert_eq!(lab, entry.lab, "{}: L*a*b*", entry.name);
        let range: Vec<f64> = cells[4].split('–').map(number).collect();
        assert_eq!(
            range,
            entry.lightness_range.to_vec(),
            "{}: L* range",
            entry.name
        );
        let srgb: Vec<u8> = cells[5]
            .trim_matches(|c| c == '(' || c == ')')
            .split(',')
            .map(|v| v.trim().parse().unwrap())
            .collect();
        assert_eq!(
            lab_to_srgb(entry.lab),
            ([srgb[0], srgb[1], srgb[2]], false),
            "{}",
            entry.name
        );
        rows += 1;
    }
    assert_eq!(rows, 11);
}

#[test]
fn cover_and_recolour_examples_in_docs_are_valid() {
    let text = spec_md();
    let mut checked = Vec::new();
    for block in text.split("```json").skip(1) {
        let body = block.split("```").next().unwrap();
        let Ok(value) = serde_json::from_str::<Value>(body) else {
            continue;
        };
        let edits: Vec<Value> = match value {
            Value::Array(items) => items,
            Value::Object(_) => vec![value],
            _ => continue,
        };
        for edit in edits {
            let Some(op) = edit["operation"].as_str() else {
                continue;
            };
            if op != "cover" && op != "recolour" {
                continue;
            }
            let params = edit
                .get("params")
                .and_then(Value::as_object)
                .cloned()
                .unwrap_or_default();
            find_operation(op)
                .expect("registered")
                .check(&params)
                .unwrap_or_else(|e| panic!("docs example {edit}: {e}"));
            checked.push(edit["id"].as_str().unwrap_or("?").to_string());
        }
    }
    println!("checked {checked:?}");
    for id in ["blur-lemons", "noise-tag", "recolour-lemon-1"] {
        assert!(
            checked.iter().any(|c| c == id),
            "example {id} not found or not checked"
        );
    }
}
