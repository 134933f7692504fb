//! Property tests of `duplicate` and of the Poisson cloner on invented images (noise or a
//! periodic pattern, sizes from 1×1): pixels outside `changed` are bit-identical, the output has
//! the input's size, the same seed gives the same output, added copies lie inside `changed`, and
//! nothing panics (no free space is an `Err` with a message).

mod common;

use image::RgbImage;
use proptest::prelude::*;
use twinaudit::render::duplicate::Duplicate;
use twinaudit::render::mask::Mask;
use twinaudit::render::poisson::{poisson_clone, poisson_clone_with_stats, PoissonParams};
use twinaudit::render::{EditInput, Operation, Params};

/// A rectangle clipped to the image (may touch the borders); `None` when empty.
fn rect_mask(w: u32, h: u32, rect: [u32; 4]) -> Option<Mask> {
    let [rx, ry, rw, rh] = rect;
    let inside = (0..w * h)
        .map(|i| {
            let (x, y) = (i % w, i / w);
            x >= rx % w && x < rx % w + rw && y >= ry % h && y < ry % h + rh
        })
        .collect();
    Mask::from_vec(w, h, inside)
}

/// An image, one or two region masks (the first selected) and params.
fn case() -> impl Strategy<Value = (RgbImage, Vec<Mask>, Params)> {
    (
        1u32..=40,
        1u32..=40,
        prop::collection::vec(any::<u8>(), 3..64),
        any::<bool>(),
        [0u32..40, 0u32..40, 1u32..12, 1u32..12],
        prop::option::of([0u32..40, 0u32..40, 1u32..12, 1u32..12]),
        0u32..5,
        1usize..4,
        any::<bool>(),
    )
        .prop_filter_map(
            "regions need a pixel",
            |(w, h, px, periodic, r1, r2, margin, copies, paste)| {
                let mut regions = vec![rect_mask(w, h, r1)?];
                if let Some(r2) = r2 {
                    regions.push(rect_mask(w, h, r2)?);
                }
                let params: Params = serde_json::from_value(serde_json::json!({
                    "margin_px": margin,
                    "copies": copies,
                    "blend": if paste { "paste" } else { "poisson" },
                }))
                .unwrap();
                Some((common::image_of(w, h, &px, periodic), regions, params))
            },
        )
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(200))]

    #[test]
    fn outside_changed_is_unchanged_and_seed_fixes_output(
        (image, regions, params) in case(),
        seed in any::<u64>(),
    ) {
        let input = EditInput { image: &image, mask: &regions[0], all_regions: &regions, seed };
        let first = Duplicate.apply(&input, &params);
        let second = Duplicate.apply(&input, &params);
        match (&first, &second) {
            (Ok(a), Ok(b)) => {
                prop_assert_eq!(&a.image, &b.image);
                prop_assert_eq!(&a.changed, &b.changed);
                prop_assert_eq!(&a.added, &b.added);
                prop_assert_eq!(a.image.dimensions(), image.dimensions());
                for (i, &c) in a.changed.as_slice().iter().enumerate() {
                    if !c {
                        let (x, y) = (i as u32 % image.width(), i as u32 / image.width());
                        prop_assert_eq!(a.image.get_pixel(x, y), image.get_pixel(x, y));
                    }
                }
                let copies = params["copies"].as_u64().unwrap() as usize;
                prop_assert_eq!(a.added.len(), copies);
                for copy in &a.added {
                    prop_assert_eq!(copy.n_inside(), regions[0].n_inside());
                    for (&m, &c) in copy.as_slice().iter().zip(a.changed.as_slice()) {
                        prop_assert!(!m || c);
                    }
                    // A copy never lands on a region.
                    for r in &regions {
                        for (&m, &o) in copy.as_slice().iter().zip(r.as_slice()) {
                            prop_assert!(!(m && o));
                        }
                    }
                }
            }
            (Err(a), Err(b)) => {
                prop_assert_eq!(a, b);
                prop_assert!(a.contains("no free place"), "{}", a);
            }
            _ => prop_assert!(false, "same seed, different outcome"),
        }
    }

    #[test]
    fn poisson_changes_only_the_mask(
        w in 1u32..=24,
        h in 1u32..=24,
        px in prop::collection::vec(any::<u8>(), 3..64),
        rect in [0u32..24, 0u32..24, 1u32..24, 1u32..24],
        offset in (-30i32..30, -30i32..30),
        mixed in any::<bool>(),
        scatter in prop::collection::vec(prop::bool::weighted(0.3), 1..97),
    ) {
        // A rectangle plus scattered pixels: holes, isolated pixels, parts touching the border.
        let Some(rect) = rect_mask(w, h, rect) else { return Ok(()) };
        let inside = rect
            .as_slice()
            .iter()
            .enumerate()
            .map(|(i, &r)| r || scatter[i % scatter.len()])
            .collect();
        let mask = Mask::from_vec(w, h, inside).unwrap();
        let dest = common::image_of(w, h, &px, false);
        let src = common::image_of(h, w, &px[1..].iter().chain(&px[..1]).copied().collect::<Vec<_>>(), true);
        let params = PoissonParams { mixed_gradients: mixed, ..PoissonParams::default() };
        let (out, stats) = poisson_clone_with_stats(&dest, &src, offset, &mask, &params);
        prop_assert_eq!(stats.n_unknowns, mask.n_inside());
        for r in stats.rms_residual {
            prop_assert!(r <= params.tolerance, "residual {} above tolerance", r);
        }
        prop_assert_eq!(out.dimensions(), dest.dimensions());
        prop_assert_eq!(&out, &poisson_clone(&dest, &src, offset, &mask, &params));
        for (i, &m) in mask.as_slice().iter().enumerate() {
            if !m {
                let (x, y) = (i as u32 % w, i as u32 / w);
                prop_assert_eq!(out.get_pixel(x, y), dest.get_pixel(x, y));
            }
        }
    }
}
