//! Quality harness for the exemplar fill: holes punched where the truth is known into invented,
//! procedurally generated images (made here, with a fixed seed), filled by Telea and by exemplar,
//! scored by PSNR inside the hole (and, printed only, SSIM over the hole's bounding box).
//!
//! PSNR (peak signal-to-noise ratio) = 10·log10(255² / MSE), MSE over the hole's pixels and the
//! three channels. PSNR rewards blur: on pure noise a smooth fill scores higher than a perfect
//! texture of the wrong phase. So the textured set is made of textures with structure a fill can
//! get right (periodic or quasi-periodic patterns with mild noise), and the table also shows the
//! standard deviation of luminance in the hole (truth vs fill) as a measure of how much texture a
//! fill keeps.
//!
//! SSIM (printed, not asserted): Z. Wang, A. C. Bovik, H. R. Sheikh, E. P. Simoncelli, "Image
//! quality assessment: from error visibility to structural similarity", IEEE TIP 13(4), 2004;
//! Gaussian window σ = 1.5 (11×11, normalised), K1 = 0.01, K2 = 0.03, L = 255, per RGB channel on
//! the crop to the hole's bounding box, mean over window centres whose window lies in the box, then
//! over channels (the definition of examples/quality.rs and docs/quality.md; for the disc hole the
//! box also holds known pixels).
//!
//! Run with `cargo test --release --test exemplar_quality -- --nocapture` to see the table.

use image::{Rgb, RgbImage};
use twinaudit::render::erase::{ring_texture, TEXTURE_STD_THRESHOLD};
use twinaudit::render::exemplar::{inpaint_exemplar, ExemplarParams};
use twinaudit::render::mask::Mask;
use twinaudit::render::quality::{psnr_in_mask, ssim_in_bounding_box};
use twinaudit::render::telea::{inpaint_telea, TeleaParams};

const SIZE: u32 = 128;

/// Small deterministic noise source for the test images (xorshift64*).
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

/// Blends two colours by `t` in [0, 1] and adds per-channel noise.
fn mix(a: [f64; 3], b: [f64; 3], t: f64, noise: &mut Noise, amp: f64) -> Rgb<u8> {
    Rgb([0, 1, 2].map(|c| level(a[c] + (b[c] - a[c]) * t + noise.next(amp))))
}

/// Invented: diagonal sinusoidal stripes, period 10 px, with noise of ±6 levels.
fn stripes() -> RgbImage {
    let mut n = Noise(0x5EED_0001);
    RgbImage::from_fn(SIZE, SIZE, |x, y| {
        let t = 0.5 + 0.5 * ((x as f64 + 0.5 * y as f64) * std::f64::consts::TAU / 10.0).sin();
        mix([70.0, 50.0, 40.0], [210.0, 180.0, 140.0], t, &mut n, 6.0)
    })
}

/// Invented: an 8 px checkerboard of two colours with noise of ±4 levels.
fn checker() -> RgbImage {
    let mut n = Noise(0x5EED_0002);
    RgbImage::from_fn(SIZE, SIZE, |x, y| {
        let t = f64::from(((x / 8) + (y / 8)) % 2 == 0);
        mix([40.0, 60.0, 120.0], [230.0, 220.0, 200.0], t, &mut n, 4.0)
    })
}

/// Invented: wood-like grain, bands of period ~7 px bent by a slow wave, with noise of ±5 levels.
fn wood() -> RgbImage {
    let mut n = Noise(0x5EED_0003);
    RgbImage::from_fn(SIZE, SIZE, |x, y| {
        let (x, y) = (x as f64, y as f64);
        let bent = y + 6.0 * (x / 17.0).sin() + 0.08 * x;
        let t = (0.5 + 0.5 * (bent * std::f64::consts::TAU / 7.0).sin()).powf(1.5);
        mix([110.0, 60.0, 25.0], [200.0, 140.0, 80.0], t, &mut n, 5.0)
    })
}

/// Invented: a woven pattern, the product of two perpendicular square waves of period 12 px.
fn weave() -> RgbImage {
    let mut n = Noise(0x5EED_0004);
    RgbImage::from_fn(SIZE, SIZE, |x, y| {
        let a = f64::from((x % 12) < 6);
        let b = f64::from((y % 12) < 6);
        let t = 0.15 + 0.7 * (a * (1.0 - b) + b * (1.0 - a)) + 0.15 * a * b;
        mix([30.0, 90.0, 60.0], [170.0, 210.0, 150.0], t, &mut n, 4.0)
    })
}

/// Invented: a smooth vertical gradient crossed by a dark straight line 3 px wide.
fn line() -> RgbImage {
    let mut n = Noise(0x5EED_0005);
    RgbImage::from_fn(SIZE, SIZE, |x, y| {
        let (x, y) = (x as f64, y as f64);
        let d = (0.6 * x - 0.8 * y + 40.0).abs();
        let base = [90.0 + y * 0.8, 120.0 + y * 0.5, 160.0 - y * 0.3];
        let t = f64::from(d < 1.5);
        mix(base, [20.0, 20.0, 30.0], t, &mut n, 2.0)
    })
}

/// Invented: a smooth two-way colour gradient (control: nothing for a texture fill to copy).
fn smooth() -> RgbImage {
    RgbImage::from_fn(SIZE, SIZE, |x, y| {
        Rgb([level(60.0 + x as f64), level(40.0 + y as f64), 150])
    })
}

/// A square hole with side `side` centred at (cx, cy).
fn square_hole(cx: u32, cy: u32, side: u32) -> Mask {
    let (x0, y0) = (cx - side / 2, cy - side / 2);
    let inside = (0..SIZE * SIZE)
        .map(|i| {
            let (x, y) = (i % SIZE, i / SIZE);
            (x0..x0 + side).contains(&x) && (y0..y0 + side).contains(&y)
        })
        .collect();
    Mask::from_vec(SIZE, SIZE, inside).unwrap()
}

/// A disc hole of radius `r` centred at (cx, cy).
fn disc_hole(cx: u32, cy: u32, r: u32) -> Mask {
    let inside = (0..SIZE * SIZE)
        .map(|i| {
            let (dx, dy) = ((i % SIZE) as i64 - cx as i64, (i / SIZE) as i64 - cy as i64);
            dx * dx + dy * dy <= (r * r) as i64
        })
        .collect();
    Mask::from_vec(SIZE, SIZE, inside).unwrap()
}

fn holes() -> Vec<Mask> {
    vec![
        square_hole(64, 64, 28),
        disc_hole(40, 88, 14),
        square_hole(96, 36, 20),
    ]
}

/// Standard deviation of BT.601 luminance over the hole's pixels.
fn luma_std_in_hole(image: &RgbImage, hole: &Mask) -> f64 {
    let v: Vec<f64> = hole
        .as_slice()
        .iter()
        .enumerate()
        .filter(|(_, &inside)| inside)
        .map(|(i, _)| {
            let p = &image.as_raw()[i * 3..i * 3 + 3];
            0.299 * f64::from(p[0]) + 0.587 * f64::from(p[1]) + 0.114 * f64::from(p[2])
        })
        .collect();
    let mean = v.iter().sum::<f64>() / v.len() as f64;
    (v.iter().map(|x| (x - mean) * (x - mean)).sum::<f64>() / v.len() as f64).sqrt()
}

struct Row {
    name: &'static str,
    textured: bool,
    psnr_telea: f64,
    psnr_exemplar: f64,
    ssim_telea: f64,
    ssim_exemplar: f64,
    std_truth: f64,
    std_telea: f64,
    std_exemplar: f64,
    /// `erase`'s texture statistic around the first hole (18 px ring, as for 9 px patches).
    ring_texture: f64,
}

fn score(name: &'static str, textured: bool, truth: &RgbImage) -> Row {
    let holes = holes();
    let (mut pt, mut pe, mut st, mut sf, mut se) = (0.0, 0.0, 0.0, 0.0, 0.0);
    let (mut qt, mut qe) = (0.0, 0.0);
    for (k, hole) in holes.iter().enumerate() {
        let telea = inpaint_telea(truth, hole, &TeleaParams { radius_px: 5.0 });
        let params = ExemplarParams {
            seed: 1000 + k as u64,
            ..ExemplarParams::default()
        };
        let exemplar = inpaint_exemplar(truth, hole, &params);
        // Capped at 60 dB so one exact fill does not make the mean infinite.
        pt += psnr_in_mask(truth, &telea, hole).min(60.0);
        pe += psnr_in_mask(truth, &exemplar, hole).min(60.0);
        qt += ssim_in_bounding_box(truth, &telea, hole)
            .expect("holes are larger than an SSIM window");
        qe += ssim_in_bounding_box(truth, &exemplar, hole)
            .expect("holes are larger than an SSIM window");
        st += luma_std_in_hole(truth, hole);
        sf += luma_std_in_hole(&telea, hole);
        se += luma_std_in_hole(&exemplar, hole);
    }
    let n = holes.len() as f64;
    let ring_texture = ring_texture(truth, &holes[0], &holes[0], 18).unwrap();
    Row {
        ring_texture,
        name,
        textured,
        psnr_telea: pt / n,
        psnr_exemplar: pe / n,
        ssim_telea: qt / n,
        ssim_exemplar: qe / n,
        std_truth: st / n,
        std_telea: sf / n,
        std_exemplar: se / n,
    }
}

#[test]
fn exemplar_beats_telea_on_textured_images() {
    let rows = [
        score("stripes + noise", true, &stripes()),
        score("checker + noise", true, &checker()),
        score("wood grain", true, &wood()),
        score("weave", true, &weave()),
        score("line on gradient", false, &line()),
        score("smooth gradient", false, &smooth()),
    ];
    println!("Invented test images, {SIZE}×{SIZE}, 3 holes each (28 px square, r=14 disc, 20 px square);");
    println!("PSNR in the hole (dB, capped at 60), SSIM over the hole's box (telea / exemplar),");
    println!("luminance std in the hole (truth / fill), and");
    println!("erase's ring texture statistic (auto picks exemplar above {TEXTURE_STD_THRESHOLD}):");
    println!(
        "{:<18} {:>8} {:>11} {:>11} {:>13} {:>11} {:>13} {:>8}",
        "image",
        "textured",
        "PSNR telea",
        "PSNR exempl",
        "SSIM tel/exe",
        "std truth",
        "std tel/exe",
        "ring"
    );
    for r in &rows {
        println!(
            "{:<18} {:>8} {:>11.2} {:>11.2} {:>6.3}/{:<6.3} {:>11.1} {:>6.1}/{:<6.1} {:>8.1}",
            r.name,
            r.textured,
            r.psnr_telea,
            r.psnr_exemplar,
            r.ssim_telea,
            r.ssim_exemplar,
            r.std_truth,
            r.std_telea,
            r.std_exemplar,
            r.ring_texture
        );
    }
    let textured: Vec<&Row> = rows.iter().filter(|r| r.textured).collect();
    let mean =
        |f: fn(&Row) -> f64| textured.iter().map(|r| f(r)).sum::<f64>() / textured.len() as f64;
    let (mean_telea, mean_exemplar) = (mean(|r| r.psnr_telea), mean(|r| r.psnr_exemplar));
    println!(
        "mean PSNR over the textured set: telea {mean_telea:.2} dB, exemplar {mean_exemplar:.2} dB"
    );
    assert!(
        mean_exemplar > mean_telea,
        "exemplar {mean_exemplar:.2} dB should beat telea {mean_telea:.2} dB on textured images"
    );
    // Exemplar keeps texture: its fills vary about as much as the truth, Telea's much less.
    for r in &textured {
        assert!(
            r.std_exemplar > 0.7 * r.std_truth,
            "{}: exemplar fill lost its texture",
            r.name
        );
        assert!(
            r.ring_texture > TEXTURE_STD_THRESHOLD,
            "{}: auto would not pick exemplar",
            r.name
        );
    }
    let smooth = rows.iter().find(|r| r.name == "smooth gradient").unwrap();
    assert!(
        smooth.ring_texture < TEXTURE_STD_THRESHOLD,
        "auto would pick exemplar on a smooth gradient, where Telea is better"
    );
}
