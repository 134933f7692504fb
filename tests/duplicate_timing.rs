//! Timing of the mask-restricted Poisson solver on invented 512×512 images: a shaded disc of
//! diameter 128 and of diameter 500 (grown by the default 3-pixel margin) cloned onto a different
//! background. Run by hand: `cargo test --test duplicate_timing -- --ignored --nocapture`
//! (add `--release` for representative times). Also checks the solver reaches its tolerance.

use std::time::Instant;

use image::{Rgb, RgbImage};
use twinaudit::render::mask::Mask;
use twinaudit::render::poisson::{poisson_clone_with_stats, PoissonParams};

const SIZE: u32 = 512;

fn disc_mask(diameter: f64) -> Mask {
    let (c, r) = (SIZE as f64 / 2.0, diameter / 2.0 + 3.0);
    let inside = (0..SIZE * SIZE)
        .map(|i| {
            let (x, y) = ((i % SIZE) as f64 + 0.5 - c, (i / SIZE) as f64 + 0.5 - c);
            x * x + y * y <= r * r
        })
        .collect();
    Mask::from_vec(SIZE, SIZE, inside).unwrap()
}

#[test]
#[ignore = "timing for the report; run by hand with --ignored --nocapture"]
fn poisson_solver_timing() {
    // Invented: source = warm ramp with a shaded disc; destination = cool ramp with texture.
    let src = RgbImage::from_fn(SIZE, SIZE, |x, y| {
        let (dx, dy) = (x as f64 - 256.0, y as f64 - 256.0);
        let shade = (1.0 - (dx + dy) / 1200.0).clamp(0.0, 1.0);
        Rgb([
            (200.0 * shade) as u8,
            (40.0 + 0.2 * x as f64) as u8,
            (60.0 * shade) as u8,
        ])
    });
    let dest = RgbImage::from_fn(SIZE, SIZE, |x, y| {
        let t = 4.0 * (0.3 * x as f64).sin() * (0.2 * y as f64).cos();
        Rgb([
            (30.0 + 0.3 * x as f64 + t) as u8,
            (90.0 + 0.2 * y as f64 + t) as u8,
            (150.0 + 0.1 * (x + y) as f64 - t) as u8,
        ])
    });
    for diameter in [128.0, 500.0] {
        let mask = disc_mask(diameter);
        // Best of five runs: the machine may be shared.
        let mut seconds = f64::INFINITY;
        let mut result = None;
        for _ in 0..5 {
            let start = Instant::now();
            let run =
                poisson_clone_with_stats(&dest, &src, (0, 0), &mask, &PoissonParams::default());
            seconds = seconds.min(start.elapsed().as_secs_f64());
            result = Some(run);
        }
        let (out, stats) = result.unwrap();
        println!(
            "disc {diameter} px: {} unknowns, CG iterations {:?}, max RMS residual {:.1e}, {:.3} s",
            stats.n_unknowns,
            stats.iterations,
            stats.rms_residual.iter().cloned().fold(0.0, f64::max),
            seconds
        );
        let start = Instant::now();
        let no_solve = PoissonParams {
            max_iterations: 0,
            ..PoissonParams::default()
        };
        let _ = poisson_clone_with_stats(&dest, &src, (0, 0), &mask, &no_solve);
        println!(
            "  set-up and output alone (no iterations): {:.3} s",
            start.elapsed().as_secs_f64()
        );
        let tight = PoissonParams {
            tolerance: 1e-7,
            max_iterations: 20_000,
            ..PoissonParams::default()
        };
        let (reference, tight_stats) = poisson_clone_with_stats(&dest, &src, (0, 0), &mask, &tight);
        let max_diff = out
            .as_raw()
            .iter()
            .zip(reference.as_raw())
            .map(|(&a, &b)| (a as i32 - b as i32).abs())
            .max()
            .unwrap();
        println!(
            "  against tolerance 1e-7 ({:?} iterations): largest difference {max_diff} levels",
            tight_stats.iterations
        );
        assert!(max_diff <= 1);
        assert!(stats
            .rms_residual
            .iter()
            .all(|&r| r <= PoissonParams::default().tolerance));
    }
}

/// Repeats only the default solve on the larger disc, for `perf stat` (CPU time on a shared
/// machine): `perf stat -e task-clock target/release/deps/duplicate_timing-* --ignored repeat`.
#[test]
#[ignore = "for profiling by hand"]
fn poisson_solver_repeat() {
    let n_runs: usize = std::env::var("POISSON_RUNS")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(10);
    let diameter: f64 = std::env::var("POISSON_DIAMETER")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(500.0);
    let src = RgbImage::from_fn(SIZE, SIZE, |x, y| Rgb([(x / 2) as u8, (y / 2) as u8, 90]));
    let dest = RgbImage::from_fn(SIZE, SIZE, |x, y| {
        Rgb([200 - (y / 3) as u8, 60, (x / 3) as u8])
    });
    let mask = disc_mask(diameter);
    for _ in 0..n_runs {
        let (out, _) =
            poisson_clone_with_stats(&dest, &src, (0, 0), &mask, &PoissonParams::default());
        assert_eq!(out.dimensions(), (SIZE, SIZE));
    }
}
