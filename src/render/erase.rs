//! `erase`: remove the regions by inpainting them from their surroundings.
//!
//! Two fills: Telea (diffusion; smooth, right for flat or gently shaded backgrounds) and
//! exemplar (copies patches; keeps texture, which a diffusion fill smears into a blur a model can
//! react to). `auto`, the default, picks exemplar when the hole is larger than
//! [`MIN_EXEMPLAR_AREA_PX`] and the background ring around it is textured
//! ([`ring_texture`] above [`TEXTURE_STD_THRESHOLD`]), else Telea. The fill actually used is
//! returned in [`Rendered::method`].
//!
//! Exemplar never copies from other regions of the case, except the one an object lies on (see
//! [`BACKGROUND_RING_SHARE`]); that is decided per group of nearby hole parts, each filled by its
//! own call. Invariant: pixels outside the dilated hole (`Rendered::changed`) are bit-identical
//! to the input, whatever the method.

use image::RgbImage;
use serde::Deserialize;

use super::exemplar::{inpaint_exemplar_avoiding, ExemplarParams, MAX_PATCH_PX};
use super::mask::Mask;
use super::telea::{inpaint_telea, TeleaParams};
use super::{parse_params, EditInput, Operation, Params, Rendered};
use crate::spec::Effect;

#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct EraseParams {
    /// Inpainting algorithm: `auto` (default), `telea` or `exemplar`.
    #[serde(default = "default_method")]
    pub method: String,
    /// Telea neighbourhood radius in pixels (also used by exemplar for pixels no patch can fill).
    #[serde(default = "default_radius")]
    pub radius_px: f32,
    /// Grow the hole by this many pixels first, so anti-aliased or shadowed edges go too.
    #[serde(default = "default_dilate")]
    pub dilate_px: u32,
    /// Exemplar patch side in pixels (odd, 3..=63).
    #[serde(default = "default_patch")]
    pub patch_px: u32,
    /// Exemplar search margin around the hole's bounding box, in pixels; unset: the larger of
    /// 8·patch_px and the hole's longer side.
    #[serde(default)]
    pub search_px: Option<u32>,
}

fn default_method() -> String {
    "auto".into()
}
fn default_radius() -> f32 {
    5.0
}
fn default_dilate() -> u32 {
    2
}
fn default_patch() -> u32 {
    9
}

/// The fill `erase` runs.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Method {
    Telea,
    Exemplar,
    /// Exemplar on textured surroundings of holes above a minimum area, Telea otherwise.
    Auto,
}

impl Method {
    fn parse(name: &str) -> Result<Method, String> {
        match name {
            "telea" => Ok(Method::Telea),
            "exemplar" => Ok(Method::Exemplar),
            "auto" => Ok(Method::Auto),
            other => Err(format!(
                "unknown erase method {other:?}; use \"auto\", \"telea\" or \"exemplar\""
            )),
        }
    }
}

/// `auto` uses exemplar only for holes with more pixels than this (after dilation): small holes
/// are filled just as well by Telea.
pub const MIN_EXEMPLAR_AREA_PX: usize = 64;
/// `auto` uses exemplar when [`ring_texture`] exceeds this many luminance levels (of 255).
pub const TEXTURE_STD_THRESHOLD: f64 = 4.0;
/// A region covering at least this share of the ring of `patch_px` pixels around a group of hole
/// parts is the group's background, which exemplar may copy from (see `plan_exemplar`).
pub const BACKGROUND_RING_SHARE: f64 = 0.25;

pub struct Erase;

impl Operation for Erase {
    fn name(&self) -> &'static str {
        "erase"
    }

    fn check(&self, params: &Params) -> Result<crate::spec::Effect, String> {
        let p: EraseParams = parse_params(params)?;
        Method::parse(&p.method)?;
        if !(p.radius_px.is_finite() && p.radius_px > 0.0) {
            return Err(format!(
                "radius_px must be a positive number, got {}",
                p.radius_px
            ));
        }
        if p.patch_px % 2 == 0 || !(3..=MAX_PATCH_PX).contains(&p.patch_px) {
            return Err(format!(
                "patch_px must be an odd number from 3 to {MAX_PATCH_PX}, got {}",
                p.patch_px
            ));
        }
        Ok(Effect::Removes)
    }

    fn apply(&self, input: &EditInput, params: &Params) -> Result<Rendered, String> {
        let p: EraseParams = parse_params(params)?;
        let method = Method::parse(&p.method)?;
        let hole = input.mask.dilate(p.dilate_px);
        if hole.n_inside() == hole.width() as usize * hole.height() as usize {
            return Err("the hole covers the whole image; nothing is left to inpaint from".into());
        }
        let telea = || {
            let image = inpaint_telea(
                input.image,
                &hole,
                &TeleaParams {
                    radius_px: p.radius_px,
                },
            );
            Rendered {
                image,
                changed: hole.clone(),
                method: "telea".into(),
                added: Vec::new(),
            }
        };
        if method == Method::Telea {
            return Ok(telea());
        }
        // Hole parts closer than this could see each other's pixels (a patch, or Telea's
        // neighbourhood when exemplar falls back), so they are filled together.
        let reach_px = p.patch_px.max(p.radius_px.ceil().min(200.0) as u32 + 2);
        let plan = plan_exemplar(&hole, input.all_regions, p.dilate_px, p.patch_px, reach_px);
        if method == Method::Auto
            && !(hole.n_inside() > MIN_EXEMPLAR_AREA_PX
                && ring_texture(input.image, &hole, &plan.avoid_all, 2 * p.patch_px)
                    .is_some_and(|t| t > TEXTURE_STD_THRESHOLD))
        {
            return Ok(telea());
        }
        // Groups are filled one after another; the result does not depend on the order, since no
        // group reads pixels of another (they are out of reach and never sources).
        let mut image = input.image.clone();
        let (mut n_exemplar_px, mut n_fallback_px) = (0, 0);
        for k in 0..plan.groups.len() {
            let (group, avoid) = plan.group(k);
            let fill = inpaint_exemplar_avoiding(
                &image,
                &group,
                &avoid,
                &ExemplarParams {
                    patch_px: p.patch_px,
                    search_px: p.search_px,
                    fallback_radius_px: p.radius_px,
                    seed: input.seed ^ (k as u64).wrapping_mul(0x9E37_79B9_7F4A_7C15),
                },
            );
            image = fill.image;
            n_exemplar_px += fill.n_exemplar_px;
            n_fallback_px += fill.n_fallback_px;
        }
        let method = match (n_exemplar_px, n_fallback_px) {
            (_, 0) => "exemplar",
            (0, _) => "telea",
            _ => "exemplar+telea",
        };
        Ok(Rendered {
            image,
            changed: hole,
            method: method.into(),
            added: Vec::new(),
        })
    }
}

/// How an exemplar erase is split up and what each part may copy from.
struct ExemplarPlan {
    width: u32,
    height: u32,
    /// Pixel indices of each group, filled by one exemplar call.
    groups: Vec<Vec<usize>>,
    /// `background[g][k]`: region `k` is what group `g` lies on.
    background: Vec<Vec<bool>>,
    /// The regions, grown like the hole.
    grown: Vec<Mask>,
    /// The hole and the regions that are background to no group (for [`ring_texture`]).
    avoid_all: Mask,
}

impl ExemplarPlan {
    /// Group `g`'s pixels, and what it must not copy from: the whole hole and every region
    /// except those it lies on. Built one group at a time, so many groups cost no memory.
    fn group(&self, g: usize) -> (Mask, Mask) {
        let mut avoid = self.avoid_all.as_slice().to_vec();
        for (k, grown) in self.grown.iter().enumerate() {
            if !self.background[g][k] && self.background.iter().any(|other| other[k]) {
                for (a, &r) in avoid.iter_mut().zip(grown.as_slice()) {
                    *a |= r;
                }
            }
        }
        let mut inside = vec![false; avoid.len()];
        for &i in &self.groups[g] {
            inside[i] = true;
        }
        // Both are non-empty: a group has pixels, and they are in `avoid` too.
        let to_mask = |v: Vec<bool>| {
            Mask::from_vec(self.width, self.height, v).unwrap_or_else(|| self.avoid_all.clone())
        };
        (to_mask(inside), to_mask(avoid))
    }
}

/// Splits the hole into groups of connected parts (parts within `2 · reach_px` of each other join
/// one group) and decides, per group, which regions exemplar must not copy from.
///
/// Exemplar never copies from the hole or from a region of the case (grown by `dilate_px`), so
/// erasing one object does not paste pieces of another, except from a region covering at least
/// [`BACKGROUND_RING_SHARE`] of the ring of `ring_px` pixels around the group: that is what the
/// group lies on (a cloth, a bowl) rather than a neighbour, and stays a source, or the fill would
/// bite a hole of table texture into it. Deciding per group matters when one edit erases several
/// objects: the bowl under one of them must not become a source for another lying on the table.
fn plan_exemplar(
    hole: &Mask,
    all_regions: &[Mask],
    dilate_px: u32,
    ring_px: u32,
    reach_px: u32,
) -> ExemplarPlan {
    let (w, h) = (hole.width() as usize, hole.height() as usize);
    let regions: Vec<&Mask> = all_regions
        .iter()
        .filter(|r| r.width() == hole.width() && r.height() == hole.height())
        .collect();
    let groups = hole_groups(hole, reach_px);
    // background[g][k]: region k is what group g lies on.
    let background: Vec<Vec<bool>> = groups
        .iter()
        .map(|(_, edges)| {
            let ring = ring_of(hole, edges, ring_px);
            regions
                .iter()
                .map(|region| {
                    let n_on_ring = ring.iter().filter(|&&i| region.as_slice()[i]).count();
                    !ring.is_empty()
                        && n_on_ring as f64 >= BACKGROUND_RING_SHARE * ring.len() as f64
                })
                .collect()
        })
        .collect();
    let grown: Vec<Mask> = regions.iter().map(|r| r.dilate(dilate_px)).collect();
    let mut avoid_all = hole.as_slice().to_vec();
    for (k, grown) in grown.iter().enumerate() {
        if background.iter().all(|bg| !bg[k]) {
            for (a, &r) in avoid_all.iter_mut().zip(grown.as_slice()) {
                *a |= r;
            }
        }
    }
    ExemplarPlan {
        width: hole.width(),
        height: hole.height(),
        groups: groups.into_iter().map(|(pixels, _)| pixels).collect(),
        background,
        grown,
        avoid_all: Mask::from_vec(w as u32, h as u32, avoid_all).unwrap_or_else(|| hole.clone()),
    }
}

/// The hole's 8-connected parts, joined into groups when within `2 · reach_px` of each other;
/// each group as (pixel indices, edge pixel indices), in order of its first pixel.
fn hole_groups(hole: &Mask, reach_px: u32) -> Vec<(Vec<usize>, Vec<usize>)> {
    let (w, h) = (hole.width() as usize, hole.height() as usize);
    let inside = hole.as_slice();
    // Parts by flood fill.
    let mut part = vec![u32::MAX; w * h];
    let mut parts: Vec<(Vec<usize>, Vec<usize>)> = Vec::new();
    for start in 0..w * h {
        if !inside[start] || part[start] != u32::MAX {
            continue;
        }
        let id = parts.len() as u32;
        let (mut pixels, mut edges) = (Vec::new(), Vec::new());
        let mut stack = vec![start];
        part[start] = id;
        while let Some(i) = stack.pop() {
            pixels.push(i);
            if is_edge(hole, i) {
                edges.push(i);
            }
            let (x, y) = ((i % w) as isize, (i / w) as isize);
            for dy in -1..=1 {
                for dx in -1..=1 {
                    let (nx, ny) = (x + dx, y + dy);
                    if nx >= 0 && ny >= 0 && (nx as usize) < w && (ny as usize) < h {
                        let j = ny as usize * w + nx as usize;
                        if inside[j] && part[j] == u32::MAX {
                            part[j] = id;
                            stack.push(j);
                        }
                    }
                }
            }
        }
        parts.push((pixels, edges));
    }
    // Join parts whose discs of radius reach_px around their edges meet (union-find).
    let mut parent: Vec<usize> = (0..parts.len()).collect();
    fn root(parent: &mut [usize], mut a: usize) -> usize {
        while parent[a] != a {
            parent[a] = parent[parent[a]];
            a = parent[a];
        }
        a
    }
    let mut owner = vec![usize::MAX; w * h];
    for (id, (_, edges)) in parts.iter().enumerate() {
        disc_around(w, h, edges, reach_px, |j| {
            if owner[j] == usize::MAX {
                owner[j] = id;
            } else if owner[j] != id {
                let (a, b) = (root(&mut parent, owner[j]), root(&mut parent, id));
                if a != b {
                    parent[a.max(b)] = a.min(b);
                }
            }
        });
    }
    let mut groups: Vec<(Vec<usize>, Vec<usize>)> = Vec::new();
    let mut group_of_root = vec![usize::MAX; parts.len()];
    for (id, (pixels, edges)) in parts.iter().enumerate() {
        let r = root(&mut parent, id);
        if group_of_root[r] == usize::MAX {
            group_of_root[r] = groups.len();
            groups.push((Vec::new(), Vec::new()));
        }
        let g = &mut groups[group_of_root[r]];
        g.0.extend_from_slice(pixels);
        g.1.extend_from_slice(edges);
    }
    groups
}

/// How textured the background around a hole is: the mean, over the ring of pixels within
/// `ring_px` of the hole (outside the hole and outside `avoid`), of the standard deviation of
/// luminance (BT.601 weights, levels 0..255) in the 3×3 window around each ring pixel, taken over
/// the window's pixels that are outside the hole and `avoid`. Flat or smoothly shaded
/// surroundings score near 0, sensor noise a few levels, visible texture more. `None` when the
/// ring is empty.
#[must_use]
pub fn ring_texture(image: &RgbImage, hole: &Mask, avoid: &Mask, ring_px: u32) -> Option<f64> {
    let (w, h) = (image.width() as usize, image.height() as usize);
    if hole.width() as usize != w || hole.height() as usize != h {
        return None;
    }
    let background = |x: usize, y: usize| {
        !hole.contains(x as u32, y as u32) && !avoid.contains(x as u32, y as u32)
    };
    let luma = |x: usize, y: usize| {
        let [r, g, b] = image.get_pixel(x as u32, y as u32).0;
        0.299 * f64::from(r) + 0.587 * f64::from(g) + 0.114 * f64::from(b)
    };
    let mut sum = 0.0;
    let mut n = 0usize;
    for (x, y) in ring(hole, ring_px) {
        if !background(x, y) {
            continue;
        }
        // Deviations from the first value, then two passes (mean, then squared deviations):
        // a flat window gives exactly 0.
        let mut values = [0.0f64; 9];
        let mut k = 0;
        for yy in y.saturating_sub(1)..=(y + 1).min(h - 1) {
            for xx in x.saturating_sub(1)..=(x + 1).min(w - 1) {
                if background(xx, yy) {
                    values[k] = luma(xx, yy);
                    k += 1;
                }
            }
        }
        let first = values[0];
        let values = values[..k].iter().map(|v| v - first);
        let mean = values.clone().sum::<f64>() / k as f64;
        let var = values.map(|v| (v - mean) * (v - mean)).sum::<f64>() / k as f64;
        sum += var.sqrt();
        n += 1;
    }
    (n > 0).then(|| sum / n as f64)
}

/// Pixels outside `hole` whose centre lies within `ring_px` of a hole pixel's centre, in raster
/// order.
fn ring(hole: &Mask, ring_px: u32) -> Vec<(usize, usize)> {
    let w = hole.width() as usize;
    let edges: Vec<usize> = (0..hole.as_slice().len())
        .filter(|&i| is_edge(hole, i))
        .collect();
    let mut ring = ring_of(hole, &edges, ring_px);
    ring.sort_unstable();
    ring.into_iter().map(|i| (i % w, i / w)).collect()
}

/// Pixel indices outside `hole` within `ring_px` of one of `edges`, each once.
fn ring_of(hole: &Mask, edges: &[usize], ring_px: u32) -> Vec<usize> {
    let (w, h) = (hole.width() as usize, hole.height() as usize);
    let inside = hole.as_slice();
    let mut seen = vec![false; w * h];
    let mut ring = Vec::new();
    disc_around(w, h, edges, ring_px, |j| {
        if !inside[j] && !seen[j] {
            seen[j] = true;
            ring.push(j);
        }
    });
    ring
}

/// A hole pixel with a 4-neighbour outside the hole or on the image border.
fn is_edge(hole: &Mask, i: usize) -> bool {
    let (w, h) = (hole.width() as usize, hole.height() as usize);
    let inside = hole.as_slice();
    let (x, y) = (i % w, i / w);
    inside[i]
        && (x == 0
            || !inside[i - 1]
            || x + 1 == w
            || !inside[i + 1]
            || y == 0
            || !inside[i - w]
            || y + 1 == h
            || !inside[i + w])
}

/// Calls `visit` for every pixel of a `w`×`h` image within `radius_px` of one of `centres`
/// (possibly more than once). Growing from edge pixels alone keeps large holes cheap.
fn disc_around(
    w: usize,
    h: usize,
    centres: &[usize],
    radius_px: u32,
    mut visit: impl FnMut(usize),
) {
    let (wi, hi) = (w as isize, h as isize);
    let r = radius_px as isize;
    for &i in centres {
        let (x, y) = (i as isize % wi, i as isize / wi);
        for dy in -r..=r {
            for dx in -r..=r {
                let (nx, ny) = (x + dx, y + dy);
                if dx * dx + dy * dy <= r * r && nx >= 0 && ny >= 0 && nx < wi && ny < hi {
                    visit((ny * wi + nx) as usize);
                }
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use image::Rgb;

    fn params(json: &str) -> Params {
        serde_json::from_str(json).unwrap()
    }

    fn square(w: u32, x0: u32, x1: u32) -> Mask {
        let inside = (0..w * w)
            .map(|i| (x0..x1).contains(&(i % w)) && (x0..x1).contains(&(i / w)))
            .collect();
        Mask::from_vec(w, w, inside).unwrap()
    }

    fn erase(image: &RgbImage, mask: &Mask, json: &str) -> Rendered {
        let input = EditInput {
            image,
            mask,
            all_regions: std::slice::from_ref(mask),
            seed: 3,
        };
        Erase.apply(&input, &params(json)).unwrap()
    }

    /// Invented test image: a diagonal pattern of period 6 with levels 60..200.
    fn textured(w: u32) -> RgbImage {
        RgbImage::from_fn(w, w, |x, y| {
            let v = if (x + 2 * y) % 6 < 3 { 60 } else { 200 };
            Rgb([v, v / 2, 255 - v])
        })
    }

    #[test]
    fn check_accepts_the_three_methods_and_rejects_others() {
        for m in ["auto", "telea", "exemplar"] {
            let json = format!(r#"{{"method": "{m}"}}"#);
            assert!(Erase.check(&params(&json)).is_ok(), "{m}");
        }
        let err = Erase.check(&params(r#"{"method": "blur"}"#)).unwrap_err();
        assert_eq!(
            err,
            "unknown erase method \"blur\"; use \"auto\", \"telea\" or \"exemplar\""
        );
    }

    #[test]
    fn check_rejects_even_or_out_of_range_patches() {
        for bad in [0, 1, 8, 65] {
            let err = Erase
                .check(&params(&format!(r#"{{"patch_px": {bad}}}"#)))
                .unwrap_err();
            assert_eq!(
                err,
                format!("patch_px must be an odd number from 3 to 63, got {bad}")
            );
        }
        assert!(Erase
            .check(&params(r#"{"patch_px": 7, "search_px": 40}"#))
            .is_ok());
    }

    #[test]
    fn auto_uses_telea_on_flat_surroundings() {
        let img = RgbImage::from_pixel(48, 48, Rgb([90, 140, 60]));
        let r = erase(&img, &square(48, 16, 30), "{}");
        assert_eq!(r.method, "telea");
    }

    #[test]
    fn auto_uses_telea_on_small_holes() {
        let img = textured(48);
        // A 3×3 square grown by 2 px: 25 pixels, below the minimum area.
        let r = erase(&img, &square(48, 20, 23), "{}");
        assert_eq!(r.method, "telea");
    }

    #[test]
    fn auto_uses_exemplar_on_textured_surroundings() {
        let img = textured(64);
        let mask = square(64, 24, 36);
        let hole = mask.dilate(2);
        let avoid = hole.clone();
        assert!(ring_texture(&img, &hole, &avoid, 18).unwrap() > TEXTURE_STD_THRESHOLD);
        let r = erase(&img, &mask, "{}");
        assert_eq!(r.method, "exemplar");
        // A periodic texture is continued exactly.
        assert_eq!(r.image, img);
    }

    #[test]
    fn explicit_method_wins_over_auto() {
        let img = textured(64);
        let mask = square(64, 24, 36);
        assert_eq!(erase(&img, &mask, r#"{"method": "telea"}"#).method, "telea");
        let flat = RgbImage::from_pixel(48, 48, Rgb([90, 140, 60]));
        let r = erase(&flat, &square(48, 16, 30), r#"{"method": "exemplar"}"#);
        assert_eq!(r.method, "exemplar");
        assert_eq!(r.image, flat);
    }

    #[test]
    fn exemplar_copies_from_the_cloth_an_object_lies_on_but_not_from_a_neighbour() {
        // Invented scene: striped table, a checked cloth (16..48), a yellow object on the cloth
        // (26..34) and a red neighbour touching it (34..38, 28..32).
        let cloth = square(64, 16, 48);
        let object = square(64, 26, 34);
        let neighbour = Mask::from_vec(
            64,
            64,
            (0..64 * 64)
                .map(|i| (34..38).contains(&(i % 64)) && (28..32).contains(&(i / 64)))
                .collect(),
        )
        .unwrap();
        let img = RgbImage::from_fn(64, 64, |x, y| {
            if object.contains(x, y) {
                Rgb([250, 220, 0])
            } else if neighbour.contains(x, y) {
                Rgb([230, 0, 0])
            } else if cloth.contains(x, y) {
                if (x / 2 + y / 2) % 2 == 0 {
                    Rgb([20, 40, 160])
                } else {
                    Rgb([240, 240, 240])
                }
            } else if (x + y) % 6 < 3 {
                Rgb([150, 100, 60])
            } else {
                Rgb([90, 60, 30])
            }
        });
        let regions = [object.clone(), cloth.clone(), neighbour.clone()];
        let input = EditInput {
            image: &img,
            mask: &object,
            all_regions: &regions,
            seed: 5,
        };
        let r = Erase
            .apply(&input, &params(r#"{"method": "exemplar", "dilate_px": 0}"#))
            .unwrap();
        assert_eq!(r.method, "exemplar");
        for (x, y, p) in r.image.enumerate_pixels() {
            if object.contains(x, y) {
                assert!(
                    [[20, 40, 160], [240, 240, 240]].contains(&p.0),
                    "({x}, {y}) = {p:?} is not cloth"
                );
            }
        }
    }

    #[test]
    fn background_is_decided_per_group_of_objects() {
        // Invented scene: striped table; a checked bowl (4..40) holding object A (18..26); object
        // B (48..56) on the table, out of reach of A. Erasing both at once: A is filled from the
        // bowl, B from the table only.
        let rect = |x0: u32, x1: u32| square(64, x0, x1);
        let (bowl, a, b) = (rect(4, 40), rect(18, 26), rect(48, 56));
        const BOWL: [[u8; 3]; 2] = [[20, 40, 160], [240, 240, 240]];
        const TABLE: [[u8; 3]; 2] = [[150, 100, 60], [90, 60, 30]];
        let img = RgbImage::from_fn(64, 64, |x, y| {
            if a.contains(x, y) || b.contains(x, y) {
                Rgb([250, 220, 0])
            } else if bowl.contains(x, y) {
                Rgb(BOWL[((x / 2 + y / 2) % 2) as usize])
            } else {
                Rgb(TABLE[usize::from((x + y) % 6 < 3)])
            }
        });
        let both = a.union(&b).unwrap();
        let regions = [a.clone(), b.clone(), bowl.clone()];
        let input = EditInput {
            image: &img,
            mask: &both,
            all_regions: &regions,
            seed: 9,
        };
        let plan = plan_exemplar(&both, &regions, 0, 9, 9);
        assert_eq!(plan.groups.len(), 2);
        let group_of = |m: &Mask| {
            (0..2)
                .map(|g| plan.group(g))
                .find(|(group, _)| group.as_slice() == m.as_slice())
                .unwrap()
        };
        assert!(!group_of(&a).1.contains(5, 5), "the bowl is A's background");
        assert!(
            group_of(&b).1.contains(5, 5),
            "the bowl is not B's background"
        );
        let r = Erase
            .apply(&input, &params(r#"{"method": "exemplar", "dilate_px": 0}"#))
            .unwrap();
        for (x, y, p) in r.image.enumerate_pixels() {
            if a.contains(x, y) {
                assert!(BOWL.contains(&p.0), "A at ({x}, {y}) = {p:?} is not bowl");
            }
            if b.contains(x, y) {
                assert!(TABLE.contains(&p.0), "B at ({x}, {y}) = {p:?} is not table");
            }
        }
    }

    #[test]
    fn ring_texture_of_flat_image_is_zero() {
        let img = RgbImage::from_pixel(20, 20, Rgb([5, 6, 7]));
        let hole = square(20, 8, 12);
        assert_eq!(ring_texture(&img, &hole, &hole, 3), Some(0.0));
    }
}
