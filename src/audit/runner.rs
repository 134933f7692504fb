//! The audit runner: workers render edits and query their own model session; the main thread
//! is the only writer of results.jsonl.

use std::collections::{HashMap, HashSet};
use std::panic::{catch_unwind, AssertUnwindSafe};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};
use std::sync::mpsc;
use std::sync::Arc;

use image::RgbImage;
use sha2::{Digest, Sha256};

use super::checker::judge;
use super::plan::{plan_pairs, with_placebos, PlannedPair, PLACEBO_SUFFIX};
use super::results::{
    read_results, PairRecord, RegionRef, ResultsWriter, Status, RESULTS_FORMAT_VERSION,
};
use super::run_info::{
    now_rfc3339, read_run_info, write_json_atomic, RunInfo, SpecFile, RUN_FORMAT_VERSION,
};
use super::AuditError;
use crate::analysis::{summarise, Summary};
use crate::imageio;
use crate::model::{runtime, Engine, Manifest, Prediction};
use crate::render::cover::CoverParams;
use crate::render::erase::EraseParams;
use crate::render::mask::Mask;
use crate::render::placebo::place_placebo;
use crate::render::recolour::RecolourParams;
use crate::render::{find_operation, EditInput, Params, Rendered};
use crate::spec::load::hex;
use crate::spec::region::{rasterise, Rasterised, RegionError};
use crate::spec::{load_specs, Case, Spec};

pub const RUN_FILE: &str = "run.json";
pub const RESULTS_FILE: &str = "results.jsonl";
pub const SUMMARY_FILE: &str = "summary.json";
pub const EDITS_DIR: &str = "edits";

#[derive(Debug, Clone)]
pub struct RunConfig {
    pub spec_path: PathBuf,
    pub manifest_path: PathBuf,
    pub out_dir: PathBuf,
    pub seed: u64,
    /// Worker threads, each with its own model session.
    pub jobs: usize,
    pub save_edits: bool,
    pub resume: bool,
    /// Confidence level of the summary's intervals.
    pub confidence: f64,
    pub show_progress: bool,
    /// Add a placebo control after every pair (docs/spec.md, "Placebo controls").
    pub placebo: bool,
}

#[derive(Debug, Clone)]
pub struct RunOutcome {
    pub out_dir: PathBuf,
    pub summary: Summary,
    /// Pairs judged or failed in this invocation (not counting those a resume skipped).
    pub n_new_pairs: usize,
}

/// The progress bar of long commands, on stderr; hidden unless `show` (callers pass false with
/// `--json` or when stderr is not a terminal). `unit` names what is counted.
pub fn progress_bar(show: bool, len: u64, unit: &str) -> indicatif::ProgressBar {
    let bar = if show {
        indicatif::ProgressBar::new(len)
    } else {
        indicatif::ProgressBar::hidden()
    };
    bar.set_style(
        indicatif::ProgressStyle::with_template(&format!(
            "{{elapsed_precise}} [{{bar:30}}] {{pos}}/{{len}} {unit} ({{per_sec}}, eta {{eta}})"
        ))
        .expect("valid template")
        .progress_chars("=> "),
    );
    bar
}

/// Per-pair seed: the first 8 bytes of sha256("<run seed>:<pair id>").
pub fn pair_seed(run_seed: u64, pair_id: &str) -> u64 {
    let digest = Sha256::digest(format!("{run_seed}:{pair_id}").as_bytes());
    u64::from_le_bytes(digest[..8].try_into().expect("sha256 has 32 bytes"))
}

fn sha256_file(path: &Path) -> Result<String, AuditError> {
    let bytes = std::fs::read(path).map_err(|source| AuditError::Write {
        path: path.to_path_buf(),
        source,
    })?;
    Ok(hex(&Sha256::digest(&bytes)))
}

fn write_err(path: &Path) -> impl Fn(std::io::Error) -> AuditError + '_ {
    move |source| AuditError::Write {
        path: path.to_path_buf(),
        source,
    }
}

pub fn run_audit(config: &RunConfig) -> Result<RunOutcome, AuditError> {
    let specs = load_specs(&config.spec_path)?;
    let manifest = Arc::new(Manifest::load(&config.manifest_path)?);
    let plan = plan_pairs(&specs, &manifest.answers)?;
    let plan = if config.placebo {
        with_placebos(plan)
    } else {
        plan
    };
    // Opening the first session checks the manifest against the model before any case runs.
    let first_engine = Engine::new(Arc::clone(&manifest), 1)?;

    let jobs = config.jobs.max(1);
    let mut info = RunInfo {
        format_version: RUN_FORMAT_VERSION,
        tool: "twinaudit".into(),
        tool_version: env!("CARGO_PKG_VERSION").into(),
        started_at: now_rfc3339(),
        finished_at: None,
        seed: config.seed,
        jobs,
        manifest_path: manifest.path.display().to_string(),
        manifest: serde_json::to_value(&manifest.raw).expect("manifests serialise"),
        model_path: manifest.onnx_path.display().to_string(),
        model_sha256: sha256_file(&manifest.onnx_path)?,
        onnx_runtime_library: runtime::locate_library()
            .map(|p| p.display().to_string())
            .unwrap_or_default(),
        specs: specs
            .iter()
            .map(|s| SpecFile {
                path: s.path.display().to_string(),
                sha256: s.sha256.clone(),
            })
            .collect(),
        n_pairs_planned: plan.len(),
        n_resumes: 0,
        placebo: config.placebo,
    };

    let out = &config.out_dir;
    let run_path = out.join(RUN_FILE);
    let results_path = out.join(RESULTS_FILE);
    let mut records: Vec<PairRecord> = if config.resume {
        let previous = read_run_info(&run_path).map_err(|message| AuditError::Resume {
            dir: out.clone(),
            message,
        })?;
        if let Some(message) = previous.resume_conflict(&info) {
            return Err(AuditError::Resume {
                dir: out.clone(),
                message: format!("{message}; start a new run with another --out"),
            });
        }
        info.started_at = previous.started_at;
        info.n_resumes = previous.n_resumes + 1;
        read_results(&results_path)?
    } else {
        if out.exists()
            && std::fs::read_dir(out)
                .map(|mut d| d.next().is_some())
                .unwrap_or(true)
        {
            return Err(AuditError::OutputExists(out.clone()));
        }
        std::fs::create_dir_all(out).map_err(write_err(out))?;
        Vec::new()
    };
    write_json_atomic(&run_path, &info).map_err(write_err(&run_path))?;

    let done: HashSet<&str> = records.iter().map(|r| r.pair_id.as_str()).collect();
    let mut work: Vec<CaseWork> = Vec::new();
    let mut index: HashMap<(usize, usize), usize> = HashMap::new();
    for p in plan.iter().filter(|p| !done.contains(p.pair_id.as_str())) {
        let slot = *index.entry((p.spec_idx, p.case_idx)).or_insert_with(|| {
            work.push(CaseWork {
                spec_idx: p.spec_idx,
                case_idx: p.case_idx,
                pairs: Vec::new(),
            });
            work.len() - 1
        });
        work[slot].pairs.push(p);
    }
    let n_pending: usize = work.iter().map(|w| w.pairs.len()).sum();

    let progress = progress_bar(config.show_progress, n_pending as u64, "pairs");

    let ctx = Context {
        specs: &specs,
        manifest: &manifest,
        config,
        out_dir: out,
    };
    let mut writer = ResultsWriter::open_append(&results_path)?;
    let next = AtomicUsize::new(0);
    let stop = AtomicBool::new(false);
    let mut write_error = None;
    let mut n_new = 0usize;
    std::thread::scope(|scope| {
        let (tx, rx) = mpsc::channel::<PairRecord>();
        let mut first = Some(first_engine);
        for _ in 0..jobs.min(work.len().max(1)) {
            let tx = tx.clone();
            let engine = first.take();
            let (ctx, work, next, stop, manifest) = (&ctx, &work, &next, &stop, &manifest);
            scope.spawn(move || {
                let mut engine = match engine {
                    Some(e) => e,
                    None => match Engine::new(Arc::clone(manifest), 1) {
                        Ok(e) => e,
                        Err(_) => return, // the other workers carry on with the same model
                    },
                };
                while !stop.load(Ordering::Relaxed) {
                    let i = next.fetch_add(1, Ordering::Relaxed);
                    let Some(case_work) = work.get(i) else { break };
                    let mut sent = HashSet::new();
                    let mut emit = |r: PairRecord| {
                        sent.insert(r.pair_id.clone());
                        tx.send(r).is_ok()
                    };
                    let outcome = catch_unwind(AssertUnwindSafe(|| ctx.process_case(case_work, &mut engine, &mut emit)));
                    if outcome.is_err() {
                        for p in &case_work.pairs {
                            if !sent.contains(&p.pair_id) {
                                let rec = ctx.error_record(case_work, p, "internal error while processing this case (a bug in twinaudit: please report it with the spec)".into());
                                if tx.send(rec).is_err() {
                                    return;
                                }
                            }
                        }
                    }
                }
            });
        }
        drop(tx);
        for rec in rx {
            if let Err(e) = writer.append(&rec) {
                stop.store(true, Ordering::Relaxed);
                write_error = Some(e);
                break;
            }
            n_new += 1;
            progress.inc(1);
            records.push(rec);
        }
    });
    progress.finish_and_clear();
    if let Some(e) = write_error {
        return Err(e.into());
    }

    // Last step: the analysis stage. `records` is in results.jsonl order (read back, then
    // appended as written), which is where the summary takes line numbers from.
    let summary = summarise(&records, config.confidence);
    let summary_path = out.join(SUMMARY_FILE);
    write_json_atomic(&summary_path, &summary).map_err(write_err(&summary_path))?;
    info.finished_at = Some(now_rfc3339());
    write_json_atomic(&run_path, &info).map_err(write_err(&run_path))?;
    Ok(RunOutcome {
        out_dir: out.clone(),
        summary,
        n_new_pairs: n_new,
    })
}

struct CaseWork<'p> {
    spec_idx: usize,
    case_idx: usize,
    pairs: Vec<&'p PlannedPair>,
}

struct Context<'a> {
    specs: &'a [Spec],
    manifest: &'a Manifest,
    config: &'a RunConfig,
    out_dir: &'a Path,
}

impl Context<'_> {
    fn case(&self, w: &CaseWork) -> (&Spec, &Case) {
        let spec = &self.specs[w.spec_idx];
        (spec, &spec.cases[w.case_idx])
    }

    /// The record for a pair with everything known before pixels are touched.
    fn base_record(&self, w: &CaseWork, p: &PlannedPair) -> PairRecord {
        let (spec, case) = self.case(w);
        let edit = &case.edits[p.edit_idx];
        let answers = &self.manifest.answers;
        PairRecord {
            format_version: RESULTS_FORMAT_VERSION,
            pair_id: p.pair_id.clone(),
            case: case.id.clone(),
            edit: edit.id.clone(),
            spec: spec.path.display().to_string(),
            image: case.image_ref.clone(),
            question: case.question.clone(),
            question_kind: case.kind,
            operation: edit.operation.clone(),
            method: None,
            role: p.role.to_string(),
            regions: edit
                .region_indices
                .iter()
                .map(|&i| {
                    let r = &case.regions[i];
                    RegionRef {
                        id: r.id.clone(),
                        label: r.label.clone(),
                        role: r.role.as_str().to_string(),
                    }
                })
                .collect(),
            n_case_regions: Some(case.regions.len() as u32),
            area_fraction: None,
            seed: pair_seed(self.config.seed, &p.pair_id),
            expectation: p.expectation.clone(),
            expectation_derived: p.expectation_derived,
            relation: if p.expectation.is_invariance() {
                "same"
            } else {
                "change"
            }
            .to_string(),
            truth: case.truth.as_deref().map(|t| answers.normalise(t)),
            status: Status::Error,
            before: None,
            before_correct: None,
            after: None,
            verdict: None,
            passed: None,
            error: None,
            warnings: Vec::new(),
            edited_image: None,
            placebo_of: p.placebo_of.clone(),
            added_regions: Vec::new(),
        }
    }

    fn error_record(&self, w: &CaseWork, p: &PlannedPair, message: String) -> PairRecord {
        let mut r = self.base_record(w, p);
        r.error = Some(message);
        r
    }

    /// Judges every pending pair of one case, handing each record to `emit` as soon as it is
    /// made; stops early when `emit` returns false (the writer has gone).
    fn process_case(
        &self,
        w: &CaseWork,
        engine: &mut Engine,
        emit: &mut dyn FnMut(PairRecord) -> bool,
    ) {
        let (_, case) = self.case(w);
        let fail_all = |message: String, emit: &mut dyn FnMut(PairRecord) -> bool| {
            for p in &w.pairs {
                if !emit(self.error_record(w, p, message.clone())) {
                    return;
                }
            }
        };
        let image = match imageio::load_rgb(&case.image_path) {
            Ok(img) => img,
            Err(e) => return fail_all(format!("case {:?}: {e}", case.id), emit),
        };
        let scene = CaseScene::new(case, image);
        let before = match engine.predict(&scene.image, &case.question) {
            Ok(p) => p,
            Err(e) => {
                return fail_all(
                    format!("case {:?}: model on the original image: {e}", case.id),
                    emit,
                )
            }
        };
        for p in &w.pairs {
            let mut rec = self.base_record(w, p);
            rec.before_correct = rec.truth.as_ref().map(|t| *t == before.answer);
            rec.before = Some(before.clone());
            if let Err(message) = self.judge_pair(case, p, &scene, &before, engine, &mut rec) {
                rec.error = Some(format!(
                    "case {:?}, edit {:?}: {message}",
                    case.id, case.edits[p.edit_idx].id
                ));
            }
            if !emit(rec) {
                return;
            }
        }
    }

    fn judge_pair(
        &self,
        case: &Case,
        p: &PlannedPair,
        scene: &CaseScene,
        before: &Prediction,
        engine: &mut Engine,
        rec: &mut PairRecord,
    ) -> Result<(), String> {
        let edit = &case.edits[p.edit_idx];
        let pair = PairEdit {
            edit_idx: p.edit_idx,
            seed: rec.seed,
            placebo: p.placebo_of.is_some(),
        };
        let shape = edit_shape(case, scene, pair, &mut rec.warnings)?;
        let rendered = render_edit(case, scene, pair, &shape)?;
        rec.method = Some(rendered.method.clone());
        rec.area_fraction = Some(rendered.changed.area_fraction());
        rec.added_regions = rendered.added.iter().map(Mask::bounding_box).collect();
        if self.config.save_edits {
            let rel = PathBuf::from(super::runner::EDITS_DIR)
                .join(&case.id)
                .join(format!(
                    "{}{}.png",
                    edit.id,
                    if p.placebo_of.is_some() {
                        PLACEBO_SUFFIX
                    } else {
                        ""
                    }
                ));
            let path = self.out_dir.join(&rel);
            let saved = std::fs::create_dir_all(path.parent().expect("edit path has a parent"))
                .map_err(|e| e.to_string())
                .and_then(|_| rendered.image.save(&path).map_err(|e| e.to_string()));
            match saved {
                Ok(()) => rec.edited_image = Some(rel.display().to_string()),
                Err(e) => rec.warnings.push(format!(
                    "could not save edited image {}: {e}",
                    path.display()
                )),
            }
        }
        let after = engine
            .predict(&rendered.image, &case.question)
            .map_err(|e| format!("model on the edited image: {e}"))?;
        let verdict = judge(&p.expectation, &before.answer, &after.answer);
        rec.after = Some(after);
        rec.verdict = Some(verdict);
        rec.passed = Some(verdict.passed());
        rec.status = Status::Ok;
        Ok(())
    }
}

/// A case's image with its regions rasterised, shared by all of the case's edits.
pub struct CaseScene {
    pub image: RgbImage,
    /// One entry per region of the case, in spec order.
    pub regions: Vec<Result<Rasterised, RegionError>>,
    /// Masks of the regions that rasterised.
    pub all_masks: Vec<Mask>,
}

impl CaseScene {
    pub fn new(case: &Case, image: RgbImage) -> CaseScene {
        let regions: Vec<Result<Rasterised, RegionError>> = case
            .regions
            .iter()
            .map(|r| rasterise(r, image.width(), image.height()))
            .collect();
        let all_masks = regions
            .iter()
            .filter_map(|r| r.as_ref().ok().map(|r| r.mask.clone()))
            .collect();
        CaseScene {
            image,
            regions,
            all_masks,
        }
    }
}

/// Which edit of a case a pair renders: the edit, the pair's seed, and whether it is the placebo
/// copy of that edit.
#[derive(Debug, Clone, Copy)]
pub struct PairEdit {
    pub edit_idx: usize,
    pub seed: u64,
    pub placebo: bool,
}

/// The pixels one edit of a case acts on: the union of its regions or, for a placebo, that shape
/// moved onto free background (chosen with the pair's seed). Region warnings (e.g. clipped at the
/// border) are appended to `warnings`.
pub fn edit_shape(
    case: &Case,
    scene: &CaseScene,
    pair: PairEdit,
    warnings: &mut Vec<String>,
) -> Result<Mask, String> {
    let edit = &case.edits[pair.edit_idx];
    let mut mask: Option<Mask> = None;
    for &i in &edit.region_indices {
        let r = scene.regions[i].as_ref().map_err(|e| e.to_string())?;
        if let Some(w) = &r.warning {
            warnings.push(w.clone());
        }
        mask = Some(match mask {
            None => r.mask.clone(),
            Some(m) => m
                .union(&r.mask)
                .expect("masks of one case share the image size"),
        });
    }
    let mask = mask.expect("validated edits select at least one region");
    if !pair.placebo {
        return Ok(mask);
    }
    let margin_px = placebo_margin_px(&edit.operation, &edit.params);
    place_placebo(&mask, &scene.all_masks, pair.seed, margin_px).ok_or_else(|| {
        format!(
            "no free background for the placebo: the edit's shape, kept {margin_px} px \
             from every region, fits nowhere in the image"
        )
    })
}

/// Renders one edit of a case on its [`edit_shape`]. Pure: the same case, shape and seed give
/// the same pixels, which is what lets review and training-pair export re-create edits a run did
/// not save.
pub fn render_edit(
    case: &Case,
    scene: &CaseScene,
    pair: PairEdit,
    shape: &Mask,
) -> Result<Rendered, String> {
    let edit = &case.edits[pair.edit_idx];
    let operation = find_operation(&edit.operation)
        .ok_or_else(|| format!("unknown operation {:?}", edit.operation))?;
    let input = EditInput {
        image: &scene.image,
        mask: shape,
        all_regions: &scene.all_masks,
        seed: pair.seed,
    };
    operation.apply(&input, &edit.params)
}

/// Margin for operations whose reach is not known here: the default erase's (2 + 5 + 1).
pub const DEFAULT_PLACEBO_MARGIN_PX: u32 = 8;

/// How far a placebo must stay from every region: the edit's reach past its mask (dilation plus
/// the fill's neighbourhood) plus one pixel, so the placebo neither changes nor reads a region's
/// pixels. Parameters were checked at planning; a parse failure falls back to the default.
pub fn placebo_margin_px(operation: &str, params: &Params) -> u32 {
    let parse = |p: &Params| serde_json::Value::Object(p.clone());
    let reach = match operation {
        "erase" => serde_json::from_value::<EraseParams>(parse(params))
            .ok()
            .map(|e| {
                e.dilate_px
                    .saturating_add(e.radius_px.clamp(1.0, 100.0).ceil() as u32)
            }),
        "cover" => serde_json::from_value::<CoverParams>(parse(params))
            .ok()
            .map(|c| c.dilate_px.saturating_add(c.ring_px)),
        "recolour" => serde_json::from_value::<RecolourParams>(parse(params))
            .ok()
            .map(|r| r.dilate_px),
        _ => None,
    };
    reach.map_or(DEFAULT_PLACEBO_MARGIN_PX, |r| r.saturating_add(1))
}
