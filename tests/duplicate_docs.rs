//! docs/spec.md and docs/spec.schema.json against the code for `duplicate`: the documented
//! examples pass the operation's parameter check with the documented effect, and the schema's
//! operation enum lists every registered operation.

use std::path::Path;

use serde_json::Value;
use twinaudit::render::{find_operation, operation_names};
use twinaudit::spec::Effect;

fn doc(rel: &str) -> String {
    std::fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join(rel)).expect(rel)
}

#[test]
fn duplicate_examples_in_docs_are_valid() {
    let text = doc("docs/spec.md");
    let mut checked = Vec::new();
    for block in text.split("```json").skip(1) {
        let body = block.split("```").next().unwrap();
        let Ok(Value::Array(edits)) = serde_json::from_str::<Value>(body) else {
            continue;
        };
        for edit in edits {
            if edit["operation"].as_str() != Some("duplicate") {
                continue;
            }
            let params = edit["params"].as_object().cloned().unwrap_or_default();
            let copies = params.get("copies").and_then(Value::as_u64).unwrap_or(1) as usize;
            let effect = find_operation("duplicate")
                .expect("registered")
                .check(&params)
                .unwrap_or_else(|e| panic!("docs example {edit}: {e}"));
            assert_eq!(
                effect,
                Effect::Adds {
                    copies_each: copies
                }
            );
            checked.push(edit["id"].as_str().unwrap_or("?").to_string());
        }
    }
    assert_eq!(checked, ["dup-lemon-1", "dup-tag-paste"]);
}

#[test]
fn schema_lists_every_operation() {
    let schema: Value = serde_json::from_str(&doc("docs/spec.schema.json")).unwrap();
    let text = schema.to_string();
    for name in operation_names() {
        assert!(
            text.contains(&format!("\"{name}\"")),
            "docs/spec.schema.json does not list operation {name}"
        );
    }
}
