//! The `twinaudit pairs` folder loads with Hugging Face `datasets` (5.2.0, pinned in
//! tools/requirements-datasets.txt): `load_dataset("imagefolder", data_dir=OUT)` gives both
//! splits with every metadata column and value (tools/check_pairs_dataset.py does the checking).
//!
//! Needs the venv made by tools/setup-datasets-venv.sh (`.venv-datasets/`, or a Python named by
//! `TWINAUDIT_DATASETS_PYTHON`); without one that imports `datasets`, the test prints why on
//! stderr and passes, so `cargo test` stays offline and Python-free.

mod common;

use std::io::Write;
use std::path::{Path, PathBuf};
use std::process::Command;

use common::{config, known};
use twinaudit::audit::run_audit;
use twinaudit::pairs::select::SelectOptions;
use twinaudit::pairs::{build_pairs, PairsConfig};

/// Printed past libtest's capture (which only takes `print!`/`eprint!`), so a skip is visible.
fn say(message: &str) {
    let _ = writeln!(std::io::stderr(), "{message}");
}

fn datasets_python() -> Result<PathBuf, String> {
    let python = std::env::var_os("TWINAUDIT_DATASETS_PYTHON")
        .map(PathBuf::from)
        .unwrap_or_else(|| Path::new(env!("CARGO_MANIFEST_DIR")).join(".venv-datasets/bin/python"));
    if !python.is_file() {
        return Err(format!(
            "{} does not exist; run tools/setup-datasets-venv.sh once (needs PyPI)",
            python.display()
        ));
    }
    let probe = Command::new(&python)
        .args(["-c", "import datasets, PIL"])
        .output()
        .map_err(|e| format!("cannot run {}: {e}", python.display()))?;
    if !probe.status.success() {
        return Err(format!(
            "{} cannot import datasets ({}); run tools/setup-datasets-venv.sh",
            python.display(),
            String::from_utf8_lossy(&probe.stderr).trim()
        ));
    }
    Ok(python)
}

#[test]
fn hugging_face_datasets_loads_both_splits() {
    let python = match datasets_python() {
        Ok(p) => p,
        Err(reason) => {
            say(&format!(
                "SKIPPED hugging_face_datasets_loads_both_splits: {reason}"
            ));
            return;
        }
    };
    let dir = tempfile::tempdir().unwrap();
    let run = dir.path().join("run");
    let mut cfg = config(
        &known("specs/colour.json"),
        &known("colour_centre.manifest.json"),
        &run,
    );
    cfg.placebo = true;
    run_audit(&cfg).unwrap();
    let out = dir.path().join("pairs");
    // Originals and placebos: null, empty-list and boolean values all occur in both splits.
    build_pairs(&PairsConfig {
        run_dir: run,
        out_dir: out.clone(),
        select: SelectOptions {
            validation_fraction: 0.5,
            include_originals: true,
            include_placebo: true,
            ..SelectOptions::with_seed(0)
        },
        jobs: 2,
        show_progress: false,
    })
    .unwrap();
    let script = Path::new(env!("CARGO_MANIFEST_DIR")).join("tools/check_pairs_dataset.py");
    let output = Command::new(&python)
        .arg(&script)
        .arg(&out)
        .output()
        .unwrap();
    let stdout = String::from_utf8_lossy(&output.stdout);
    assert!(
        output.status.success(),
        "{} failed:\n{stdout}\n{}",
        script.display(),
        String::from_utf8_lossy(&output.stderr)
    );
    assert!(stdout.starts_with("ok: datasets 5.2.0"), "{stdout}");
    assert!(
        stdout.contains("train ") && stdout.contains("validation "),
        "{stdout}"
    );
}
