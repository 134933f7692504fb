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
