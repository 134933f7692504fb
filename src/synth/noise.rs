//! Deterministic smooth noise and trigonometry for the synthesizer.
//!
//! Only `+`, `*`, `floor` and `sqrt` (all exactly rounded by IEEE 754) are used, never the
//! platform's `sin`/`cos`, so a seed gives the same pixels on every machine and toolchain.

use super::rng::splitmix64;

const TAU: f64 = std::f64::consts::TAU;
const PI: f64 = std::f64::consts::PI;
const HALF_PI: f64 = std::f64::consts::FRAC_PI_2;

/// sin(x) from a Taylor polynomial after range reduction; absolute error below 1e-9 for
/// |x| < 1e6. Non-finite input gives 0 rather than NaN, so callers never propagate NaN.
pub fn sin(x: f64) -> f64 {
    if !x.is_finite() {
        return 0.0;
    }
    let mut r = x - TAU * (x / TAU).round();
    // Fold [-π, π] onto [-π/2, π/2] using sin(π − r) = sin(r).
    if r > HALF_PI {
        r = PI - r;
    } else if r < -HALF_PI {
        r = -PI - r;
    }
    let r2 = r * r;
    // Horner form of r − r³/3! + r⁵/5! − … − r¹⁵/15!.
    let mut p = -1.0 / 1_307_674_368_000.0;
    p = p * r2 + 1.0 / 6_227_020_800.0;
    p = p * r2 - 1.0 / 39_916_800.0;
    p = p * r2 + 1.0 / 362_880.0;
    p = p * r2 - 1.0 / 5_040.0;
    p = p * r2 + 1.0 / 120.0;
    p = p * r2 - 1.0 / 6.0;
    p = p * r2 + 1.0;
    p * r
}

pub fn cos(x: f64) -> f64 {
    sin(x + HALF_PI)
}

/// Hermite smoothstep of `x` between `edge0` and `edge1`, clamped to [0, 1].
pub fn smoothstep(edge0: f64, edge1: f64, x: f64) -> f64 {
    if edge1 == edge0 {
        return if x < edge0 { 0.0 } else { 1.0 };
    }
    let t = ((x - edge0) / (edge1 - edge0)).clamp(0.0, 1.0);
    t * t * (3.0 - 2.0 * t)
}

/// 2-D value noise: random values on an integer lattice, blended with a quintic fade.
/// Output lies in [0, 1]; the same (seed, x, y) always gives the same value.
#[derive(Debug, Clone, Copy)]
pub struct ValueNoise {
    seed: u64,
}

impl ValueNoise {
    pub fn new(seed: u64) -> ValueNoise {
        ValueNoise { seed }
    }

    fn lattice(&self, ix: i64, iy: i64) -> f64 {
        let mut s = self.seed ^ (ix as u64).wrapping_mul(0x9E37_79B9_7F4A_7C15);
        s ^= (iy as u64).wrapping_mul(0xC2B2_AE3D_27D4_EB4F);
        (splitmix64(&mut s) >> 11) as f64 * (1.0 / (1u64 << 53) as f64)
    }

    pub fn at(&self, x: f64, y: f64) -> f64 {
        if !x.is_finite() || !y.is_finite() {
            return 0.5;
        }
        let (fx, fy) = (x.floor(), y.floor());
        let (ix, iy) = (fx as i64, fy as i64);
        let fade = |t: f64| t * t * t * (t * (t * 6.0 - 15.0) + 10.0);
        let (tx, ty) = (fade(x - fx), fade(y - fy));
        let v00 = self.lattice(ix, iy);
        let v10 = self.lattice(ix + 1, iy);
        let v01 = self.lattice(ix, iy + 1);
        let v11 = self.lattice(ix + 1, iy + 1);
        let top = v00 + (v10 - v00) * tx;
        let bottom = v01 + (v11 - v01) * tx;
        top + (bottom - top) * ty
    }

    /// Fractal sum of `octaves` layers, each at twice the frequency and `gain` times the amplitude
    /// of the last, rescaled to [0, 1]. `scale_px` is the size of the coarsest feature in pixels.
    pub fn fractal(&self, x: f64, y: f64, scale_px: f64, octaves: u32, gain: f64) -> f64 {
        let mut freq = 1.0 / scale_px.max(1e-6);
        let (mut amp, mut sum, mut norm) = (1.0, 0.0, 0.0);
        for octave in 0..octaves.max(1) {
            // Offset each octave so their lattices do not line up at the origin.
            let shift = 17.31 * f64::from(octave);
            sum += amp * self.at(x * freq + shift, y * freq - shift);
            norm += amp;
            amp *= gain;
            freq *= 2.0;
        }
        sum / norm
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sin_and_cos_match_std_closely() {
        let mut x = -50.0;
        while x < 50.0 {
            assert!((sin(x) - x.sin()).abs() < 1e-9, "sin({x})");
            assert!((cos(x) - x.cos()).abs() < 1e-9, "cos({x})");
            x += 0.0137;
        }
        assert_eq!(sin(f64::NAN), 0.0);
    }

    #[test]
    fn value_noise_is_bounded_and_continuous() {
        let n = ValueNoise::new(5);
        let mut prev = n.at(-3.0, 2.5);
        let mut x = -3.0;
        while x < 3.0 {
            let v = n.at(x, 2.5);
            assert!((0.0..=1.0).contains(&v));
            assert!((v - prev).abs() < 0.05, "jump at {x}");
            prev = v;
            x += 0.01;
        }
        assert_eq!(n.at(1.25, -7.5), ValueNoise::new(5).at(1.25, -7.5));
        let f = n.fractal(10.0, 20.0, 32.0, 4, 0.5);
        assert!((0.0..=1.0).contains(&f));
    }
}
