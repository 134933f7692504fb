//! Seam check of `duplicate` with Poisson blending, on an invented image: a shaded disc on a
//! smoothly varying background (a linear colour ramp plus a mild sinusoidal texture).
//!
//! Acceptance criterion (the project's, for seamless cloning after Pérez, Gangnet and Blake,
//! "Poisson image editing", SIGGRAPH 2003): the copy shows no seam, measured as
//! - seam gradient: the mean, over all 4-adjacent pixel pairs (p, q) with p inside the pasted
//!   footprint (`Rendered::changed`) and q outside it, of the Euclidean RGB norm of f(p) − f(q);
//! - surrounding gradient: the same mean over all 4-adjacent pairs with both pixels outside the
//!   footprint, within `RING_PX` pixels of it (footprint dilated by `RING_PX`) and on background
//!   (outside the original disc grown by one pixel, so no pair straddles the disc's own edge),
//!
//! both on the edited image; the seam gradient must lie within 20 % of the surrounding gradient.
//! The same measure on `blend: "paste"` is printed for comparison (it shows the seam a plain
//! copy leaves where the ramp differs between source and destination).

use image::{Rgb, RgbImage};
use twinaudit::render::duplicate::Duplicate;
use twinaudit::render::mask::Mask;
use twinaudit::render::{EditInput, Operation, Params};

const SIZE: u32 = 128;
const RING_PX: u32 = 6;
const DISC: (f64, f64, f64) = (30.0, 40.0, 10.0);

/// Invented background: ramp in every channel plus a mild texture of about ±3 levels.
fn background(x: u32, y: u32) -> [f64; 3] {
    let (xf, yf) = (x as f64, y as f64);
    let t = 3.0 * (0.9 * xf).sin() * (0.7 * yf).cos();
    [
        40.0 + 1.2 * xf + t,
        60.0 + 0.8 * yf + t,
        100.0 + 0.5 * (xf + yf) - t,
    ]
}

/// Invented scene: the background with a disc shaded from its upper left.
fn scene() -> (RgbImage, Mask) {
    let (cx, cy, r) = DISC;
    let mut inside = Vec::new();
    let image = RgbImage::from_fn(SIZE, SIZE, |x, y| {
        let (dx, dy) = (x as f64 - cx, y as f64 - cy);
        let v = if dx * dx + dy * dy <= r * r {
            let shade = 1.0 - 0.03 * (dx + dy);
            [200.0 * shade, 50.0 * shade, 60.0 * shade]
        } else {
            background(x, y)
        };
        Rgb(v.map(|c| c.round().clamp(0.0, 255.0) as u8))
    });
    for y in 0..SIZE {
        for x in 0..SIZE {
            let (dx, dy) = (x as f64 - cx, y as f64 - cy);
            inside.push(dx * dx + dy * dy <= r * r);
        }
    }
    (image, Mask::from_vec(SIZE, SIZE, inside).unwrap())
}

fn diff(image: &RgbImage, p: (u32, u32), q: (u32, u32)) -> f64 {
    let (a, b) = (image.get_pixel(p.0, p.1).0, image.get_pixel(q.0, q.1).0);
    (0..3)
        .map(|c| (a[c] as f64 - b[c] as f64).powi(2))
        .sum::<f64>()
        .sqrt()
}

/// (seam gradient, surrounding gradient) as defined in the module documentation.
fn seam_and_surrounding(image: &RgbImage, footprint: &Mask, disc: &Mask) -> (f64, f64) {
    let ring = footprint.dilate(RING_PX);
    let object = disc.dilate(1);
    let background = |x: u32, y: u32| ring.contains(x, y) && !object.contains(x, y);
    let (mut seam, mut n_seam, mut around, mut n_around) = (0.0, 0usize, 0.0, 0usize);
    for y in 0..SIZE {
        for x in 0..SIZE {
            for (nx, ny) in [(x + 1, y), (x, y + 1)] {
                if nx >= SIZE || ny >= SIZE {
                    continue;
                }
                let (a, b) = (footprint.contains(x, y), footprint.contains(nx, ny));
                let d = diff(image, (x, y), (nx, ny));
                if a != b {
                    seam += d;
                    n_seam += 1;
                } else if !a && background(x, y) && background(nx, ny) {
                    around += d;
                    n_around += 1;
                }
            }
        }
    }
    (seam / n_seam as f64, around / n_around as f64)
}

fn duplicate(image: &RgbImage, disc: &Mask, blend: &str, seed: u64) -> (RgbImage, Mask) {
    let params: Params =
        serde_json::from_str(&format!(r#"{{"margin_px": 3, "blend": "{blend}"}}"#)).unwrap();
    let input = EditInput {
        image,
        mask: disc,
        all_regions: std::slice::from_ref(disc),
        seed,
    };
    let r = Duplicate.apply(&input, &params).unwrap();
    (r.image, r.changed)
}

#[test]
fn poisson_copy_has_no_seam() {
    let (image, disc) = scene();
    for seed in 1..=5u64 {
        let (out, footprint) = duplicate(&image, &disc, "poisson", seed);
        let (seam, around) = seam_and_surrounding(&out, &footprint, &disc);
        let (pasted, pasted_fp) = duplicate(&image, &disc, "paste", seed);
        let (paste_seam, paste_around) = seam_and_surrounding(&pasted, &pasted_fp, &disc);
        let [x, y, ..] = footprint.bounding_box();
        println!(
            "seed {seed}: copy at ({x}, {y}); poisson seam {seam:.2} vs surrounding {around:.2} (ratio {:.3}); paste seam {paste_seam:.2} vs {paste_around:.2} (ratio {:.3})",
            seam / around,
            paste_seam / paste_around
        );
        // The measure sees a seam where there is one.
        assert!(
            paste_seam > 2.0 * paste_around,
            "seed {seed}: paste shows no seam"
        );
        assert!(
            (seam - around).abs() <= 0.2 * around,
            "seed {seed}: seam gradient {seam:.2} not within 20% of the surrounding {around:.2}"
        );
    }
}
