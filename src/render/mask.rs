//! Binary region masks in image coordinates.
//!
//! Invariant: a [`Mask`] is never empty and always has the size of the image it belongs to,
//! so every stage after `spec/` can index pixels without bounds checks on the region.

use image::GrayImage;

/// A non-empty binary mask the size of its image; `true` marks pixels inside the region.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Mask {
    width: u32,
    height: u32,
    inside: Vec<bool>,
    n_inside: usize,
}

impl Mask {
    /// Builds a mask from a row-major `inside` vector; `None` when the sizes disagree or no pixel is set.
    pub fn from_vec(width: u32, height: u32, inside: Vec<bool>) -> Option<Mask> {
        if inside.len() != width as usize * height as usize {
            return None;
        }
        let n_inside = inside.iter().filter(|&&b| b).count();
        (n_inside > 0).then_some(Mask {
            width,
            height,
            inside,
            n_inside,
        })
    }

    /// Pixels with a non-zero value are inside.
    pub fn from_gray(gray: &GrayImage) -> Option<Mask> {
        let inside = gray.as_raw().iter().map(|&v| v != 0).collect();
        Mask::from_vec(gray.width(), gray.height(), inside)
    }

    /// Builds a mask from a predicate on pixel coordinates; `None` when no pixel is inside.
    pub fn from_fn(width: u32, height: u32, inside: impl Fn(u32, u32) -> bool) -> Option<Mask> {
        let v = (0..height)
            .flat_map(|y| (0..width).map(move |x| (x, y)))
            .map(|(x, y)| inside(x, y))
            .collect();
        Mask::from_vec(width, height, v)
    }

    /// The mask moved by `(dx, dy)` pixels; `None` if any inside pixel would leave the image.
    pub fn translate(&self, dx: i64, dy: i64) -> Option<Mask> {
        let (w, h) = (self.width as i64, self.height as i64);
        let mut inside = vec![false; self.inside.len()];
        for y in 0..h {
            for x in 0..w {
                if self.inside[(y * w + x) as usize] {
                    let (nx, ny) = (x + dx, y + dy);
                    if nx < 0 || ny < 0 || nx >= w || ny >= h {
                        return None;
                    }
                    inside[(ny * w + nx) as usize] = true;
                }
            }
        }
        Mask::from_vec(self.width, self.height, inside)
    }

    pub fn width(&self) -> u32 {
        self.width
    }

    pub fn height(&self) -> u32 {
        self.height
    }

    /// Number of pixels inside the region.
    pub fn n_inside(&self) -> usize {
        self.n_inside
    }

    /// Fraction of the image covered by the region, in [0, 1].
    pub fn area_fraction(&self) -> f64 {
        self.n_inside as f64 / (self.width as f64 * self.height as f64)
    }

    #[inline]
    pub fn contains(&self, x: u32, y: u32) -> bool {
        x < self.width && y < self.height && self.inside[(y * self.width + x) as usize]
    }

    /// Row-major view of the mask.
    pub fn as_slice(&self) -> &[bool] {
        &self.inside
    }

    /// Smallest box `[x, y, w, h]` holding every inside pixel.
    pub fn bounding_box(&self) -> [u32; 4] {
        let (mut x0, mut y0, mut x1, mut y1) = (u32::MAX, u32::MAX, 0, 0);
        for y in 0..self.height {
            for x in 0..self.width {
                if self.inside[(y * self.width + x) as usize] {
                    x0 = x0.min(x);
                    y0 = y0.min(y);
                    x1 = x1.max(x);
                    y1 = y1.max(y);
                }
            }
        }
        [x0, y0, x1 - x0 + 1, y1 - y0 + 1]
    }

    /// Pixel-wise union; `None` when sizes differ.
    pub fn union(&self, other: &Mask) -> Option<Mask> {
        if self.width != other.width || self.height != other.height {
            return None;
        }
        let inside = self
            .inside
            .iter()
            .zip(&other.inside)
            .map(|(&a, &b)| a || b)
            .collect();
        Mask::from_vec(self.width, self.height, inside)
    }

    /// Grows the mask by a Euclidean disc of `radius_px` pixels (a pixel joins when its centre lies
    /// within `radius_px` of an inside pixel's centre). Radius 0 returns a copy.
    #[must_use]
    pub fn dilate(&self, radius_px: u32) -> Mask {
        if radius_px == 0 {
            return self.clone();
        }
        let r = radius_px as i64;
        let (w, h) = (self.width as i64, self.height as i64);
        let offsets: Vec<(i64, i64)> = (-r..=r)
            .flat_map(|dy| (-r..=r).map(move |dx| (dx, dy)))
            .filter(|(dx, dy)| dx * dx + dy * dy <= r * r)
            .collect();
        let mut inside = self.inside.clone();
        for y in 0..h {
            for x in 0..w {
                if !self.inside[(y * w + x) as usize] {
                    continue;
                }
                for &(dx, dy) in &offsets {
                    let (nx, ny) = (x + dx, y + dy);
                    if nx >= 0 && ny >= 0 && nx < w && ny < h {
                        inside[(ny * w + nx) as usize] = true;
                    }
                }
            }
        }
        Mask::from_vec(self.width, self.height, inside)
            .expect("dilating a non-empty mask keeps it non-empty")
    }

    /// 255 inside, 0 outside.
    pub fn to_gray(&self) -> GrayImage {
        let raw = self
            .inside
            .iter()
            .map(|&b| if b { 255 } else { 0 })
            .collect();
        GrayImage::from_raw(self.width, self.height, raw)
            .expect("mask buffer has width*height pixels")
    }
}

/// Squared distances at or above this count as "no outside pixel" (stand-in for infinity that
/// keeps the arithmetic finite).
const FAR_SQ: f64 = 1e20;

impl Mask {
    /// Euclidean distance from each pixel centre to the nearest pixel centre outside the mask,
    /// row-major: 0 outside, ≥ 1 inside, infinite when the mask covers the whole image.
    ///
    /// Exact, in linear time: the lower envelope of parabolas, first down the columns, then along
    /// the rows.
    ///
    /// # References
    /// P. F. Felzenszwalb, D. P. Huttenlocher, "Distance Transforms of Sampled Functions", Theory of
    /// Computing 8, 2012.
    #[must_use]
    pub fn distance_to_outside(&self) -> Vec<f64> {
        let mask = self;
        let (w, h) = (mask.width() as usize, mask.height() as usize);
        let mut out = vec![0.0; w * h];
        // Only the mask's bounding box grown by one pixel needs the transform: that frame is outside
        // the mask (or beyond the image), and clamping any farther outside pixel onto it comes no
        // farther from a pixel in the box.
        let [bx, by, bw, bh] = mask.bounding_box().map(|v| v as usize);
        let (x0, y0) = (bx.saturating_sub(1), by.saturating_sub(1));
        let (x1, y1) = ((bx + bw + 1).min(w), (by + bh + 1).min(h));
        let (cw, ch) = (x1 - x0, y1 - y0);
        let inside = mask.as_slice();
        let mut sq: Vec<f64> = (0..cw * ch)
            .map(|i| {
                let (x, y) = (x0 + i % cw, y0 + i / cw);
                if inside[y * w + x] {
                    FAR_SQ
                } else {
                    0.0
                }
            })
            .collect();
        let mut scratch = Envelope::new(cw.max(ch));
        let mut line = vec![0.0; cw.max(ch)];
        for x in 0..cw {
            for y in 0..ch {
                line[y] = sq[y * cw + x];
            }
            scratch.transform(&mut line[..ch]);
            for y in 0..ch {
                sq[y * cw + x] = line[y];
            }
        }
        for y in 0..ch {
            scratch.transform(&mut sq[y * cw..(y + 1) * cw]);
        }
        for (i, d) in sq.into_iter().enumerate() {
            let (x, y) = (x0 + i % cw, y0 + i / cw);
            out[y * w + x] = if d >= FAR_SQ * 0.5 {
                f64::INFINITY
            } else {
                d.sqrt()
            };
        }
        out
    }
}

/// Work space for the one-dimensional squared-distance transform.
struct Envelope {
    /// Positions of the parabolas in the lower envelope.
    vertex: Vec<usize>,
    /// Boundaries between consecutive parabolas.
    bound: Vec<f64>,
    result: Vec<f64>,
}

impl Envelope {
    fn new(n: usize) -> Envelope {
        Envelope {
            vertex: vec![0; n.max(1)],
            bound: vec![0.0; n.max(1) + 1],
            result: vec![0.0; n.max(1)],
        }
    }

    /// In place: f[q] ← min over p of (q − p)² + f[p].
    fn transform(&mut self, f: &mut [f64]) {
        let n = f.len();
        if n == 0 {
            return;
        }
        let (v, z) = (&mut self.vertex, &mut self.bound);
        let mut k = 0usize;
        v[0] = 0;
        z[0] = f64::NEG_INFINITY;
        z[1] = f64::INFINITY;
        let sq = |q: usize| (q * q) as f64;
        let intersect =
            |q: usize, p: usize| ((f[q] + sq(q)) - (f[p] + sq(p))) / (2.0 * (q - p) as f64);
        for q in 1..n {
            let mut s = intersect(q, v[k]);
            // z[0] = −∞ stops the walk back for any finite s; `k > 0` keeps it safe regardless.
            while k > 0 && s <= z[k] {
                k -= 1;
                s = intersect(q, v[k]);
            }
            k += 1;
            v[k] = q;
            z[k] = s;
            z[k + 1] = f64::INFINITY;
        }
        let mut k = 0usize;
        for q in 0..n {
            while z[k + 1] < q as f64 {
                k += 1;
            }
            let p = v[k];
            let d = q as f64 - p as f64;
            self.result[q] = d * d + f[p];
        }
        f.copy_from_slice(&self.result[..n]);
    }
}

#[cfg(test)]
mod mask_tests {
    use super::*;

    #[test]
    fn translate_moves_pixels_and_refuses_to_leave_the_image() {
        // One pixel at (1, 2) in a 4x4 image, worked by hand.
        let m = Mask::from_fn(4, 4, |x, y| (x, y) == (1, 2)).unwrap();
        let moved = m.translate(2, -1).unwrap();
        assert!(moved.contains(3, 1) && moved.n_inside() == 1);
        assert!(m.translate(3, 0).is_none());
        assert!(m.translate(0, -3).is_none());
    }
}
