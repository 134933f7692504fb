//! `recolour`: give the regions another named colour in CIELAB, keeping their shading and texture.
//!
//! Invariants: only pixels of the (dilated) mask change; the result depends only on the image, the
//! mask and the parameters (no randomness); target colours outside sRGB are brought inside by
//! chroma reduction at constant L* and hue ([`lab_to_srgb`]), never by clipping channels.

use image::RgbImage;
use serde::Deserialize;

use super::colour::{colour_names, lab_to_srgb, named_colour_entry, srgb_to_lab, NamedColour};
use super::mask::Mask;
use super::{parse_params, EditInput, Operation, Params, Rendered};
use crate::spec::Effect;

/// Parameters of the `recolour` operation as written in a spec.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RecolourParams {
    /// A name from the named-colour table ([`colour_names`]).
    pub colour: String,
    /// Width of the soft edge inside the region, in pixels (0 = hard edge).
    #[serde(default = "default_feather")]
    pub feather_px: f64,
    /// Grow the region by this many pixels first.
    #[serde(default)]
    pub dilate_px: u32,
}

fn default_feather() -> f64 {
    2.0
}

/// Largest accepted `feather_px`: a wider edge would leave most objects half recoloured.
const MAX_FEATHER_PX: f64 = 256.0;

/// Parameters of [`recolour_lab`]: the target taken from the named-colour table.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LabRecolourParams {
    /// Target L*, a*, b*; only a* and b* are used (lightness follows `lightness_range`).
    pub target_lab: [f64; 3],
    /// The region's mean L* is moved into this range (and no further).
    pub lightness_range: [f64; 2],
    /// Width of the soft edge in pixels; non-finite or negative counts as 0.
    pub feather_px: f64,
}

impl LabRecolourParams {
    pub fn from_named(colour: &NamedColour, feather_px: f64) -> LabRecolourParams {
        LabRecolourParams {
            target_lab: colour.lab,
            lightness_range: colour.lightness_range,
            feather_px,
        }
    }
}

pub struct Recolour;

impl Recolour {
    fn parse(params: &Params) -> Result<(RecolourParams, &'static NamedColour), String> {
        let p: RecolourParams = parse_params(params)?;
        let colour = named_colour_entry(&p.colour).ok_or_else(|| {
            format!(
                "unknown colour {:?}; known colours: {}",
                p.colour,
                colour_names().join(", ")
            )
        })?;
        if !(p.feather_px.is_finite() && (0.0..=MAX_FEATHER_PX).contains(&p.feather_px)) {
            return Err(format!(
                "feather_px must be a number from 0 to {MAX_FEATHER_PX}, got {}",
                p.feather_px
            ));
        }
        Ok((p, colour))
    }
}

impl Operation for Recolour {
    fn name(&self) -> &'static str {
        "recolour"
    }

    fn check(&self, params: &Params) -> Result<Effect, String> {
        let (_, colour) = Recolour::parse(params)?;
        Ok(Effect::Recolours {
            colour: colour.name.to_string(),
        })
    }

    fn apply(&self, input: &EditInput, params: &Params) -> Result<Rendered, String> {
        let (p, colour) = Recolour::parse(params)?;
        let region = input.mask.dilate(p.dilate_px);
        let image = recolour_lab(
            input.image,
            &region,
            &LabRecolourParams::from_named(colour, p.feather_px),
        );
        Ok(Rendered {
            image,
            changed: region,
            method: "lab-chroma".into(),
            added: Vec::new(),
        })
    }
}

/// Recolours the pixels inside `mask` towards a target colour in CIELAB, keeping shading and
/// texture.
///
/// Each 8-connected part of the mask (each object, when an edit selects several) is handled on
/// its own, with w the per-pixel blend weight (below) and means weighted by w over the part:
/// - **Chroma**: (a*, b*)' = t + g · R · ((a*, b*) − m), where t is the target's (a*, b*), m the
///   part's mean (a*, b*), R the rotation by the hue difference hue(t) − hue(m), and
///   g = min(1, |t| / |m|). The part's mean chroma becomes exactly t; each pixel's deviation from
///   the mean (texture, shading) is carried over, turned with the hue and never amplified.
///   Achromatic targets (|t| = 0: white, grey, black) get g = 0, i.e. no tint. When the part
///   itself is achromatic (|m| = 0), deviations are kept as they are (g = 1, no rotation).
/// - **Lightness**: L*' = L* + ΔL with ΔL = clamp(mean L*, lo, hi) − mean L*, where [lo, hi] is
///   the target's `lightness_range`: a part whose mean L* already suits the name keeps every
///   pixel's L*; a part too dark or too light for the name (a red object made white, black or
///   yellow) is shifted as a whole, so shading survives (values beyond 0..100 are limited there).
/// - **Edge**: w = clamp((d − ½) / feather_px, 0, 1), d the Euclidean distance from the pixel's
///   centre to the nearest pixel centre outside the mask (d − ½ approximates the distance to the
///   mask's border); w = 1 everywhere for feather_px = 0. The output is
///   (1 − w) · original + w · recoloured in L*a*b*. Image borders do not count as outside.
/// - Results outside sRGB lose chroma at constant L* and hue ([`lab_to_srgb`]).
///
/// Pixels outside the mask are returned bit-identical; mask pixels beyond the image are ignored.
///
/// # References
/// E. Reinhard, M. Ashikhmin, B. Gooch, P. Shirley, "Color Transfer between Images", IEEE Computer
/// Graphics and Applications 21(5), 2001 (moving a region's colour statistics in a perceptual
/// space while keeping per-pixel deviations). CIE 15:2004, Colorimetry, section 8.2.1 (CIELAB).
/// P. F. Felzenszwalb, D. P. Huttenlocher, "Distance Transforms of Sampled Functions", Theory of
/// Computing 8, 2012 (the distance transform behind the feathered edge).
#[must_use]
pub fn recolour_lab(image: &RgbImage, mask: &Mask, params: &LabRecolourParams) -> RgbImage {
    let mut out = image.clone();
    let weights = feather_weights(mask, params.feather_px);
    let (iw, mw) = (image.width() as usize, mask.width() as usize);
    for part in connected_parts(mask, image.width(), image.height()) {
        let pixels: Vec<Sample> = part
            .into_iter()
            .map(|(x, y)| {
                let pi = (y * iw + x) * 3;
                let raw = &image.as_raw()[pi..pi + 3];
                Sample {
                    offset: pi,
                    weight: weights[y * mw + x],
                    lab: srgb_to_lab([raw[0], raw[1], raw[2]]),
                }
            })
            .collect();
        recolour_part(&mut out, &pixels, params);
    }
    out
}

/// One mask pixel: byte offset in the image, blend weight, original L*a*b*.
struct Sample {
    offset: usize,
    weight: f64,
    lab: [f64; 3],
}

/// Applies the transfer of [`recolour_lab`] to one connected part, with the part's own means.
fn recolour_part(out: &mut RgbImage, pixels: &[Sample], params: &LabRecolourParams) {
    let total: f64 = pixels.iter().map(|p| p.weight).sum();
    if total.is_nan() || total <= 0.0 {
        return;
    }
    let mean = |c: usize| pixels.iter().map(|p| p.weight * p.lab[c]).sum::<f64>() / total;
    let (mean_l, mean_a, mean_b) = (mean(0), mean(1), mean(2));

    let [lo, hi] = params.lightness_range;
    // max/min rather than clamp: no panic on a reversed or NaN range.
    let delta_l = mean_l.max(lo).min(hi) - mean_l;
    let delta_l = if delta_l.is_finite() { delta_l } else { 0.0 };
    let [_, target_a, target_b] = params.target_lab;
    let target_chroma = target_a.hypot(target_b);
    let mean_chroma = mean_a.hypot(mean_b);
    // NaN cannot occur for finite inputs; it would count as zero chroma.
    let (gain, angle) = if target_chroma.is_nan() || target_chroma <= 0.0 {
        (0.0, 0.0)
    } else if mean_chroma.is_nan() || mean_chroma <= 0.0 {
        (1.0, 0.0)
    } else {
        (
            (target_chroma / mean_chroma).min(1.0),
            target_b.atan2(target_a) - mean_b.atan2(mean_a),
        )
    };
    let (sin, cos) = angle.sin_cos();

    for p in pixels {
        let [l, a, b] = p.lab;
        let (da, db) = (a - mean_a, b - mean_b);
        let new = [
            l + delta_l,
            target_a + gain * (cos * da - sin * db),
            target_b + gain * (sin * da + cos * db),
        ];
        let blended = [0, 1, 2].map(|c| p.lab[c] + p.weight * (new[c] - p.lab[c]));
        let (rgb, _) = lab_to_srgb(blended);
        out.as_mut()[p.offset..p.offset + 3].copy_from_slice(&rgb);
    }
}

/// The mask's 8-connected parts as lists of (x, y), limited to the `width` × `height` image, in
/// order of their first pixel (row-major) and each listed in visiting order.
fn connected_parts(mask: &Mask, width: u32, height: u32) -> Vec<Vec<(usize, usize)>> {
    let (w, h) = (
        width.min(mask.width()) as usize,
        height.min(mask.height()) as usize,
    );
    let mw = mask.width() as usize;
    let inside = mask.as_slice();
    let mut seen = vec![false; w * h];
    let mut parts = Vec::new();
    let mut stack = Vec::new();
    for start in 0..w * h {
        let (sx, sy) = (start % w, start / w);
        if seen[start] || !inside[sy * mw + sx] {
            continue;
        }
        seen[start] = true;
        stack.push((sx, sy));
        let mut part = Vec::new();
        while let Some((x, y)) = stack.pop() {
            part.push((x, y));
            for ny in y.saturating_sub(1)..=(y + 1).min(h - 1) {
                for nx in x.saturating_sub(1)..=(x + 1).min(w - 1) {
                    let k = ny * w + nx;
                    if !seen[k] && inside[ny * mw + nx] {
                        seen[k] = true;
                        stack.push((nx, ny));
                    }
                }
            }
        }
        parts.push(part);
    }
    parts
}

/// Blend weight of every mask pixel, row-major over the mask: 0 outside,
/// clamp((d − ½) / feather_px, 0, 1) inside (d as in [`distance_to_outside`]); 1 inside when
/// `feather_px` is 0, negative or not finite.
#[must_use]
pub fn feather_weights(mask: &Mask, feather_px: f64) -> Vec<f64> {
    let hard = !(feather_px.is_finite() && feather_px > 0.0);
    let distances = if hard {
        Vec::new()
    } else {
        mask.distance_to_outside()
    };
    mask.as_slice()
        .iter()
        .enumerate()
        .map(|(i, &inside)| match (inside, hard) {
            (false, _) => 0.0,
            (true, true) => 1.0,
            (true, false) => ((distances[i] - 0.5) / feather_px).clamp(0.0, 1.0),
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use image::Rgb;
    use proptest::prelude::*;

    fn mask_from(w: u32, h: u32, f: impl Fn(u32, u32) -> bool) -> Mask {
        Mask::from_fn(w, h, f).expect("test mask is non-empty")
    }

    fn params(name: &str, feather_px: f64) -> LabRecolourParams {
        LabRecolourParams::from_named(named_colour_entry(name).expect("known"), feather_px)
    }

    #[test]
    fn distance_transform_matches_brute_force() {
        let mask = mask_from(13, 9, |x, y| {
            (x * 7 + y * 3) % 5 != 0 || (4..9).contains(&x)
        });
        let fast = mask.distance_to_outside();
        for y in 0..9i64 {
            for x in 0..13i64 {
                let mut best = f64::INFINITY;
                for v in 0..9i64 {
                    for u in 0..13i64 {
                        if !mask.contains(u as u32, v as u32) {
                            best = best.min((((x - u).pow(2) + (y - v).pow(2)) as f64).sqrt());
                        }
                    }
                }
                assert_eq!(fast[(y * 13 + x) as usize], best, "({x},{y})");
            }
        }
        let full = mask_from(4, 3, |_, _| true);
        assert!(full.distance_to_outside().iter().all(|d| d.is_infinite()));
    }

    #[test]
    fn feather_ramps_from_the_border() {
        // A 1-pixel-wide strip of outside on the left; the rest inside.
        let mask = mask_from(8, 1, |x, _| x > 0);
        let w = feather_weights(&mask, 2.0);
        assert_eq!(w, vec![0.0, 0.25, 0.75, 1.0, 1.0, 1.0, 1.0, 1.0]);
        assert_eq!(feather_weights(&mask, 0.0)[1], 1.0);
    }

    #[test]
    fn unknown_colour_lists_the_known_names() {
        let mut p = Params::new();
        p.insert("colour".into(), "teal".into());
        let err = Recolour.check(&p).unwrap_err();
        assert!(err.contains("unknown colour \"teal\""), "{err}");
        assert!(
            err.contains(
                "red, orange, yellow, green, blue, purple, white, grey, brown, pink, black"
            ),
            "{err}"
        );
        p.insert("colour".into(), "blue".into());
        assert_eq!(
            Recolour.check(&p),
            Ok(Effect::Recolours {
                colour: "blue".into()
            })
        );
        p.insert("feather_px".into(), (-1.0).into());
        assert!(Recolour.check(&p).unwrap_err().contains("feather_px"));
        p.remove("feather_px");
        p.insert("hue".into(), 3.into());
        assert!(Recolour
            .check(&p)
            .unwrap_err()
            .contains("unknown field `hue`"));
    }

    #[test]
    fn flat_patch_takes_the_target_chroma() {
        let img = RgbImage::from_pixel(6, 6, Rgb([60, 150, 60]));
        let mask = mask_from(6, 6, |x, y| (1..5).contains(&x) && (1..5).contains(&y));
        let out = recolour_lab(&img, &mask, &params("red", 0.0));
        let lab = srgb_to_lab(out.get_pixel(2, 2).0);
        let before = srgb_to_lab([60, 150, 60]);
        // The green's L* (54.7) already lies in red's range (35–55): every L* is kept.
        assert!((lab[0] - before[0]).abs() < 0.5, "{lab:?} vs {before:?}");
        assert!(
            (lab[1] - 66.0).abs() < 1.0 && (lab[2] - 48.0).abs() < 1.0,
            "{lab:?}"
        );
        assert_eq!(out.get_pixel(0, 0), img.get_pixel(0, 0));
    }

    #[test]
    fn mask_of_another_size_does_not_panic() {
        let img = RgbImage::from_pixel(5, 4, Rgb([90, 30, 30]));
        let small = mask_from(3, 2, |x, _| x == 1);
        let big = mask_from(9, 9, |x, y| x >= 3 && y >= 2);
        for mask in [small, big] {
            let out = recolour_lab(&img, &mask, &params("blue", 2.0));
            assert_eq!(out.dimensions(), img.dimensions());
        }
    }

    fn case() -> impl Strategy<Value = (RgbImage, Mask, f64, usize)> {
        (1u32..12, 1u32..12).prop_flat_map(|(w, h)| {
            let n = (w * h) as usize;
            (
                proptest::collection::vec(any::<u8>(), n * 3),
                proptest::collection::vec(any::<bool>(), n),
                0usize..n,
                0.0f64..6.0,
                0usize..11,
            )
                .prop_map(move |(px, mut inside, forced, feather, colour)| {
                    inside[forced] = true;
                    let img = RgbImage::from_raw(w, h, px).expect("sized buffer");
                    (
                        img,
                        Mask::from_vec(w, h, inside).expect("non-empty"),
                        feather,
                        colour,
                    )
                })
        })
    }

    proptest! {
        #[test]
        fn outside_unchanged_same_size_deterministic((img, mask, feather, colour) in case(), dilate in 0u32..3, seed: u64) {
            let name = colour_names()[colour];
            let mut p = Params::new();
            p.insert("colour".into(), name.into());
            p.insert("feather_px".into(), feather.into());
            p.insert("dilate_px".into(), dilate.into());
            let regions = [mask.clone()];
            let input = EditInput { image: &img, mask: &mask, all_regions: &regions, seed };
            let out = Recolour.apply(&input, &p).expect("recolour applies");
            prop_assert_eq!(out.image.dimensions(), img.dimensions());
            prop_assert_eq!(&out.changed, &mask.dilate(dilate));
            prop_assert_eq!(out.method.as_str(), "lab-chroma");
            for (x, y, px) in img.enumerate_pixels() {
                if !out.changed.contains(x, y) {
                    prop_assert_eq!(out.image.get_pixel(x, y), px);
                }
            }
            let other = EditInput { seed: seed ^ 1, ..input };
            prop_assert_eq!(Recolour.apply(&other, &p).expect("applies").image, out.image);
        }

        #[test]
        fn distance_transform_is_exact((_, mask, _, _) in case()) {
            let (w, h) = (mask.width() as i64, mask.height() as i64);
            let fast = mask.distance_to_outside();
            for y in 0..h {
                for x in 0..w {
                    let mut best = f64::INFINITY;
                    for v in 0..h {
                        for u in 0..w {
                            if !mask.contains(u as u32, v as u32) {
                                best = best.min((((x - u).pow(2) + (y - v).pow(2)) as f64).sqrt());
                            }
                        }
                    }
                    prop_assert_eq!(fast[(y * w + x) as usize], best);
                }
            }
        }

        #[test]
        fn odd_parameters_do_not_panic((img, mask, _, colour) in case(), feather in prop_oneof![Just(f64::NAN), Just(f64::INFINITY), Just(-3.0), 0.0f64..1e9], lo in -50.0f64..150.0, hi in -50.0f64..150.0) {
            let mut p = params(colour_names()[colour], feather);
            p.lightness_range = [lo, hi];
            let out = recolour_lab(&img, &mask, &p);
            prop_assert_eq!(out.dimensions(), img.dimensions());
        }
    }
}
