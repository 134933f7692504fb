//! Reading a finished run folder back: run.json, results.jsonl and the spec files it names, and
//! re-creating any pair's edited image, for the contact sheet, the report and training pairs.
//!
//! Invariants: nothing in the run folder is written; an edit is re-created only from spec files
//! whose sha256 equals the one recorded in run.json (else the pixels could differ from what the
//! model saw), and a saved edit (`--save-edits`) is preferred to re-rendering.

use std::collections::HashMap;
use std::path::{Path, PathBuf};

use image::RgbImage;

use super::plan::PLACEBO_SUFFIX;
use super::results::{read_results_readonly, PairRecord};
use super::run_info::{read_run_info, RunInfo};
use super::runner::{edit_shape, render_edit, CaseScene, PairEdit, RESULTS_FILE, RUN_FILE};
use crate::imageio;
use crate::render::mask::Mask;
use crate::spec::{load_spec, Case, Spec};

#[derive(Debug, thiserror::Error)]
pub enum ReplayError {
    #[error("{dir} is not a twinaudit run folder: {message}")]
    NotARun { dir: PathBuf, message: String },
    #[error("run {dir}: spec {spec} cannot be read again ({message}); run the command from the folder the audit ran in, or re-run the audit with --save-edits")]
    SpecUnavailable {
        dir: PathBuf,
        spec: String,
        message: String,
    },
    #[error("run {dir}: spec {spec} changed since the run (sha256 differs), so its edits cannot be re-created; restore the spec or re-run the audit with --save-edits")]
    SpecChanged { dir: PathBuf, spec: String },
    #[error("run {dir}, pair {pair_id:?}: {message}")]
    Pair {
        dir: PathBuf,
        pair_id: String,
        message: String,
    },
}

/// A run folder as read from disk.
pub struct RunFolder {
    pub dir: PathBuf,
    pub info: RunInfo,
    /// Every line of results.jsonl, in file order.
    pub records: Vec<PairRecord>,
    /// Spec files named in run.json, loaded on first need (by [`RunFolder::case_of`]).
    specs: Option<Vec<Spec>>,
    /// The last case's decoded image and rasterised regions, keyed by (spec, case): pairs of one
    /// case usually follow each other, and decoding dominates [`RunFolder::pair_images`].
    last_scene: Option<(String, String, CaseScene)>,
}

/// The two images of a pair and where the edit acted.
pub struct PairImages {
    pub original: RgbImage,
    pub edited: RgbImage,
    /// The shape the edit acted on, before the operation's dilation (a placebo's moved shape).
    pub shape: Mask,
    /// Masks of objects the edit added (`duplicate`); empty when read from a saved edit (the
    /// record's `added_regions` boxes still say where they are).
    pub added: Vec<Mask>,
    /// True when `edited` was read from the run's saved edit, false when re-rendered.
    pub from_saved_edit: bool,
}

impl RunFolder {
    /// Reads run.json and results.jsonl; spec files are read only when an edit must be re-created.
    pub fn open(dir: &Path) -> Result<RunFolder, ReplayError> {
        let not_a_run = |message: String| ReplayError::NotARun {
            dir: dir.to_path_buf(),
            message,
        };
        let info = read_run_info(&dir.join(RUN_FILE)).map_err(not_a_run)?;
        let results = dir.join(RESULTS_FILE);
        if !results.is_file() {
            return Err(not_a_run(format!("{} is missing", results.display())));
        }
        let records = read_results_readonly(&results).map_err(|e| not_a_run(e.to_string()))?;
        Ok(RunFolder {
            dir: dir.to_path_buf(),
            info,
            records,
            specs: None,
            last_scene: None,
        })
    }

    fn load_specs(&mut self) -> Result<&[Spec], ReplayError> {
        if self.specs.is_none() {
            let mut specs = Vec::new();
            for f in &self.info.specs {
                let spec =
                    load_spec(Path::new(&f.path)).map_err(|e| ReplayError::SpecUnavailable {
                        dir: self.dir.clone(),
                        spec: f.path.clone(),
                        message: e.to_string(),
                    })?;
                if spec.sha256 != f.sha256 {
                    return Err(ReplayError::SpecChanged {
                        dir: self.dir.clone(),
                        spec: f.path.clone(),
                    });
                }
                specs.push(spec);
            }
            self.specs = Some(specs);
        }
        Ok(self.specs.as_deref().expect("just loaded"))
    }

    /// The case a record came from, and the index of its edit.
    pub fn case_of(&mut self, record: &PairRecord) -> Result<(&Case, usize), ReplayError> {
        self.load_specs()?;
        find_case(&self.dir, self.specs.as_deref().expect("loaded"), record)
    }

    /// The original and edited images of a pair. The edit is read from the run's saved file when
    /// there is one and re-rendered with the pair's recorded seed otherwise; the edited shape is
    /// always re-derived (cheap: no rendering).
    pub fn pair_images(&mut self, record: &PairRecord) -> Result<PairImages, ReplayError> {
        let dir = self.dir.clone();
        let pair_err = |message: String| ReplayError::Pair {
            dir: dir.clone(),
            pair_id: record.pair_id.clone(),
            message,
        };
        self.load_specs()?;
        let specs = self.specs.as_deref().expect("loaded");
        let (case, edit_idx) = find_case(&dir, specs, record)?;
        let cached = matches!(&self.last_scene,
            Some((spec, case, _)) if *spec == record.spec && *case == record.case);
        if !cached {
            self.last_scene = None;
            let image = imageio::load_rgb(&case.image_path).map_err(|e| pair_err(e.to_string()))?;
            let scene = CaseScene::new(case, image);
            self.last_scene = Some((record.spec.clone(), record.case.clone(), scene));
        }
        let scene = &self.last_scene.as_ref().expect("just filled").2;
        let mut warnings = Vec::new();
        let pair = PairEdit {
            edit_idx,
            seed: record.seed,
            placebo: record.placebo_of.is_some(),
        };
        let shape = edit_shape(case, scene, pair, &mut warnings).map_err(pair_err)?;
        let saved = record
            .edited_image
            .as_ref()
            .map(|rel| dir.join(rel))
            .filter(|p| p.is_file());
        let (edited, added, from_saved_edit) = match saved {
            Some(path) => (
                imageio::load_rgb(&path).map_err(|e| pair_err(e.to_string()))?,
                Vec::new(),
                true,
            ),
            None => {
                let rendered = render_edit(case, scene, pair, &shape).map_err(pair_err)?;
                (rendered.image, rendered.added, false)
            }
        };
        Ok(PairImages {
            original: scene.image.clone(),
            edited,
            shape,
            added,
            from_saved_edit,
        })
    }

    /// Real pairs only (placebo controls have `placebo_of`), in file order.
    pub fn real_records(&self) -> impl Iterator<Item = &PairRecord> {
        self.records.iter().filter(|r| r.placebo_of.is_none())
    }

    /// Records by pair id.
    pub fn by_pair_id(&self) -> HashMap<&str, &PairRecord> {
        self.records
            .iter()
            .map(|r| (r.pair_id.as_str(), r))
            .collect()
    }
}

/// The case of `record` among `specs`, and the index of its edit.
fn find_case<'a>(
    dir: &Path,
    specs: &'a [Spec],
    record: &PairRecord,
) -> Result<(&'a Case, usize), ReplayError> {
    let pair_err = |message: String| ReplayError::Pair {
        dir: dir.to_path_buf(),
        pair_id: record.pair_id.clone(),
        message,
    };
    let case = specs
        .iter()
        .filter(|s| s.path.display().to_string() == record.spec)
        .flat_map(|s| &s.cases)
        .find(|c| c.id == record.case)
        .ok_or_else(|| {
            pair_err(format!(
                "case {:?} is not in spec {}",
                record.case, record.spec
            ))
        })?;
    let edit_idx = case
        .edits
        .iter()
        .position(|e| e.id == record.edit)
        .ok_or_else(|| {
            pair_err(format!(
                "edit {:?} is not in case {:?}",
                record.edit, record.case
            ))
        })?;
    Ok((case, edit_idx))
}

/// The pair id of a placebo control for `pair_id`.
pub fn placebo_pair_id(pair_id: &str) -> String {
    format!("{pair_id}{PLACEBO_SUFFIX}")
}
