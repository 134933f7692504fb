//! `twinaudit inspect` names every way a manifest disagrees with its model.
//! The models' true signatures are documented in tests/data/known/README.md
//! (built by tools/fixtures/known_models.py with onnx 1.23.2).

mod common;

use common::{bin, known};

fn inspect(model: &str, manifest: &str) -> (i32, String) {
    let out = bin()
        .args([
            "inspect",
            known(model).to_str().unwrap(),
            "--manifest",
            known(manifest).to_str().unwrap(),
        ])
        .output()
        .unwrap();
    (
        out.status.code().unwrap(),
        String::from_utf8_lossy(&out.stdout).into_owned(),
    )
}

#[test]
fn lists_inputs_and_outputs_and_accepts_a_matching_manifest() {
    let (code, out) = inspect("vqa_joint.onnx", "vqa_joint.manifest.json");
    assert_eq!(code, 0, "{out}");
    assert!(
        out.contains("pixels") && out.contains("float32  [1, 64, 64, 3]"),
        "{out}"
    );
    assert!(
        out.contains("tokens") && out.contains("int64    [1, 8]"),
        "{out}"
    );
    assert!(
        out.contains("answer_scores") && out.contains("[1, 18]"),
        "{out}"
    );
    assert!(out.contains("matches the model"), "{out}");
}

#[test]
fn names_a_wrong_tensor_name() {
    let (code, out) = inspect("count_red.onnx", "bad_tensor_name.manifest.json");
    assert_eq!(code, 2);
    assert!(
        out.contains(
            "image tensor \"img\" is not an input of the model; its inputs are [\"image\"]"
        ),
        "{out}"
    );
}

#[test]
fn names_a_wrong_shape() {
    let (code, out) = inspect("count_red.onnx", "bad_shape.manifest.json");
    assert_eq!(code, 2);
    assert!(out.contains("image tensor \"image\" has shape [1, 3, 64, 64] in the model but the manifest feeds [1, 3, 64, 32]"), "{out}");
}

#[test]
fn names_a_wrong_element_type() {
    let (code, out) = inspect("vqa_joint.onnx", "bad_type.manifest.json");
    assert_eq!(code, 2);
    assert!(out.contains("question tensor \"tokens\" has element type int64 in the model but the manifest feeds int32"), "{out}");
}

#[test]
fn json_output_is_parseable() {
    let out = bin()
        .args([
            "inspect",
            known("count_red.onnx").to_str().unwrap(),
            "--json",
        ])
        .output()
        .unwrap();
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["io"]["inputs"][0]["name"], "image");
    assert_eq!(v["io"]["outputs"][0]["shape"], serde_json::json!([1, 10]));
}

#[test]
fn not_an_onnx_file_is_a_clear_error() {
    let dir = tempfile::tempdir().unwrap();
    let fake = dir.path().join("fake.onnx");
    std::fs::write(&fake, b"not a model").unwrap();
    let out = bin()
        .args(["inspect", fake.to_str().unwrap()])
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2));
    assert!(
        err.contains(&format!("cannot load ONNX model {}", fake.display())),
        "{err}"
    );
    assert!(!err.contains("panicked"), "{err}");
}
