//! The `cover` styles `mean`, `blur` and `noise` (src/render/cover.rs).
//!
//! Sources of the expected values:
//! - `noise`: i.i.d. normal deviates (Box & Muller 1958) scaled to the ring's per-channel mean and
//!   population standard deviation, computed here directly from the ring pixels; sampling error of
//!   a mean over n draws is σ/√n, of a standard deviation about σ/√(2n) (normal theory).
//! - `blur`: normalised convolution (Knutsson & Westin 1993) of a linear gradient: a weighted mean
//!   of a linear function is the function at the weights' centroid, so the fill follows the
//!   gradient, biased only towards the nearer edge; the analytic gradient is the reference.
//! - `mean`: the ring's rounded mean colour (unchanged behaviour).

use image::{Rgb, RgbImage};
use twinaudit::render::cover::{fill_blur, ring_stats, BlurFillParams};
use twinaudit::render::mask::Mask;
use twinaudit::render::{find_operation, EditInput, Params, Rendered};

/// Small deterministic generator for test textures (SplitMix64).
fn next(state: &mut u64) -> u64 {
    *state = state.wrapping_add(0x9E37_79B9_7F4A_7C15);
    let mut z = *state;
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

fn square_mask(w: u32, h: u32, x0: u32, y0: u32, side: u32) -> Mask {
    Mask::from_vec(
        w,
        h,
        (0..h)
            .flat_map(|y| {
                (0..w).map(move |x| (x0..x0 + side).contains(&x) && (y0..y0 + side).contains(&y))
            })
            .collect(),
    )
    .expect("non-empty")
}

fn cover(image: &RgbImage, mask: &Mask, seed: u64, params: &str) -> Rendered {
    let op = find_operation("cover").expect("cover is registered");
    let params: Params = serde_json::from_str(params).unwrap();
    op.check(&params).expect("valid params");
    let regions = [mask.clone()];
    let input = EditInput {
        image,
        mask,
        all_regions: &regions,
        seed,
    };
    op.apply(&input, &params).expect("cover applies")
}

fn assert_outside_unchanged(before: &RgbImage, out: &Rendered) {
    assert_eq!(before.dimensions(), out.image.dimensions());
    for (x, y, p) in before.enumerate_pixels() {
        if !out.changed.contains(x, y) {
            assert_eq!(
                out.image.get_pixel(x, y),
                p,
                "outside pixel ({x},{y}) changed"
            );
        }
    }
}

/// Uniform noise per channel around (120, 90, 60) with half-widths (34, 26, 17): standard
/// deviations about (19.6, 15.0, 9.8), well inside 0..255 so no draw is clipped.
fn noisy_background(w: u32, h: u32) -> RgbImage {
    let mut state = 99u64;
    RgbImage::from_fn(w, h, |_, _| {
        let v = next(&mut state);
        Rgb([
            (86 + v % 69) as u8,
            (64 + (v >> 16) % 53) as u8,
            (43 + (v >> 32) % 35) as u8,
        ])
    })
}

#[test]
fn noise_matches_ring_statistics_and_follows_the_seed() {
    let (w, h) = (96, 96);
    let img = noisy_background(w, h);
    let mask = square_mask(w, h, 24, 24, 48);
    let params = r#"{"style": "noise", "ring_px": 4, "dilate_px": 0}"#;
    let out = cover(&img, &mask, 7, params);
    assert_eq!(out.method, "noise");
    assert_outside_unchanged(&img, &out);
    assert_eq!(cover(&img, &mask, 7, params).image, out.image, "same seed");
    let other = cover(&img, &mask, 8, params).image;
    let n_differ = other
        .pixels()
        .zip(out.image.pixels())
        .filter(|(a, b)| a != b)
        .count();
    assert!(
        n_differ > 2000,
        "different seed changed only {n_differ} pixels"
    );

    // The ring: pixels within 4 px of the square, outside it (Euclidean disc dilation).
    let grown = mask.dilate(4);
    let mut ring = Vec::new();
    let mut filled = Vec::new();
    for (x, y, p) in out.image.enumerate_pixels() {
        if mask.contains(x, y) {
            filled.push(p.0);
        } else if grown.contains(x, y) {
            ring.push(p.0);
        }
    }
    let stats = |v: &[[u8; 3]], c: usize| {
        let n = v.len() as f64;
        let m = v.iter().map(|p| f64::from(p[c])).sum::<f64>() / n;
        let var = v.iter().map(|p| (f64::from(p[c]) - m).powi(2)).sum::<f64>() / n;
        (m, var.sqrt())
    };
    let library = ring_stats(&img, &mask, 4).expect("ring");
    assert_eq!(library.n_pixels, ring.len());
    let n = filled.len() as f64;
    for c in 0..3 {
        let (ring_mean, ring_std) = stats(&ring, c);
        assert!((library.mean[c] - ring_mean).abs() < 1e-9);
        assert!((library.std[c] - ring_std).abs() < 1e-9);
        let (fill_mean, fill_std) = stats(&filled, c);
        // 4 standard errors: a false failure has probability below 1e-4 per check. Rounding to
        // integers adds variance 1/12, negligible here.
        let mean_tol = 4.0 * ring_std / n.sqrt();
        let std_tol = 4.0 * ring_std / (2.0 * n).sqrt() + 0.05;
        println!(
            "channel {c}: ring {ring_mean:.2} ± {ring_std:.2}, fill {fill_mean:.2} ± {fill_std:.2} (tolerances {mean_tol:.2}, {std_tol:.2})"
        );
        assert!(
            (fill_mean - ring_mean).abs() <= mean_tol,
            "channel {c} mean"
        );
        assert!((fill_std - ring_std).abs() <= std_tol, "channel {c} std");
    }
}

/// A smooth diagonal colour gradient, linear in x and y.
fn gradient(w: u32, h: u32) -> (RgbImage, impl Fn(u32, u32) -> [f64; 3]) {
    let f = |x: u32, y: u32| {
        let (x, y) = (f64::from(x), f64::from(y));
        [40.0 + 1.5 * x, 30.0 + 1.8 * y, 200.0 - 0.7 * (x + y)]
    };
    let img = RgbImage::from_fn(w, h, |x, y| Rgb(f(x, y).map(|v| v.round() as u8)));
    (img, f)
}

#[test]
fn blur_fills_a_gradient_hole_close_to_the_gradient() {
    let (w, h) = (96, 96);
    let (img, truth) = gradient(w, h);
    let mask = square_mask(w, h, 36, 38, 20);
    let out = cover(&img, &mask, 1, r#"{"style": "blur", "dilate_px": 0}"#);
    assert_eq!(out.method, "blur");
    assert_outside_unchanged(&img, &out);
    let (mut sum, mut n, mut worst) = (0.0, 0.0, 0.0f64);
    for (x, y, p) in out.image.enumerate_pixels() {
        if mask.contains(x, y) {
            let t = truth(x, y);
            for (c, &expected) in t.iter().enumerate() {
                let d = (f64::from(p.0[c]) - expected).abs();
                sum += d;
                n += 1.0;
                worst = worst.max(d);
            }
        }
    }
    let mad = sum / n;
    println!("gradient hole 20×20: mean |error| {mad:.2} levels, max {worst:.1}");
    // reference: the analytic gradient (slopes up to 1.8 levels per pixel, so the hole spans
    // about 36 levels per channel). Measured: mean 2.8 levels, max 6.4; a flat fill (style mean)
    // errs by 7.0 on average. The residual is the zero-order fill's pull towards the nearer edge.
    assert!(mad <= 3.5, "mean abs error {mad}");
    assert!(worst <= 10.0, "max abs error {worst}");

    let flat = cover(&img, &mask, 1, r#"{"style": "mean", "dilate_px": 0}"#);
    let flat_mad = flat
        .image
        .enumerate_pixels()
        .filter(|(x, y, _)| mask.contains(*x, *y))
        .map(|(x, y, p)| {
            let t = truth(x, y);
            (0..3)
                .map(|c| (f64::from(p.0[c]) - t[c]).abs())
                .sum::<f64>()
        })
        .sum::<f64>()
        / n;
    println!("same hole, style mean: mean |error| {flat_mad:.2} levels");
    assert!(
        mad < flat_mad / 2.0,
        "blur should follow the gradient far better than a flat fill"
    );
}

#[test]
fn blur_of_a_flat_surrounding_is_flat_and_large_holes_fade_to_the_ring_mean() {
    let (w, h) = (200, 120);
    let img = RgbImage::from_pixel(w, h, Rgb([70, 130, 180]));
    // A hole far wider than 4σ (σ = 3): its middle has no known support within the kernel and
    // takes the ring mean, which here equals the flat colour; the rim averages flat pixels.
    let mask = square_mask(w, h, 20, 10, 100);
    let out = fill_blur(
        &img,
        &mask,
        &BlurFillParams {
            sigma_px: 3.0,
            ring_px: 3,
        },
    );
    assert!(out.pixels().all(|p| p.0 == [70, 130, 180]));
}

#[test]
fn mean_style_is_the_default_and_unchanged() {
    let img = noisy_background(40, 40);
    let mask = square_mask(40, 40, 10, 10, 12);
    let default = cover(&img, &mask, 3, r#"{}"#);
    let explicit = cover(&img, &mask, 3, r#"{"style": "mean"}"#);
    assert_eq!(default.method, "mean");
    assert_eq!(default.image, explicit.image);
    assert_outside_unchanged(&img, &default);
    // Every filled pixel is the rounded ring mean (ring 3 px around the 2-px dilated square).
    let stats = ring_stats(&img, &default.changed, 3).unwrap();
    let expected = stats.mean.map(|m| m.round() as u8);
    for (x, y, p) in default.image.enumerate_pixels() {
        if default.changed.contains(x, y) {
            assert_eq!(p.0, expected);
        }
    }
}
