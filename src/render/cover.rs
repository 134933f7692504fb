//! `cover`: paint over the regions with the mean colour of a thin ring around them.

use image::{Rgb, RgbImage};
use serde::Deserialize;

use super::mask::Mask;
use super::{parse_params, EditInput, Operation, Params, Rendered};
use crate::spec::Effect;

#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct CoverParams {
    /// Width of the ring whose mean colour fills the region, in pixels.
    #[serde(default = "default_ring")]
    pub ring_px: u32,
    /// Grow the region by this many pixels before filling.
    #[serde(default = "default_dilate")]
    pub dilate_px: u32,
}

fn default_ring() -> u32 {
    3
}
fn default_dilate() -> u32 {
    2
}

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
        Ok(Effect::Removes)
    }

    fn apply(&self, input: &EditInput, params: &Params) -> Result<Rendered, String> {
        let p: CoverParams = parse_params(params)?;
        let hole = input.mask.dilate(p.dilate_px);
        let colour = ring_mean(input.image, &hole, p.ring_px).ok_or(
            "no pixels around the region to take a colour from; the region covers the whole image",
        )?;
        Ok(Rendered {
            image: fill_flat(input.image, &hole, colour),
            changed: hole,
            method: "mean".into(),
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
            let px = &image.as_raw()[i * 3..i * 3 + 3];
            for c in 0..3 {
                sum[c] += px[c] as u64;
            }
            n += 1;
        }
    }
    (n > 0).then(|| Rgb([0, 1, 2].map(|c| ((sum[c] + n / 2) / n) as u8)))
}

/// The image with every mask pixel set to `colour`.
#[must_use]
pub fn fill_flat(image: &RgbImage, mask: &Mask, colour: Rgb<u8>) -> RgbImage {
    let mut out = image.clone();
    for (i, &m) in mask.as_slice().iter().enumerate() {
        if m {
            out.as_mut()[i * 3..i * 3 + 3].copy_from_slice(&colour.0);
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn cover_fills_with_ring_mean_and_leaves_outside() {
        let mut img = RgbImage::from_pixel(9, 9, Rgb([10, 20, 30]));
        img.put_pixel(4, 4, Rgb([255, 0, 0]));
        let mask = Mask::from_vec(9, 9, (0..81).map(|i| i == 40).collect()).unwrap();
        let out = fill_flat(&img, &mask, ring_mean(&img, &mask, 2).unwrap());
        assert_eq!(out.get_pixel(4, 4), &Rgb([10, 20, 30]));
        assert_eq!(out.get_pixel(0, 0), img.get_pixel(0, 0));
    }
}
