//! `cover`: paint over the regions with something taken from their surroundings: the mean colour
//! of a thin ring around them (`mean`), a heavy blur of the surroundings (`blur`), or noise with
//! the ring's statistics (`noise`).
//!
//! Invariants: only pixels of the dilated mask change; `mean` and `blur` use no randomness,
//! `noise` draws only from the edit's seed, so the same seed gives the same pixels.

use image::{Rgb, RgbImage};
use serde::Deserialize;

use super::mask::Mask;
use super::rng::SplitMix64;
use super::{parse_params, EditInput, Operation, Params, Rendered};
use crate::spec::Effect;

#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct CoverParams {
    /// What fills the region.
    #[serde(default)]
    pub style: CoverStyle,
    /// Width of the ring around the region whose colour statistics are used, in pixels.
    #[serde(default = "default_ring")]
    pub ring_px: u32,
    /// Grow the region by this many pixels before filling.
    #[serde(default = "default_dilate")]
    pub dilate_px: u32,
    /// `blur` only: Gaussian σ in pixels; unset: the hole's inscribed radius, limited to
    /// [`MIN_DEFAULT_SIGMA_PX`]..=[`MAX_DEFAULT_SIGMA_PX`].
    #[serde(default)]
    pub blur_sigma_px: Option<f64>,
}

/// What a cover fills the region with.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum CoverStyle {
    /// The ring's mean colour: a flat patch.
    #[default]
    Mean,
    /// A normalised-convolution blur of the known pixels around the region.
    Blur,
    /// Independent Gaussian noise per pixel and channel with the ring's mean and deviation.
    Noise,
}

impl CoverStyle {
    pub fn as_str(self) -> &'static str {
        match self {
            CoverStyle::Mean => "mean",
            CoverStyle::Blur => "blur",
            CoverStyle::Noise => "noise",
        }
    }
}

fn default_ring() -> u32 {
    3
}
fn default_dilate() -> u32 {
    2
}

/// Bounds of the default blur σ (pixels): at least a visible blur, at most a cost that stays
/// small (the work grows with σ); larger holes fade to the ring mean in their middle.
pub const MIN_DEFAULT_SIGMA_PX: f64 = 2.0;
pub const MAX_DEFAULT_SIGMA_PX: f64 = 32.0;
/// Largest `blur_sigma_px` a spec may ask for.
pub const MAX_SIGMA_PX: f64 = 64.0;

const NO_RING: &str =
    "no pixels around the region to take a colour from; the region covers the whole image";

pub struct Cover;

impl Operation for Cover {
    fn name(&self) -> &'static str {
        "cover"
    }

    fn check(&self, params: &Params) -> Result<Effect, String> {
        let p: CoverParams = parse_params(params)?;
        if p.ring_px == 0 {
            return Err("ring_px must be at least 1".into());
        }
        if let Some(sigma) = p.blur_sigma_px {
            if p.style != CoverStyle::Blur {
                return Err(format!(
                    "blur_sigma_px applies only to style \"blur\", not {:?}",
                    p.style.as_str()
                ));
            }
            if !(sigma.is_finite() && sigma > 0.0 && sigma <= MAX_SIGMA_PX) {
                return Err(format!(
                    "blur_sigma_px must be a number above 0 and at most {MAX_SIGMA_PX}, got {sigma}"
                ));
            }
        }
        Ok(Effect::Removes)
    }

    fn apply(&self, input: &EditInput, params: &Params) -> Result<Rendered, String> {
        let p: CoverParams = parse_params(params)?;
        let hole = input.mask.dilate(p.dilate_px);
        let image = match p.style {
            CoverStyle::Mean => {
                let colour = ring_mean(input.image, &hole, p.ring_px).ok_or(NO_RING)?;
                fill_flat(input.image, &hole, colour)
            }
            CoverStyle::Blur => {
                ring_stats(input.image, &hole, p.ring_px).ok_or(NO_RING)?;
                let sigma_px = p.blur_sigma_px.unwrap_or_else(|| default_blur_sigma(&hole));
                fill_blur(
                    input.image,
                    &hole,
                    &BlurFillParams {
                        sigma_px,
                        ring_px: p.ring_px,
                    },
                )
            }
            CoverStyle::Noise => {
                ring_stats(input.image, &hole, p.ring_px).ok_or(NO_RING)?;
                fill_noise(
                    input.image,
                    &hole,
                    &NoiseFillParams {
                        ring_px: p.ring_px,
                        seed: input.seed,
                    },
                )
            }
        };
        Ok(Rendered {
            image,
            changed: hole,
            method: p.style.as_str().into(),
            added: Vec::new(),
        })
    }
}

/// Mean colour (rounded) of the pixels within `ring_px` of the mask but outside it.
#[must_use]
pub fn ring_mean(image: &RgbImage, mask: &Mask, ring_px: u32) -> Option<Rgb<u8>> {
    let grown = mask.dilate(ring_px);
    let mut sum = [0u64; 3];
    let mut n = 0u64;
    for (i, (&g, &m)) in grown.as_slice().iter().zip(mask.as_slice()).enumerate() {
        if g && !m {
            let Some(px) = image.as_raw().get(i * 3..i * 3 + 3) else {
                continue;
            };
            for c in 0..3 {
                sum[c] += px[c] as u64;
            }
            n += 1;
        }
    }
    (n > 0).then(|| Rgb([0, 1, 2].map(|c| ((sum[c] + n / 2) / n) as u8)))
}

/// Per-channel statistics of the ring of [`ring_mean`].
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct RingStats {
    pub mean: [f64; 3],
    /// Population standard deviation.
    pub std: [f64; 3],
    pub n_pixels: usize,
}

/// Mean and population standard deviation per channel of the pixels within `ring_px` of the mask
/// but outside it (`None` when there are none). Assumes the mask has the image's size.
#[must_use]
pub fn ring_stats(image: &RgbImage, mask: &Mask, ring_px: u32) -> Option<RingStats> {
    let grown = mask.dilate(ring_px);
    let mut sum = [0.0f64; 3];
    let mut sum_sq = [0.0f64; 3];
    let mut n = 0usize;
    for (i, (&g, &m)) in grown.as_slice().iter().zip(mask.as_slice()).enumerate() {
        if g && !m {
            let Some(px) = image.as_raw().get(i * 3..i * 3 + 3) else {
                continue;
            };
            for c in 0..3 {
                let v = f64::from(px[c]);
                sum[c] += v;
                sum_sq[c] += v * v;
            }
            n += 1;
        }
    }
    if n == 0 {
        return None;
    }
    let nf = n as f64;
    let mean = sum.map(|s| s / nf);
    let std = [0, 1, 2].map(|c| (sum_sq[c] / nf - mean[c] * mean[c]).max(0.0).sqrt());
    Some(RingStats {
        mean,
        std,
        n_pixels: n,
    })
}

/// The image with every mask pixel set to `colour`.
#[must_use]
pub fn fill_flat(image: &RgbImage, mask: &Mask, colour: Rgb<u8>) -> RgbImage {
    let mut out = image.clone();
    for (i, &m) in mask.as_slice().iter().enumerate() {
        if m {
            if let Some(px) = out.as_mut().get_mut(i * 3..i * 3 + 3) {
                px.copy_from_slice(&colour.0);
            }
        }
    }
    out
}

/// Parameters of [`fill_blur`].
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct BlurFillParams {
    /// Gaussian σ in pixels; non-finite or below 0.5 counts as 0.5, above [`MAX_SIGMA_PX`] as that.
    pub sigma_px: f64,
    /// Ring width for the mean colour that weakly supported pixels fade to.
    pub ring_px: u32,
}

/// Default σ of the `blur` style: the hole's inscribed radius (largest distance from a hole pixel
/// to the nearest known pixel), limited to [`MIN_DEFAULT_SIGMA_PX`]..=[`MAX_DEFAULT_SIGMA_PX`], so
/// the middle of the hole still gets weight e^(−½) from its nearest surroundings.
#[must_use]
pub fn default_blur_sigma(mask: &Mask) -> f64 {
    let radius = mask
        .distance_to_outside()
        .into_iter()
        .filter(|d| d.is_finite())
        .fold(0.0, f64::max);
    radius.clamp(MIN_DEFAULT_SIGMA_PX, MAX_DEFAULT_SIGMA_PX)
}

/// Weight of the ring-mean prior in [`fill_blur`], relative to a fully supported pixel's weight
/// of 1: it only matters where the known pixels' Gaussian weight has faded below about 1e-3.
const BLUR_PRIOR_WEIGHT: f64 = 1e-3;

/// Fills the mask with a normalised-convolution blur of the pixels around it.
///
/// With K the indicator of known pixels (outside the mask, inside the image), G a Gaussian of σ
/// `sigma_px` truncated at 4σ, and c the ring mean colour ([`ring_mean`]), each hole pixel gets
/// (G ∗ (I·K) + ε·c) / (G ∗ K + ε), ε = 10⁻³: a Gaussian-weighted mean of the known pixels only,
/// fading smoothly to the ring mean where the known pixels are too far away to carry weight
/// (holes much wider than σ). The image border is not extended: outside the image counts as
/// unknown. Pixels outside the mask are returned bit-identical.
///
/// # References
/// H. Knutsson, C.-F. Westin, "Normalized and Differential Convolution: Methods for Interpolation
/// and Filtering of Incomplete and Uncertain Data", Proc. IEEE CVPR, 1993.
#[must_use]
pub fn fill_blur(image: &RgbImage, mask: &Mask, params: &BlurFillParams) -> RgbImage {
    let mut out = image.clone();
    let (w, h) = (image.width() as usize, image.height() as usize);
    if mask.width() as usize != w || mask.height() as usize != h {
        return out;
    }
    let Some(prior) = ring_mean(image, mask, params.ring_px.max(1)) else {
        return out;
    };
    let prior = prior.0.map(f64::from);
    let sigma = if params.sigma_px.is_finite() {
        params.sigma_px.clamp(0.5, MAX_SIGMA_PX)
    } else {
        0.5
    };
    let radius = (4.0 * sigma).ceil() as usize;
    let kernel: Vec<f64> = (0..=radius)
        .map(|d| (-((d * d) as f64) / (2.0 * sigma * sigma)).exp())
        .collect();
    let kernel_sum: f64 = kernel[0] + 2.0 * kernel[1..].iter().sum::<f64>();
    let kernel: Vec<f64> = kernel.iter().map(|k| k / kernel_sum).collect();

    let [bx, by, bw, bh] = mask.bounding_box().map(|v| v as usize);
    let inside = mask.as_slice();
    let raw = image.as_raw();
    // Horizontal pass, only for the hole's columns and the rows the vertical pass reads:
    // per cell (Σ g·R·K, Σ g·G·K, Σ g·B·K, Σ g·K).
    let row0 = by.saturating_sub(radius);
    let row1 = (by + bh + radius).min(h);
    let mut horizontal = vec![[0.0f64; 4]; (row1 - row0) * bw];
    for y in row0..row1 {
        for x in bx..bx + bw {
            let mut acc = [0.0f64; 4];
            let x_lo = x.saturating_sub(radius);
            let x_hi = (x + radius).min(w - 1);
            for sx in x_lo..=x_hi {
                let i = y * w + sx;
                if inside[i] {
                    continue;
                }
                let g = kernel[sx.abs_diff(x)];
                for c in 0..3 {
                    acc[c] += g * f64::from(raw[i * 3 + c]);
                }
                acc[3] += g;
            }
            horizontal[(y - row0) * bw + (x - bx)] = acc;
        }
    }
    for y in by..by + bh {
        for x in bx..bx + bw {
            let i = y * w + x;
            if !inside[i] {
                continue;
            }
            let mut acc = [0.0f64; 4];
            let y_lo = y.saturating_sub(radius);
            let y_hi = (y + radius).min(h - 1);
            for sy in y_lo..=y_hi {
                let g = kernel[sy.abs_diff(y)];
                let cell = &horizontal[(sy - row0) * bw + (x - bx)];
                for c in 0..4 {
                    acc[c] += g * cell[c];
                }
            }
            let den = acc[3] + BLUR_PRIOR_WEIGHT;
            let px = [0, 1, 2].map(|c| {
                let v = (acc[c] + BLUR_PRIOR_WEIGHT * prior[c]) / den;
                v.round().clamp(0.0, 255.0) as u8
            });
            out.as_mut()[i * 3..i * 3 + 3].copy_from_slice(&px);
        }
    }
    out
}

/// Parameters of [`fill_noise`].
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct NoiseFillParams {
    /// Width of the ring whose statistics the noise matches.
    pub ring_px: u32,
    /// Seed of the noise.
    pub seed: u64,
}

/// Fills the mask with independent Gaussian noise per pixel and channel whose mean and standard
/// deviation are the ring's ([`ring_stats`]), rounded and limited to 0..=255. Channels are drawn
/// independently (no colour correlation, no spatial structure). Draws follow the mask in row-major
/// order, red, green, blue, from SplitMix64 seeded with `seed`, turned into normal deviates by the
/// Box–Muller transform. Pixels outside the mask are returned bit-identical; without a ring the
/// image is returned unchanged.
///
/// # References
/// G. E. P. Box, M. E. Muller, "A Note on the Generation of Random Normal Deviates", Annals of
/// Mathematical Statistics 29(2), 1958. G. L. Steele, D. Lea, C. H. Flood, "Fast Splittable
/// Pseudorandom Number Generators", OOPSLA 2014 (SplitMix64).
#[must_use]
pub fn fill_noise(image: &RgbImage, mask: &Mask, params: &NoiseFillParams) -> RgbImage {
    let mut out = image.clone();
    let Some(stats) = ring_stats(image, mask, params.ring_px.max(1)) else {
        return out;
    };
    let mut normal = NormalDeviates::new(params.seed);
    for (i, &m) in mask.as_slice().iter().enumerate() {
        if !m {
            continue;
        }
        let Some(px) = out.as_mut().get_mut(i * 3..i * 3 + 3) else {
            continue;
        };
        for (c, value) in px.iter_mut().enumerate() {
            let v = stats.mean[c] + stats.std[c] * normal.next();
            *value = v.round().clamp(0.0, 255.0) as u8;
        }
    }
    out
}

/// Standard normal deviates from SplitMix64 through the Box–Muller transform (both deviates of
/// each pair are used).
struct NormalDeviates {
    state: SplitMix64,
    spare: Option<f64>,
}

impl NormalDeviates {
    fn new(seed: u64) -> NormalDeviates {
        // Decorrelate from other users of the same seed.
        NormalDeviates {
            state: SplitMix64::new(seed ^ 0xC0DE_C0FE_2B1A_5EED),
            spare: None,
        }
    }

    fn next(&mut self) -> f64 {
        if let Some(z) = self.spare.take() {
            return z;
        }
        let u1 = self.state.uniform_open0();
        let u2 = self.state.uniform_open0();
        let r = (-2.0 * u1.ln()).sqrt();
        let (s, c) = (2.0 * std::f64::consts::PI * u2).sin_cos();
        self.spare = Some(r * s);
        r * c
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    #[test]
    fn cover_fills_with_ring_mean_and_leaves_outside() {
        let mut img = RgbImage::from_pixel(9, 9, Rgb([10, 20, 30]));
        img.put_pixel(4, 4, Rgb([255, 0, 0]));
        let mask = Mask::from_vec(9, 9, (0..81).map(|i| i == 40).collect()).unwrap();
        let out = fill_flat(&img, &mask, ring_mean(&img, &mask, 2).unwrap());
        assert_eq!(out.get_pixel(4, 4), &Rgb([10, 20, 30]));
        assert_eq!(out.get_pixel(0, 0), img.get_pixel(0, 0));
    }

    #[test]
    fn normal_deviates_have_unit_moments() {
        let mut n = NormalDeviates::new(3);
        let draws: Vec<f64> = (0..200_000).map(|_| n.next()).collect();
        let mean = draws.iter().sum::<f64>() / draws.len() as f64;
        let var = draws.iter().map(|z| (z - mean).powi(2)).sum::<f64>() / draws.len() as f64;
        // Standard error of the mean 1/√200000 ≈ 0.0022; of the variance √(2/200000) ≈ 0.0032.
        assert!(mean.abs() < 0.01, "mean {mean}");
        assert!((var - 1.0).abs() < 0.015, "variance {var}");
        assert!(draws.iter().all(|z| z.is_finite()));
    }

    #[test]
    fn check_validates_style_and_sigma() {
        let parse = |json: &str| {
            let v: serde_json::Value = serde_json::from_str(json).unwrap();
            Cover.check(v.as_object().unwrap())
        };
        assert_eq!(
            parse(r#"{"style": "blur", "blur_sigma_px": 4}"#),
            Ok(Effect::Removes)
        );
        assert_eq!(parse(r#"{"style": "noise"}"#), Ok(Effect::Removes));
        assert_eq!(parse(r#"{}"#), Ok(Effect::Removes));
        let err = parse(r#"{"style": "smear"}"#).unwrap_err();
        assert!(
            err.contains("unknown variant `smear`") && err.contains("`blur`"),
            "{err}"
        );
        let err = parse(r#"{"style": "noise", "blur_sigma_px": 4}"#).unwrap_err();
        assert!(err.contains("only to style \"blur\""), "{err}");
        let err = parse(r#"{"style": "blur", "blur_sigma_px": 0}"#).unwrap_err();
        assert!(err.contains("blur_sigma_px must be"), "{err}");
        let err = parse(r#"{"style": "blur", "blur_sigma_px": 500}"#).unwrap_err();
        assert!(err.contains("at most 64"), "{err}");
    }

    fn case() -> impl Strategy<Value = (RgbImage, Mask)> {
        (2u32..12, 1u32..12).prop_flat_map(|(w, h)| {
            let n = (w * h) as usize;
            (
                proptest::collection::vec(any::<u8>(), n * 3),
                proptest::collection::vec(any::<bool>(), n),
                0usize..n,
            )
                .prop_map(move |(px, mut inside, forced)| {
                    inside[forced] = true;
                    // Keep one pixel outside so every style has a ring to work from.
                    inside[(forced + 1) % n] = false;
                    let img = RgbImage::from_raw(w, h, px).expect("sized buffer");
                    (img, Mask::from_vec(w, h, inside).expect("non-empty"))
                })
        })
    }

    proptest! {
        #[test]
        fn outside_unchanged_same_size_deterministic(
            (img, mask) in case(),
            style in prop_oneof![Just("mean"), Just("blur"), Just("noise")],
            ring in 1u32..4,
            dilate in 0u32..3,
            seed: u64,
        ) {
            let mut p = Params::new();
            p.insert("style".into(), style.into());
            p.insert("ring_px".into(), ring.into());
            p.insert("dilate_px".into(), dilate.into());
            prop_assert!(Cover.check(&p).is_ok());
            let regions = [mask.clone()];
            let input = EditInput { image: &img, mask: &mask, all_regions: &regions, seed };
            match Cover.apply(&input, &p) {
                Ok(out) => {
                    prop_assert_eq!(out.image.dimensions(), img.dimensions());
                    prop_assert_eq!(&out.changed, &mask.dilate(dilate));
                    prop_assert_eq!(out.method.as_str(), style);
                    for (x, y, px) in img.enumerate_pixels() {
                        if !out.changed.contains(x, y) {
                            prop_assert_eq!(out.image.get_pixel(x, y), px);
                        }
                    }
                    let again = Cover.apply(&input, &p).expect("applies twice");
                    prop_assert_eq!(again.image, out.image);
                }
                // Dilation may swallow the whole image: then every style refuses the same way.
                Err(e) => prop_assert_eq!(e, NO_RING),
            }
        }

        #[test]
        fn blur_never_panics_on_odd_sigma((img, mask) in case(), sigma in prop_oneof![Just(f64::NAN), Just(f64::INFINITY), Just(-1.0), 0.0f64..100.0]) {
            let out = fill_blur(&img, &mask, &BlurFillParams { sigma_px: sigma, ring_px: 1 });
            prop_assert_eq!(out.dimensions(), img.dimensions());
        }
    }
}
