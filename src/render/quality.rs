//! Measuring a fill against the truth inside a hole: PSNR and SSIM, for the inpainting tests
//! and the quality harness (examples/quality.rs, docs/quality.md). Pure, no I/O.

use image::RgbImage;

use super::mask::Mask;

/// 10·log10(255² / MSE), MSE over the mask's pixels and the three RGB channels (the standard
/// definition); infinite for an exact fill.
#[must_use]
pub fn psnr_in_mask(truth: &RgbImage, fill: &RgbImage, mask: &Mask) -> f64 {
    let (mut se, mut n) = (0.0, 0.0);
    for (i, &inside) in mask.as_slice().iter().enumerate() {
        if inside {
            for c in 0..3 {
                let d = f64::from(truth.as_raw()[i * 3 + c]) - f64::from(fill.as_raw()[i * 3 + c]);
                se += d * d;
                n += 1.0;
            }
        }
    }
    let mse = se / n;
    if mse == 0.0 {
        f64::INFINITY
    } else {
        10.0 * (255.0f64 * 255.0 / mse).log10()
    }
}

/// Gaussian window weights, σ = 1.5, radius 5, normalised to sum 1.
fn gaussian_taps() -> [f64; 11] {
    let taps: [f64; 11] = std::array::from_fn(|k| {
        let d = k as f64 - 5.0;
        (-d * d / (2.0 * 1.5 * 1.5)).exp()
    });
    let sum: f64 = taps.iter().sum();
    taps.map(|t| t / sum)
}

/// Separable "valid" Gaussian filter of a `w`×`h` plane: output is (w−10)×(h−10).
fn filter_valid(plane: &[f64], w: usize, h: usize, taps: &[f64; 11]) -> Vec<f64> {
    let (ow, oh) = (w - 10, h - 10);
    let mut rows = vec![0.0; ow * h];
    for y in 0..h {
        for x in 0..ow {
            rows[y * ow + x] = (0..11).map(|k| taps[k] * plane[y * w + x + k]).sum();
        }
    }
    let mut out = vec![0.0; ow * oh];
    for y in 0..oh {
        for x in 0..ow {
            out[y * ow + x] = (0..11).map(|k| taps[k] * rows[(y + k) * ow + x]).sum();
        }
    }
    out
}

/// Mean SSIM over the window centres whose 11×11 window lies in the mask's bounding box, per RGB
/// channel, averaged over channels; `None` when the box is smaller than a window.
///
/// # References
/// Z. Wang, A. C. Bovik, H. R. Sheikh, E. P. Simoncelli, "Image quality assessment: from error
/// visibility to structural similarity", IEEE Trans. Image Processing 13(4), 2004: Gaussian
/// window σ = 1.5 (11×11), K1 = 0.01, K2 = 0.03, L = 255, population variances.
#[must_use]
pub fn ssim_in_bounding_box(truth: &RgbImage, fill: &RgbImage, mask: &Mask) -> Option<f64> {
    let [x0, y0, w, h] = mask.bounding_box().map(|v| v as usize);
    if w <= 10 || h <= 10 {
        return None;
    }
    let taps = gaussian_taps();
    let (c1, c2) = ((0.01f64 * 255.0).powi(2), (0.03f64 * 255.0).powi(2));
    let mut total = 0.0;
    for c in 0..3 {
        let plane = |img: &RgbImage| -> Vec<f64> {
            (0..w * h)
                .map(|i| f64::from(img.get_pixel((x0 + i % w) as u32, (y0 + i / w) as u32)[c]))
                .collect()
        };
        let (a, b) = (plane(truth), plane(fill));
        let prod = |p: &[f64], q: &[f64]| p.iter().zip(q).map(|(u, v)| u * v).collect::<Vec<_>>();
        let (mu_a, mu_b) = (filter_valid(&a, w, h, &taps), filter_valid(&b, w, h, &taps));
        let aa = filter_valid(&prod(&a, &a), w, h, &taps);
        let bb = filter_valid(&prod(&b, &b), w, h, &taps);
        let ab = filter_valid(&prod(&a, &b), w, h, &taps);
        let mut sum = 0.0;
        for i in 0..mu_a.len() {
            let (ma, mb) = (mu_a[i], mu_b[i]);
            let (va, vb, cov) = (aa[i] - ma * ma, bb[i] - mb * mb, ab[i] - ma * mb);
            sum += ((2.0 * ma * mb + c1) * (2.0 * cov + c2))
                / ((ma * ma + mb * mb + c1) * (va + vb + c2));
        }
        total += sum / mu_a.len() as f64;
    }
    Some(total / 3.0)
}
