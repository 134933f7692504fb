//! A missing or unusable ONNX Runtime library is one clear error that says how to fix it.

mod common;

use common::{bin, known};

fn inspect_with_dylib(path: &std::path::Path) -> String {
    let out = bin()
        .env("ORT_DYLIB_PATH", path)
        .args(["inspect", known("count_red.onnx").to_str().unwrap()])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr).into_owned();
    assert!(!err.contains("panicked"), "{err}");
    err
}

#[test]
fn missing_library_says_how_to_fix_it() {
    let err = inspect_with_dylib(std::path::Path::new(
        "/nonexistent/libonnxruntime.so.1.32.0",
    ));
    assert!(
        err.contains("$ORT_DYLIB_PATH names no file") && err.contains("tools/setup-runtime.sh"),
        "{err}"
    );
}

#[test]
fn a_file_that_is_not_the_library_says_how_to_fix_it() {
    let dir = tempfile::tempdir().unwrap();
    let fake = dir.path().join("libonnxruntime.so.1.32.0");
    std::fs::write(&fake, b"not a shared library").unwrap();
    let err = inspect_with_dylib(&fake);
    assert!(
        err.contains(&format!("cannot load ONNX Runtime from {}", fake.display())),
        "{err}"
    );
    assert!(err.contains("tools/setup-runtime.sh"), "{err}");
}

/// A stand-in library whose `OrtGetApiBase` reports version 1.10.0, built with the system C
/// compiler; ONNX Runtime's C API (onnxruntime_c_api.h) defines OrtApiBase as these two functions.
#[test]
fn too_old_library_is_refused_with_the_version() {
    let dir = tempfile::tempdir().unwrap();
    let src = dir.path().join("old.c");
    std::fs::write(
        &src,
        "#include <stddef.h>\n#include <stdint.h>\n\
         static const void* get_api(uint32_t v) { (void)v; return NULL; }\n\
         static const char* version(void) { return \"1.10.0\"; }\n\
         struct base { const void* (*GetApi)(uint32_t); const char* (*GetVersionString)(void); };\n\
         static const struct base b = { get_api, version };\n\
         const struct base* OrtGetApiBase(void) { return &b; }\n",
    )
    .unwrap();
    let lib = dir.path().join("libonnxruntime.so.1.10.0");
    let cc = std::process::Command::new("cc")
        .args([
            "-shared",
            "-fPIC",
            "-o",
            lib.to_str().unwrap(),
            src.to_str().unwrap(),
        ])
        .status();
    if !matches!(cc, Ok(s) if s.success()) {
        eprintln!("skipped: no working C compiler (cc) to build the stand-in library");
        return;
    }
    let err = inspect_with_dylib(&lib);
    assert!(err.contains("1.10.0") && err.contains("1.31"), "{err}");
    assert!(err.contains("tools/setup-runtime.sh"), "{err}");
}
