//! Questions about a synthesized scene and the files that carry them: edit-spec cases
//! (docs/spec.md, format_version 1) and scenes.jsonl records.
//!
//! Invariants: every case has at least one edit; every region is a mask region of a non-empty
//! mask; a count case annotates every object of the counted kind as a target, so derived
//! expectations always resolve; edits never touch the bowl of a colour case.

use serde::Serialize;

use super::objects::Kind;
use super::rng::Rng;
use super::scene::{ObjectMask, Shortcuts};
use super::texture::TableKind;

const ERASE: EditParams = EditParams::Erase {
    method: "telea",
    radius_px: 5,
    dilate_px: 3,
};
const COVER: EditParams = EditParams::Cover {
    ring_px: 3,
    dilate_px: 3,
};

#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
#[serde(untagged)]
pub enum EditParams {
    Erase {
        method: &'static str,
        radius_px: u32,
        dilate_px: u32,
    },
    Cover {
        ring_px: u32,
        dilate_px: u32,
    },
    Recolour {
        colour: &'static str,
        feather_px: u32,
    },
}

#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct RegionOut {
    pub id: String,
    pub label: &'static str,
    pub role: &'static str,
    pub mask: String,
}

#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SelectorOut {
    pub ids: Vec<String>,
}

/// An edit whose expectation is derived (no `expect` key).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct EditOut {
    pub id: String,
    pub operation: &'static str,
    pub regions: SelectorOut,
    pub params: EditParams,
}

#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CaseOut {
    pub id: String,
    pub image: String,
    pub question: String,
    pub question_kind: &'static str,
    pub answer: String,
    pub regions: Vec<RegionOut>,
    pub edits: Vec<EditOut>,
}

/// One object in scenes.jsonl.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ObjectRecord {
    pub id: String,
    pub kind: Kind,
    pub colour: &'static str,
    /// `[x, y, w, h]` of the visible pixels.
    pub bbox: [u32; 4],
    pub visible_px: u32,
    pub in_bowl: bool,
    /// 1 − visible / whole, rounded to 4 decimals (pixels outside the image do not count).
    pub occluded_fraction: f64,
    pub mask: String,
}

#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct QuestionRecord {
    pub case: String,
    pub question: String,
    pub question_kind: &'static str,
    pub answer: String,
}

/// The generator and its options, repeated on every scenes.jsonl line.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct GeneratorRecord {
    pub name: &'static str,
    pub version: u32,
    pub seed: u64,
    pub scenes: u32,
    pub size: u32,
    pub max_objects: u32,
    pub cloth_matches_bowl: Option<f64>,
    pub tags_match_apples: Option<f64>,
    pub cloth_rate: f64,
}

/// Version of the scenes.jsonl line layout ([`SceneRecord`]); bump when fields change.
pub const SCENES_FORMAT_VERSION: u32 = 1;

/// One line of scenes.jsonl (documented in docs/synth.md).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SceneRecord {
    pub format_version: u32,
    pub scene: String,
    pub index: u32,
    pub image: String,
    pub table: TableKind,
    pub shortcuts: Shortcuts,
    pub objects: Vec<ObjectRecord>,
    pub questions: Vec<QuestionRecord>,
    pub generator: GeneratorRecord,
}

/// Paths of a scene's files, relative to the output folder.
pub fn image_path(scene: &str) -> String {
    format!("images/{scene}.png")
}

pub fn mask_path(scene: &str, region: &str) -> String {
    format!("masks/{scene}/{region}.png")
}

pub fn object_records(scene: &str, masks: &[ObjectMask]) -> Vec<ObjectRecord> {
    masks
        .iter()
        .map(|m| ObjectRecord {
            id: m.id.clone(),
            kind: m.kind,
            colour: m.colour.as_str(),
            bbox: m.bbox,
            visible_px: m.visible_px,
            in_bowl: m.in_bowl,
            occluded_fraction: (m.occluded_fraction() * 10_000.0).round() / 10_000.0,
            mask: mask_path(scene, &m.id),
        })
        .collect()
}

fn erase(id: impl Into<String>, ids: Vec<String>) -> EditOut {
    EditOut {
        id: id.into(),
        operation: "erase",
        regions: SelectorOut { ids },
        params: ERASE,
    }
}

fn cover(id: impl Into<String>, ids: Vec<String>) -> EditOut {
    EditOut {
        id: id.into(),
        operation: "cover",
        regions: SelectorOut { ids },
        params: COVER,
    }
}

/// A question about one scene: id suffix (`count`), text, kind and ground-truth answer.
struct Question {
    suffix: &'static str,
    text: String,
    kind: &'static str,
    answer: String,
}

/// Builds a case: objects for which `is_target` holds are targets, the rest distractors.
fn case(
    scene: &str,
    question: Question,
    masks: &[ObjectMask],
    is_target: impl Fn(&ObjectMask) -> bool,
    edits: Vec<EditOut>,
) -> CaseOut {
    CaseOut {
        id: format!("{scene}-{}", question.suffix),
        image: image_path(scene),
        question: question.text,
        question_kind: question.kind,
        answer: question.answer,
        regions: masks
            .iter()
            .map(|m| RegionOut {
                id: m.id.clone(),
                label: m.kind.label(),
                role: if is_target(m) { "target" } else { "distractor" },
                mask: mask_path(scene, &m.id),
            })
            .collect(),
        edits,
    }
}

fn ids_of<'a>(masks: impl IntoIterator<Item = &'a ObjectMask>) -> Vec<String> {
    masks.into_iter().map(|m| m.id.clone()).collect()
}

/// Up to two price tags, one erase edit each (expectation: same).
fn tag_edits(masks: &[ObjectMask]) -> Vec<EditOut> {
    masks
        .iter()
        .filter(|m| m.kind == Kind::Tag)
        .take(2)
        .map(|m| erase(format!("erase-{}", m.id), vec![m.id.clone()]))
        .collect()
}

fn cloth_edit(masks: &[ObjectMask]) -> Option<EditOut> {
    masks
        .iter()
        .find(|m| m.kind == Kind::Cloth)
        .map(|m| cover("cover-cloth", vec![m.id.clone()]))
}

/// Recolours the napkin to a colour that is neither its own nor the bowl's (expectation: same).
fn recolour_cloth_edit(masks: &[ObjectMask], rng: &mut Rng) -> Option<EditOut> {
    let cloth = masks.iter().find(|m| m.kind == Kind::Cloth)?;
    let bowl = masks.iter().find(|m| m.kind == Kind::Bowl)?;
    let choices: Vec<_> = super::palette::ColourName::ALL
        .into_iter()
        .filter(|c| *c != cloth.colour && *c != bowl.colour)
        .collect();
    let colour = choices[rng.index(choices.len())];
    Some(EditOut {
        id: "recolour-cloth".into(),
        operation: "recolour",
        regions: SelectorOut {
            ids: vec![cloth.id.clone()],
        },
        params: EditParams::Recolour {
            colour: colour.as_str(),
            feather_px: 2,
        },
    })
}

fn pick<'a>(rng: &mut Rng, items: &[&'a ObjectMask]) -> Option<&'a ObjectMask> {
    (!items.is_empty()).then(|| items[rng.index(items.len())])
}

/// "How many <kind> are there?" with erase/cover edits on targets and distractors.
fn count_case(scene: &str, masks: &[ObjectMask], rng: &mut Rng) -> CaseOut {
    let mut kind = [Kind::Apple, Kind::Lemon, Kind::Plum, Kind::Orange]
        [rng.weighted(&[0.55, 0.15, 0.15, 0.15])];
    // Other kinds are often absent; ask mostly about one that is there, so counts above zero
    // are common for every kind.
    if kind != Kind::Apple && rng.chance(0.7) {
        let present: Vec<Kind> = [Kind::Lemon, Kind::Plum, Kind::Orange]
            .into_iter()
            .filter(|k| masks.iter().any(|m| m.kind == *k))
            .collect();
        if !present.is_empty() {
            kind = present[rng.index(present.len())];
        }
    }
    let targets: Vec<&ObjectMask> = masks.iter().filter(|m| m.kind == kind).collect();
    let mut edits = Vec::new();
    if let Some(one) = pick(rng, &targets) {
        edits.push(erase("erase-one-target", vec![one.id.clone()]));
    }
    if targets.len() >= 2 {
        let mut order: Vec<&ObjectMask> = targets.clone();
        rng.shuffle(&mut order);
        let mut two = ids_of(order.into_iter().take(2));
        two.sort();
        edits.push(erase("erase-two-targets", two));
    }
    edits.extend(tag_edits(masks));
    let others: Vec<&ObjectMask> = masks
        .iter()
        .filter(|m| m.kind.is_fruit() && m.kind != kind)
        .collect();
    if let Some(other) = pick(rng, &others) {
        edits.push(erase("erase-other-fruit", vec![other.id.clone()]));
    }
    edits.extend(cloth_edit(masks));
    case(
        scene,
        Question {
            suffix: "count",
            text: format!("How many {} are there?", kind.plural()),
            kind: "count",
            answer: targets.len().to_string(),
        },
        masks,
        |m| m.kind == kind,
        edits,
    )
}

/// "What colour is the bowl?"; only edits that must not change the answer.
fn colour_case(scene: &str, masks: &[ObjectMask], rng: &mut Rng) -> Option<CaseOut> {
    let bowl = masks.iter().find(|m| m.kind == Kind::Bowl)?;
    let mut edits: Vec<EditOut> = cloth_edit(masks).into_iter().collect();
    edits.extend(recolour_cloth_edit(masks, rng));
    edits.extend(tag_edits(masks));
    let outside: Vec<&ObjectMask> = masks
        .iter()
        .filter(|m| m.kind.is_fruit() && !m.in_bowl)
        .collect();
    if let Some(f) = pick(rng, &outside) {
        edits.push(erase("erase-fruit-outside-bowl", vec![f.id.clone()]));
    }
    Some(case(
        scene,
        Question {
            suffix: "colour",
            text: "What colour is the bowl?".to_string(),
            kind: "colour",
            answer: bowl.colour.as_str().to_string(),
        },
        masks,
        |m| m.kind == Kind::Bowl,
        edits,
    ))
}

/// "Is there a lemon?" (or plum, orange), yes and no about equally often.
fn exists_case(scene: &str, masks: &[ObjectMask], rng: &mut Rng) -> CaseOut {
    let kinds = [Kind::Lemon, Kind::Plum, Kind::Orange];
    let present: Vec<Kind> = kinds
        .iter()
        .copied()
        .filter(|k| masks.iter().any(|m| m.kind == *k))
        .collect();
    let absent: Vec<Kind> = kinds
        .iter()
        .copied()
        .filter(|k| !present.contains(k))
        .collect();
    let want_yes = rng.chance(0.5);
    let pool = match (want_yes, present.is_empty(), absent.is_empty()) {
        (true, false, _) | (false, _, true) => &present,
        _ => &absent,
    };
    let kind = pool[rng.index(pool.len())];
    let targets: Vec<&ObjectMask> = masks.iter().filter(|m| m.kind == kind).collect();
    let mut edits = Vec::new();
    if !targets.is_empty() {
        edits.push(erase("erase-all-targets", ids_of(targets.iter().copied())));
    }
    let distractors: Vec<&ObjectMask> = masks
        .iter()
        .filter(|m| (m.kind.is_fruit() && m.kind != kind) || m.kind == Kind::Tag)
        .collect();
    if let Some(d) = pick(rng, &distractors) {
        edits.push(erase("erase-distractor", vec![d.id.clone()]));
    }
    let article = if kind == Kind::Orange { "an" } else { "a" };
    case(
        scene,
        Question {
            suffix: "exists",
            text: format!("Is there {article} {}?", kind.label()),
            kind: "exists",
            answer: if targets.is_empty() { "no" } else { "yes" }.to_string(),
        },
        masks,
        |m| m.kind == kind,
        edits,
    )
}

/// The 2–3 cases of one scene (count, colour when there is a bowl, exists). Cases that found no
/// edit (only possible in a scene thinned to almost nothing) are left out.
pub fn scene_cases(scene: &str, masks: &[ObjectMask], rng: &mut Rng) -> Vec<CaseOut> {
    let mut cases = vec![count_case(scene, masks, rng)];
    cases.extend(colour_case(scene, masks, rng));
    cases.push(exists_case(scene, masks, rng));
    cases.retain(|c| !c.edits.is_empty());
    cases
}

pub fn question_records(cases: &[CaseOut]) -> Vec<QuestionRecord> {
    cases
        .iter()
        .map(|c| QuestionRecord {
            case: c.id.clone(),
            question: c.question.clone(),
            question_kind: c.question_kind,
            answer: c.answer.clone(),
        })
        .collect()
}

/// The spec file's text: one region or edit per line, so a 2,000-scene spec stays readable
/// and diffable.
pub fn spec_json(description: &str, cases: &[CaseOut]) -> Result<String, serde_json::Error> {
    let s = |v: &str| serde_json::to_string(v);
    let mut out = String::new();
    out.push_str("{\n  \"format_version\": 1,\n");
    out.push_str(&format!(
        "  \"description\": {},\n  \"cases\": [",
        s(description)?
    ));
    for (ci, c) in cases.iter().enumerate() {
        out.push_str(if ci == 0 { "\n" } else { ",\n" });
        out.push_str(&format!(
            "    {{\n      \"id\": {},\n      \"image\": {},\n      \"question\": {},\n      \"question_kind\": {},\n      \"answer\": {},\n      \"regions\": [\n",
            s(&c.id)?,
            s(&c.image)?,
            s(&c.question)?,
            s(c.question_kind)?,
            s(&c.answer)?
        ));
        let regions: Vec<String> = c
            .regions
            .iter()
            .map(|r| serde_json::to_string(r).map(|j| format!("        {j}")))
            .collect::<Result<_, _>>()?;
        out.push_str(&regions.join(",\n"));
        out.push_str("\n      ],\n      \"edits\": [\n");
        let edits: Vec<String> = c
            .edits
            .iter()
            .map(|e| serde_json::to_string(e).map(|j| format!("        {j}")))
            .collect::<Result<_, _>>()?;
        out.push_str(&edits.join(",\n"));
        out.push_str("\n      ]\n    }");
    }
    out.push_str("\n  ]\n}\n");
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::synth::scene::{plan_scene, render_scene, SceneOptions};

    fn masks(seed: u64) -> Vec<ObjectMask> {
        let options = SceneOptions {
            size: 128,
            max_fruit: 9,
            cloth_matches_bowl: None,
            tags_match_apples: None,
            cloth_rate: crate::synth::DEFAULT_CLOTH_RATE,
        };
        render_scene(&plan_scene(&options, &mut Rng::for_stream(seed, 0))).1
    }

    #[test]
    fn every_scene_gets_two_or_three_cases_with_edits_and_consistent_answers() {
        for seed in 0..40 {
            let masks = masks(seed);
            let cases = scene_cases("scene-00000", &masks, &mut Rng::new(seed));
            let has_bowl = masks.iter().any(|m| m.kind == Kind::Bowl);
            assert_eq!(cases.len(), 2 + usize::from(has_bowl));
            for c in &cases {
                assert!(!c.edits.is_empty(), "{}", c.id);
                assert_eq!(c.regions.len(), masks.len());
                let n_targets = c.regions.iter().filter(|r| r.role == "target").count();
                match c.question_kind {
                    "count" => assert_eq!(c.answer, n_targets.to_string()),
                    "exists" => assert_eq!(c.answer == "yes", n_targets > 0),
                    _ => assert_eq!(n_targets, 1),
                }
                for e in &c.edits {
                    for id in &e.regions.ids {
                        assert!(c.regions.iter().any(|r| &r.id == id));
                    }
                    if c.question_kind == "colour" {
                        assert!(!e.regions.ids.iter().any(|id| id == "bowl"));
                    }
                }
            }
        }
    }

    #[test]
    fn spec_text_is_valid_json_with_the_documented_layout() {
        let masks = masks(1);
        let cases = scene_cases("scene-00000", &masks, &mut Rng::new(1));
        let text = spec_json("test \"quoted\"", &cases).unwrap();
        let v: serde_json::Value = serde_json::from_str(&text).unwrap();
        assert_eq!(v["format_version"], 1);
        assert_eq!(v["description"], "test \"quoted\"");
        assert_eq!(v["cases"].as_array().unwrap().len(), cases.len());
        let edit = &v["cases"][0]["edits"][0];
        assert!(edit.get("expect").is_none());
        assert_eq!(edit["params"]["dilate_px"], 3);
    }
}
