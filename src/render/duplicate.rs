//! `duplicate`: add copies of the selected objects elsewhere in the image, on free background.
//!
//! Objects: each region of the case whose mask lies wholly inside the edit's mask (the union of
//! the selected regions) is one object, except a region contained in another such region (its
//! copy travels with the larger one). [`EditInput`] does not say which regions were selected, so
//! a region that was not selected but lies wholly inside the selected ones counts as selected
//! (its pixels would be copied anyway). When no region qualifies (a caller that passes no
//! regions), the edit's mask is one object. An object made of several disconnected parts is
//! copied as one piece, so the count of added objects matches the count of selected regions.
//!
//! Each object's mask grown by `margin_px` (not clipped at the image border: source pixels past
//! it repeat the border) is the patch; a copy is placed by a seeded search over whole-pixel
//! translations where the whole patch lies inside the image and touches neither any region of the
//! case (grown by `margin_px`) nor an earlier patch: [`RANDOM_TRIES`] uniform draws, then every
//! position in row order from a random start, so a free place is found whenever one exists. Then
//! the patch is blended in (`poisson`: seamless cloning, [`super::poisson`]; `paste`: the patch's
//! pixels as they are).
//!
//! Invariants: only pixels of the placed patches ([`Rendered::changed`]) change; every random
//! choice comes from the edit's seed; the copies' object masks are returned in
//! [`Rendered::added`]. When no free place exists, the edit fails with a message, never panics.

use image::RgbImage;
use serde::Deserialize;

use super::mask::Mask;
use super::poisson::{poisson_clone, PoissonParams};
use super::rng::SplitMix64;
use super::{parse_params, EditInput, Operation, Params, Rendered};
use crate::spec::Effect;

#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct DuplicateParams {
    /// Background kept around the object in the copied patch, in pixels; also the smallest gap
    /// between a copy and any region or other copy.
    #[serde(default = "default_margin")]
    pub margin_px: u32,
    /// Copies added per object.
    #[serde(default = "default_copies")]
    pub copies: usize,
    /// How a copy meets its new surroundings.
    #[serde(default)]
    pub blend: Blend,
}

/// How a copied patch is put into the image.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Blend {
    /// Seamless cloning: the patch keeps its gradients, its border takes the new surroundings'
    /// values (colours inside shift smoothly toward them).
    #[default]
    Poisson,
    /// The patch's pixels unchanged (a visible seam where backgrounds differ).
    Paste,
}

impl Blend {
    pub fn as_str(self) -> &'static str {
        match self {
            Blend::Poisson => "poisson",
            Blend::Paste => "paste",
        }
    }
}

fn default_margin() -> u32 {
    3
}
fn default_copies() -> usize {
    1
}

/// Most copies per object a spec may ask for.
pub const MAX_COPIES: usize = 16;
/// Largest `margin_px` a spec may ask for.
pub const MAX_MARGIN_PX: u32 = 64;
/// Random placements tried per copy before every placement is scanned in turn.
pub const RANDOM_TRIES: usize = 2000;

pub struct Duplicate;

impl Operation for Duplicate {
    fn name(&self) -> &'static str {
        "duplicate"
    }

    fn check(&self, params: &Params) -> Result<Effect, String> {
        let p: DuplicateParams = parse_params(params)?;
        if !(1..=MAX_COPIES).contains(&p.copies) {
            return Err(format!(
                "copies must be from 1 to {MAX_COPIES}, got {}",
                p.copies
            ));
        }
        if p.margin_px > MAX_MARGIN_PX {
            return Err(format!(
                "margin_px must be at most {MAX_MARGIN_PX}, got {}",
                p.margin_px
            ));
        }
        Ok(Effect::Adds {
            copies_each: p.copies,
        })
    }

    fn apply(&self, input: &EditInput, params: &Params) -> Result<Rendered, String> {
        let p: DuplicateParams = parse_params(params)?;
        self.check(params)?;
        let out = duplicate_objects(
            input.image,
            &select_objects(input.mask, input.all_regions),
            input.all_regions,
            &PlacementParams {
                margin_px: p.margin_px,
                copies: p.copies,
                blend: p.blend,
                seed: input.seed,
            },
        )?;
        Ok(Rendered {
            image: out.image,
            changed: out.changed,
            method: p.blend.as_str().into(),
            added: out.added,
        })
    }
}

/// The objects an edit duplicates (see the module documentation).
#[must_use]
pub fn select_objects(mask: &Mask, all_regions: &[Mask]) -> Vec<Mask> {
    let within = |inner: &Mask, outer: &Mask| {
        inner.width() == outer.width()
            && inner.height() == outer.height()
            && inner
                .as_slice()
                .iter()
                .zip(outer.as_slice())
                .all(|(&i, &o)| !i || o)
    };
    let mut candidates: Vec<&Mask> = Vec::new();
    for r in all_regions {
        if within(r, mask) && !candidates.contains(&r) {
            candidates.push(r);
        }
    }
    let objects: Vec<Mask> = candidates
        .iter()
        .filter(|r| {
            !candidates
                .iter()
                .any(|other| other != *r && within(r, other))
        })
        .map(|r| (*r).clone())
        .collect();
    if objects.is_empty() {
        vec![mask.clone()]
    } else {
        objects
    }
}

/// How copies are placed and blended.
#[derive(Debug, Clone)]
pub struct PlacementParams {
    pub margin_px: u32,
    pub copies: usize,
    pub blend: Blend,
    pub seed: u64,
}

/// The image with the copies, the union of the placed patches and each copy's object mask.
#[derive(Debug, Clone)]
pub struct Duplicated {
    pub image: RgbImage,
    pub changed: Mask,
    pub added: Vec<Mask>,
}

/// Adds `copies` copies of every object to `image`, each on free background (see the module
/// documentation). `avoid` are masks no patch may touch (grown by `margin_px`).
///
/// # References
/// P. Pérez, M. Gangnet, A. Blake, "Poisson image editing", ACM SIGGRAPH 2003 (seamless cloning
/// of the copied patch, `Blend::Poisson`).
pub fn duplicate_objects(
    image: &RgbImage,
    objects: &[Mask],
    avoid: &[Mask],
    params: &PlacementParams,
) -> Result<Duplicated, String> {
    let (w, h) = image.dimensions();
    let n = w as usize * h as usize;
    let mut forbidden = vec![false; n];
    for m in avoid.iter().chain(objects) {
        if m.width() != w || m.height() != h {
            return Err("a region mask does not have the image's size".into());
        }
        for (f, &b) in forbidden
            .iter_mut()
            .zip(m.dilate(params.margin_px).as_slice())
        {
            *f |= b;
        }
    }
    let mut result = image.clone();
    let mut changed = vec![false; n];
    let mut added = Vec::new();
    let mut rng = SplitMix64::new(params.seed);
    for (object_idx, object) in objects.iter().enumerate() {
        let footprint = Footprint::of(object, params.margin_px);
        for copy_idx in 0..params.copies {
            let (tx, ty) = find_place(&footprint, &forbidden, w, h, &mut rng).ok_or_else(|| {
                format!(
                    "no free place for copy {} of object {} ({} pixels with a {}-pixel margin): every position inside the image overlaps a region or an earlier copy",
                    copy_idx + 1,
                    object_idx + 1,
                    object.n_inside(),
                    params.margin_px
                )
            })?;
            let (dx, dy) = (tx as i64 - footprint.x0, ty as i64 - footprint.y0);
            let placed = footprint.placed_at(tx, ty, w, h);
            let copy = shift_mask(object, dx, dy);
            let (Some(placed), Some(copy)) = (placed, copy) else {
                return Err("internal: a placed copy left the image".into());
            };
            result = match params.blend {
                Blend::Poisson => poisson_clone(
                    &result,
                    image,
                    (dx as i32, dy as i32),
                    &placed,
                    &PoissonParams::default(),
                ),
                Blend::Paste => paste(&result, image, (dx, dy), &placed),
            };
            // Later copies keep the margin from this one as from any region: `placed` is the
            // copy grown by the margin, as `forbidden` holds the regions grown by it.
            for ((f, c), &b) in forbidden
                .iter_mut()
                .zip(changed.iter_mut())
                .zip(placed.as_slice())
            {
                *f |= b;
                *c |= b;
            }
            added.push(copy);
        }
    }
    let changed = Mask::from_vec(w, h, changed).ok_or("no copy was placed")?;
    Ok(Duplicated {
        image: result,
        changed,
        added,
    })
}

/// Copies the source pixels under `mask` (destination coordinates; destination (x, y) reads
/// source (x − offset.0, y − offset.1), at the nearest source pixel when that lies outside the
/// source, as [`poisson_clone`] does: the margin of an object at the image border is the border's
/// pixels repeated).
fn paste(dest: &RgbImage, src: &RgbImage, offset: (i64, i64), mask: &Mask) -> RgbImage {
    let mut out = dest.clone();
    if src.width() == 0 || src.height() == 0 {
        return out;
    }
    for y in 0..dest.height() {
        for x in 0..dest.width() {
            if !mask.contains(x, y) {
                continue;
            }
            let sx = (x as i64 - offset.0).clamp(0, src.width() as i64 - 1) as u32;
            let sy = (y as i64 - offset.1).clamp(0, src.height() as i64 - 1) as u32;
            out.put_pixel(x, y, *src.get_pixel(sx, sy));
        }
    }
    out
}

/// `mask` moved by (dx, dy); `None` when a pixel would leave the image.
fn shift_mask(mask: &Mask, dx: i64, dy: i64) -> Option<Mask> {
    let (w, h) = (mask.width() as i64, mask.height() as i64);
    let mut inside = vec![false; mask.as_slice().len()];
    for y in 0..h {
        for x in 0..w {
            if mask.as_slice()[(y * w + x) as usize] {
                let (nx, ny) = (x + dx, y + dy);
                if nx < 0 || ny < 0 || nx >= w || ny >= h {
                    return None;
                }
                inside[(ny * w + nx) as usize] = true;
            }
        }
    }
    Mask::from_vec(mask.width(), mask.height(), inside)
}

/// An object grown by the margin (a Euclidean disc, as [`Mask::dilate`], but not clipped at the
/// image border, so a copy of an object at the border still gets its full margin), as offsets
/// from the grown bounding box's corner (`x0`, `y0`, image coordinates, may be negative).
struct Footprint {
    x0: i64,
    y0: i64,
    box_w: u32,
    box_h: u32,
    offsets: Vec<(u32, u32)>,
}

impl Footprint {
    fn of(object: &Mask, margin_px: u32) -> Footprint {
        let [ox, oy, ow, oh] = object.bounding_box();
        let m = margin_px as i64;
        let (box_w, box_h) = (ow + 2 * margin_px, oh + 2 * margin_px);
        let mut grown = vec![false; box_w as usize * box_h as usize];
        let disc: Vec<(i64, i64)> = (-m..=m)
            .flat_map(|dy| (-m..=m).map(move |dx| (dx, dy)))
            .filter(|(dx, dy)| dx * dx + dy * dy <= m * m)
            .collect();
        for y in 0..oh {
            for x in 0..ow {
                if !object.contains(ox + x, oy + y) {
                    continue;
                }
                for &(dx, dy) in &disc {
                    let (lx, ly) = (x as i64 + m + dx, y as i64 + m + dy);
                    grown[(ly * box_w as i64 + lx) as usize] = true;
                }
            }
        }
        let offsets = grown
            .iter()
            .enumerate()
            .filter(|(_, &g)| g)
            .map(|(i, _)| ((i % box_w as usize) as u32, (i / box_w as usize) as u32))
            .collect();
        Footprint {
            x0: ox as i64 - m,
            y0: oy as i64 - m,
            box_w,
            box_h,
            offsets,
        }
    }

    /// The footprint with its box corner at (tx, ty) as a mask of a `w`×`h` image; `None` when
    /// it would leave the image.
    fn placed_at(&self, tx: u32, ty: u32, w: u32, h: u32) -> Option<Mask> {
        if tx as u64 + self.box_w as u64 > w as u64 || ty as u64 + self.box_h as u64 > h as u64 {
            return None;
        }
        let mut inside = vec![false; w as usize * h as usize];
        for &(ox, oy) in &self.offsets {
            inside[((ty + oy) * w + tx + ox) as usize] = true;
        }
        Mask::from_vec(w, h, inside)
    }

    fn fits(&self, forbidden: &[bool], w: u32, tx: u32, ty: u32) -> bool {
        self.offsets
            .iter()
            .all(|&(ox, oy)| !forbidden[((ty + oy) * w + tx + ox) as usize])
    }
}

/// A top-left corner for the footprint's bounding box where no footprint pixel is forbidden:
/// first [`RANDOM_TRIES`] uniform draws, then every position in row order from a random start.
fn find_place(
    footprint: &Footprint,
    forbidden: &[bool],
    w: u32,
    h: u32,
    rng: &mut SplitMix64,
) -> Option<(u32, u32)> {
    if footprint.box_w > w || footprint.box_h > h {
        return None;
    }
    let (nx, ny) = (
        (w - footprint.box_w) as u64 + 1,
        (h - footprint.box_h) as u64 + 1,
    );
    let n_positions = nx * ny;
    for _ in 0..RANDOM_TRIES {
        let k = rng.below(n_positions);
        let (tx, ty) = ((k % nx) as u32, (k / nx) as u32);
        if footprint.fits(forbidden, w, tx, ty) {
            return Some((tx, ty));
        }
    }
    let start = rng.below(n_positions);
    (0..n_positions)
        .map(|i| (start + i) % n_positions)
        .map(|k| ((k % nx) as u32, (k / nx) as u32))
        .find(|&(tx, ty)| footprint.fits(forbidden, w, tx, ty))
}

#[cfg(test)]
mod tests {
    use super::*;
    use image::Rgb;

    fn box_mask(w: u32, h: u32, b: [u32; 4]) -> Mask {
        let inside = (0..w * h)
            .map(|i| {
                let (x, y) = (i % w, i / w);
                x >= b[0] && x < b[0] + b[2] && y >= b[1] && y < b[1] + b[3]
            })
            .collect();
        Mask::from_vec(w, h, inside).unwrap()
    }

    fn params(json: &str) -> Params {
        serde_json::from_str(json).unwrap()
    }

    #[test]
    fn one_pixel_image_fails_with_a_message() {
        let img = RgbImage::from_pixel(1, 1, Rgb([9, 9, 9]));
        let mask = Mask::from_vec(1, 1, vec![true]).unwrap();
        let input = EditInput {
            image: &img,
            mask: &mask,
            all_regions: std::slice::from_ref(&mask),
            seed: 1,
        };
        let err = Duplicate.apply(&input, &params("{}")).unwrap_err();
        assert!(err.contains("no free place"), "{err}");
    }

    #[test]
    fn copy_lands_on_free_background_with_its_margin() {
        // Invented: 40x20 grey image, a red 4x4 tile near the left border.
        let mut img = RgbImage::from_pixel(40, 20, Rgb([100, 100, 100]));
        let tile = box_mask(40, 20, [0, 8, 4, 4]);
        for y in 8..12 {
            for x in 0..4 {
                img.put_pixel(x, y, Rgb([220, 10, 10]));
            }
        }
        let input = EditInput {
            image: &img,
            mask: &tile,
            all_regions: std::slice::from_ref(&tile),
            seed: 3,
        };
        let r = Duplicate
            .apply(&input, &params(r#"{"blend": "paste", "copies": 2}"#))
            .unwrap();
        assert_eq!(r.added.len(), 2);
        assert_eq!(r.method, "paste");
        for copy in &r.added {
            let [x, y, w, h] = copy.bounding_box();
            assert_eq!((w, h), (4, 4));
            assert_eq!(*r.image.get_pixel(x + 1, y + 1), Rgb([220, 10, 10]));
            // The copy is farther than 2·margin from the tile (they share no dilated pixel).
            assert!(copy
                .dilate(3)
                .as_slice()
                .iter()
                .zip(tile.dilate(3).as_slice())
                .all(|(&a, &b)| !(a && b)));
        }
    }

    #[test]
    fn poisson_pulls_a_copy_toward_a_different_background_and_paste_does_not() {
        // Invented: left half light grey with a red 4x4 tile, right half dark grey; the left
        // half is off limits, so the copy lands on the dark half.
        let mut img = RgbImage::from_fn(40, 16, |x, _| {
            if x < 20 {
                Rgb([200, 200, 200])
            } else {
                Rgb([40, 40, 40])
            }
        });
        for y in 6..10 {
            for x in 6..10 {
                img.put_pixel(x, y, Rgb([220, 30, 30]));
            }
        }
        let tile = box_mask(40, 16, [6, 6, 4, 4]);
        let left = box_mask(40, 16, [0, 0, 20, 16]);
        let run = |blend| {
            duplicate_objects(
                &img,
                std::slice::from_ref(&tile),
                std::slice::from_ref(&left),
                &PlacementParams {
                    margin_px: 2,
                    copies: 1,
                    blend,
                    seed: 5,
                },
            )
            .unwrap()
        };
        let (poisson, paste) = (run(Blend::Poisson), run(Blend::Paste));
        assert_eq!(
            poisson.added, paste.added,
            "placement does not depend on the blend"
        );
        let [x, y, ..] = paste.added[0].bounding_box();
        assert_eq!(*paste.image.get_pixel(x + 1, y + 1), Rgb([220, 30, 30]));
        // Boundary 160 levels darker than the source's rim: the copy's red drops by as much.
        let r = poisson.image.get_pixel(x + 1, y + 1).0[0];
        assert!((55..=65).contains(&r), "red channel {r}");
    }

    #[test]
    fn nested_regions_count_once() {
        let outer = box_mask(10, 10, [1, 1, 4, 4]);
        let inner = box_mask(10, 10, [2, 2, 1, 1]);
        let other = box_mask(10, 10, [7, 7, 2, 2]);
        let objects = select_objects(&outer, &[outer.clone(), inner, other]);
        assert_eq!(objects, vec![outer]);
    }

    #[test]
    fn check_rejects_bad_params() {
        assert!(Duplicate.check(&params(r#"{"copies": 0}"#)).is_err());
        assert!(Duplicate.check(&params(r#"{"blend": "alpha"}"#)).is_err());
        assert!(Duplicate.check(&params(r#"{"margin": 2}"#)).is_err());
        assert_eq!(
            Duplicate.check(&params(r#"{"copies": 2}"#)),
            Ok(Effect::Adds { copies_each: 2 })
        );
    }
}
