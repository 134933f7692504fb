//! `twinaudit synth`: procedural top-down scenes of a fruit-market stall table, with exact
//! per-object masks, a ready-to-run edit spec and a scenes.jsonl for training scripts.
//!
//! A scene holds a table surface (wood, woven cover or stone), usually a napkin ("cloth") and a
//! bowl, 3..=`max_objects` fruit (apples, lemons, plums, oranges) and up to four price tags. Two
//! options plant shortcuts for demo models: `cloth_matches_bowl` (the napkin takes the bowl's
//! colour) and `tags_match_apples` (as many tags as apples).
//!
//! Invariants:
//! - Every random choice comes from [`rng::Rng`] streams derived from (seed, scene index): the
//!   same config writes byte-identical files, whatever the number of threads, and scene k is the
//!   same whatever the number of scenes.
//! - A mask holds the pixels whose centre lies inside the object's outline and inside no object
//!   drawn above it: masks of one scene never overlap and none is empty. Masks hold the object
//!   itself (stem and leaf included), not its soft drop shadow; the edits' `dilate_px` takes
//!   the shadow's inner part along.
//! - Scene generation ([`plan_scene`], [`render_scene`]) is pure; only [`synthesize`] touches
//!   the file system.

pub mod noise;
pub mod objects;
pub mod palette;
pub mod rng;
pub mod scene;
pub mod spec_out;
pub mod texture;

use std::io::Write;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};
use std::sync::mpsc;

use image::codecs::png::{CompressionType, FilterType, PngEncoder};
use image::{ExtendedColorType, GrayImage, ImageEncoder, RgbImage};

pub use objects::Kind;
pub use palette::{ColourName, PALETTE};
pub use rng::Rng;
pub use scene::{plan_scene, render_scene, ObjectMask, SceneOptions, SceneParams};

use spec_out::{CaseOut, GeneratorRecord, SceneRecord};

/// Version of the generator's output; bump whenever the same config would write other bytes.
pub const SYNTH_VERSION: u32 = 1;
pub const MIN_SIZE: u32 = 128;
pub const MAX_SIZE: u32 = 1024;
pub const MAX_SCENES: u32 = 100_000;
pub const MIN_OBJECTS: u32 = 3;
pub const MAX_OBJECTS: u32 = 16;
/// Share of scenes with a napkin unless `--cloth-rate` says otherwise.
pub const DEFAULT_CLOTH_RATE: f64 = 0.75;

/// Salt separating the question stream from the scene stream, so changing the questions never
/// changes the images.
const QUESTION_SALT: u64 = 0x0051_E571_0000_0001;

/// What to generate and where. Build with [`SynthConfig::new`], adjust fields, then call
/// [`synthesize`] (which validates it).
#[derive(Debug, Clone, PartialEq)]
pub struct SynthConfig {
    pub out_dir: PathBuf,
    pub n_scenes: u32,
    pub seed: u64,
    /// Width and height in pixels.
    pub size: u32,
    /// Most fruit in a scene (at least 3); bowl, napkin and price tags come on top.
    pub max_objects: u32,
    /// Probability that the napkin has the bowl's colour (`None`: independent colours).
    pub cloth_matches_bowl: Option<f64>,
    /// Probability that the number of tags equals the number of apples, capped at 4
    /// (`None`: independent).
    pub tags_match_apples: Option<f64>,
    /// Probability that a scene has a napkin (default 0.75).
    pub cloth_rate: f64,
    /// Worker threads; the output does not depend on it.
    pub jobs: usize,
}

impl SynthConfig {
    pub fn new(out_dir: impl Into<PathBuf>, n_scenes: u32, seed: u64) -> SynthConfig {
        SynthConfig {
            out_dir: out_dir.into(),
            n_scenes,
            seed,
            size: 256,
            max_objects: 9,
            cloth_matches_bowl: None,
            tags_match_apples: None,
            cloth_rate: DEFAULT_CLOTH_RATE,
            jobs: 1,
        }
    }

    /// Checks every option; messages name the command-line flag.
    pub fn validate(&self) -> Result<(), SynthError> {
        let bad =
            |option: &'static str, message: String| Err(SynthError::Option { option, message });
        if self.n_scenes == 0 || self.n_scenes > MAX_SCENES {
            return bad(
                "--scenes",
                format!("must lie in 1..={MAX_SCENES}, got {}", self.n_scenes),
            );
        }
        if !(MIN_SIZE..=MAX_SIZE).contains(&self.size) {
            return bad(
                "--size",
                format!(
                    "must lie in {MIN_SIZE}..={MAX_SIZE} pixels, got {}",
                    self.size
                ),
            );
        }
        if !(MIN_OBJECTS..=MAX_OBJECTS).contains(&self.max_objects) {
            return bad(
                "--max-objects",
                format!(
                    "must lie in {MIN_OBJECTS}..={MAX_OBJECTS}, got {}",
                    self.max_objects
                ),
            );
        }
        for (option, p) in [
            ("--cloth-matches-bowl", self.cloth_matches_bowl),
            ("--tags-match-apples", self.tags_match_apples),
            ("--cloth-rate", Some(self.cloth_rate)),
        ] {
            if let Some(p) = p {
                if !(0.0..=1.0).contains(&p) {
                    return bad(
                        option,
                        format!("is a probability and must lie in [0, 1], got {p}"),
                    );
                }
            }
        }
        Ok(())
    }

    pub fn scene_options(&self) -> SceneOptions {
        SceneOptions {
            size: self.size,
            max_fruit: self.max_objects,
            cloth_matches_bowl: self.cloth_matches_bowl,
            tags_match_apples: self.tags_match_apples,
            cloth_rate: self.cloth_rate,
        }
    }

    fn generator_record(&self) -> GeneratorRecord {
        GeneratorRecord {
            name: "twinaudit synth",
            version: SYNTH_VERSION,
            seed: self.seed,
            scenes: self.n_scenes,
            size: self.size,
            max_objects: self.max_objects,
            cloth_matches_bowl: self.cloth_matches_bowl,
            tags_match_apples: self.tags_match_apples,
            cloth_rate: self.cloth_rate,
        }
    }

    /// Human-readable account of the options, for the spec's `description`.
    pub fn description(&self) -> String {
        let p = |v: Option<f64>| v.map_or("unset".to_string(), |p| p.to_string());
        format!(
            "Synthetic fruit-stall scenes from twinaudit synth (generator {SYNTH_VERSION}): seed {}, {} scenes of {}x{} px, 3..={} fruit each. \
             cloth-matches-bowl {} (colour shortcut: the napkin takes the bowl's colour with this probability; unset = independent), \
             tags-match-apples {} (counting shortcut: as many price tags as apples, at most 4; unset = independent), cloth-rate {} (share of scenes with a napkin).",
            self.seed,
            self.n_scenes,
            self.size,
            self.size,
            self.max_objects,
            p(self.cloth_matches_bowl),
            p(self.tags_match_apples),
            self.cloth_rate
        )
    }
}

#[derive(Debug, thiserror::Error)]
pub enum SynthError {
    #[error("{option} {message}")]
    Option {
        option: &'static str,
        message: String,
    },
    #[error("output folder {path} exists and is not empty; choose a new folder (synth never overwrites)")]
    OutNotEmpty { path: PathBuf },
    #[error("output path {path} exists and is not a folder")]
    OutNotDir { path: PathBuf },
    #[error("cannot write {path}: {source}")]
    Io {
        path: PathBuf,
        source: std::io::Error,
    },
    #[error("cannot encode PNG {path}: {source}")]
    Png {
        path: PathBuf,
        source: image::ImageError,
    },
    #[error("cannot serialise {path}: {source}")]
    Json {
        path: PathBuf,
        source: serde_json::Error,
    },
}

/// What [`synthesize`] wrote.
#[derive(Debug, Clone, PartialEq)]
pub struct SynthSummary {
    pub out_dir: PathBuf,
    pub spec_path: PathBuf,
    pub scenes_path: PathBuf,
    pub n_scenes: u32,
    pub n_cases: usize,
    pub n_objects: usize,
    /// Total size of every file written.
    pub bytes_written: u64,
}

/// One scene generated in memory.
#[derive(Debug, Clone)]
pub struct SynthScene {
    /// `scene-00000`.
    pub name: String,
    pub params: SceneParams,
    pub image: RgbImage,
    pub masks: Vec<ObjectMask>,
    pub cases: Vec<CaseOut>,
}

pub fn scene_name(index: u32) -> String {
    format!("scene-{index:05}")
}

/// Generates scene `index` of a run with `seed`, without touching the file system.
#[must_use]
pub fn synthesize_scene(options: &SceneOptions, seed: u64, index: u32) -> SynthScene {
    let name = scene_name(index);
    let params = plan_scene(options, &mut Rng::for_stream(seed, u64::from(index)));
    let (image, masks) = render_scene(&params);
    let mut question_rng = Rng::for_stream(seed ^ QUESTION_SALT, u64::from(index));
    let cases = spec_out::scene_cases(&name, &masks, &mut question_rng);
    SynthScene {
        name,
        params,
        image,
        masks,
        cases,
    }
}

fn io_err(path: &Path) -> impl FnOnce(std::io::Error) -> SynthError + '_ {
    move |source| SynthError::Io {
        path: path.to_path_buf(),
        source,
    }
}

/// PNG with adaptive filters at the default deflate level: on these images maximum effort
/// saves under 3% of the bytes at nearly three times the encoding time.
fn png_bytes(
    raw: &[u8],
    width: u32,
    height: u32,
    colour: ExtendedColorType,
    path: &Path,
) -> Result<Vec<u8>, SynthError> {
    let mut buf = Vec::new();
    PngEncoder::new_with_quality(&mut buf, CompressionType::Default, FilterType::Adaptive)
        .write_image(raw, width, height, colour)
        .map_err(|source| SynthError::Png {
            path: path.to_path_buf(),
            source,
        })?;
    Ok(buf)
}

fn write_file(path: &Path, bytes: &[u8]) -> Result<u64, SynthError> {
    std::fs::write(path, bytes).map_err(io_err(path))?;
    Ok(bytes.len() as u64)
}

fn write_rgb(path: &Path, image: &RgbImage) -> Result<u64, SynthError> {
    let bytes = png_bytes(
        image.as_raw(),
        image.width(),
        image.height(),
        ExtendedColorType::Rgb8,
        path,
    )?;
    write_file(path, &bytes)
}

fn write_gray(path: &Path, image: &GrayImage) -> Result<u64, SynthError> {
    let bytes = png_bytes(
        image.as_raw(),
        image.width(),
        image.height(),
        ExtendedColorType::L8,
        path,
    )?;
    write_file(path, &bytes)
}

/// Creates `out` (or accepts it empty); refuses anything else.
fn prepare_out_dir(out: &Path) -> Result<(), SynthError> {
    if out.exists() {
        if !out.is_dir() {
            return Err(SynthError::OutNotDir {
                path: out.to_path_buf(),
            });
        }
        let mut entries = std::fs::read_dir(out).map_err(io_err(out))?;
        if entries.next().is_some() {
            return Err(SynthError::OutNotEmpty {
                path: out.to_path_buf(),
            });
        }
    }
    for dir in [out.to_path_buf(), out.join("images"), out.join("masks")] {
        std::fs::create_dir_all(&dir).map_err(io_err(&dir))?;
    }
    Ok(())
}

/// What one finished scene contributes to spec.json and scenes.jsonl.
struct SceneOutput {
    cases: Vec<CaseOut>,
    record: SceneRecord,
    bytes: u64,
}

fn write_scene(config: &SynthConfig, index: u32) -> Result<SceneOutput, SynthError> {
    let scene = synthesize_scene(&config.scene_options(), config.seed, index);
    let out = &config.out_dir;
    let mut bytes = write_rgb(&out.join(spec_out::image_path(&scene.name)), &scene.image)?;
    let mask_dir = out.join("masks").join(&scene.name);
    std::fs::create_dir_all(&mask_dir).map_err(io_err(&mask_dir))?;
    for m in &scene.masks {
        bytes += write_gray(&out.join(spec_out::mask_path(&scene.name, &m.id)), &m.mask)?;
    }
    let record = SceneRecord {
        format_version: spec_out::SCENES_FORMAT_VERSION,
        scene: scene.name.clone(),
        index,
        image: spec_out::image_path(&scene.name),
        table: scene.params.table.kind,
        shortcuts: scene.params.shortcuts,
        objects: spec_out::object_records(&scene.name, &scene.masks),
        questions: spec_out::question_records(&scene.cases),
        generator: config.generator_record(),
    };
    Ok(SceneOutput {
        cases: scene.cases,
        record,
        bytes,
    })
}

/// Writes `images/`, `masks/`, `spec.json` and `scenes.jsonl` into `config.out_dir`, which must
/// not exist or be empty. Scenes are rendered on `config.jobs` threads; files are identical for
/// any number of threads.
pub fn synthesize(config: &SynthConfig) -> Result<SynthSummary, SynthError> {
    config.validate()?;
    prepare_out_dir(&config.out_dir)?;
    let n = config.n_scenes as usize;
    let next = AtomicUsize::new(0);
    let failed = AtomicBool::new(false);
    let (tx, rx) = mpsc::channel::<(usize, Result<SceneOutput, SynthError>)>();
    let mut outputs: Vec<Option<SceneOutput>> = (0..n).map(|_| None).collect();
    let mut first_error: Option<(usize, SynthError)> = None;
    std::thread::scope(|scope| {
        for _ in 0..config.jobs.clamp(1, n) {
            let tx = tx.clone();
            let (next, failed) = (&next, &failed);
            scope.spawn(move || loop {
                let i = next.fetch_add(1, Ordering::Relaxed);
                if i >= n || failed.load(Ordering::Relaxed) {
                    break;
                }
                let result = write_scene(config, i as u32);
                if result.is_err() {
                    failed.store(true, Ordering::Relaxed);
                }
                if tx.send((i, result)).is_err() {
                    break;
                }
            });
        }
        drop(tx);
        for (i, result) in rx {
            match result {
                Ok(o) => outputs[i] = Some(o),
                // Report the lowest-numbered failure, so the message does not depend on timing.
                Err(e) if first_error.as_ref().is_none_or(|(j, _)| i < *j) => {
                    first_error = Some((i, e))
                }
                Err(_) => {}
            }
        }
    });
    if let Some((_, e)) = first_error {
        return Err(e);
    }
    let outputs: Vec<SceneOutput> = outputs.into_iter().flatten().collect();
    let mut bytes: u64 = outputs.iter().map(|o| o.bytes).sum();
    let cases: Vec<CaseOut> = outputs
        .iter()
        .flat_map(|o| o.cases.iter().cloned())
        .collect();

    let spec_path = config.out_dir.join("spec.json");
    let spec =
        spec_out::spec_json(&config.description(), &cases).map_err(|source| SynthError::Json {
            path: spec_path.clone(),
            source,
        })?;
    bytes += write_file(&spec_path, spec.as_bytes())?;

    let scenes_path = config.out_dir.join("scenes.jsonl");
    let mut lines = Vec::new();
    for o in &outputs {
        serde_json::to_writer(&mut lines, &o.record).map_err(|source| SynthError::Json {
            path: scenes_path.clone(),
            source,
        })?;
        lines.write_all(b"\n").map_err(io_err(&scenes_path))?;
    }
    bytes += write_file(&scenes_path, &lines)?;
    Ok(SynthSummary {
        out_dir: config.out_dir.clone(),
        spec_path,
        scenes_path,
        n_scenes: config.n_scenes,
        n_cases: cases.len(),
        n_objects: outputs.iter().map(|o| o.record.objects.len()).sum(),
        bytes_written: bytes,
    })
}
