//! Inpainting speed on 512×512 invented textured images (generated here with a fixed seed) with
//! square-ish holes covering 5% and 15% of the image: Telea against exemplar, in the same run.
//!
//! `cargo bench --bench inpaint`

use criterion::{criterion_group, criterion_main, BenchmarkId, Criterion};
use image::{Rgb, RgbImage};
use std::hint::black_box;
use twinaudit::render::exemplar::{inpaint_exemplar, ExemplarParams};
use twinaudit::render::mask::Mask;
use twinaudit::render::telea::{inpaint_telea, TeleaParams};

const SIZE: u32 = 512;
const SEED: u64 = 0x1A2B_3C4D;

/// Invented texture: bent wood-like bands plus two crossing stripe sets and uniform noise.
fn textured() -> RgbImage {
    let mut state = SEED;
    let mut noise = move || {
        state ^= state << 13;
        state ^= state >> 7;
        state ^= state << 17;
        (state % 21) as f64 - 10.0
    };
    RgbImage::from_fn(SIZE, SIZE, |x, y| {
        let (x, y) = (f64::from(x), f64::from(y));
        let bands = (0.9 * (y + 7.0 * (x / 23.0).sin())).sin();
        let weave = (0.5 * x).sin() * (0.37 * y).sin();
        let v = 128.0 + 55.0 * bands + 30.0 * weave + noise();
        let level = |c: f64| c.round().clamp(0.0, 255.0) as u8;
        Rgb([level(v), level(0.7 * v + 20.0), level(0.4 * v + 30.0)])
    })
}

/// A centred rectangle with aspect 5:4 covering about `fraction` of the image.
fn hole(fraction: f64) -> Mask {
    let area = fraction * f64::from(SIZE * SIZE);
    let h = (area / 1.25).sqrt().round() as u32;
    let w = (area / f64::from(h)).round() as u32;
    let (x0, y0) = ((SIZE - w) / 2, (SIZE - h) / 2);
    let inside = (0..SIZE * SIZE)
        .map(|i| (x0..x0 + w).contains(&(i % SIZE)) && (y0..y0 + h).contains(&(i / SIZE)))
        .collect();
    Mask::from_vec(SIZE, SIZE, inside).expect("non-empty hole")
}

fn inpaint(c: &mut Criterion) {
    let image = textured();
    let mut group = c.benchmark_group("inpaint_512");
    group.sample_size(10);
    for fraction in [0.05, 0.15] {
        let mask = hole(fraction);
        let label = format!("{:.0}%", fraction * 100.0);
        group.bench_with_input(BenchmarkId::new("telea", &label), &mask, |b, mask| {
            b.iter(|| inpaint_telea(black_box(&image), mask, &TeleaParams { radius_px: 5.0 }))
        });
        let params = ExemplarParams {
            seed: SEED,
            ..ExemplarParams::default()
        };
        group.bench_with_input(BenchmarkId::new("exemplar", &label), &mask, |b, mask| {
            b.iter(|| inpaint_exemplar(black_box(&image), mask, &params))
        });
    }
    group.finish();
}

criterion_group!(benches, inpaint);
criterion_main!(benches);
