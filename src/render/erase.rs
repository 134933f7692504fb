//! `erase`: remove the regions by inpainting them from their surroundings.
//!
//! Two fills: Telea (diffusion; smooth, right for flat or gently shaded backgrounds) and
//! exemplar (copies patches; keeps texture, which a diffusion fill smears into a blur a model can
//! react to). `auto`, the default, picks exemplar when the hole is larger than
//! [`MIN_EXEMPLAR_AREA_PX`] and the background ring around it is textured
//! ([`ring_texture`] above [`TEXTURE_STD_THRESHOLD`]), else Telea. The fill actually used is
//! returned in [`Rendered::method`].

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
        let avoid = regions_to_avoid(&hole, input.all_regions, p.dilate_px);
        let use_exemplar = match method {
            Method::Telea => false,
            Method::Exemplar => true,
            Method::Auto => {
                hole.n_inside() > MIN_EXEMPLAR_AREA_PX
                    && ring_texture(input.image, &hole, &avoid, 2 * p.patch_px)
                        .is_some_and(|t| t > TEXTURE_STD_THRESHOLD)
            }
        };
        if !use_exemplar {
            let image = inpaint_telea(
                input.image,
                &hole,
                &TeleaParams {
                    radius_px: p.radius_px,
                },
            );
            return Ok(Rendered {
                image,
                changed: hole,
                method: "telea".into(),
            });
        }
        let fill = inpaint_exemplar_avoiding(
            input.image,
            &hole,
            &avoid,
            &ExemplarParams {
                patch_px: p.patch_px,
                search_px: p.search_px,
                fallback_radius_px: p.radius_px,
                seed: input.seed,
            },
        );
        let method = match (fill.n_exemplar_px, fill.n_fallback_px) {
            (_, 0) => "exemplar",
            (0, _) => "telea",
            _ => "exemplar+telea",
        };
        Ok(Rendered {
            image: fill.image,
            changed: hole,
            method: method.into(),
        })
    }
}

/// The hole and every region of the case, each grown like the hole: exemplar never copies from
/// them, so erasing one object does not paste pieces of another.
fn regions_to_avoid(hole: &Mask, all_regions: &[Mask], dilate_px: u32) -> Mask {
    let mut avoid = hole.as_slice().to_vec();
    for region in all_regions {
        if region.width() != hole.width() || region.height() != hole.height() {
            continue;
        }
        for (a, &r) in avoid.iter_mut().zip(region.dilate(dilate_px).as_slice()) {
            *a |= r;
        }
    }
    Mask::from_vec(hole.width(), hole.height(), avoid).unwrap_or_else(|| hole.clone())
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
/// order. Grows only from the hole's edge pixels, so large holes stay cheap.
fn ring(hole: &Mask, ring_px: u32) -> Vec<(usize, usize)> {
    let (w, h) = (hole.width() as usize, hole.height() as usize);
    let r = ring_px as isize;
    let inside = hole.as_slice();
    let mut in_ring = vec![false; w * h];
    for y in 0..h {
        for x in 0..w {
            let i = y * w + x;
            let edge = inside[i]
                && ((x == 0 || !inside[i - 1])
                    || (x + 1 == w || !inside[i + 1])
                    || (y == 0 || !inside[i - w])
                    || (y + 1 == h || !inside[i + w]));
            if !edge {
                continue;
            }
            for dy in -r..=r {
                for dx in -r..=r {
                    let (nx, ny) = (x as isize + dx, y as isize + dy);
                    if dx * dx + dy * dy <= r * r
                        && nx >= 0
                        && ny >= 0
                        && (nx as usize) < w
                        && (ny as usize) < h
                    {
                        in_ring[ny as usize * w + nx as usize] = true;
                    }
                }
            }
        }
    }
    (0..h)
        .flat_map(|y| (0..w).map(move |x| (x, y)))
        .filter(|&(x, y)| in_ring[y * w + x] && !inside[y * w + x])
        .collect()
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
    fn ring_texture_of_flat_image_is_zero() {
        let img = RgbImage::from_pixel(20, 20, Rgb([5, 6, 7]));
        let hole = square(20, 8, 12);
        assert_eq!(ring_texture(&img, &hole, &hole, 3), Some(0.0));
    }
}
