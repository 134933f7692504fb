//! Contact-sheet speed on a 10,000-pair run (target: under a minute on 2 cores), measured with
//! and without the run's saved edits. `cargo bench --bench sheet` (needs tools/setup-runtime.sh).
//!
//! Set-up, once, cached under target/bench-data/sheet-10k/: `synth` draws 1,100 fruit-stall
//! scenes (seed 11, default options), and an audit of their spec with the bundled
//! models-cpu/stall-vqa model and `--save-edits` writes about 10,300 pairs. The sheet draws the
//! first 10,000 rows (`--limit 10000`), 10 rows a page, on 2 workers, into a fresh temporary
//! folder. "without saved edits" is a copy of the run holding only run.json and results.jsonl,
//! so every edited image is re-rendered from its recorded seed.
//!
//! Not criterion: one measurement takes tens of seconds and criterion needs at least ten. Each
//! case runs `SHEET_BENCH_REPEATS` times (default 3); the median and the spread are printed.
//! Outside `cargo bench` (e.g. `cargo test --all-targets`) it does nothing.

use std::path::{Path, PathBuf};
use std::time::Instant;

use twinaudit::audit::{run_audit, RunConfig};
use twinaudit::report::sheet::{write_sheet, SheetConfig};
use twinaudit::synth::{synthesize, SynthConfig};

const N_SCENES: u32 = 1_100;
const SEED: u64 = 11;
const N_ROWS: usize = 10_000;
const JOBS: usize = 2;

fn data_dir() -> PathBuf {
    let target = std::env::var_os("CARGO_TARGET_DIR")
        .map(PathBuf::from)
        .unwrap_or_else(|| Path::new(env!("CARGO_MANIFEST_DIR")).join("target"));
    target.join("bench-data").join("sheet-10k")
}

/// The 10,000-pair run with saved edits, and a copy without them.
fn prepare() -> (PathBuf, PathBuf) {
    let dir = data_dir();
    let run = dir.join("run");
    let bare = dir.join("run-without-edits");
    let done = dir.join("complete");
    if !done.is_file() {
        if dir.exists() {
            std::fs::remove_dir_all(&dir).unwrap();
        }
        let t = Instant::now();
        let synth = SynthConfig {
            jobs: JOBS,
            ..SynthConfig::new(dir.join("scenes"), N_SCENES, SEED)
        };
        let s = synthesize(&synth).unwrap();
        eprintln!(
            "set-up: synth {} scenes in {:.1} s",
            s.n_scenes,
            t.elapsed().as_secs_f64()
        );
        let t = Instant::now();
        let root = Path::new(env!("CARGO_MANIFEST_DIR"));
        let outcome = run_audit(&RunConfig {
            spec_path: s.spec_path.clone(),
            manifest_path: root.join("models-cpu/stall-vqa.manifest.json"),
            out_dir: run.clone(),
            seed: 0,
            jobs: JOBS,
            save_edits: true,
            resume: false,
            confidence: 0.95,
            show_progress: false,
            placebo: false,
        })
        .unwrap();
        eprintln!(
            "set-up: audit of {} pairs in {:.1} s",
            outcome.summary.n_pairs,
            t.elapsed().as_secs_f64()
        );
        assert!(outcome.summary.n_pairs as usize >= N_ROWS);
        std::fs::create_dir_all(&bare).unwrap();
        for f in ["run.json", "results.jsonl"] {
            std::fs::copy(run.join(f), bare.join(f)).unwrap();
        }
        std::fs::write(&done, "").unwrap();
    }
    (run, bare)
}

fn measure(name: &str, run: &Path, repeats: usize) {
    let mut seconds = Vec::new();
    for _ in 0..repeats {
        let out = tempfile::tempdir().unwrap();
        let cfg = SheetConfig {
            out_dir: out.path().join("sheet"),
            limit: Some(N_ROWS),
            rows_per_page: 10,
            jobs: JOBS,
            ..SheetConfig::new(run)
        };
        let t = Instant::now();
        let index = write_sheet(&cfg).unwrap();
        seconds.push(t.elapsed().as_secs_f64());
        assert_eq!(index.n_rows, N_ROWS);
        assert_eq!(index.n_rows_without_pictures, 0);
        let bytes: u64 = index
            .pages
            .iter()
            .map(|p| {
                std::fs::metadata(out.path().join("sheet").join(&p.file))
                    .unwrap()
                    .len()
            })
            .sum();
        eprintln!(
            "  {name}: {} pages, {:.0} MB, {:.1} s",
            index.pages.len(),
            bytes as f64 / 1e6,
            seconds.last().unwrap()
        );
    }
    seconds.sort_by(f64::total_cmp);
    println!(
        "sheet, {N_ROWS} rows, {JOBS} workers, {name}: median {:.1} s (min {:.1}, max {:.1}, {} runs), {:.2} ms a row",
        seconds[seconds.len() / 2],
        seconds[0],
        seconds[seconds.len() - 1],
        seconds.len(),
        1e3 * seconds[seconds.len() / 2] / N_ROWS as f64
    );
}

fn main() {
    if !std::env::args().any(|a| a == "--bench") {
        return;
    }
    let repeats = std::env::var("SHEET_BENCH_REPEATS")
        .ok()
        .and_then(|s| s.parse().ok())
        .unwrap_or(3usize)
        .max(1);
    let (run, bare) = prepare();
    measure("with saved edits", &run, repeats);
    measure("without saved edits (re-rendered)", &bare, repeats);
}
