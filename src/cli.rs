//! Command-line types and dispatch. clap types stop here: each command becomes a validated
//! config struct before any stage sees it.

use std::io::IsTerminal;
use std::path::PathBuf;

use anyhow::{bail, Context};
use clap::{Args, Parser, Subcommand, ValueEnum};

use crate::analysis::compare::{
    compare_runs, render_text as render_compare_text, CompareConfig, CompareOptions,
};
use crate::analysis::render_text;
use crate::audit::{run_audit, RunConfig};
use crate::model::check::{check_manifest, describe};
use crate::model::engine::open_session;
use crate::model::Manifest;
use crate::report::sheet::{
    write_sheet, Outcome, PairSet, RowFilter, SheetConfig, SortKey, MAX_ROWS_PER_PAGE,
};

#[derive(Debug, Parser)]
#[command(
    name = "twinaudit",
    version,
    about = "Audit VQA, counting and colour models with counterfactual image edits"
)]
pub struct Cli {
    #[command(subcommand)]
    pub command: Command,
}

#[derive(Debug, Subcommand)]
pub enum Command {
    /// Edit every case's image as its spec says, ask the model before and after, and judge each pair.
    Run(RunArgs),
    /// Print an ONNX model's inputs and outputs, and check a manifest against them.
    Inspect(InspectArgs),
    /// Run the bundled audit (edit-specs/ with the bundled model) and print its summary.
    Demo(DemoArgs),
    /// Generate fruit-stall scenes with exact masks, an edit spec and scenes.jsonl.
    Synth(SynthArgs),
    /// Compare two runs on the same pairs: rates, paired differences (B − A) and McNemar tests.
    Compare(CompareArgs),
    /// Turn a finished run into training data: each edited image with its counterfactual answer,
    /// as an ImageFolder dataset (train/ and validation/ with metadata.jsonl).
    Pairs(PairsArgs),
    /// Write a self-contained HTML report of a finished run (tables, plots, failures gallery).
    Report(ReportArgs),
    /// Draw a run's pairs on PNG pages: original, edited with the edited shape outlined,
    /// difference heat map, and question, answers, expectation and verdict in words.
    Sheet(SheetArgs),
}

#[derive(Debug, Args)]
pub struct CompareArgs {
    /// Run folder A (the baseline).
    pub run_a: PathBuf,
    /// Run folder B (compared against A; differences are B − A).
    pub run_b: PathBuf,
    /// Confidence level of every interval.
    #[arg(long, default_value_t = 0.95)]
    pub confidence: f64,
    /// Significance level of the McNemar tests (Holm-adjusted within the group and accuracy tables).
    #[arg(long, default_value_t = crate::analysis::compare::DEFAULT_ALPHA)]
    pub alpha: f64,
    /// Print the comparison as JSON (docs/compare.md) instead of the report.
    #[arg(long)]
    pub json: bool,
    /// Exit with code 1 when B is significantly worse than A in any row (for CI).
    #[arg(long)]
    pub fail_on_regression: bool,
}

#[derive(Debug, Args)]
pub struct PairsArgs {
    /// Run folder written by `twinaudit run` or `twinaudit demo` (its spec files must be
    /// readable and unchanged).
    pub run_dir: PathBuf,
    /// Output folder; must not exist or be empty.
    #[arg(long)]
    pub out: PathBuf,
    /// Seed of the split, the cap and the balance (same seed and options, same bytes).
    #[arg(long, default_value_t = 0)]
    pub seed: u64,
    /// Share of source images whose rows go to validation/, in [0, 1); 0 writes train/ only.
    #[arg(long, default_value_t = crate::pairs::select::DEFAULT_VALIDATION_FRACTION)]
    pub validation_fraction: f64,
    /// Also write each case's unedited image with its question and ground truth (relation `original`).
    #[arg(long)]
    pub originals: bool,
    /// Keep only the pairs the audit judged failed (flipped, did not move, moved elsewhere).
    #[arg(long)]
    pub only_failed: bool,
    /// Keep only the pairs whose answer on the edited image differs from the row's label.
    #[arg(long)]
    pub only_wrong: bool,
    /// Keep as many change as same pairs in each split (the larger relation is subsampled).
    #[arg(long)]
    pub balance: bool,
    /// Keep at most this many pairs per source image (chosen by the seed).
    #[arg(long)]
    pub max_per_image: Option<usize>,
    /// Keep placebo controls (from `run --placebo`) as same pairs; they are left out by default.
    #[arg(long)]
    pub placebo: bool,
    /// Threads rendering and writing images [default: number of cores].
    #[arg(long)]
    pub jobs: Option<usize>,
    /// Print pairs.json on stdout instead of the table (no progress bar).
    #[arg(long)]
    pub json: bool,
}

#[derive(Debug, Args)]
pub struct ReportArgs {
    /// The run folder (run.json, results.jsonl).
    pub run_dir: PathBuf,
    /// Where to write the HTML file [default: RUN_DIR/report.html].
    #[arg(long)]
    pub out: Option<PathBuf>,
    /// Confidence level of every interval; the summary is recomputed from results.jsonl.
    #[arg(long, default_value_t = 0.95)]
    pub confidence: f64,
    /// Print the report's path and the recomputed summary as JSON.
    #[arg(long)]
    pub json: bool,
}

#[derive(Debug, Clone, Copy, ValueEnum)]
pub enum VerdictArg {
    Held,
    Flipped,
    #[value(alias = "moved_to_expected")]
    MovedToExpected,
    #[value(alias = "moved_elsewhere")]
    MovedElsewhere,
    #[value(alias = "did_not_move")]
    DidNotMove,
}

#[derive(Debug, Clone, Copy, ValueEnum)]
pub enum OutcomeArg {
    Passed,
    Failed,
    /// Pairs that could not be judged.
    Error,
}

#[derive(Debug, Clone, Copy, ValueEnum)]
pub enum RoleArg {
    Target,
    Distractor,
    Mixed,
}

#[derive(Debug, Clone, Copy, ValueEnum)]
pub enum KindArg {
    Count,
    #[value(alias = "color")]
    Colour,
    Exists,
    Other,
}

#[derive(Debug, Clone, Copy, ValueEnum)]
pub enum PairsArg {
    All,
    Real,
    Placebo,
}

#[derive(Debug, Clone, Copy, ValueEnum)]
pub enum SortArg {
    /// results.jsonl order.
    Line,
    /// Pair id, ascending.
    PairId,
    /// After-edit answer probability, highest first.
    Confidence,
    /// Edited area, largest first.
    Area,
}

#[derive(Debug, Args)]
pub struct SheetArgs {
    /// The run folder (run.json, results.jsonl).
    pub run: PathBuf,
    /// Output folder [default: RUN/sheet]; an earlier sheet there is replaced, other files stop the command.
    #[arg(long)]
    pub out: Option<PathBuf>,
    /// Keep pairs with these verdicts (comma-separated).
    #[arg(long, value_enum, value_delimiter = ',')]
    pub verdict: Vec<VerdictArg>,
    /// Keep passed, failed or not-judged pairs.
    #[arg(long, value_enum)]
    pub outcome: Option<OutcomeArg>,
    /// Keep pairs edited with these operations (comma-separated, e.g. erase,recolour).
    #[arg(long, value_delimiter = ',')]
    pub operation: Vec<String>,
    /// Keep pairs whose edited regions have this role (comma-separated).
    #[arg(long, value_enum, value_delimiter = ',')]
    pub role: Vec<RoleArg>,
    /// Keep pairs with these question kinds (comma-separated).
    #[arg(long, value_enum, value_delimiter = ',')]
    pub kind: Vec<KindArg>,
    /// Keep pairs with an edited region of this label (repeat for several; labels may hold commas).
    #[arg(long)]
    pub label: Vec<String>,
    /// Real pairs, placebo controls or both.
    #[arg(long, value_enum, default_value = "all")]
    pub pairs: PairsArg,
    /// Keep only the real distractor edits of the label whose edits flip answers most often
    /// (the first line of the summary's distractor ranking); combine with --verdict flipped.
    #[arg(long)]
    pub top_confounder: bool,
    /// Row order.
    #[arg(long, value_enum, default_value = "line")]
    pub sort: SortArg,
    /// Reverse the order.
    #[arg(long)]
    pub reverse: bool,
    /// Rows on each page (1..=100).
    #[arg(long, default_value_t = 10)]
    pub rows_per_page: usize,
    /// Draw at most this many rows (after sorting).
    #[arg(long)]
    pub limit: Option<usize>,
    /// Worker threads, each drawing whole pages [default: number of cores].
    #[arg(long)]
    pub jobs: Option<usize>,
    /// Print index.json (pages and the pair on each row) on stdout; no progress bar.
    #[arg(long)]
    pub json: bool,
}

#[derive(Debug, Args)]
pub struct SynthArgs {
    /// Number of scenes.
    #[arg(long)]
    pub scenes: u32,
    /// Seed of every random choice (same seed and options, same bytes).
    #[arg(long, default_value_t = 0)]
    pub seed: u64,
    /// Output folder; must not exist or be empty.
    #[arg(long)]
    pub out: PathBuf,
    /// Image width and height in pixels (128..=1024).
    #[arg(long, default_value_t = 256)]
    pub size: u32,
    /// Probability that the napkin has the bowl's colour (plants a colour shortcut) [default: independent].
    #[arg(long)]
    pub cloth_matches_bowl: Option<f64>,
    /// Probability that there are as many price tags as apples, at most 4 (plants a counting shortcut) [default: independent].
    #[arg(long)]
    pub tags_match_apples: Option<f64>,
    /// Probability that a scene has a napkin (cloth).
    #[arg(long, default_value_t = crate::synth::DEFAULT_CLOTH_RATE)]
    pub cloth_rate: f64,
    /// Most fruit per scene (3..=16); bowl, napkin and tags come on top.
    #[arg(long, default_value_t = 9)]
    pub max_objects: u32,
}

#[derive(Debug, Args)]
pub struct DemoArgs {
    /// Output folder [default: runs/demo-<UTC time> in the project].
    #[arg(long)]
    pub out: Option<PathBuf>,
    /// Print summary.json on stdout instead of the table.
    #[arg(long)]
    pub json: bool,
}

/// The bundled audit, relative to the project folder.
pub const DEMO_SPECS: &str = "edit-specs";
pub const DEMO_MANIFEST: &str = "models-cpu/stall-vqa.manifest.json";

/// The project folder holding the bundled demo: the working directory or an ancestor, else the
/// source tree this binary was built from.
fn project_dir() -> PathBuf {
    let has_demo =
        |d: &std::path::Path| d.join(DEMO_SPECS).is_dir() && d.join(DEMO_MANIFEST).is_file();
    std::env::current_dir()
        .ok()
        .and_then(|cwd| {
            cwd.ancestors()
                .find(|d| has_demo(d))
                .map(|d| d.to_path_buf())
        })
        .unwrap_or_else(|| PathBuf::from(env!("CARGO_MANIFEST_DIR")))
}

#[derive(Debug, Args)]
pub struct RunArgs {
    /// Edit spec file, or a folder of them (*.json, searched recursively).
    #[arg(long)]
    pub spec: PathBuf,
    /// Model manifest (JSON) naming the ONNX file and how to feed it.
    #[arg(long)]
    pub model: PathBuf,
    /// Output folder; must not exist or be empty, unless --resume.
    #[arg(long)]
    pub out: PathBuf,
    /// Seed for every random choice of the edits (recorded in run.json).
    #[arg(long, default_value_t = 0)]
    pub seed: u64,
    /// Worker threads, each with its own model session [default: number of cores].
    #[arg(long)]
    pub jobs: Option<usize>,
    /// Also write every edited image under OUT/edits/.
    #[arg(long)]
    pub save_edits: bool,
    /// Continue an interrupted run in OUT: pairs already in results.jsonl are skipped.
    #[arg(long)]
    pub resume: bool,
    /// Confidence level of the summary's Wilson intervals.
    #[arg(long, default_value_t = 0.95)]
    pub confidence: f64,
    /// Print summary.json on stdout instead of the table (no progress bar).
    #[arg(long)]
    pub json: bool,
    /// Add a placebo control per edit: the same edit moved onto background clear of every
    /// region, expected to leave the answer unchanged; the summary shows its flip rate.
    #[arg(long)]
    pub placebo: bool,
}

#[derive(Debug, Args)]
pub struct InspectArgs {
    /// The ONNX model file.
    pub model: PathBuf,
    /// A manifest to check against the model.
    #[arg(long)]
    pub manifest: Option<PathBuf>,
    /// Print JSON.
    #[arg(long)]
    pub json: bool,
}

/// Cores available to this process (the default of every `--jobs`).
fn n_cores() -> usize {
    std::thread::available_parallelism().map_or(1, |n| n.get())
}

/// Runs a command; returns the process exit code.
pub fn execute(cli: Cli) -> anyhow::Result<u8> {
    match cli.command {
        Command::Run(args) => run(args),
        Command::Inspect(args) => inspect(args),
        Command::Demo(args) => demo(args),
        Command::Synth(args) => synth(args),
        Command::Compare(args) => compare(args),
        Command::Pairs(args) => pairs(args),
        Command::Report(args) => report(args),
        Command::Sheet(args) => sheet(args),
    }
}

fn compare(args: CompareArgs) -> anyhow::Result<u8> {
    let config = CompareConfig {
        options: CompareOptions::new(args.confidence, args.alpha)
            .context("invalid --confidence or --alpha")?,
        run_a: args.run_a,
        run_b: args.run_b,
    };
    let comparison = compare_runs(&config).with_context(|| {
        format!(
            "cannot compare {} with {}",
            config.run_a.display(),
            config.run_b.display()
        )
    })?;
    if args.json {
        println!("{}", serde_json::to_string_pretty(&comparison)?);
    } else {
        print!("{}", render_compare_text(&comparison));
    }
    if args.fail_on_regression && comparison.n_rows_b_worse > 0 {
        eprintln!(
            "twinaudit: run B ({}) is significantly worse than run A ({}) in {} row(s)",
            comparison.run_b.dir, comparison.run_a.dir, comparison.n_rows_b_worse
        );
        return Ok(1);
    }
    Ok(0)
}

fn pairs(args: PairsArgs) -> anyhow::Result<u8> {
    let config = crate::pairs::PairsConfig {
        run_dir: args.run_dir,
        out_dir: args.out,
        select: crate::pairs::select::SelectOptions {
            seed: args.seed,
            validation_fraction: args.validation_fraction,
            include_originals: args.originals,
            only_failed: args.only_failed,
            only_wrong: args.only_wrong,
            balance: args.balance,
            max_per_image: args.max_per_image,
            include_placebo: args.placebo,
        },
        jobs: args.jobs.unwrap_or_else(n_cores),
        show_progress: !args.json && std::io::stderr().is_terminal(),
    };
    config.check()?;
    let start = std::time::Instant::now();
    let s = crate::pairs::build_pairs(&config).context("pairs failed")?;
    if args.json {
        println!("{}", serde_json::to_string_pretty(&s)?);
    } else {
        print!("{}", crate::pairs::render_text(&s, &config.out_dir));
        println!(
            "wrote {}/{{train, validation}}/metadata.jsonl and {} in {:.1} s",
            config.out_dir.display(),
            crate::pairs::PAIRS_SUMMARY_FILE,
            start.elapsed().as_secs_f64()
        );
    }
    if !s.failures.is_empty() {
        eprintln!(
            "twinaudit: {} images could not be made and are not in the dataset; see \"failures\" in {}",
            s.failures.len(),
            config.out_dir.join(crate::pairs::PAIRS_SUMMARY_FILE).display()
        );
        return Ok(2);
    }
    Ok(0)
}

fn sheet_config(args: &SheetArgs) -> anyhow::Result<SheetConfig> {
    if args.rows_per_page == 0 || args.rows_per_page > MAX_ROWS_PER_PAGE {
        bail!(
            "--rows-per-page must lie in 1..={MAX_ROWS_PER_PAGE}, got {}",
            args.rows_per_page
        );
    }
    if args.limit == Some(0) {
        bail!("--limit must be at least 1, got 0");
    }
    if args.jobs == Some(0) {
        bail!("--jobs must be at least 1, got 0");
    }
    if let Some(empty) = args
        .operation
        .iter()
        .chain(&args.label)
        .find(|s| s.is_empty())
    {
        bail!("--operation and --label need a value, got {empty:?}");
    }
    use crate::audit::checker::Verdict;
    use crate::spec::QuestionKind;
    let filter = RowFilter {
        verdicts: args
            .verdict
            .iter()
            .map(|v| match v {
                VerdictArg::Held => Verdict::Held,
                VerdictArg::Flipped => Verdict::Flipped,
                VerdictArg::MovedToExpected => Verdict::MovedToExpected,
                VerdictArg::MovedElsewhere => Verdict::MovedElsewhere,
                VerdictArg::DidNotMove => Verdict::DidNotMove,
            })
            .collect(),
        outcome: args.outcome.map(|o| match o {
            OutcomeArg::Passed => Outcome::Passed,
            OutcomeArg::Failed => Outcome::Failed,
            OutcomeArg::Error => Outcome::Error,
        }),
        operations: args.operation.clone(),
        roles: args
            .role
            .iter()
            .map(|r| {
                match r {
                    RoleArg::Target => "target",
                    RoleArg::Distractor => "distractor",
                    RoleArg::Mixed => "mixed",
                }
                .to_string()
            })
            .collect(),
        kinds: args
            .kind
            .iter()
            .map(|k| match k {
                KindArg::Count => QuestionKind::Count,
                KindArg::Colour => QuestionKind::Colour,
                KindArg::Exists => QuestionKind::Exists,
                KindArg::Other => QuestionKind::Other,
            })
            .collect(),
        labels: args.label.clone(),
        pairs: match args.pairs {
            PairsArg::All => PairSet::All,
            PairsArg::Real => PairSet::Real,
            PairsArg::Placebo => PairSet::Placebo,
        },
        top_confounder: args.top_confounder,
    };
    Ok(SheetConfig {
        out_dir: args
            .out
            .clone()
            .unwrap_or_else(|| args.run.join(crate::report::sheet::SHEET_DIR)),
        filter,
        sort: match args.sort {
            SortArg::Line => SortKey::Line,
            SortArg::PairId => SortKey::PairId,
            SortArg::Confidence => SortKey::Confidence,
            SortArg::Area => SortKey::Area,
        },
        reverse: args.reverse,
        rows_per_page: args.rows_per_page,
        limit: args.limit,
        jobs: args.jobs.unwrap_or_else(|| {
            std::thread::available_parallelism()
                .map(|n| n.get())
                .unwrap_or(1)
        }),
        show_progress: !args.json && std::io::stderr().is_terminal(),
        ..SheetConfig::new(&args.run)
    })
}

fn sheet(args: SheetArgs) -> anyhow::Result<u8> {
    let config = sheet_config(&args)?;
    let start = std::time::Instant::now();
    let index = write_sheet(&config).context("sheet failed")?;
    if args.json {
        println!("{}", serde_json::to_string_pretty(&index)?);
    } else {
        if let Some(c) = &index.selection.top_confounder {
            println!(
                "top confounder: {:?} distractor on {} questions, flip rate {}",
                c.label,
                c.question_kind.as_str(),
                c.flip_rate.describe()
            );
        }
        if index.n_rows == 0 {
            println!(
                "no pair of {} matches ({}); wrote an empty {}",
                config.run_dir.display(),
                index.selection.filter.describe(),
                config
                    .out_dir
                    .join(crate::report::sheet::INDEX_FILE)
                    .display()
            );
        } else {
            println!(
                "wrote {} page(s), {} row(s) ({} matched, {} a page) to {} in {:.1} s\nindex: {}",
                index.pages.len(),
                index.n_rows,
                index.selection.n_matching,
                index.selection.rows_per_page,
                config.out_dir.display(),
                start.elapsed().as_secs_f64(),
                config
                    .out_dir
                    .join(crate::report::sheet::INDEX_FILE)
                    .display()
            );
        }
    }
    if index.n_rows_without_pictures > 0 {
        eprintln!(
            "twinaudit: {} row(s) have no pictures; see \"problem\" in {}",
            index.n_rows_without_pictures,
            config
                .out_dir
                .join(crate::report::sheet::INDEX_FILE)
                .display()
        );
        return Ok(2);
    }
    Ok(0)
}

fn check_confidence(confidence: f64) -> anyhow::Result<()> {
    if !(confidence > 0.0 && confidence < 1.0) {
        bail!("--confidence must lie strictly between 0 and 1, got {confidence}");
    }
    Ok(())
}

fn report(args: ReportArgs) -> anyhow::Result<u8> {
    check_confidence(args.confidence)?;
    let config = crate::report::html::ReportConfig {
        run_dir: args.run_dir,
        out_path: args.out,
        confidence: args.confidence,
    };
    let outcome = crate::report::html::write_report(&config).context("report failed")?;
    if args.json {
        let value = serde_json::json!({
            "report": outcome.path,
            "bytes": outcome.bytes,
            "gallery_pairs": outcome.n_gallery_pairs,
            "summary": outcome.summary,
        });
        println!("{}", serde_json::to_string_pretty(&value)?);
    } else {
        println!(
            "wrote {} ({:.1} KB, {} gallery pairs with images)",
            outcome.path.display(),
            outcome.bytes as f64 / 1024.0,
            outcome.n_gallery_pairs
        );
    }
    Ok(0)
}

fn synth(args: SynthArgs) -> anyhow::Result<u8> {
    let config = crate::synth::SynthConfig {
        cloth_matches_bowl: args.cloth_matches_bowl,
        tags_match_apples: args.tags_match_apples,
        cloth_rate: args.cloth_rate,
        size: args.size,
        max_objects: args.max_objects,
        jobs: n_cores(),
        ..crate::synth::SynthConfig::new(args.out, args.scenes, args.seed)
    };
    let start = std::time::Instant::now();
    let s = crate::synth::synthesize(&config).context("synth failed")?;
    println!(
        "wrote {} scenes ({} cases, {} objects, {:.1} MB) to {} in {:.1} s\nspec: {}\nscenes: {}",
        s.n_scenes,
        s.n_cases,
        s.n_objects,
        s.bytes_written as f64 / 1e6,
        s.out_dir.display(),
        start.elapsed().as_secs_f64(),
        s.spec_path.display(),
        s.scenes_path.display()
    );
    Ok(0)
}

fn demo(args: DemoArgs) -> anyhow::Result<u8> {
    let root = project_dir();
    let stamp = crate::audit::run_info::now_rfc3339().replace([':', '-'], "");
    let out = args
        .out
        .unwrap_or_else(|| root.join("runs").join(format!("demo-{stamp}")));
    let start = std::time::Instant::now();
    let code = run(RunArgs {
        spec: root.join(DEMO_SPECS),
        model: root.join(DEMO_MANIFEST),
        out: out.clone(),
        seed: 0,
        jobs: None,
        save_edits: true,
        resume: false,
        confidence: 0.95,
        json: args.json,
        placebo: false,
    })?;
    if !args.json {
        println!(
            "demo finished in {:.1} s; edited images in {}",
            start.elapsed().as_secs_f64(),
            out.join("edits").display()
        );
        println!(
            "review it: twinaudit report {dir} (HTML), twinaudit sheet {dir} --top-confounder (PNG pages)",
            dir = out.display()
        );
    }
    Ok(code)
}

fn run(args: RunArgs) -> anyhow::Result<u8> {
    check_confidence(args.confidence)?;
    let config = RunConfig {
        spec_path: args.spec,
        manifest_path: args.model,
        out_dir: args.out,
        seed: args.seed,
        jobs: args.jobs.unwrap_or_else(n_cores),
        save_edits: args.save_edits,
        resume: args.resume,
        confidence: args.confidence,
        show_progress: !args.json && std::io::stderr().is_terminal(),
        placebo: args.placebo,
    };
    let outcome = run_audit(&config).context("audit failed")?;
    let s = &outcome.summary;
    if args.json {
        println!("{}", serde_json::to_string_pretty(s)?);
    } else {
        print!("{}", render_text(s));
        println!(
            "\nwrote {}/{{run.json, results.jsonl, summary.json}}",
            outcome.out_dir.display()
        );
    }
    if s.n_errors > 0 {
        eprintln!(
            "twinaudit: {} of {} pairs could not be judged; see the \"error\" field of their lines in {}",
            s.n_errors,
            s.n_pairs,
            outcome.out_dir.join("results.jsonl").display()
        );
        return Ok(2);
    }
    if let Some(p) = s.placebo.as_ref().filter(|p| p.n_errors > 0) {
        eprintln!(
            "twinaudit: {} of {} placebo controls could not be judged (most often no free background fits the edit); see the \"error\" field of their lines in {}",
            p.n_errors,
            p.n_pairs,
            outcome.out_dir.join("results.jsonl").display()
        );
        return Ok(2);
    }
    Ok(0)
}

fn inspect(args: InspectArgs) -> anyhow::Result<u8> {
    let session = open_session(&args.model, 1)?;
    let info = describe(&session);
    let mismatches = match &args.manifest {
        None => None,
        Some(path) => {
            let manifest = Manifest::load(path)?;
            Some(check_manifest(&session, &manifest))
        }
    };
    if args.json {
        let value = serde_json::json!({ "model": args.model, "io": info, "manifest_mismatches": mismatches });
        println!("{}", serde_json::to_string_pretty(&value)?);
    } else {
        println!("model {}", args.model.display());
        for (title, list) in [("inputs", &info.inputs), ("outputs", &info.outputs)] {
            println!("{title}:");
            for t in list {
                let shape = t.shape.as_ref().map(|s| {
                    let dims: Vec<String> = s
                        .iter()
                        .map(|d| if *d < 0 { "?".into() } else { d.to_string() })
                        .collect();
                    format!("[{}]", dims.join(", "))
                });
                println!(
                    "  {:<24} {:<8} {}",
                    t.name,
                    t.element_type,
                    shape.unwrap_or_default()
                );
            }
        }
        if let Some(m) = &mismatches {
            if m.is_empty() {
                println!(
                    "manifest {}: matches the model",
                    args.manifest.as_ref().expect("checked").display()
                );
            } else {
                println!(
                    "manifest {}: {} mismatch(es)",
                    args.manifest.as_ref().expect("checked").display(),
                    m.len()
                );
                for line in m {
                    println!("  - {line}");
                }
            }
        }
    }
    Ok(match mismatches {
        Some(m) if !m.is_empty() => 2,
        _ => 0,
    })
}
