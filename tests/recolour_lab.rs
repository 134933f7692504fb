//! The `recolour` operation (src/render/recolour.rs) on invented shaded objects.
//!
//! Sources of the expected values:
//! - the operation's definition in docs/spec.md ("recolour"): mean chroma of each part becomes the
//!   target's, L* kept when the part's mean L* lies in the name's range and otherwise shifted by
//!   one amount, blend weight clamp((d − ½) / feather_px, 0, 1);
//! - the named-colour table (docs/spec.md, `NAMED_COLOURS`);
//! - L*a*b* through `twinaudit::render::colour::srgb_to_lab`, which tests/colour_conversions.rs
//!   checks against colour-science 0.4.7 and the CIE 15:2004 values in ../shared/REFERENCES.md.
//!
//! Tolerances come from 8-bit output: rounding each channel by up to half a level moves a pixel's
//! L* by at most about 0.3 in these colours (measured: 0.2), hence 0.4 per pixel; over a region the
//! rounding errors average out, so mean a*, b* are held to 0.1 (measured: 0.01).

use image::{Rgb, RgbImage};
use twinaudit::render::colour::{lab_to_srgb, named_colour_entry, srgb_to_lab};
use twinaudit::render::mask::Mask;
use twinaudit::render::recolour::{feather_weights, recolour_lab, LabRecolourParams};
use twinaudit::render::{find_operation, EditInput, Params};

const W: u32 = 64;
const H: u32 = 64;

/// Small deterministic generator for test textures (SplitMix64).
fn next(state: &mut u64) -> u64 {
    *state = state.wrapping_add(0x9E37_79B9_7F4A_7C15);
    let mut z = *state;
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

fn in_disc(x: u32, y: u32, cx: f64, cy: f64, r: f64) -> bool {
    (f64::from(x) + 0.5 - cx).hypot(f64::from(y) + 0.5 - cy) < r
}

/// A ball of colour `base` lit from the upper left (brightness falls by `shading` across it), with
/// a little texture, on a noisy grey background.
fn shaded_ball(base: [f64; 3], shading: f64) -> (RgbImage, Mask) {
    let mut state = 11u64;
    let img = RgbImage::from_fn(W, H, |x, y| {
        let jitter = (next(&mut state) % 9) as f64 - 4.0;
        if in_disc(x, y, 32.0, 32.0, 20.0) {
            let shade = 1.0 - shading * (f64::from(x) + f64::from(y)) / 128.0;
            Rgb(base.map(|c| (c * shade + jitter).round().clamp(0.0, 255.0) as u8))
        } else {
            Rgb([128.0 + jitter; 3].map(|c| c as u8))
        }
    });
    let mask = Mask::from_vec(
        W,
        H,
        (0..H)
            .flat_map(|y| (0..W).map(move |x| in_disc(x, y, 32.0, 32.0, 20.0)))
            .collect(),
    )
    .expect("ball is non-empty");
    (img, mask)
}

fn params(name: &str, feather_px: f64) -> LabRecolourParams {
    LabRecolourParams::from_named(named_colour_entry(name).expect("known name"), feather_px)
}

fn labs_inside(img: &RgbImage, mask: &Mask) -> Vec<[f64; 3]> {
    img.enumerate_pixels()
        .filter(|(x, y, _)| mask.contains(*x, *y))
        .map(|(_, _, p)| srgb_to_lab(p.0))
        .collect()
}

fn mean(v: &[[f64; 3]], c: usize) -> f64 {
    v.iter().map(|p| p[c]).sum::<f64>() / v.len() as f64
}

fn std(v: &[[f64; 3]], c: usize) -> f64 {
    let m = mean(v, c);
    (v.iter().map(|p| (p[c] - m).powi(2)).sum::<f64>() / v.len() as f64).sqrt()
}

fn assert_outside_unchanged(before: &RgbImage, after: &RgbImage, mask: &Mask) {
    assert_eq!(before.dimensions(), after.dimensions());
    for (x, y, p) in before.enumerate_pixels() {
        if !mask.contains(x, y) {
            assert_eq!(after.get_pixel(x, y), p, "outside pixel ({x},{y}) changed");
        }
    }
}

#[test]
fn mid_target_keeps_every_pixels_lightness_and_takes_the_target_chroma() {
    // A light red ball: its L* (about 45–60) leaves every mid target inside sRGB at every pixel,
    // so no chroma is lost to gamut mapping and the mean chroma can be checked exactly.
    let (img, mask) = shaded_ball([235.0, 95.0, 85.0], 0.25);
    let before = labs_inside(&img, &mask);
    let mean_l = mean(&before, 0);
    // definition: green's L* range is 30–70 (docs/spec.md table); the ball's mean L* lies inside,
    // so no pixel's L* may move beyond 8-bit rounding.
    assert!((30.0..=70.0).contains(&mean_l), "ball mean L* {mean_l}");
    for name in ["green", "blue", "grey", "brown"] {
        let p = params(name, 0.0);
        let [lo, hi] = p.lightness_range;
        if !(lo..=hi).contains(&mean_l) {
            continue;
        }
        let [_, ta, tb] = p.target_lab;
        assert!(
            before.iter().all(|b| !lab_to_srgb([b[0], ta, tb]).1),
            "{name}: premise: target inside sRGB at every pixel's L*"
        );
        let out = recolour_lab(&img, &mask, &p);
        assert_outside_unchanged(&img, &out, &mask);
        let after = labs_inside(&out, &mask);
        let worst = before
            .iter()
            .zip(&after)
            .map(|(b, a)| (a[0] - b[0]).abs())
            .fold(0.0, f64::max);
        println!("{name}: max |ΔL*| {worst:.3}");
        assert!(worst <= 0.4, "{name}: L* moved by up to {worst}");
        // definition: the part's mean (a*, b*) becomes the target's.
        let (ma, mb) = (mean(&after, 1), mean(&after, 2));
        println!("{name}: mean a* {ma:.3} (target {ta}), b* {mb:.3} (target {tb})");
        assert!(
            (ma - ta).abs() <= 0.1 && (mb - tb).abs() <= 0.1,
            "{name}: ({ma}, {mb})"
        );
        // Shading survives: the spread of L* is the same.
        assert!((std(&after, 0) - std(&before, 0)).abs() <= 0.05, "{name}");
    }
}

#[test]
fn light_and_dark_targets_shift_lightness_as_a_whole() {
    let (img, mask) = shaded_ball([200.0, 45.0, 40.0], 0.45);
    let before = labs_inside(&img, &mask);
    let mean_before = mean(&before, 0);
    for (name, expected_mean_l) in [("white", 92.0), ("black", 16.0), ("yellow", 82.0)] {
        // definition: the mean L* moves to the nearest end of the name's range (white 92–100,
        // black 0–16, yellow 82–95) by one shift for every pixel.
        let out = recolour_lab(&img, &mask, &params(name, 0.0));
        assert_outside_unchanged(&img, &out, &mask);
        let after = labs_inside(&out, &mask);
        let shift = expected_mean_l - mean_before;
        let mut worst = 0.0f64;
        for (b, a) in before.iter().zip(&after) {
            let wanted = b[0] + shift;
            if (0.5..=99.5).contains(&wanted) {
                worst = worst.max((a[0] - wanted).abs());
            }
        }
        println!("{name}: max |L* − (L* + ΔL)| {worst:.3}");
        assert!(worst <= 0.4, "{name}: {worst}");
        let chroma = after.iter().map(|p| p[1].hypot(p[2])).sum::<f64>() / after.len() as f64;
        if name == "yellow" {
            // Yellow keeps its hue near 93° (b* ≫ a*) and most of its chroma.
            assert!(
                mean(&after, 2) > 60.0 && mean(&after, 1).abs() < 8.0,
                "{name}"
            );
        } else {
            // Achromatic targets carry no tint (up to 8-bit rounding).
            assert!(chroma <= 1.0, "{name}: mean chroma {chroma}");
        }
        assert!((mean(&after, 0) - expected_mean_l).abs() <= 0.3, "{name}");
    }
}

#[test]
fn each_object_keeps_its_own_shading() {
    // Two objects of different colours recoloured by one edit: each ends up with the target's
    // mean chroma, because statistics are per connected part.
    let img = RgbImage::from_fn(W, H, |x, y| {
        if in_disc(x, y, 16.0, 32.0, 10.0) {
            Rgb([200, 40 + (y as u8 % 7), 40])
        } else if in_disc(x, y, 48.0, 32.0, 10.0) {
            Rgb([230, 210, 60 + (x as u8 % 5)])
        } else {
            Rgb([90, 90, 90])
        }
    });
    let inside =
        |x: u32, y: u32| in_disc(x, y, 16.0, 32.0, 10.0) || in_disc(x, y, 48.0, 32.0, 10.0);
    let mask = Mask::from_vec(
        W,
        H,
        (0..H)
            .flat_map(|y| (0..W).map(move |x| inside(x, y)))
            .collect(),
    )
    .expect("non-empty");
    let out = recolour_lab(&img, &mask, &params("blue", 0.0));
    assert_outside_unchanged(&img, &out, &mask);
    for cx in [16.0, 48.0] {
        let one = Mask::from_vec(
            W,
            H,
            (0..H)
                .flat_map(|y| (0..W).map(move |x| in_disc(x, y, cx, 32.0, 10.0)))
                .collect(),
        )
        .expect("non-empty");
        let after = labs_inside(&out, &one);
        let (ma, mb) = (mean(&after, 1), mean(&after, 2));
        // definition: blue's (a*, b*) = (18, −56); the lighter yellow part (L* ≈ 84) is brought to
        // blue's upper L* end (55), where (18, −56) is still inside sRGB.
        assert!(
            (ma - 18.0).abs() <= 1.0 && (mb + 56.0).abs() <= 1.0,
            "part at x={cx}: ({ma}, {mb})"
        );
    }
}

#[test]
fn feather_ramps_from_the_border() {
    // A flat red square; along its middle row the colour change grows with the blend weight.
    let img = RgbImage::from_fn(W, H, |x, y| {
        if (16..48).contains(&x) && (16..48).contains(&y) {
            Rgb([200, 40, 40])
        } else {
            Rgb([128, 128, 128])
        }
    });
    let mask = Mask::from_vec(
        W,
        H,
        (0..H)
            .flat_map(|y| (0..W).map(move |x| (16..48).contains(&x) && (16..48).contains(&y)))
            .collect(),
    )
    .expect("non-empty");
    let feather = 4.0;
    let out = recolour_lab(&img, &mask, &params("green", feather));
    assert_outside_unchanged(&img, &out, &mask);
    let full = recolour_lab(&img, &mask, &params("green", 0.0));
    let weights = feather_weights(&mask, feather);
    let original = srgb_to_lab([200, 40, 40]);
    let delta = |p: [f64; 3]| {
        (0..3)
            .map(|c| (p[c] - original[c]).powi(2))
            .sum::<f64>()
            .sqrt()
    };
    let y = 32u32;
    let full_change = delta(srgb_to_lab(full.get_pixel(32, y).0));
    let mut previous = 0.0;
    for x in 16..32u32 {
        let w = weights[(y * W + x) as usize];
        // definition: w = clamp((d − ½) / feather_px, 0, 1), d = distance to the nearest outside
        // pixel centre (here x − 15 along the row).
        let d = f64::from(x - 15);
        assert!(
            (w - ((d - 0.5) / feather).clamp(0.0, 1.0)).abs() < 1e-12,
            "x={x}: w={w}"
        );
        // Blending is linear in L*a*b*, so the change is w times the full change (plus rounding).
        let change = delta(srgb_to_lab(out.get_pixel(x, y).0));
        let ratio = change / full_change;
        println!("x={x}: weight {w:.3}, change ratio {ratio:.3}");
        assert!(
            (ratio - w).abs() <= 0.02,
            "x={x}: ratio {ratio}, weight {w}"
        );
        assert!(
            change + 0.5 >= previous,
            "x={x}: change must not shrink inward"
        );
        previous = change;
    }
}

#[test]
fn operation_records_method_changed_mask_and_errors() {
    let op = find_operation("recolour").expect("recolour is registered");
    let (img, mask) = shaded_ball([200.0, 45.0, 40.0], 0.45);
    let regions = [mask.clone()];
    let input = EditInput {
        image: &img,
        mask: &mask,
        all_regions: &regions,
        seed: 5,
    };
    let params: Params =
        serde_json::from_str(r#"{"colour": "purple", "feather_px": 2, "dilate_px": 1}"#).unwrap();
    let out = op.apply(&input, &params).expect("applies");
    assert_eq!(out.method, "lab-chroma");
    assert_eq!(out.changed, mask.dilate(1));
    assert_outside_unchanged(&img, &out.image, &out.changed);

    let bad: Params = serde_json::from_str(r#"{"colour": "teal"}"#).unwrap();
    let err = op.check(&bad).unwrap_err();
    assert_eq!(
        err,
        "unknown colour \"teal\"; known colours: red, orange, yellow, green, blue, purple, white, grey, brown, pink, black"
    );
    let missing: Params = serde_json::from_str(r#"{"feather_px": 1}"#).unwrap();
    assert!(op
        .check(&missing)
        .unwrap_err()
        .contains("missing field `colour`"));
}
