//! Reading spec files and validating them into [`Spec`].

use std::collections::{HashMap, HashSet};
use std::path::{Path, PathBuf};

use sha2::{Digest, Sha256};

use super::raw::{RawCase, RawEdit, RawExpect, RawRegion, RawSpec, SPEC_FORMAT_VERSION};
use super::{Case, Edit, Expectation, QuestionKind, Region, Role, Shape, Spec, SpecError};

/// Loads one spec file, or every `*.json` file below a folder (sorted by path, so runs are
/// reproducible). Case ids must be unique across all of them.
pub fn load_specs(path: &Path) -> Result<Vec<Spec>, SpecError> {
    let files: Vec<PathBuf> = if path.is_dir() {
        let mut files: Vec<PathBuf> = walkdir::WalkDir::new(path)
            .follow_links(true)
            .into_iter()
            .filter_map(|e| e.ok())
            .filter(|e| e.file_type().is_file())
            .map(|e| e.into_path())
            .filter(|p| p.extension().is_some_and(|x| x == "json"))
            .collect();
        files.sort();
        files
    } else {
        vec![path.to_path_buf()]
    };
    if files.is_empty() {
        return Err(SpecError::NoSpecs {
            path: path.to_path_buf(),
        });
    }
    let specs = files
        .iter()
        .map(|f| load_spec(f))
        .collect::<Result<Vec<_>, _>>()?;
    let mut seen: HashMap<&str, &Path> = HashMap::new();
    for spec in &specs {
        for case in &spec.cases {
            if let Some(first) = seen.insert(&case.id, &spec.path) {
                return Err(SpecError::DuplicateCase {
                    case: case.id.clone(),
                    first: first.to_path_buf(),
                    second: spec.path.clone(),
                });
            }
        }
    }
    Ok(specs)
}

pub fn load_spec(path: &Path) -> Result<Spec, SpecError> {
    let bytes = std::fs::read(path).map_err(|source| SpecError::Read {
        path: path.to_path_buf(),
        source,
    })?;
    let sha256 = hex(&Sha256::digest(&bytes));
    let text = String::from_utf8_lossy(&bytes);
    let raw: RawSpec = serde_json::from_str(&text).map_err(|e| SpecError::Json {
        path: path.to_path_buf(),
        line: e.line(),
        column: e.column(),
        message: e.to_string(),
    })?;
    if raw.format_version != SPEC_FORMAT_VERSION {
        return Err(SpecError::Version {
            path: path.to_path_buf(),
            found: raw.format_version,
            supported: SPEC_FORMAT_VERSION,
        });
    }
    let dir = path.parent().unwrap_or(Path::new("."));
    let mut ids = HashSet::new();
    let mut cases = Vec::with_capacity(raw.cases.len());
    for raw_case in raw.cases {
        if !ids.insert(raw_case.id.clone()) {
            return Err(case_error(
                path,
                &raw_case.id,
                "case id appears twice in this file",
            ));
        }
        cases.push(validate_case(path, dir, raw_case)?);
    }
    Ok(Spec {
        path: path.to_path_buf(),
        sha256,
        cases,
    })
}

pub(crate) fn hex(bytes: &[u8]) -> String {
    bytes.iter().map(|b| format!("{b:02x}")).collect()
}

fn case_error(path: &Path, case: &str, message: impl Into<String>) -> SpecError {
    SpecError::Case {
        path: path.to_path_buf(),
        case: case.to_string(),
        message: message.into(),
    }
}

fn validate_id(s: &str) -> bool {
    !s.is_empty()
        && s.chars()
            .all(|c| c.is_ascii_alphanumeric() || "-_.".contains(c))
}

fn validate_case(path: &Path, dir: &Path, raw: RawCase) -> Result<Case, SpecError> {
    let case_id = raw.id.clone();
    if !validate_id(&case_id) {
        return Err(case_error(
            path,
            &case_id,
            "ids may hold only letters, digits, '-', '_' and '.'",
        ));
    }
    let kind = QuestionKind::parse(&raw.question_kind).ok_or_else(|| {
        case_error(
            path,
            &case_id,
            format!(
                "unknown question_kind {:?}; use count, colour, exists or other",
                raw.question_kind
            ),
        )
    })?;
    if raw.question.trim().is_empty() {
        return Err(case_error(path, &case_id, "question is empty"));
    }
    let mut regions = Vec::with_capacity(raw.regions.len());
    for r in raw.regions {
        if regions.iter().any(|x: &Region| x.id == r.id) {
            return Err(region_error(
                path,
                &case_id,
                &r.id,
                "region id appears twice in this case",
            ));
        }
        regions.push(validate_region(path, dir, &case_id, r)?);
    }
    if raw.edits.is_empty() {
        return Err(case_error(
            path,
            &case_id,
            "case has no edits; add at least one edit",
        ));
    }
    let mut edits: Vec<Edit> = Vec::with_capacity(raw.edits.len());
    for e in raw.edits {
        if edits.iter().any(|x| x.id == e.id) {
            return Err(edit_error(
                path,
                &case_id,
                &e.id,
                "edit id appears twice in this case",
            ));
        }
        edits.push(validate_edit(path, &case_id, &regions, e)?);
    }
    Ok(Case {
        id: case_id,
        image_path: dir.join(&raw.image),
        image_ref: raw.image,
        question: raw.question,
        kind,
        truth: raw.answer,
        regions,
        edits,
    })
}

fn region_error(path: &Path, case: &str, region: &str, message: impl Into<String>) -> SpecError {
    SpecError::Region {
        path: path.to_path_buf(),
        case: case.to_string(),
        region: region.to_string(),
        message: message.into(),
    }
}

fn edit_error(path: &Path, case: &str, edit: &str, message: impl Into<String>) -> SpecError {
    SpecError::Edit {
        path: path.to_path_buf(),
        case: case.to_string(),
        edit: edit.to_string(),
        message: message.into(),
    }
}

fn validate_region(
    path: &Path,
    dir: &Path,
    case: &str,
    raw: RawRegion,
) -> Result<Region, SpecError> {
    let err = |m: String| region_error(path, case, &raw.id, m);
    if !validate_id(&raw.id) {
        return Err(err(
            "ids may hold only letters, digits, '-', '_' and '.'".into()
        ));
    }
    let role = Role::parse(&raw.role).ok_or_else(|| {
        err(format!(
            "unknown role {:?}; use target or distractor",
            raw.role
        ))
    })?;
    let n_shapes =
        raw.bbox.is_some() as u8 + raw.polygon.is_some() as u8 + raw.mask.is_some() as u8;
    if n_shapes != 1 {
        return Err(err(format!(
            "give exactly one of box, polygon or mask (found {n_shapes})"
        )));
    }
    let shape = if let Some(b) = raw.bbox {
        if b.iter().any(|v| !v.is_finite()) || b[2] <= 0.0 || b[3] <= 0.0 {
            return Err(err(format!(
                "box {b:?} is empty or not finite; width and height must be > 0"
            )));
        }
        Shape::Box(b)
    } else if let Some(p) = raw.polygon {
        if p.len() < 3 || p.iter().flatten().any(|v| !v.is_finite()) {
            return Err(err(
                "polygon needs at least three finite [x, y] points".into()
            ));
        }
        Shape::Polygon(p)
    } else {
        let m = raw.mask.expect("one shape is present");
        Shape::MaskFile(dir.join(m))
    };
    Ok(Region {
        id: raw.id,
        label: raw.label,
        role,
        shape,
    })
}

fn validate_edit(
    path: &Path,
    case: &str,
    regions: &[Region],
    raw: RawEdit,
) -> Result<Edit, SpecError> {
    let err = |m: String| edit_error(path, case, &raw.id, m);
    if !validate_id(&raw.id) {
        return Err(err(
            "ids may hold only letters, digits, '-', '_' and '.'".into()
        ));
    }
    let sel = &raw.regions;
    let n_keys = sel.ids.is_some() as u8 + sel.role.is_some() as u8 + sel.label.is_some() as u8;
    if n_keys != 1 {
        return Err(err(format!(
            "regions must give exactly one of ids, role or label (found {n_keys})"
        )));
    }
    let mut region_indices: Vec<usize> = if let Some(ids) = &sel.ids {
        let mut idx = Vec::new();
        for id in ids {
            let i = regions.iter().position(|r| &r.id == id).ok_or_else(|| {
                region_error(
                    path,
                    case,
                    id,
                    format!(
                        "edit {:?} names region {id:?}, which this case does not define",
                        raw.id
                    ),
                )
            })?;
            idx.push(i);
        }
        idx
    } else if let Some(role) = &sel.role {
        let role = Role::parse(role).ok_or_else(|| {
            err(format!(
                "unknown role {role:?} in regions; use target or distractor"
            ))
        })?;
        regions
            .iter()
            .enumerate()
            .filter(|(_, r)| r.role == role)
            .map(|(i, _)| i)
            .collect()
    } else {
        let label = sel.label.as_deref().expect("one key is present");
        regions
            .iter()
            .enumerate()
            .filter(|(_, r)| r.label == label)
            .map(|(i, _)| i)
            .collect()
    };
    region_indices.sort_unstable();
    region_indices.dedup();
    if region_indices.is_empty() {
        return Err(err(format!(
            "regions selector {} matches no region of this case",
            serde_json::to_string(sel).unwrap_or_default()
        )));
    }
    let stated = match raw.expect {
        None => None,
        Some(RawExpect::Word(w)) => match w.as_str() {
            "derived" => None,
            "change" => Some(Expectation::Change),
            "same" => Some(Expectation::Same),
            other => {
                return Err(err(format!(
                    "unknown expect {other:?}; use \"derived\", \"change\", \"same\" or {{\"answer\": \"...\"}}"
                )))
            }
        },
        Some(RawExpect::Answer { answer }) => Some(Expectation::Answer(answer)),
    };
    Ok(Edit {
        id: raw.id,
        operation: raw.operation,
        region_indices,
        params: raw.params,
        stated,
    })
}
