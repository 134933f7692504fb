//! Telea inpainting: fill a hole pixel by pixel, marching inward from its edge in order of
//! distance, each new pixel a weighted mean of the known pixels around it.
//!
//! Follows OpenCV's `cv::inpaint(..., INPAINT_TELEA)` step for step (same visiting order, same
//! weights, same single-precision arithmetic) so results agree to the level, including OpenCV's
//! quirks (noted where they happen). Checked against fixtures made by
//! `tools/fixtures/telea_opencv.py` in `tests/telea_opencv.rs`.

use std::cmp::Reverse;
use std::collections::BinaryHeap;

use image::RgbImage;

use super::mask::Mask;

/// Parameters of [`inpaint_telea`].
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TeleaParams {
    /// Radius of the neighbourhood each filled pixel is taken from, in pixels. As in OpenCV it is
    /// rounded to an integer (ties to even) and clamped to 1..=100; NaN counts as 1.
    pub radius_px: f32,
}

/// Cell states on the padded grid. Each march only asks "is this cell still unknown to me?".
const KNOWN: u8 = 0;
/// Inside the hole and not filled yet.
const HOLE: u8 = 2;
/// Outside the hole, within the radius of it, not yet reached by the outward march.
const RING: u8 = 3;
/// Distance of cells no march has reached (OpenCV's initial value).
const FAR: f32 = 1.0e6;

/// Fills the pixels inside `mask` from their surroundings with Telea's fast-marching method.
///
/// Pixels outside the mask are returned bit-identical. Hole pixels with no known pixel to march
/// from (the mask covers the whole image) keep their input values, as in OpenCV. Mask pixels
/// beyond the image are ignored. Work is limited to the hole's bounding box plus the radius.
///
/// # References
/// A. Telea, "An Image Inpainting Technique Based on the Fast Marching Method",
/// Journal of Graphics Tools 9(1), 2004.
#[must_use]
pub fn inpaint_telea(image: &RgbImage, mask: &Mask, params: &TeleaParams) -> RgbImage {
    let mut out = image.clone();
    let (w, h) = (image.width() as usize, image.height() as usize);
    let inside = |x: usize, y: usize| mask.contains(x as u32, y as u32);
    let Some([x0, y0, x1, y1]) = hole_bounds(w, h, &inside) else {
        return out;
    };
    let r = clamp_radius(params.radius_px);
    // Nothing farther than r + 1 from the hole is read, so a crop with this margin gives the
    // same result as the whole image.
    let margin = r + 2;
    let crop = Crop {
        x0: x0.saturating_sub(margin),
        y0: y0.saturating_sub(margin),
        x1: (x1 + margin).min(w - 1),
        y1: (y1 + margin).min(h - 1),
    };
    let mut grid = Grid::new(image, &crop, &inside);
    grid.fill(r);
    for y in crop.y0..=crop.y1 {
        for x in crop.x0..=crop.x1 {
            if inside(x, y) {
                let at = ((y - crop.y0 + 1) * grid.pw + (x - crop.x0 + 1)) * 3;
                let rgb = [grid.img[at], grid.img[at + 1], grid.img[at + 2]];
                out.put_pixel(x as u32, y as u32, image::Rgb(rgb));
            }
        }
    }
    out
}

/// OpenCV: `cvRound(radius)` clamped to 1..=100.
fn clamp_radius(radius_px: f32) -> usize {
    // `as` saturates and maps NaN to 0, which the clamp turns into 1.
    (radius_px.round_ties_even() as i64).clamp(1, 100) as usize
}

/// `[x0, y0, x1, y1]` (inclusive) of the hole pixels inside the image, if any.
fn hole_bounds(w: usize, h: usize, inside: &impl Fn(usize, usize) -> bool) -> Option<[usize; 4]> {
    let mut b: Option<[usize; 4]> = None;
    for y in 0..h {
        for x in 0..w {
            if inside(x, y) {
                b = Some(match b {
                    None => [x, y, x, y],
                    Some([a, c, d, e]) => [a.min(x), c.min(y), d.max(x), e.max(y)],
                });
            }
        }
    }
    b
}

/// Inclusive image rectangle the algorithm runs on.
struct Crop {
    x0: usize,
    y0: usize,
    x1: usize,
    y1: usize,
}

/// Min-queue of cells by distance, first-in first-out among equal distances (as OpenCV's
/// queue, which keeps insertion order among equal distances).
struct MarchQueue {
    /// Key: distance order in the high 32 bits, push count in the low 32 (ties stay FIFO
    /// for the first 2^32 pushes, far beyond any image that fits in memory).
    heap: BinaryHeap<Reverse<(u64, usize)>>,
    seq: u32,
}

impl MarchQueue {
    fn new() -> Self {
        MarchQueue {
            heap: BinaryHeap::new(),
            seq: 0,
        }
    }

    fn push(&mut self, t: f32, cell: usize) {
        let key = (u64::from(order_key(t)) << 32) | u64::from(self.seq);
        self.heap.push(Reverse((key, cell)));
        self.seq = self.seq.wrapping_add(1);
    }

    fn pop(&mut self) -> Option<usize> {
        self.heap.pop().map(|Reverse((_, cell))| cell)
    }
}

/// Maps a float to an unsigned key with the same order (-0 and +0 equal).
fn order_key(t: f32) -> u32 {
    let bits = (t + 0.0).to_bits();
    if bits >> 31 == 1 {
        !bits
    } else {
        bits | 0x8000_0000
    }
}

/// For one padded row (or column) index: the padded rows the image gradient of a known pixel
/// there reads. Normally k-1, k, k+1; on the first and last image row OpenCV shifts them one
/// row inward, kept so results match. Clamped so 1-pixel-wide images stay in bounds.
#[derive(Clone, Copy, Default)]
struct Taps {
    centre: usize,
    before: usize,
    after: usize,
    after_inner: usize,
}

/// Taps for padded indices `0..n + 2` over an image side of `n` pixels.
fn taps(n: usize) -> Vec<Taps> {
    let last = n as isize - 1;
    let c = |v: isize| v.clamp(0, last.max(0)) as usize + 1;
    (0..n as isize + 2)
        .map(|k| {
            let km = k - 1 + isize::from(k == 1);
            let kp = k - 1 - isize::from(k == n as isize);
            Taps {
                centre: c(km),
                before: c(km - 1),
                after: c(kp + 1),
                after_inner: c(kp),
            }
        })
        .collect()
}

/// One neighbourhood offset with its distance weight `1 / |r|^3` (`r` points from the
/// neighbour to the pixel being filled).
struct Offset {
    dk: isize,
    dl: isize,
    /// `dk * pw + dl` on the padded grid.
    delta: isize,
    rx: f32,
    ry: f32,
    dst: f32,
}

/// The disc of radius `r` without its centre, in raster order (OpenCV's summation order).
fn offsets(r: usize, pw: usize) -> Vec<Offset> {
    let (r, pw) = (r as isize, pw as isize);
    let mut v = Vec::new();
    for dk in -r..=r {
        for dl in -r..=r {
            if (dk, dl) != (0, 0) && dk * dk + dl * dl <= r * r {
                let len = f64::from((dl * dl + dk * dk) as f32);
                let dst = (1.0 / (len * len.sqrt())) as f32;
                let (rx, ry) = (-dl as f32, -dk as f32);
                v.push(Offset {
                    dk,
                    dl,
                    delta: dk * pw + dl,
                    rx,
                    ry,
                    dst,
                });
            }
        }
    }
    v
}

/// Sums of one fill: weighted colour, the two gradient terms per channel, and the weight.
struct Sums {
    ia: [f32; 3],
    jx: [f32; 3],
    jy: [f32; 3],
    s: f32,
}

/// The crop padded by one known cell on every side (OpenCV's layout): cell `k * pw + l` is
/// crop pixel `(l - 1, k - 1)`. The image is stored in the same layout, 3 bytes per cell.
struct Grid {
    pw: usize,
    ph: usize,
    state: Vec<u8>,
    /// Arrival distance; negative outside the hole after the outward march.
    t: Vec<f32>,
    /// RGB per cell, filled in place; the padding cells are never read.
    img: Vec<u8>,
    rows: Vec<Taps>,
    cols: Vec<Taps>,
}

impl Grid {
    fn new(image: &RgbImage, crop: &Crop, inside: &impl Fn(usize, usize) -> bool) -> Self {
        let (cw, ch) = (crop.x1 - crop.x0 + 1, crop.y1 - crop.y0 + 1);
        let (pw, ph) = (cw + 2, ch + 2);
        let mut state = vec![KNOWN; pw * ph];
        let mut img = vec![0u8; pw * ph * 3];
        let (raw, iw) = (image.as_raw(), image.width() as usize);
        for y in 0..ch {
            let src = ((crop.y0 + y) * iw + crop.x0) * 3;
            let dst = ((y + 1) * pw + 1) * 3;
            img[dst..dst + cw * 3].copy_from_slice(&raw[src..src + cw * 3]);
            for x in 0..cw {
                if inside(crop.x0 + x, crop.y0 + y) {
                    state[(y + 1) * pw + x + 1] = HOLE;
                }
            }
        }
        let t = vec![FAR; pw * ph];
        Grid {
            pw,
            ph,
            state,
            t,
            img,
            rows: taps(ch),
            cols: taps(cw),
        }
    }

    fn fill(&mut self, r: usize) {
        // Band: known cells 4-touching the hole, distance 0, queued in raster order.
        let pw = self.pw;
        let mut band = Vec::new();
        for k in 1..self.ph - 1 {
            for cell in k * pw + 1..(k + 1) * pw - 1 {
                if self.state[cell] != HOLE
                    && [cell - pw, cell - 1, cell + 1, cell + pw]
                        .iter()
                        .any(|&n| self.state[n] == HOLE)
                {
                    band.push(cell);
                    self.t[cell] = 0.0;
                }
            }
        }
        self.mark_ring(r);
        self.march_outward(&band);
        self.march_inward(&band, r);
    }

    /// Marks as RING the known interior cells within the (2r+1)² square of a hole cell, minus
    /// the band (OpenCV dilates with a square, not a disc).
    fn mark_ring(&mut self, r: usize) {
        let (pw, ph) = (self.pw, self.ph);
        // Distance along the row to the nearest hole cell, capped at r + 1.
        let cap = r + 1;
        let mut horiz = vec![cap; pw * ph];
        for k in 0..ph {
            let row = k * pw;
            let mut d = cap;
            for l in 0..pw {
                d = if self.state[row + l] == HOLE {
                    0
                } else {
                    (d + 1).min(cap)
                };
                horiz[row + l] = d;
            }
            d = cap;
            for l in (0..pw).rev() {
                d = if self.state[row + l] == HOLE {
                    0
                } else {
                    (d + 1).min(cap)
                };
                horiz[row + l] = horiz[row + l].min(d);
            }
        }
        // A cell is in the square when some cell within r rows has a row distance <= r.
        let mut near_above = vec![false; ph];
        for l in 1..pw - 1 {
            let mut last_near: Option<usize> = None;
            for (k, flag) in near_above.iter_mut().enumerate() {
                if horiz[k * pw + l] <= r {
                    last_near = Some(k);
                }
                *flag = last_near.is_some_and(|j| k - j <= r);
            }
            let mut next_near: Option<usize> = None;
            for k in (1..ph - 1).rev() {
                if horiz[k * pw + l] <= r {
                    next_near = Some(k);
                }
                let near = near_above[k] || next_near.is_some_and(|j| j - k <= r);
                let cell = k * pw + l;
                if near && self.state[cell] == KNOWN && self.t[cell] != 0.0 {
                    self.state[cell] = RING;
                }
            }
        }
    }

    /// Distances outward from the band over the ring, stored negated: the level-set weight
    /// then sees known pixels farther from the hole as farther in T too.
    fn march_outward(&mut self, band: &[usize]) {
        let pw = self.pw;
        let mut queue = MarchQueue::new();
        let mut reached = Vec::with_capacity(band.len());
        for &cell in band {
            queue.push(0.0, cell);
        }
        while let Some(cell) = queue.pop() {
            reached.push(cell);
            for n in [cell - pw, cell - 1, cell + pw, cell + 1] {
                if self.state[n] == RING {
                    let d = self.arrival(n, RING);
                    self.t[n] = d;
                    self.state[n] = KNOWN;
                    queue.push(d, n);
                }
            }
        }
        for cell in reached {
            self.t[cell] = -self.t[cell];
        }
        for s in &mut self.state {
            if *s == RING {
                *s = KNOWN;
            }
        }
    }

    /// The fill: each unknown neighbour (up, left, down, right) of the nearest band cell is
    /// solved once, painted at once, and joins the band.
    fn march_inward(&mut self, band: &[usize], r: usize) {
        let pw = self.pw;
        let offs = offsets(r, pw);
        let mut queue = MarchQueue::new();
        for &cell in band {
            queue.push(0.0, cell);
        }
        while let Some(cell) = queue.pop() {
            for n in [cell - pw, cell - 1, cell + pw, cell + 1] {
                if self.state[n] == HOLE {
                    let d = self.arrival(n, HOLE);
                    self.t[n] = d;
                    self.paint(n, &offs, r);
                    self.state[n] = KNOWN;
                    queue.push(d, n);
                }
            }
        }
    }

    /// First-order eikonal update from the four neighbour pairs, in double precision; cells in
    /// state `unknown` do not count as solved.
    fn arrival(&self, cell: usize, unknown: u8) -> f32 {
        let pw = self.pw;
        let pair = |a: usize, b: usize| -> f32 {
            let (ta, tb) = (f64::from(self.t[a]), f64::from(self.t[b]));
            let sol = match (self.state[a] != unknown, self.state[b] != unknown) {
                (true, true) if (ta - tb).abs() >= 1.0 => 1.0 + ta.min(tb),
                (true, true) => (ta + tb + (2.0 - (ta - tb) * (ta - tb)).sqrt()) * 0.5,
                (true, false) => 1.0 + ta,
                (false, true) => 1.0 + tb,
                (false, false) => 1.0 + ta.min(tb),
            };
            sol as f32
        };
        let (up, down, left, right) = (cell - pw, cell + pw, cell - 1, cell + 1);
        pair(up, left)
            .min(pair(down, left))
            .min(pair(up, right).min(pair(down, right)))
    }

    /// Paints the freshly solved hole cell: Telea's weighted mean of the known pixels within
    /// the radius plus the image-gradient term, normalised to unit length.
    fn paint(&mut self, cell: usize, offs: &[Offset], r: usize) {
        let known = |c: usize| self.state[c] != HOLE;
        let (t, tc, pw) = (&self.t, self.t[cell], self.pw);
        // Gradient of T at the cell, one-sided where a neighbour is still unknown.
        let grad = |a: usize, b: usize| match (known(b), known(a)) {
            (true, true) => (t[b] - t[a]) * 0.5,
            (true, false) => t[b] - tc,
            (false, true) => tc - t[a],
            (false, false) => 0.0,
        };
        let gt = (grad(cell - 1, cell + 1), grad(cell - pw, cell + pw));
        let (i, j) = (cell / pw, cell % pw);
        // Away from the image edge no bounds checks and no shifted gradient taps are needed.
        let plain = i >= r + 2 && j >= r + 2 && i + r + 3 <= self.ph && j + r + 3 <= pw;
        let sums = if plain {
            self.sums::<false>(cell, offs, gt)
        } else {
            self.sums::<true>(cell, offs, gt)
        };
        for c in 0..3 {
            let (jx, jy) = (sums.jx[c], sums.jy[c]);
            let sat = sums.ia[c] / sums.s + (jx + jy) / ((jx * jx + jy * jy).sqrt() + 1.0e-20);
            // OpenCV adds 0.5 in double, rounds half to even and saturates; NaN becomes 0.
            self.img[cell * 3 + c] = (f64::from(sat) + 0.5).round_ties_even() as u8;
        }
    }

    /// The sums over the neighbourhood of `cell`, in OpenCV's order and precision. `EDGE`
    /// handles windows reaching the first or last image row or column.
    fn sums<const EDGE: bool>(&self, cell: usize, offs: &[Offset], gt: (f32, f32)) -> Sums {
        let (pw, ph) = (self.pw as isize, self.ph as isize);
        let (state, t, img) = (&self.state, &self.t, &self.img);
        let known = |c: usize| state[c] != HOLE;
        let tc = t[cell];
        let (i, j) = ((cell / self.pw) as isize, (cell % self.pw) as isize);
        let mut sums = Sums {
            ia: [0.0; 3],
            jx: [0.0; 3],
            jy: [0.0; 3],
            s: 1.0e-20,
        };
        for o in offs {
            let q = if EDGE {
                let (k, l) = (i + o.dk, j + o.dl);
                if k <= 0 || l <= 0 || k >= ph - 1 || l >= pw - 1 {
                    continue;
                }
                (k * pw + l) as usize
            } else {
                cell.wrapping_add_signed(o.delta)
            };
            if !known(q) {
                continue;
            }
            let lev = (1.0 / (1.0 + f64::from((t[q] - tc).abs()))) as f32;
            let mut dir = o.rx * gt.0 + o.ry * gt.1;
            if f64::from(dir.abs()) <= 0.01 {
                dir = 1.0e-6;
            }
            let w = (o.dst * lev * dir).abs();
            // Cells the image gradient at q reads: rows (centre, before, after, after_inner)
            // as multiples of pw, columns likewise.
            let (rc, rb, ra, ri, cc, cb, ca, ci) = if EDGE {
                let (rt, ct) = (self.rows[q / self.pw], self.cols[q % self.pw]);
                let row = |v: usize| v * self.pw;
                (
                    row(rt.centre),
                    row(rt.before),
                    row(rt.after),
                    row(rt.after_inner),
                    ct.centre,
                    ct.before,
                    ct.after,
                    ct.after_inner,
                )
            } else {
                let (row, col) = (q - q % self.pw, q % self.pw);
                (
                    row,
                    row - self.pw,
                    row + self.pw,
                    row,
                    col,
                    col - 1,
                    col + 1,
                    col,
                )
            };
            // Gradient as (cell a, cell b, scale) = scale * (I[a] - I[b]). OpenCV doubles the
            // central difference (instead of halving it); kept so results match.
            let gx = match (known(q + 1), known(q - 1)) {
                (true, true) => (rc + ca, rc + cb, 2.0),
                (true, false) => (rc + ca, rc + cc, 1.0),
                (false, true) => (rc + ci, rc + cb, 1.0),
                (false, false) => (rc + cc, rc + cc, 0.0),
            };
            let gy = match (known(q + self.pw), known(q - self.pw)) {
                (true, true) => (ra + cc, rb + cc, 2.0),
                (true, false) => (ra + cc, rc + cc, 1.0),
                (false, true) => (ri + cc, rb + cc, 1.0),
                (false, false) => (rc + cc, rc + cc, 0.0),
            };
            let diff = |(a, b, scale): (usize, usize, f32), c: usize| {
                (i32::from(img[a * 3 + c]) - i32::from(img[b * 3 + c])) as f32 * scale
            };
            for c in 0..3 {
                sums.ia[c] += w * f32::from(img[q * 3 + c]);
                sums.jx[c] -= w * (diff(gx, c) * o.rx);
                sums.jy[c] -= w * (diff(gy, c) * o.ry);
            }
            sums.s += w;
        }
        sums
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use image::Rgb;
    use proptest::prelude::*;

    fn mask_from(w: u32, h: u32, f: impl Fn(u32, u32) -> bool) -> Mask {
        Mask::from_fn(w, h, f).expect("test mask is non-empty")
    }

    fn params(r: f32) -> TeleaParams {
        TeleaParams { radius_px: r }
    }

    #[test]
    fn flat_field_stays_flat() {
        let img = RgbImage::from_pixel(12, 10, Rgb([90, 140, 200]));
        let mask = mask_from(12, 10, |x, y| (3..8).contains(&x) && (2..7).contains(&y));
        for r in [1.0, 3.0, 5.0] {
            let out = inpaint_telea(&img, &mask, &params(r));
            for p in out.pixels() {
                for (a, b) in p.0.iter().zip([90u8, 140, 200]) {
                    assert!(a.abs_diff(b) <= 2, "r={r}: {:?}", p.0);
                }
            }
        }
    }

    #[test]
    fn outside_pixels_unchanged_on_literal_image() {
        let img = RgbImage::from_fn(5, 4, |x, y| Rgb([(x * 50) as u8, (y * 60) as u8, 7]));
        let mask = mask_from(5, 4, |x, y| x == 2 && y >= 1);
        let out = inpaint_telea(&img, &mask, &params(3.0));
        for (x, y, p) in img.enumerate_pixels() {
            if !mask.contains(x, y) {
                assert_eq!(out.get_pixel(x, y), p);
            }
        }
        // The hole column lies between columns valued 50 and 150 in red.
        let red = out.get_pixel(2, 2).0[0];
        assert!((50..=150).contains(&red), "red {red}");
    }

    #[test]
    fn degenerate_inputs_do_not_panic() {
        let one = RgbImage::from_pixel(1, 1, Rgb([1, 2, 3]));
        let full = mask_from(1, 1, |_, _| true);
        assert_eq!(inpaint_telea(&one, &full, &params(3.0)), one);
        let img = RgbImage::from_fn(1, 6, |_, y| Rgb([(y * 40) as u8, 0, 0]));
        let m = mask_from(1, 6, |_, y| y != 3);
        let out = inpaint_telea(&img, &m, &params(2.0));
        assert_eq!(out.get_pixel(0, 3), img.get_pixel(0, 3));
        let row = RgbImage::from_pixel(7, 1, Rgb([9, 9, 9]));
        let m = mask_from(7, 1, |x, _| x == 0 || x == 6);
        let filled = inpaint_telea(&row, &m, &params(100.0)).get_pixel(0, 0).0;
        assert!(filled.iter().all(|&v| v.abs_diff(9) <= 2), "{filled:?}");
        // A single known pixel: everything is filled from it. The normalised gradient term
        // (up to ±1.4 per step, as in OpenCV) lets long propagations drift a few levels.
        let img = RgbImage::from_fn(9, 7, |x, y| Rgb([(x * 20) as u8, (y * 30) as u8, 5]));
        let m = mask_from(9, 7, |x, y| (x, y) != (8, 0));
        let out = inpaint_telea(&img, &m, &params(5.0));
        assert_eq!(out.get_pixel(8, 0), img.get_pixel(8, 0));
        let near = |p: &Rgb<u8>| {
            p.0.iter()
                .zip([160u8, 0, 5])
                .all(|(a, b)| a.abs_diff(b) <= 5)
        };
        assert!(out.pixels().all(near));
        // Mask of another size: pixels beyond the image are ignored.
        let small = mask_from(3, 3, |x, y| x == 1 && y == 1);
        let img = RgbImage::from_pixel(6, 6, Rgb([10, 20, 30]));
        let _ = inpaint_telea(&img, &small, &params(f32::NAN));
        let big = mask_from(9, 9, |x, _| x >= 7);
        assert_eq!(inpaint_telea(&img, &big, &params(f32::INFINITY)), img);
    }

    #[test]
    fn radius_rounds_and_clamps_like_opencv() {
        assert_eq!(clamp_radius(2.5), 2);
        assert_eq!(clamp_radius(3.5), 4);
        assert_eq!(clamp_radius(0.0), 1);
        assert_eq!(clamp_radius(-4.0), 1);
        assert_eq!(clamp_radius(f32::NAN), 1);
        assert_eq!(clamp_radius(1.0e9), 100);
    }

    #[test]
    fn queue_is_fifo_among_equal_distances() {
        let mut q = MarchQueue::new();
        for (t, c) in [(1.0, 10), (0.0, 11), (1.0, 12), (-0.0, 13), (0.5, 14)] {
            q.push(t, c);
        }
        let order: Vec<_> = std::iter::from_fn(|| q.pop()).collect();
        assert_eq!(order, vec![11, 13, 14, 10, 12]);
    }

    fn case() -> impl Strategy<Value = (RgbImage, Mask, f32)> {
        (1u32..14, 1u32..14).prop_flat_map(|(w, h)| {
            let n = (w * h) as usize;
            (
                proptest::collection::vec(any::<u8>(), n * 3),
                proptest::collection::vec(any::<bool>(), n),
                0usize..n,
                0.0f32..8.0,
            )
                .prop_map(move |(px, mut inside, forced, r)| {
                    inside[forced] = true;
                    let img = RgbImage::from_raw(w, h, px).expect("sized buffer");
                    (img, Mask::from_vec(w, h, inside).expect("non-empty"), r)
                })
        })
    }

    proptest! {
        #[test]
        fn outside_unchanged_same_size_deterministic((img, mask, r) in case()) {
            let out = inpaint_telea(&img, &mask, &params(r));
            prop_assert_eq!(out.dimensions(), img.dimensions());
            for (x, y, p) in img.enumerate_pixels() {
                if !mask.contains(x, y) {
                    prop_assert_eq!(out.get_pixel(x, y), p);
                }
            }
            prop_assert_eq!(inpaint_telea(&img, &mask, &params(r)), out);
        }
    }
}
