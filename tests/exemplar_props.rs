//! Property tests of the exemplar fill and of `erase` with its three methods: pixels outside the
//! hole are bit-identical, the output has the input's size, the same seed gives the same output,
//! and nothing panics, whatever the image size (down to 1×1), hole shape (touching borders,
//! covering most of the image) or parameters.

mod common;

use image::{Rgb, RgbImage};
use proptest::prelude::*;
use twinaudit::render::erase::Erase;
use twinaudit::render::exemplar::{inpaint_exemplar, inpaint_exemplar_avoiding, ExemplarParams};
use twinaudit::render::mask::Mask;
use twinaudit::render::{EditInput, Operation, Params};

/// A mask of the given size: a rectangle (may touch or cover the borders) plus scattered pixels.
fn mask_of(w: u32, h: u32, rect: [u32; 4], scatter: &[bool]) -> Option<Mask> {
    let [rx, ry, rw, rh] = rect;
    let inside = (0..w * h)
        .map(|i| {
            let (x, y) = (i % w, i / w);
            let in_rect = x >= rx % w && x < rx % w + rw && y >= ry % h && y < ry % h + rh;
            in_rect || scatter[i as usize % scatter.len()]
        })
        .collect();
    Mask::from_vec(w, h, inside)
}

fn case() -> impl Strategy<Value = (RgbImage, Mask)> {
    (
        1u32..=28,
        1u32..=28,
        prop::collection::vec(any::<u8>(), 3..64),
        any::<bool>(),
        [0u32..28, 0u32..28, 0u32..29, 0u32..29],
        prop::collection::vec(prop::bool::weighted(0.05), 1..97),
    )
        .prop_filter_map(
            "mask needs a pixel",
            |(w, h, px, periodic, rect, scatter)| {
                let mask = mask_of(w, h, rect, &scatter)?;
                Some((common::image_of(w, h, &px, periodic), mask))
            },
        )
}

fn params() -> impl Strategy<Value = ExemplarParams> {
    (0u32..14, prop::option::of(0u32..40), any::<u64>()).prop_map(|(patch_px, search_px, seed)| {
        ExemplarParams {
            patch_px,
            search_px,
            fallback_radius_px: 3.0,
            seed,
        }
    })
}

fn assert_outside_unchanged(
    input: &RgbImage,
    output: &RgbImage,
    mask: &Mask,
) -> Result<(), TestCaseError> {
    prop_assert_eq!(output.dimensions(), input.dimensions());
    for (x, y, p) in input.enumerate_pixels() {
        if !mask.contains(x, y) {
            prop_assert_eq!(
                output.get_pixel(x, y),
                p,
                "pixel ({}, {}) outside the hole changed",
                x,
                y
            );
        }
    }
    Ok(())
}

proptest! {
    #[test]
    fn exemplar_keeps_outside_size_and_is_deterministic((img, mask) in case(), p in params()) {
        let out = inpaint_exemplar(&img, &mask, &p);
        assert_outside_unchanged(&img, &out, &mask)?;
        prop_assert_eq!(inpaint_exemplar(&img, &mask, &p), out);
    }

    #[test]
    fn exemplar_avoiding_counts_every_hole_pixel(
        (img, mask) in case(),
        p in params(),
        avoid_rect in [0u32..28, 0u32..28, 0u32..12, 0u32..12],
    ) {
        let (w, h) = img.dimensions();
        let avoid = mask_of(w, h, avoid_rect, &[false]).unwrap_or_else(|| mask.clone());
        let fill = inpaint_exemplar_avoiding(&img, &mask, &avoid, &p);
        assert_outside_unchanged(&img, &fill.image, &mask)?;
        let everything = mask.n_inside() == (w * h) as usize;
        let n_filled = fill.n_exemplar_px + fill.n_fallback_px;
        prop_assert_eq!(n_filled, if everything { 0 } else { mask.n_inside() });
        prop_assert_eq!(inpaint_exemplar_avoiding(&img, &mask, &avoid, &p).image, fill.image);
    }

    #[test]
    fn exemplar_ignores_mask_pixels_beyond_the_image(
        (img, _) in case(),
        mw in 1u32..40,
        mh in 1u32..40,
        rect in [0u32..40, 0u32..40, 0u32..20, 0u32..20],
        p in params(),
    ) {
        // A mask of another size is not what callers pass, but must not panic either.
        if let Some(mask) = mask_of(mw, mh, rect, &[false]) {
            let out = inpaint_exemplar(&img, &mask, &p);
            assert_outside_unchanged(&img, &out, &mask)?;
        }
    }

    #[test]
    fn erase_keeps_pixels_outside_changed_for_every_method(
        (img, mask) in case(),
        method in prop::sample::select(vec!["auto", "telea", "exemplar"]),
        dilate_px in 0u32..3,
        seed in any::<u64>(),
    ) {
        let json = format!(r#"{{"method": "{method}", "dilate_px": {dilate_px}, "patch_px": 5}}"#);
        let params: Params = serde_json::from_str(&json).unwrap();
        let input = EditInput { image: &img, mask: &mask, all_regions: std::slice::from_ref(&mask), seed };
        match Erase.apply(&input, &params) {
            Ok(rendered) => {
                assert_outside_unchanged(&img, &rendered.image, &rendered.changed)?;
                prop_assert!(["telea", "exemplar", "exemplar+telea"].contains(&rendered.method.as_str()));
                if method == "telea" {
                    prop_assert_eq!(rendered.method.as_str(), "telea");
                }
                let again = Erase.apply(&input, &params).unwrap();
                prop_assert_eq!(again.image, rendered.image);
                prop_assert_eq!(again.method, rendered.method);
            }
            Err(e) => {
                prop_assert_eq!(mask.dilate(dilate_px).n_inside(), (img.width() * img.height()) as usize);
                prop_assert_eq!(e, "the hole covers the whole image; nothing is left to inpaint from");
            }
        }
    }
}

#[test]
fn one_pixel_image() {
    let img = RgbImage::from_pixel(1, 1, Rgb([9, 8, 7]));
    let mask = Mask::from_vec(1, 1, vec![true]).unwrap();
    assert_eq!(
        inpaint_exemplar(&img, &mask, &ExemplarParams::default()),
        img
    );
}

#[test]
fn hole_larger_than_the_known_area_falls_back_for_what_no_patch_reaches() {
    // 16×16 image, everything but a 3-pixel frame is hole: no 9×9 patch is wholly known.
    let img = RgbImage::from_fn(16, 16, |x, y| Rgb([(x * 16) as u8, (y * 16) as u8, 100]));
    let inside = (0..256)
        .map(|i| (3..13).contains(&(i % 16)) && (3..13).contains(&(i / 16)))
        .collect();
    let mask = Mask::from_vec(16, 16, inside).unwrap();
    let fill = inpaint_exemplar_avoiding(&img, &mask, &mask, &ExemplarParams::default());
    assert_eq!((fill.n_exemplar_px, fill.n_fallback_px), (0, 100));
    // With 3×3 patches the frame holds sources.
    let small = ExemplarParams {
        patch_px: 3,
        ..ExemplarParams::default()
    };
    let fill = inpaint_exemplar_avoiding(&img, &mask, &mask, &small);
    assert_eq!((fill.n_exemplar_px, fill.n_fallback_px), (100, 0));
}

#[test]
fn seeds_change_the_search_not_the_invariants() {
    let img = common::image_of(40, 40, &[0, 1, 2], true);
    let inside = (0..1600)
        .map(|i| (12..30).contains(&(i % 40)) && (12..30).contains(&(i / 40)))
        .collect();
    let mask = Mask::from_vec(40, 40, inside).unwrap();
    for seed in 0..8 {
        let p = ExemplarParams {
            seed,
            ..ExemplarParams::default()
        };
        let out = inpaint_exemplar(&img, &mask, &p);
        for (x, y, px) in img.enumerate_pixels() {
            if !mask.contains(x, y) {
                assert_eq!(out.get_pixel(x, y), px);
            }
        }
    }
}
