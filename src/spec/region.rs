//! Turning region shapes into pixel masks once the image size is known.

use std::path::PathBuf;

use super::{Region, Shape};
use crate::imageio;
use crate::render::mask::Mask;

#[derive(Debug, thiserror::Error)]
pub enum RegionError {
    #[error("region {region:?} lies wholly outside the {width}x{height} image (or covers no pixel centre); fix its coordinates")]
    Outside {
        region: String,
        width: u32,
        height: u32,
    },
    #[error("region {region:?}: {source}")]
    MaskLoad {
        region: String,
        source: imageio::ImageLoadError,
    },
    #[error("region {region:?}: mask {path} is {mask_w}x{mask_h} but the image is {width}x{height}; masks must match the upright image")]
    MaskSize {
        region: String,
        path: PathBuf,
        mask_w: u32,
        mask_h: u32,
        width: u32,
        height: u32,
    },
}

/// A region's pixels plus a warning when part of its shape fell outside the image.
#[derive(Debug, Clone)]
pub struct Rasterised {
    pub mask: Mask,
    pub warning: Option<String>,
}

/// Rasterises a region for a `width`×`height` image. Pixels count as inside when their centre
/// `(x + 0.5, y + 0.5)` is inside the shape; shapes reaching past the border are clipped with a warning.
pub fn rasterise(region: &Region, width: u32, height: u32) -> Result<Rasterised, RegionError> {
    let outside = || RegionError::Outside {
        region: region.id.clone(),
        width,
        height,
    };
    let (inside, clipped) = match &region.shape {
        Shape::Box([x, y, w, h]) => {
            let clipped = *x < 0.0 || *y < 0.0 || x + w > width as f64 || y + h > height as f64;
            let mut inside = vec![false; width as usize * height as usize];
            let (cx0, cx1) = centre_range(*x, x + w, width);
            let (cy0, cy1) = centre_range(*y, y + h, height);
            for py in cy0..cy1 {
                for px in cx0..cx1 {
                    inside[py * width as usize + px] = true;
                }
            }
            (inside, clipped)
        }
        Shape::Polygon(points) => {
            let clipped = points.iter().any(|[px, py]| {
                *px < 0.0 || *py < 0.0 || *px > width as f64 || *py > height as f64
            });
            (fill_polygon(points, width, height), clipped)
        }
        Shape::MaskFile(path) => {
            let gray = imageio::load_gray(path).map_err(|source| RegionError::MaskLoad {
                region: region.id.clone(),
                source,
            })?;
            if gray.dimensions() != (width, height) {
                return Err(RegionError::MaskSize {
                    region: region.id.clone(),
                    path: path.clone(),
                    mask_w: gray.width(),
                    mask_h: gray.height(),
                    width,
                    height,
                });
            }
            (gray.as_raw().iter().map(|&v| v != 0).collect(), false)
        }
    };
    let mask = Mask::from_vec(width, height, inside).ok_or_else(outside)?;
    let warning = clipped.then(|| {
        format!(
            "region {:?} reaches outside the {width}x{height} image; clipped to the image",
            region.id
        )
    });
    Ok(Rasterised { mask, warning })
}

/// Pixel indices whose centres lie in `[lo, hi)`, clipped to `0..size`.
fn centre_range(lo: f64, hi: f64, size: u32) -> (usize, usize) {
    let first = (lo - 0.5).ceil().max(0.0);
    let end = (hi - 0.5).ceil().clamp(0.0, size as f64);
    let first = first.min(size as f64);
    (first as usize, (end as usize).max(first as usize))
}

/// Even-odd scanline fill sampled at pixel centres.
fn fill_polygon(points: &[[f64; 2]], width: u32, height: u32) -> Vec<bool> {
    let mut inside = vec![false; width as usize * height as usize];
    let mut xs: Vec<f64> = Vec::new();
    for py in 0..height as usize {
        let yc = py as f64 + 0.5;
        xs.clear();
        for i in 0..points.len() {
            let [x0, y0] = points[i];
            let [x1, y1] = points[(i + 1) % points.len()];
            if (y0 <= yc) != (y1 <= yc) {
                xs.push(x0 + (yc - y0) * (x1 - x0) / (y1 - y0));
            }
        }
        xs.sort_by(|a, b| a.total_cmp(b));
        for span in xs.chunks_exact(2) {
            let (first, end) = centre_range(span[0], span[1], width);
            for px in first..end {
                inside[py * width as usize + px] = true;
            }
        }
    }
    inside
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::spec::Role;

    fn region(shape: Shape) -> Region {
        Region {
            id: "r".into(),
            label: "l".into(),
            role: Role::Target,
            shape,
        }
    }

    #[test]
    fn box_covers_whole_pixels() {
        let r = rasterise(&region(Shape::Box([2.0, 1.0, 3.0, 2.0])), 8, 6).unwrap();
        assert_eq!(r.mask.n_inside(), 6);
        assert_eq!(r.mask.bounding_box(), [2, 1, 3, 2]);
        assert!(r.warning.is_none());
    }

    #[test]
    fn box_partly_outside_is_clipped_with_warning() {
        let r = rasterise(&region(Shape::Box([-2.0, -2.0, 4.0, 4.0])), 8, 6).unwrap();
        assert_eq!(r.mask.n_inside(), 4);
        assert!(r.warning.unwrap().contains("clipped"));
    }

    #[test]
    fn box_wholly_outside_is_an_error_naming_the_region() {
        let e = rasterise(&region(Shape::Box([20.0, 0.0, 4.0, 4.0])), 8, 6).unwrap_err();
        assert!(
            e.to_string()
                .contains("region \"r\" lies wholly outside the 8x6 image"),
            "{e}"
        );
    }

    #[test]
    fn polygon_square_matches_box() {
        let poly = vec![[2.0, 1.0], [5.0, 1.0], [5.0, 3.0], [2.0, 3.0]];
        let a = rasterise(&region(Shape::Polygon(poly)), 8, 6).unwrap();
        let b = rasterise(&region(Shape::Box([2.0, 1.0, 3.0, 2.0])), 8, 6).unwrap();
        assert_eq!(a.mask, b.mask);
    }
}
