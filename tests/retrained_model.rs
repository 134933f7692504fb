//! The audit-to-retraining loop on the demo (README, "From audit to retraining"): the committed
//! retrained model (models-cpu/stall-vqa-retrained, trained with pairs that `twinaudit pairs`
//! exported from an audit of other synthesized scenes) against the first model, through real
//! audits and `compare`. Thresholds are the acceptance lines: the shortcut's flip rate
//! falls with McNemar p < 0.01 on the demo pairs, and clean accuracy on fresh scenes does not
//! drop by more than 2 points.

mod common;

use std::path::{Path, PathBuf};

use twinaudit::analysis::compare::{compare_runs, CompareConfig, CompareOptions};
use twinaudit::audit::run_audit;
use twinaudit::synth::{synthesize, SynthConfig};

fn project(rel: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join(rel)
}

const FIRST: &str = "models-cpu/stall-vqa.manifest.json";
const RETRAINED: &str = "models-cpu/stall-vqa-retrained.manifest.json";

fn compare(spec: &Path, dir: &Path) -> twinaudit::analysis::compare::Comparison {
    for (name, model) in [("a", FIRST), ("b", RETRAINED)] {
        run_audit(&common::config(spec, &project(model), &dir.join(name))).unwrap();
    }
    compare_runs(&CompareConfig {
        run_a: dir.join("a"),
        run_b: dir.join("b"),
        options: CompareOptions::new(0.95, 0.05).unwrap(),
    })
    .unwrap()
}

#[test]
fn retraining_lowers_the_napkin_flip_rate_on_the_demo_pairs() {
    let dir = tempfile::tempdir().unwrap();
    let c = compare(&project("edit-specs"), dir.path());
    for operation in ["recolour", "cover"] {
        let g = c
            .groups
            .iter()
            .find(|g| {
                g.operation == operation
                    && g.role == "distractor"
                    && g.question_kind.as_str() == "colour"
            })
            .unwrap_or_else(|| panic!("no {operation}/distractor/colour group"));
        let f = &g.comparison.failure;
        println!(
            "{operation}: A {} B {} p {:.2e}",
            f.rate_a.describe(),
            f.rate_b.describe(),
            f.p_exact
        );
        assert!(
            f.rate_b.value < f.rate_a.value,
            "{operation}: flip rate did not fall"
        );
        assert!(
            f.p_exact < 0.01,
            "{operation}: McNemar exact p {}",
            f.p_exact
        );
    }
}

#[test]
fn retraining_keeps_clean_accuracy_on_fresh_scenes() {
    let dir = tempfile::tempdir().unwrap();
    let synth_dir = dir.path().join("synth");
    // The training distribution (both models' training.json), a seed no training run used.
    let config = SynthConfig {
        cloth_matches_bowl: Some(1.0),
        tags_match_apples: Some(0.9),
        cloth_rate: 0.9,
        jobs: 2,
        ..SynthConfig::new(&synth_dir, 150, 4244)
    };
    synthesize(&config).unwrap();
    let spec_path = synth_dir.join("spec.json");
    common::keep_first_edit_per_case(&spec_path);
    let c = compare(&spec_path, dir.path());
    let all = c.clean_accuracy_all.expect("cases with truth");
    let d = all.difference.expect("cases in both runs");
    println!(
        "clean accuracy: A {} B {} B − A {}",
        all.rate_a.describe(),
        all.rate_b.describe(),
        d.describe()
    );
    assert!(all.n >= 400, "enough questions to measure ({})", all.n);
    assert!(d.value >= -0.02, "clean accuracy fell by {}", d.describe());
}
