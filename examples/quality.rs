//! Quality harness: holes punched where the truth is known into fixed, seeded 512×512 images,
//! filled by our Telea and exemplar fills, scored inside the hole; plus one seamless-cloning case
//! (a disc object pasted on a table texture), timed. A bench-style command, not a test:
//!
//! ```sh
//! cargo run --release --example quality -- --out DIR
//! .venv/bin/python tools/compare_opencv.py DIR      # OpenCV on the same inputs, docs/quality.md
//! ```
//! (`tools/quality.sh` runs both.)
//!
//! Writes `DIR/inputs/NAME.image.png` (the input: the truth with the hole painted black, so no
//! method can read the answer), `NAME.truth.png`, `NAME.mask.png` (255 = hole), for the clone
//! cases `NAME.source.png` instead of a truth; our outputs `DIR/ours/NAME.{telea,exemplar,poisson}.png`;
//! and `DIR/ours.json` with every case, its hole, and per method PSNR, SSIM and wall time.
//!
//! Metrics (the same definitions are implemented again in numpy by tools/compare_opencv.py):
//! - PSNR = 10·log10(255² / MSE), MSE over the hole's pixels and the three RGB channels (standard
//!   definition).
//! - SSIM: Z. Wang, A. C. Bovik, H. R. Sheikh, E. P. Simoncelli, "Image quality assessment: from
//!   error visibility to structural similarity", IEEE TIP 13(4), 2004; Gaussian window σ = 1.5
//!   truncated to 11×11 (radius 5, normalised to sum 1), K1 = 0.01, K2 = 0.03, L = 255, population
//!   (weighted) variances. Computed per RGB channel on the crop of truth and fill to the hole's
//!   bounding box, averaged over the window centres whose whole window lies in that box, then
//!   averaged over the three channels. All holes here are axis-aligned rectangles, so the box is
//!   the hole and every window lies wholly inside the hole.
//! - Time: wall time of one call, median of 5 runs, in this one thread (the fills are
//!   single-threaded).

use std::fs;
use std::path::{Path, PathBuf};
use std::time::Instant;

use image::{GrayImage, Luma, Rgb, RgbImage};
use serde_json::{json, Value};
use twinaudit::render::exemplar::{inpaint_exemplar, ExemplarParams};
use twinaudit::render::mask::Mask;
use twinaudit::render::poisson::{poisson_clone, PoissonParams};
use twinaudit::render::quality::{psnr_in_mask, ssim_in_bounding_box};
use twinaudit::render::telea::{inpaint_telea, TeleaParams};
use twinaudit::synth::texture::{table_texture, TableKind, TableStyle};

const SIZE: u32 = 512;
const SEED: u64 = 0x0051_A11E_7E57;
const N_RUNS: usize = 5;
/// Same as `erase`'s default `radius_px`.
const TELEA_RADIUS_PX: f32 = 5.0;
const HOLE_FRACTIONS: [f64; 2] = [0.05, 0.15];

/// Small deterministic noise source for the procedural images (xorshift64*).
struct Noise(u64);

impl Noise {
    /// Uniform in `[-amp, amp]`.
    fn next(&mut self, amp: f64) -> f64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        let u = (self.0.wrapping_mul(0x2545_F491_4F6C_DD1D) >> 11) as f64 / (1u64 << 53) as f64;
        (2.0 * u - 1.0) * amp
    }
}

fn level(v: f64) -> u8 {
    v.round().clamp(0.0, 255.0) as u8
}

fn mix(a: [f64; 3], b: [f64; 3], t: f64, noise: &mut Noise, amp: f64) -> Rgb<u8> {
    Rgb([0, 1, 2].map(|c| level(a[c] + (b[c] - a[c]) * t + noise.next(amp))))
}

/// Invented: diagonal sinusoidal stripes, period 10 px, with noise of ±6 levels.
fn stripes() -> RgbImage {
    let mut n = Noise(SEED ^ 1);
    RgbImage::from_fn(SIZE, SIZE, |x, y| {
        let t = 0.5 + 0.5 * ((x as f64 + 0.5 * y as f64) * std::f64::consts::TAU / 10.0).sin();
        mix([70.0, 50.0, 40.0], [210.0, 180.0, 140.0], t, &mut n, 6.0)
    })
}

/// Invented: a 16 px checkerboard of two colours with noise of ±4 levels.
fn checker() -> RgbImage {
    let mut n = Noise(SEED ^ 2);
    RgbImage::from_fn(SIZE, SIZE, |x, y| {
        let t = f64::from(((x / 16) + (y / 16)) % 2 == 0);
        mix([40.0, 60.0, 120.0], [230.0, 220.0, 200.0], t, &mut n, 4.0)
    })
}

/// Invented: a woven pattern, the product of two perpendicular square waves of period 12 px.
fn weave() -> RgbImage {
    let mut n = Noise(SEED ^ 3);
    RgbImage::from_fn(SIZE, SIZE, |x, y| {
        let a = f64::from((x % 12) < 6);
        let b = f64::from((y % 12) < 6);
        let t = 0.15 + 0.7 * (a * (1.0 - b) + b * (1.0 - a)) + 0.15 * a * b;
        mix([30.0, 90.0, 60.0], [170.0, 210.0, 150.0], t, &mut n, 4.0)
    })
}

/// Invented: wood-like grain, bands of period ~9 px bent by a slow wave, with noise of ±5 levels.
fn wood_grain() -> RgbImage {
    let mut n = Noise(SEED ^ 4);
    RgbImage::from_fn(SIZE, SIZE, |x, y| {
        let (x, y) = (x as f64, y as f64);
        let bent = y + 9.0 * (x / 29.0).sin() + 0.06 * x;
        let t = (0.5 + 0.5 * (bent * std::f64::consts::TAU / 9.0).sin()).powf(1.5);
        mix([110.0, 60.0, 25.0], [200.0, 140.0, 80.0], t, &mut n, 5.0)
    })
}

/// A table surface from the scene synthesizer (`synth::texture::table_texture`), before
/// lighting, at the scale of a 512 px scene (`px` = 2).
fn table(kind: TableKind, seed: u64) -> RgbImage {
    let px = f64::from(SIZE) / 256.0;
    let style = match kind {
        TableKind::Wood => TableStyle {
            kind,
            seed,
            light: [178.0, 132.0, 84.0],
            dark: [128.0, 86.0, 50.0],
            period_px: 50.0 * px,
            detail: 7.0 * px,
            vertical: false,
            px,
        },
        TableKind::Woven => TableStyle {
            kind,
            seed,
            light: [218.0, 208.0, 186.0],
            dark: [176.0, 160.0, 130.0],
            period_px: 14.0 * px,
            detail: 0.35,
            vertical: true,
            px,
        },
        TableKind::Stone => TableStyle {
            kind,
            seed,
            light: [176.0, 166.0, 150.0],
            dark: [124.0, 114.0, 100.0],
            period_px: 110.0 * px,
            detail: 0.0,
            vertical: false,
            px,
        },
    };
    let texels = table_texture(&style, SIZE);
    RgbImage::from_fn(SIZE, SIZE, |x, y| {
        let c = texels[(y * SIZE + x) as usize];
        Rgb(c.map(level))
    })
}

/// A rectangle of aspect 5:4 covering about `fraction` of the image, centred at (cx, cy).
fn rect_hole(fraction: f64, cx: u32, cy: u32) -> ([u32; 4], Mask) {
    let area = fraction * f64::from(SIZE * SIZE);
    let h = (area / 1.25).sqrt().round() as u32;
    let w = (area / f64::from(h)).round() as u32;
    let (x0, y0) = (cx - w / 2, cy - h / 2);
    let inside = (0..SIZE * SIZE)
        .map(|i| (x0..x0 + w).contains(&(i % SIZE)) && (y0..y0 + h).contains(&(i / SIZE)))
        .collect();
    let mask = Mask::from_vec(SIZE, SIZE, inside).expect("non-empty hole");
    ([x0, y0, x0 + w, y0 + h], mask)
}

fn disc_mask(cx: i64, cy: i64, r: i64) -> Mask {
    let inside = (0..SIZE * SIZE)
        .map(|i| {
            let (dx, dy) = ((i % SIZE) as i64 - cx, (i / SIZE) as i64 - cy);
            dx * dx + dy * dy <= r * r
        })
        .collect();
    Mask::from_vec(SIZE, SIZE, inside).expect("non-empty disc")
}

/// The source of a clone case: a shaded orange ball of radius `r` at (cx, cy) on a plain grey
/// cloth (the cloth inside the mask's margin is what seamless cloning has to blend away).
fn ball_source(cx: f64, cy: f64, r: f64) -> RgbImage {
    let mut n = Noise(SEED ^ 5);
    RgbImage::from_fn(SIZE, SIZE, |x, y| {
        let (dx, dy) = ((x as f64 - cx) / r, (y as f64 - cy) / r);
        let d2 = dx * dx + dy * dy;
        if d2 <= 1.0 {
            let dz = (1.0 - d2).sqrt();
            // Lambert shading, light from the upper left.
            let shade = (0.25 + 0.75 * (-0.5 * dx - 0.5 * dy + 0.7 * dz).max(0.0)).min(1.0);
            mix([0.0; 3], [240.0, 140.0, 40.0], shade, &mut n, 2.0)
        } else {
            mix([0.0; 3], [96.0, 100.0, 104.0], 1.0, &mut n, 2.0)
        }
    })
}

/// Wall time of `f` in milliseconds: median and minimum of [`N_RUNS`], and the last result.
fn time_ms<T>(mut f: impl FnMut() -> T) -> (Timing, T) {
    let mut times = Vec::with_capacity(N_RUNS);
    let mut last = None;
    for _ in 0..N_RUNS {
        let start = Instant::now();
        let out = std::hint::black_box(f());
        times.push(start.elapsed().as_secs_f64() * 1000.0);
        last = Some(out);
    }
    times.sort_by(f64::total_cmp);
    let timing = Timing {
        median_ms: times[N_RUNS / 2],
        min_ms: times[0],
    };
    (timing, last.expect("at least one run"))
}

#[derive(Debug, Clone, Copy)]
struct Timing {
    median_ms: f64,
    /// Less sensitive than the median to other work on the machine.
    min_ms: f64,
}

fn save_rgb(image: &RgbImage, path: &Path) {
    image
        .save(path)
        .unwrap_or_else(|e| panic!("cannot write {}: {e}", path.display()));
}

fn save_mask(mask: &Mask, path: &Path) {
    let gray = GrayImage::from_fn(SIZE, SIZE, |x, y| {
        Luma([if mask.contains(x, y) { 255 } else { 0 }])
    });
    gray.save(path)
        .unwrap_or_else(|e| panic!("cannot write {}: {e}", path.display()));
}

/// The image with the hole painted black, so no fill can read the truth.
fn blank_hole(truth: &RgbImage, hole: &Mask) -> RgbImage {
    let mut image = truth.clone();
    for (x, y, p) in image.enumerate_pixels_mut() {
        if hole.contains(x, y) {
            *p = Rgb([0, 0, 0]);
        }
    }
    image
}

fn parse_out_dir() -> PathBuf {
    let args: Vec<String> = std::env::args().skip(1).collect();
    match args.as_slice() {
        [flag, dir] if flag == "--out" => PathBuf::from(dir),
        _ => {
            eprintln!("usage: cargo run --release --example quality -- --out DIR");
            std::process::exit(2);
        }
    }
}

fn main() {
    let out_dir = parse_out_dir();
    let (inputs, ours) = (out_dir.join("inputs"), out_dir.join("ours"));
    for d in [&inputs, &ours] {
        fs::create_dir_all(d).unwrap_or_else(|e| panic!("cannot create {}: {e}", d.display()));
    }
    let textures: Vec<(&str, &str, RgbImage)> = vec![
        (
            "stripes",
            "procedural: diagonal sine stripes, period 10 px, noise ±6",
            stripes(),
        ),
        (
            "checker",
            "procedural: 16 px checkerboard, noise ±4",
            checker(),
        ),
        (
            "weave",
            "procedural: crossed square waves, period 12 px, noise ±4",
            weave(),
        ),
        (
            "wood_grain",
            "procedural: bent sine bands, period 9 px, noise ±5",
            wood_grain(),
        ),
        (
            "table_wood",
            "synth::texture::table_texture, Wood, px = 2",
            table(TableKind::Wood, SEED ^ 11),
        ),
        (
            "table_woven",
            "synth::texture::table_texture, Woven, px = 2",
            table(TableKind::Woven, SEED ^ 12),
        ),
        (
            "table_stone",
            "synth::texture::table_texture, Stone, px = 2",
            table(TableKind::Stone, SEED ^ 13),
        ),
    ];
    let mut cases: Vec<Value> = Vec::new();
    println!(
        "{:<18} {:>5} {:<9} {:>8} {:>7} {:>10}",
        "input", "hole", "method", "PSNR dB", "SSIM", "time ms"
    );
    for (k, (texture, description, truth)) in textures.iter().enumerate() {
        for (j, &fraction) in HOLE_FRACTIONS.iter().enumerate() {
            // Holes a little off centre, at a position that varies with the texture (fixed).
            let (cx, cy) = (SIZE / 2 - 20 + 7 * k as u32, SIZE / 2 + 15 - 5 * j as u32);
            let (bbox, hole) = rect_hole(fraction, cx, cy);
            let name = format!("{texture}_{:02}", (fraction * 100.0).round() as u32);
            let image = blank_hole(truth, &hole);
            save_rgb(&image, &inputs.join(format!("{name}.image.png")));
            save_rgb(truth, &inputs.join(format!("{name}.truth.png")));
            save_mask(&hole, &inputs.join(format!("{name}.mask.png")));

            let telea_params = TeleaParams {
                radius_px: TELEA_RADIUS_PX,
            };
            let exemplar_params = ExemplarParams {
                seed: SEED,
                ..ExemplarParams::default()
            };
            let (t_telea, telea) = time_ms(|| inpaint_telea(&image, &hole, &telea_params));
            let (t_exemplar, exemplar) =
                time_ms(|| inpaint_exemplar(&image, &hole, &exemplar_params));
            let mut methods = serde_json::Map::new();
            for (method, out, ms) in [
                ("telea", &telea, t_telea),
                ("exemplar", &exemplar, t_exemplar),
            ] {
                save_rgb(out, &ours.join(format!("{name}.{method}.png")));
                let psnr = psnr_in_mask(truth, out, &hole);
                let ssim = ssim_in_bounding_box(truth, out, &hole)
                    .expect("holes are larger than an SSIM window");
                println!(
                    "{name:<18} {:>4.1}% {method:<9} {psnr:>8.2} {ssim:>7.4} {:>10.1}",
                    hole.area_fraction() * 100.0,
                    ms.median_ms
                );
                methods.insert(
                    method.into(),
                    json!({ "psnr_db": psnr, "ssim": ssim, "time_ms": ms.median_ms, "min_time_ms": ms.min_ms }),
                );
            }
            cases.push(json!({
                "name": name,
                "kind": "inpaint",
                "texture": texture,
                "description": description,
                "hole_fraction": hole.area_fraction(),
                "hole_bbox": bbox,
                "methods": methods,
            }));
        }
    }

    // Clone cases: a ball (object radius r) with a margin of cloth, pasted at the same place on
    // the woven table; the mask is the ball's disc grown by the margin. Source and destination
    // have the same size and the offset is (0, 0), so OpenCV's seamlessClone sees the same
    // placement with `center` = the disc's centre.
    let background = table(TableKind::Woven, SEED ^ 21);
    for (name, r, margin) in [
        ("ball_r56_on_woven", 56i64, 8i64),
        ("ball_r230_on_woven", 230, 16),
    ] {
        let (cx, cy) = (256i64, 256i64);
        let source = ball_source(cx as f64, cy as f64, r as f64);
        let mask = disc_mask(cx, cy, r + margin);
        save_rgb(&background, &inputs.join(format!("{name}.image.png")));
        save_rgb(&source, &inputs.join(format!("{name}.source.png")));
        save_mask(&mask, &inputs.join(format!("{name}.mask.png")));
        let params = PoissonParams::default();
        let (ms, out) = time_ms(|| poisson_clone(&background, &source, (0, 0), &mask, &params));
        save_rgb(&out, &ours.join(format!("{name}.poisson.png")));
        println!(
            "{name:<18} {:>4.1}% {:<9} {:>8} {:>7} {:>10.1}",
            mask.area_fraction() * 100.0,
            "poisson",
            "-",
            "-",
            ms.median_ms
        );
        cases.push(json!({
            "name": name,
            "kind": "clone",
            "description": format!(
                "shaded ball radius {r} px with {margin} px of grey cloth, pasted on \
                 synth Woven table texture; mask = disc radius {} px at ({cx}, {cy})",
                r + margin
            ),
            "hole_fraction": mask.area_fraction(),
            "center": [cx, cy],
            "mask_radius_px": r + margin,
            "methods": { "poisson": { "time_ms": ms.median_ms, "min_time_ms": ms.min_ms } },
        }));
    }

    let report = json!({
        "generator": "cargo run --release --example quality",
        "image_size": SIZE,
        "seed": SEED,
        "n_runs": N_RUNS,
        // Other work on the machine skews wall times; recorded so a noisy run can be spotted.
        "loadavg_at_end": fs::read_to_string("/proc/loadavg")
            .ok()
            .map(|l| l.split_whitespace().take(3).collect::<Vec<_>>().join(" ")),
        "timing": "wall time of one call, median of n_runs, single thread",
        "telea": { "radius_px": TELEA_RADIUS_PX },
        "exemplar": { "patch_px": ExemplarParams::default().patch_px, "seed": SEED },
        "poisson": { "tolerance": PoissonParams::default().tolerance },
        "psnr": "10*log10(255^2/MSE), MSE over hole pixels x RGB channels",
        "ssim": "Wang et al. 2004; Gaussian sigma 1.5, 11x11, K1 0.01, K2 0.03, L 255; per RGB \
                 channel over window centres whose window lies in the hole's bounding box, mean \
                 over centres then channels",
        "cases": cases,
    });
    let path = out_dir.join("ours.json");
    fs::write(
        &path,
        serde_json::to_string_pretty(&report).expect("serialisable") + "\n",
    )
    .unwrap_or_else(|e| panic!("cannot write {}: {e}", path.display()));
    println!("wrote {}", path.display());
}
