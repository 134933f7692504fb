//! The pictures of a sheet row: thumbnails, the edited shape's outline, dashed boxes around
//! added objects, and the difference heat map with its colour ramp.
//!
//! Invariants: thumbnails keep the source's aspect ratio (shrunk with a box filter, or enlarged
//! by a whole factor); the difference thumbnail is max-pooled, so a changed pixel never averages
//! away and an unchanged area is exactly 0 (one colour, [`heat_colour`]`(0)`); the outline is
//! drawn only on pixels of the shape's inner band.

use std::sync::OnceLock;

use image::{GrayImage, Rgb, RgbImage};

use super::text::blend;
use crate::audit::replay::PairImages;

/// Largest channel difference per pixel, `max_c |a_c − b_c|` in levels (0..=255); `None` when
/// the sizes differ.
pub fn difference_map(original: &RgbImage, edited: &RgbImage) -> Option<GrayImage> {
    if original.dimensions() != edited.dimensions() {
        return None;
    }
    let data = original
        .as_raw()
        .chunks_exact(3)
        .zip(edited.as_raw().chunks_exact(3))
        .map(|(a, b)| {
            (0..3)
                .map(|k| a[k].abs_diff(b[k]))
                .max()
                .expect("three channels")
        })
        .collect();
    Some(GrayImage::from_raw(original.width(), original.height(), data).expect("one value a pixel"))
}

/// Colour of a difference of `d` levels: our own ramp from slate (0, exactly) through blue,
/// teal and amber to cream, on a square-root scale with a jump above 0, so a one-level change
/// is visible and "no change" is a single colour.
pub fn heat_colour(d: u8) -> Rgb<u8> {
    static RAMP: OnceLock<[Rgb<u8>; 256]> = OnceLock::new();
    RAMP.get_or_init(|| {
        const STOPS: [(f32, [f32; 3]); 5] = [
            (0.0, [30.0, 34.0, 46.0]),
            (0.3, [44.0, 82.0, 150.0]),
            (0.55, [24.0, 152.0, 150.0]),
            (0.8, [238.0, 178.0, 54.0]),
            (1.0, [255.0, 248.0, 228.0]),
        ];
        std::array::from_fn(|i| {
            if i == 0 {
                return Rgb([30, 34, 46]);
            }
            let t = 0.16 + 0.84 * (i as f32 / 255.0).sqrt();
            let k = STOPS.windows(2).position(|w| t <= w[1].0).unwrap_or(3);
            let ((t0, c0), (t1, c1)) = (STOPS[k], STOPS[k + 1]);
            let f = ((t - t0) / (t1 - t0)).clamp(0.0, 1.0);
            Rgb(std::array::from_fn(|c| {
                (c0[c] + f * (c1[c] - c0[c])).round() as u8
            }))
        })
    })[d as usize]
}

/// How an image of `src` pixels maps onto a thumbnail at most `max_px` on its longer side:
/// shrunk to fit, or enlarged by a whole factor (so small test images stay crisp).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Thumb {
    pub src_width: u32,
    pub src_height: u32,
    pub width: u32,
    pub height: u32,
}

impl Thumb {
    pub fn fit(src_width: u32, src_height: u32, max_px: u32) -> Thumb {
        let longer = src_width.max(src_height).max(1);
        let (width, height) = if longer <= max_px {
            let k = max_px / longer;
            (src_width * k, src_height * k)
        } else {
            let s = max_px as f64 / longer as f64;
            (
                ((src_width as f64 * s).round() as u32).max(1),
                ((src_height as f64 * s).round() as u32).max(1),
            )
        };
        Thumb {
            src_width,
            src_height,
            width,
            height,
        }
    }

    fn span(t: u32, thumb: u32, src: u32) -> (u32, u32) {
        let a = (t as u64 * src as u64 / thumb as u64) as u32;
        let b = ((t as u64 + 1) * src as u64 / thumb as u64) as u32;
        (a, b.max(a + 1).min(src))
    }

    /// Source pixels `[x0, x1) × [y0, y1)` that thumbnail pixel `(tx, ty)` stands for.
    pub fn source_span(&self, tx: u32, ty: u32) -> ((u32, u32), (u32, u32)) {
        (
            Thumb::span(tx, self.width, self.src_width),
            Thumb::span(ty, self.height, self.src_height),
        )
    }

    /// Calls `f(x_span, y_span)` for every thumbnail pixel in row-major order (spans computed
    /// once per column and row: the divisions dominated otherwise).
    fn for_each_span(&self, mut f: impl FnMut((usize, usize), (usize, usize))) {
        let table = |n: u32, src: u32| -> Vec<(usize, usize)> {
            (0..n)
                .map(|t| {
                    let (a, b) = Thumb::span(t, n, src);
                    (a as usize, b as usize)
                })
                .collect()
        };
        let xs = table(self.width, self.src_width);
        for ty in table(self.height, self.src_height) {
            for &tx in &xs {
                f(tx, ty);
            }
        }
    }

    /// Box-filtered (mean) thumbnail of an RGB image of the source size.
    pub(crate) fn shrink_rgb(&self, image: &RgbImage) -> RgbImage {
        let (raw, w) = (image.as_raw(), self.src_width as usize);
        let mut out = Vec::with_capacity((self.width * self.height * 3) as usize);
        self.for_each_span(|(x0, x1), (y0, y1)| {
            let mut sum = [0u32; 3];
            for y in y0..y1 {
                for px in raw[3 * (y * w + x0)..3 * (y * w + x1)].chunks_exact(3) {
                    sum[0] += px[0] as u32;
                    sum[1] += px[1] as u32;
                    sum[2] += px[2] as u32;
                }
            }
            let n = ((x1 - x0) * (y1 - y0)) as u32;
            out.extend(sum.map(|s| ((s + n / 2) / n) as u8));
        });
        RgbImage::from_raw(self.width, self.height, out).expect("three values a pixel")
    }

    /// Max-pooled thumbnail of a difference map: a changed pixel never averages away.
    pub fn shrink_max(&self, map: &GrayImage) -> GrayImage {
        let (raw, w) = (map.as_raw(), self.src_width as usize);
        let mut out = Vec::with_capacity((self.width * self.height) as usize);
        self.for_each_span(|(x0, x1), (y0, y1)| {
            let m = (y0..y1)
                .flat_map(|y| raw[y * w + x0..y * w + x1].iter().copied())
                .max()
                .unwrap_or(0);
            out.push(m);
        });
        GrayImage::from_raw(self.width, self.height, out).expect("one value a pixel")
    }

    /// Thumbnail pixels that stand for at least one inside pixel of `mask`.
    fn shrink_any(&self, mask: &[bool]) -> Vec<bool> {
        let w = self.src_width as usize;
        let mut out = Vec::with_capacity((self.width * self.height) as usize);
        self.for_each_span(|(x0, x1), (y0, y1)| {
            out.push((y0..y1).any(|y| mask[y * w + x0..y * w + x1].contains(&true)));
        });
        out
    }
}

/// The inner band of a region: inside pixels whose Chebyshev distance to a pixel outside the
/// region (or outside the image) is at most `thickness_px`. Row-major, `width × height`.
pub fn outline_band(inside: &[bool], width: u32, height: u32, thickness_px: u32) -> Vec<bool> {
    let (w, h, t) = (width as i64, height as i64, thickness_px as i64);
    let at = |x: i64, y: i64| x >= 0 && y >= 0 && x < w && y < h && inside[(y * w + x) as usize];
    let mut out = vec![false; inside.len()];
    for y in 0..h {
        for x in 0..w {
            if at(x, y) {
                out[(y * w + x) as usize] =
                    (-t..=t).any(|dy| (-t..=t).any(|dx| !at(x + dx, y + dy)));
            }
        }
    }
    out
}

/// Colour of the edited shape's outline: magenta, rare in photographs and in the fruit palette.
pub const SHAPE_OUTLINE: Rgb<u8> = Rgb([236, 28, 196]);
/// Colour of the dashed boxes around objects a duplicate added.
pub const ADDED_OUTLINE: Rgb<u8> = Rgb([0, 196, 255]);
const HALO: Rgb<u8> = Rgb([16, 16, 20]);
const OUTLINE_PX: u32 = 2;

/// The three pictures of a row at thumbnail size.
pub struct RowPictures {
    pub thumb: Thumb,
    pub original: RgbImage,
    /// The edited image with the shape outlined and added objects boxed.
    pub edited: RgbImage,
    /// Max-pooled difference map (levels) behind `heat`.
    pub difference: GrayImage,
    pub heat: RgbImage,
    /// Thumbnail pixels painted as the shape's outline (row-major).
    pub outline: Vec<bool>,
}

/// Thumbnails of a pair's images, the outline of the edited shape (`PairImages::shape`), dashed
/// boxes around `added_regions` and the difference heat map. `None` when the two images differ in
/// size.
pub fn row_pictures(
    images: &PairImages,
    added_regions: &[[u32; 4]],
    max_px: u32,
) -> Option<RowPictures> {
    let full_difference = difference_map(&images.original, &images.edited)?;
    let (w, h) = images.original.dimensions();
    let thumb = Thumb::fit(w, h, max_px);
    let original = thumb.shrink_rgb(&images.original);
    let mut edited = thumb.shrink_rgb(&images.edited);
    let difference = thumb.shrink_max(&full_difference);
    let heat = RgbImage::from_fn(thumb.width, thumb.height, |x, y| {
        heat_colour(difference.get_pixel(x, y).0[0])
    });
    let shape = &images.shape;
    let inside = if shape.width() == w && shape.height() == h {
        thumb.shrink_any(shape.as_slice())
    } else {
        vec![false; (thumb.width * thumb.height) as usize]
    };
    let outline = outline_band(&inside, thumb.width, thumb.height, OUTLINE_PX);
    // A one-pixel dark halo just outside the band keeps it visible on magenta-ish content.
    let halo = halo_of(&inside, thumb.width, thumb.height);
    for (i, p) in edited.pixels_mut().enumerate() {
        if outline[i] {
            *p = SHAPE_OUTLINE;
        } else if halo[i] {
            blend(p, HALO, 170);
        }
    }
    for b in added_regions {
        let sx = thumb.width as f64 / w as f64;
        let sy = thumb.height as f64 / h as f64;
        let x0 = (b[0] as f64 * sx).floor() as i32;
        let y0 = (b[1] as f64 * sy).floor() as i32;
        let x1 = ((b[0] + b[2]) as f64 * sx).ceil() as i32;
        let y1 = ((b[1] + b[3]) as f64 * sy).ceil() as i32;
        dashed_rect(
            &mut edited,
            x0 - 1,
            y0 - 1,
            x1 - x0 + 2,
            y1 - y0 + 2,
            ADDED_OUTLINE,
        );
    }
    Some(RowPictures {
        thumb,
        original,
        edited,
        difference,
        heat,
        outline,
    })
}

/// Pixels outside the region that touch an inside pixel (8-neighbourhood).
fn halo_of(inside: &[bool], width: u32, height: u32) -> Vec<bool> {
    let (w, h) = (width as i64, height as i64);
    let mut out = vec![false; inside.len()];
    for y in 0..h {
        for x in 0..w {
            if !inside[(y * w + x) as usize] {
                continue;
            }
            for (dx, dy) in (-1..=1).flat_map(|dy| (-1..=1).map(move |dx| (dx, dy))) {
                let (nx, ny) = (x + dx, y + dy);
                if nx >= 0 && ny >= 0 && nx < w && ny < h && !inside[(ny * w + nx) as usize] {
                    out[(ny * w + nx) as usize] = true;
                }
            }
        }
    }
    out
}

pub(crate) fn dashed_rect(image: &mut RgbImage, x: i32, y: i32, w: i32, h: i32, colour: Rgb<u8>) {
    let (iw, ih) = (image.width() as i32, image.height() as i32);
    let mut put = |px: i32, py: i32, k: i32| {
        if k % 9 < 6 {
            for (qx, qy) in [(px, py), (px + 1, py), (px, py + 1)] {
                if qx >= 0 && qy >= 0 && qx < iw && qy < ih {
                    image.put_pixel(qx as u32, qy as u32, colour);
                }
            }
        }
    };
    for k in 0..w {
        put(x + k, y, k);
        put(x + k, y + h - 1, k);
    }
    for k in 0..h {
        put(x, y + k, k);
        put(x + w - 1, y + k, k);
    }
}
