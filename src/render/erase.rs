//! `erase`: remove the regions by inpainting them from their surroundings.

use serde::Deserialize;

use super::telea::{inpaint_telea, TeleaParams};
use super::{parse_params, EditInput, Operation, Params, Rendered};
use crate::spec::Effect;

#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct EraseParams {
    /// Inpainting algorithm; only `telea` so far.
    #[serde(default = "default_method")]
    pub method: String,
    /// Telea neighbourhood radius in pixels.
    #[serde(default = "default_radius")]
    pub radius_px: f32,
    /// Grow the hole by this many pixels first, so anti-aliased or shadowed edges go too.
    #[serde(default = "default_dilate")]
    pub dilate_px: u32,
}

fn default_method() -> String {
    "telea".into()
}
fn default_radius() -> f32 {
    5.0
}
fn default_dilate() -> u32 {
    2
}

pub struct Erase;

impl Operation for Erase {
    fn name(&self) -> &'static str {
        "erase"
    }

    fn check(&self, params: &Params) -> Result<crate::spec::Effect, String> {
        let p: EraseParams = parse_params(params)?;
        if p.method != "telea" {
            return Err(format!(
                "unknown erase method {:?}; use \"telea\"",
                p.method
            ));
        }
        if !(p.radius_px.is_finite() && p.radius_px > 0.0) {
            return Err(format!(
                "radius_px must be a positive number, got {}",
                p.radius_px
            ));
        }
        Ok(Effect::Removes)
    }

    fn apply(&self, input: &EditInput, params: &Params) -> Result<Rendered, String> {
        let p: EraseParams = parse_params(params)?;
        let hole = input.mask.dilate(p.dilate_px);
        if hole.n_inside() == hole.width() as usize * hole.height() as usize {
            return Err("the hole covers the whole image; nothing is left to inpaint from".into());
        }
        let image = inpaint_telea(
            input.image,
            &hole,
            &TeleaParams {
                radius_px: p.radius_px,
            },
        );
        Ok(Rendered {
            image,
            changed: hole,
            method: p.method,
        })
    }
}
