//! Table surfaces under the objects: wood planks, a woven table cover, worn stone.
//!
//! All textures are smooth (value noise and sinusoids, no per-pixel white noise) so the PNGs stay
//! small, and muted (browns, linen, greys) so no table reads as one of the palette's named
//! colours. Pure functions of their parameters.

use serde::Serialize;

use super::noise::{sin, smoothstep, ValueNoise};
use super::rng::Rng;

/// Which surface the table has; the name goes into scenes.jsonl.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum TableKind {
    Wood,
    Woven,
    Stone,
}

/// Everything that decides a table surface.
#[derive(Debug, Clone, PartialEq)]
pub struct TableStyle {
    pub kind: TableKind,
    pub seed: u64,
    /// Main and secondary colour (sRGB 0–255).
    pub light: [f64; 3],
    pub dark: [f64; 3],
    /// Wood: plank width; woven: check period; stone: slab size (0 = no slabs). Pixels.
    pub period_px: f64,
    /// Wood: grain ring period in pixels; woven: stripe width as a fraction of the period.
    pub detail: f64,
    /// Planks or stripes run vertically.
    pub vertical: bool,
    /// Pixel scale (image size / 256).
    pub px: f64,
}

impl TableStyle {
    pub fn sample(rng: &mut Rng, px: f64) -> TableStyle {
        let kind =
            [TableKind::Wood, TableKind::Woven, TableKind::Stone][rng.weighted(&[0.45, 0.3, 0.25])];
        let seed = rng.next_u64();
        let vertical = rng.chance(0.5);
        let tint = |rng: &mut Rng, c: [f64; 3]| {
            let k = rng.range(0.92, 1.08);
            [c[0] * k, c[1] * k, c[2] * k]
        };
        match kind {
            TableKind::Wood => {
                // Pale pine, honey oak or dark walnut.
                let woods = [
                    ([204.0, 166.0, 118.0], [164.0, 118.0, 74.0]),
                    ([178.0, 132.0, 84.0], [128.0, 86.0, 50.0]),
                    ([126.0, 88.0, 58.0], [88.0, 58.0, 36.0]),
                ];
                let (l, d) = woods[rng.index(woods.len())];
                TableStyle {
                    kind,
                    seed,
                    light: tint(rng, l),
                    dark: tint(rng, d),
                    period_px: rng.range(38.0, 62.0) * px,
                    detail: rng.range(5.0, 9.0) * px,
                    vertical,
                    px,
                }
            }
            TableKind::Woven => {
                let covers = [
                    ([218.0, 208.0, 186.0], [176.0, 160.0, 130.0]),
                    ([200.0, 204.0, 204.0], [150.0, 158.0, 168.0]),
                    ([214.0, 198.0, 176.0], [168.0, 140.0, 122.0]),
                ];
                let (l, d) = covers[rng.index(covers.len())];
                TableStyle {
                    kind,
                    seed,
                    light: tint(rng, l),
                    dark: tint(rng, d),
                    period_px: rng.range(10.0, 18.0) * px,
                    detail: rng.range(0.25, 0.45),
                    vertical,
                    px,
                }
            }
            TableKind::Stone => {
                let stones = [
                    ([164.0, 160.0, 152.0], [112.0, 110.0, 106.0]),
                    ([176.0, 166.0, 150.0], [124.0, 114.0, 100.0]),
                    ([138.0, 140.0, 142.0], [92.0, 94.0, 98.0]),
                ];
                let (l, d) = stones[rng.index(stones.len())];
                let slabs = rng.chance(0.5);
                TableStyle {
                    kind,
                    seed,
                    light: tint(rng, l),
                    dark: tint(rng, d),
                    period_px: if slabs {
                        rng.range(90.0, 140.0) * px
                    } else {
                        0.0
                    },
                    detail: 0.0,
                    vertical,
                    px,
                }
            }
        }
    }
}

fn lerp(a: [f64; 3], b: [f64; 3], t: f64) -> [f64; 3] {
    let t = t.clamp(0.0, 1.0);
    [
        a[0] + (b[0] - a[0]) * t,
        a[1] + (b[1] - a[1]) * t,
        a[2] + (b[2] - a[2]) * t,
    ]
}

fn hash01(seed: u64, k: i64) -> f64 {
    let mut s = seed ^ (k as u64).wrapping_mul(0x9E37_79B9_7F4A_7C15);
    (super::rng::splitmix64(&mut s) >> 11) as f64 * (1.0 / (1u64 << 53) as f64)
}

/// The table surface for a `size`×`size` image, row-major, sRGB 0–255 before lighting.
#[must_use]
pub fn table_texture(style: &TableStyle, size: u32) -> Vec<[f64; 3]> {
    let n = size as usize;
    let mut out = Vec::with_capacity(n * n);
    for y in 0..n {
        for x in 0..n {
            let (px, py) = (x as f64 + 0.5, y as f64 + 0.5);
            let (along, across) = if style.vertical { (py, px) } else { (px, py) };
            out.push(match style.kind {
                TableKind::Wood => wood(style, along, across),
                TableKind::Woven => woven(style, along, across),
                TableKind::Stone => stone(style, px, py),
            });
        }
    }
    out
}

/// Planks running along `along`: warped sinusoidal growth rings, a tone per plank, dark seams
/// between planks and one butt joint per plank.
fn wood(style: &TableStyle, along: f64, across: f64) -> [f64; 3] {
    let noise = ValueNoise::new(style.seed);
    let w = style.period_px.max(1.0);
    let plank = (across / w).floor();
    let k = plank as i64;
    let within = across - plank * w;
    let tone = 0.88 + 0.24 * hash01(style.seed, k);
    let period = style.detail * (0.8 + 0.4 * hash01(style.seed ^ 1, k));
    let shift = 1000.0 * hash01(style.seed ^ 2, k);
    let warp = noise.fractal(along / 2.0 + shift, within, 40.0 * style.px, 3, 0.5) - 0.5;
    let rings = sin(std::f64::consts::TAU * (within + 22.0 * style.px * warp) / period);
    let late = smoothstep(0.35, 1.0, rings);
    let streak = noise.fractal(along + shift, within * 6.0, 60.0 * style.px, 2, 0.5);
    let mut c = lerp(
        style.light,
        style.dark,
        0.6 * late + 0.5 * (streak - 0.5) + 0.15,
    );
    c = [c[0] * tone, c[1] * tone, c[2] * tone];
    // Seams between planks and one butt joint per plank.
    let seam = smoothstep(1.6 * style.px, 0.4 * style.px, within.min(w - within));
    let joint_at = (hash01(style.seed ^ 3, k) * 1.6 - 0.3) * 256.0 * style.px;
    let joint = smoothstep(1.2 * style.px, 0.3 * style.px, (along - joint_at).abs());
    let dark = 1.0 - 0.5 * seam.max(joint);
    [c[0] * dark, c[1] * dark, c[2] * dark]
}

/// A woven cover: checks from two sets of stripes, a faint thread texture and soft wrinkles.
fn woven(style: &TableStyle, along: f64, across: f64) -> [f64; 3] {
    let noise = ValueNoise::new(style.seed);
    let p = style.period_px.max(2.0);
    let band = |t: f64| {
        let f = (t / p - (t / p).floor()) * p;
        let half = 0.5 * style.detail * p;
        smoothstep(half + 0.6, half - 0.6, (f - 0.5 * p).abs())
    };
    let checks = 0.5 * (band(along) + band(across));
    let thread = 0.5 + 0.5 * sin(std::f64::consts::TAU * along / (2.5 * style.px));
    let wrinkle = noise.fractal(along, across, 70.0 * style.px, 3, 0.5) - 0.5;
    let c = lerp(style.light, style.dark, checks);
    let k = (1.0 + 0.025 * (thread - 0.5)) * (1.0 + 0.12 * wrinkle);
    [c[0] * k, c[1] * k, c[2] * k]
}

/// Worn stone: fractal mottling, faint veins, lighter worn patches and optional slab joints.
fn stone(style: &TableStyle, x: f64, y: f64) -> [f64; 3] {
    let noise = ValueNoise::new(style.seed);
    let mottle = noise.fractal(x, y, 70.0 * style.px, 5, 0.55);
    let vein_noise = ValueNoise::new(style.seed ^ 0xA5A5).fractal(x, y, 90.0 * style.px, 4, 0.5);
    let vein = smoothstep(0.03, 0.0, (vein_noise - 0.5).abs());
    let worn = smoothstep(
        0.6,
        0.8,
        ValueNoise::new(style.seed ^ 0x5A5A).fractal(x, y, 50.0 * style.px, 3, 0.5),
    );
    let mut c = lerp(style.dark, style.light, 0.15 + 1.1 * (mottle - 0.2));
    let k = (1.0 - 0.08 * vein) * (1.0 + 0.08 * worn);
    c = [c[0] * k, c[1] * k, c[2] * k];
    if style.period_px > 0.0 {
        let p = style.period_px;
        let offset = if ((y / p).floor() as i64) % 2 == 0 {
            0.0
        } else {
            0.5 * p
        };
        let fx = (x + offset) / p;
        let fy = y / p;
        let dx = (fx - fx.round()).abs() * p;
        let dy = (fy - fy.round()).abs() * p;
        let joint = smoothstep(1.4 * style.px, 0.4 * style.px, dx.min(dy));
        let j = 1.0 - 0.35 * joint;
        c = [c[0] * j, c[1] * j, c[2] * j];
    }
    c
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_table_is_finite_and_in_range() {
        for seed in 0..12 {
            let mut rng = Rng::new(seed);
            let style = TableStyle::sample(&mut rng, 0.5);
            let t = table_texture(&style, 128);
            assert_eq!(t.len(), 128 * 128);
            assert!(t
                .iter()
                .flatten()
                .all(|v| v.is_finite() && (0.0..=300.0).contains(v)));
        }
    }
}
