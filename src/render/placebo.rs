//! Placebo placement: where a control edit goes. A placebo repeats a real edit's shape, size and
//! method on background that holds no annotated object, so whatever it changes in the answer is an
//! artifact of the editing itself.
//!
//! Invariants: pure (no I/O); the placed mask is the input mask translated by a whole-pixel
//! offset, lies wholly inside the image, and no pixel of it comes within `margin_px` (Euclidean,
//! pixel centres) of a pixel of any region; the same inputs and seed give the same placement.

use super::mask::Mask;
use super::rng::SplitMix64;

/// Moves `mask` to free background: a translation of it such that every moved pixel is inside the
/// image and the moved mask grown by a disc of `margin_px` overlaps none of `all_regions`.
///
/// Among the offsets whose moved bounding box, grown by `margin_px`, holds no region pixel at all
/// (clear background around the whole shape), one is drawn uniformly with a SplitMix64 generator
/// seeded by `seed`. When there is none, offsets are tried pixel-exactly in an order starting at a
/// seeded position, and the first that fits is taken. `None` when no offset fits (or the pixel
/// checks needed to find one exceed a fixed budget, which only happens on very large images packed
/// with regions), or when a region's size differs from the mask's.
#[must_use]
pub fn place_placebo(mask: &Mask, all_regions: &[Mask], seed: u64, margin_px: u32) -> Option<Mask> {
    let (w, h) = (mask.width(), mask.height());
    if all_regions
        .iter()
        .any(|r| r.width() != w || r.height() != h)
    {
        return None;
    }
    let forbidden = forbidden_pixels(w, h, all_regions, margin_px);
    let table = SummedArea::new(w, h, &forbidden);
    let [bx, by, bw, bh] = mask.bounding_box();
    // Offsets keeping the bounding box inside the image: dx in [-bx, w - bw - bx], same for dy.
    let (n_dx, n_dy) = ((w - bw + 1) as u64, (h - bh + 1) as u64);
    let offset_of =
        |i: u64| -> (i64, i64) { ((i % n_dx) as i64 - bx as i64, (i / n_dx) as i64 - by as i64) };
    let n_offsets = n_dx * n_dy;
    let mut rng = SplitMix64::new(seed);

    // Clear boxes: the moved bounding box grown by the margin holds no forbidden pixel, so every
    // moved pixel is free as well (forbidden pixels already include the margin's growth).
    let box_is_clear = |i: u64| {
        let (dx, dy) = offset_of(i);
        table.sum((bx as i64 + dx) as u32, (by as i64 + dy) as u32, bw, bh) == 0
    };
    let n_clear = (0..n_offsets).filter(|&i| box_is_clear(i)).count() as u64;
    if n_clear > 0 {
        let pick = rng.below(n_clear);
        let i = (0..n_offsets)
            .filter(|&i| box_is_clear(i))
            .nth(pick as usize)?;
        let (dx, dy) = offset_of(i);
        return mask.translate(dx, dy);
    }

    // No clear box: check the shape itself, pixel by pixel.
    let inside: Vec<(u32, u32)> = (by..by + bh)
        .flat_map(|y| (bx..bx + bw).map(move |x| (x, y)))
        .filter(|&(x, y)| mask.contains(x, y))
        .collect();
    let start = rng.below(n_offsets);
    let mut budget: u64 = PIXEL_CHECK_BUDGET;
    for k in 0..n_offsets {
        let i = (start + k) % n_offsets;
        let (dx, dy) = offset_of(i);
        let mut fits = true;
        for &(x, y) in &inside {
            if budget == 0 {
                return None;
            }
            budget -= 1;
            let (nx, ny) = ((x as i64 + dx) as u32, (y as i64 + dy) as u32);
            if forbidden[(ny * w + nx) as usize] {
                fits = false;
                break;
            }
        }
        if fits {
            return mask.translate(dx, dy);
        }
    }
    None
}

/// Most pixel checks the exact search may make (about a second of work), so a huge image full of
/// regions cannot stall a worker.
const PIXEL_CHECK_BUDGET: u64 = 1 << 28;

/// Pixels within `margin_px` of any region (regions included), row-major.
fn forbidden_pixels(w: u32, h: u32, regions: &[Mask], margin_px: u32) -> Vec<bool> {
    let mut forbidden = vec![false; w as usize * h as usize];
    for region in regions {
        let grown = region.dilate(margin_px);
        for (f, &g) in forbidden.iter_mut().zip(grown.as_slice()) {
            *f |= g;
        }
    }
    forbidden
}

/// Counts of set pixels over boxes in constant time.
struct SummedArea {
    stride: usize,
    /// (w + 1) × (h + 1) prefix sums; row and column 0 are zero.
    sums: Vec<u64>,
}

impl SummedArea {
    fn new(w: u32, h: u32, pixels: &[bool]) -> SummedArea {
        let stride = w as usize + 1;
        let mut sums = vec![0u64; stride * (h as usize + 1)];
        for y in 0..h as usize {
            let mut row = 0u64;
            for x in 0..w as usize {
                row += pixels[y * w as usize + x] as u64;
                sums[(y + 1) * stride + x + 1] = sums[y * stride + x + 1] + row;
            }
        }
        SummedArea { stride, sums }
    }

    /// Set pixels in the box `[x, x + bw) × [y, y + bh)`, which must lie inside the image.
    fn sum(&self, x: u32, y: u32, bw: u32, bh: u32) -> u64 {
        let (x0, y0) = (x as usize, y as usize);
        let (x1, y1) = (x0 + bw as usize, y0 + bh as usize);
        let s = &self.sums;
        s[y1 * self.stride + x1] + s[y0 * self.stride + x0]
            - s[y0 * self.stride + x1]
            - s[y1 * self.stride + x0]
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn rect(w: u32, h: u32, [x, y, bw, bh]: [u32; 4]) -> Mask {
        let inside = (0..h)
            .flat_map(|py| (0..w).map(move |px| (px, py)))
            .map(|(px, py)| px >= x && px < x + bw && py >= y && py < y + bh)
            .collect();
        Mask::from_vec(w, h, inside).unwrap()
    }

    #[test]
    fn bounding_box_clear_of_the_margin_is_preferred() {
        // 20×20 image, one region in the top-left corner; a 4×4 mask there must move away and
        // keep 3 px clear of it.
        let region = rect(20, 20, [0, 0, 4, 4]);
        for seed in 0..50 {
            let moved = place_placebo(&region, std::slice::from_ref(&region), seed, 3).unwrap();
            let grown = moved.dilate(3);
            assert!(grown
                .as_slice()
                .iter()
                .zip(region.as_slice())
                .all(|(&g, &r)| !(g && r)));
            assert_eq!(moved.n_inside(), 16);
        }
    }

    #[test]
    fn exact_search_fits_a_shape_no_clear_box_holds() {
        // An L-shaped mask around a region sitting in the L's empty corner: the L's box always
        // contains that region when placed around it, so only the exact check can place it.
        // 12×12 image: region at (9..12, 0..3); L = column x 0..2 rows 0..12 + row y 10..12.
        let (w, h) = (12, 12);
        let region = rect(w, h, [9, 0, 3, 3]);
        let l_inside = (0..h)
            .flat_map(|y| (0..w).map(move |x| (x, y)))
            .map(|(x, y)| x < 2 || y >= 10)
            .collect();
        let l = Mask::from_vec(w, h, l_inside).unwrap();
        // The L's box is the whole image, so no box is clear; the L in place misses the region by
        // more than 1 px (the region ends at y = 2, the L's row starts at y = 10).
        let moved = place_placebo(&l, std::slice::from_ref(&region), 5, 1).unwrap();
        assert_eq!(moved, l);
    }

    #[test]
    fn none_when_no_place_fits() {
        let region = rect(16, 16, [6, 6, 4, 4]);
        let big = rect(16, 16, [0, 0, 10, 10]);
        assert_eq!(place_placebo(&big, &[region], 1, 2), None);
    }
}
