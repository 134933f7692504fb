//! Properties of `render::placebo::place_placebo`, the pure function that moves an edit's mask to
//! free background for a placebo control.
//!
//! Source of every expectation: the function's contract (docs/spec.md, "Placebo controls"): the
//! result is a whole-pixel translation of the mask, inside the image, whose dilation by the margin
//! (`Mask::dilate`, Euclidean disc) overlaps no region; the seed alone decides the placement; and
//! `None` exactly when no translation satisfies this, checked here by brute force over every
//! offset.

use proptest::prelude::*;
use twinaudit::render::mask::Mask;
use twinaudit::render::placebo::place_placebo;

fn rect(w: u32, h: u32, [x, y, bw, bh]: [u32; 4]) -> Option<Mask> {
    let inside = (0..h)
        .flat_map(|py| (0..w).map(move |px| (px, py)))
        .map(|(px, py)| px >= x && px < x + bw && py >= y && py < y + bh)
        .collect();
    Mask::from_vec(w, h, inside)
}

fn clear_of(moved: &Mask, regions: &[Mask], margin_px: u32) -> bool {
    let grown = moved.dilate(margin_px);
    regions.iter().all(|r| {
        grown
            .as_slice()
            .iter()
            .zip(r.as_slice())
            .all(|(&g, &q)| !(g && q))
    })
}

/// The offset taking `mask` to `moved`, if `moved` is a translation of it.
fn offset_between(mask: &Mask, moved: &Mask) -> Option<(i64, i64)> {
    let [ax, ay, _, _] = mask.bounding_box();
    let [bx, by, _, _] = moved.bounding_box();
    let (dx, dy) = (bx as i64 - ax as i64, by as i64 - ay as i64);
    (mask.translate(dx, dy).as_ref() == Some(moved)).then_some((dx, dy))
}

/// An image size, a few box regions, and a mask: a box with some pixels knocked out (any shape).
fn scene() -> impl Strategy<Value = (Mask, Vec<Mask>, u32)> {
    (8u32..40, 8u32..40)
        .prop_flat_map(|(w, h)| {
            let boxes = prop::collection::vec((0..w, 0..h, 1..=w / 2, 1..=h / 2), 0..5);
            let shape = (0..w, 0..h, 1..=w / 2, 1..=h / 2, any::<u64>());
            (Just((w, h)), boxes, shape, 0u32..5)
        })
        .prop_filter_map(
            "mask must be non-empty",
            |((w, h), boxes, (x, y, bw, bh, holes), margin)| {
                let regions: Vec<Mask> = boxes
                    .into_iter()
                    .filter_map(|(x, y, bw, bh)| rect(w, h, [x, y, bw.min(w - x), bh.min(h - y)]))
                    .collect();
                let (bw, bh) = (bw.min(w - x), bh.min(h - y));
                let inside: Vec<bool> = (0..h)
                    .flat_map(|py| (0..w).map(move |px| (px, py)))
                    .map(|(px, py)| {
                        let in_box = px >= x && px < x + bw && py >= y && py < y + bh;
                        let bit = (py * w + px) % 64;
                        in_box && (holes >> bit) & 1 == 0
                    })
                    .collect();
                Mask::from_vec(w, h, inside).map(|m| (m, regions, margin))
            },
        )
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(200))]

    #[test]
    fn placement_is_a_translation_inside_the_image_clear_of_every_region(
        (mask, regions, margin) in scene(),
        seed in any::<u64>(),
    ) {
        match place_placebo(&mask, &regions, seed, margin) {
            Some(moved) => {
                prop_assert_eq!(moved.n_inside(), mask.n_inside());
                prop_assert_eq!((moved.width(), moved.height()), (mask.width(), mask.height()));
                prop_assert!(offset_between(&mask, &moved).is_some(), "not a translation");
                prop_assert!(clear_of(&moved, &regions, margin), "placebo touches a region");
            }
            None => {
                // Brute force: no offset keeps the mask inside the image and clear of regions.
                let (w, h) = (mask.width() as i64, mask.height() as i64);
                for dy in -h..h {
                    for dx in -w..w {
                        if let Some(m) = mask.translate(dx, dy) {
                            prop_assert!(!clear_of(&m, &regions, margin), "free offset ({dx}, {dy}) missed");
                        }
                    }
                }
            }
        }
    }

    #[test]
    fn same_seed_same_placement((mask, regions, margin) in scene(), seed in any::<u64>()) {
        prop_assert_eq!(
            place_placebo(&mask, &regions, seed, margin),
            place_placebo(&mask, &regions, seed, margin)
        );
    }
}

#[test]
fn different_seeds_use_different_free_places() {
    // 64×64, one 6×6 region in the middle: many free places, so 20 seeds should not all agree.
    let region = rect(64, 64, [29, 29, 6, 6]).unwrap();
    let placements: std::collections::BTreeSet<[u32; 4]> = (0..20)
        .map(|seed| {
            place_placebo(&region, std::slice::from_ref(&region), seed, 5)
                .unwrap()
                .bounding_box()
        })
        .collect();
    assert!(placements.len() > 10, "{placements:?}");
}

#[test]
fn none_when_the_image_is_full_of_regions() {
    let full = rect(32, 24, [0, 0, 32, 24]).unwrap();
    let mask = rect(32, 24, [4, 4, 3, 3]).unwrap();
    for seed in 0..10 {
        assert_eq!(
            place_placebo(&mask, std::slice::from_ref(&full), seed, 0),
            None
        );
    }
    // Regions leaving only a 2-px strip free cannot take a 3×3 shape with a 1-px margin.
    let left = rect(32, 24, [0, 0, 15, 24]).unwrap();
    let right = rect(32, 24, [17, 0, 15, 24]).unwrap();
    assert_eq!(place_placebo(&mask, &[left, right], 3, 1), None);
}

#[test]
fn regions_of_another_size_give_none_instead_of_a_panic() {
    let mask = rect(16, 16, [0, 0, 2, 2]).unwrap();
    let other = rect(8, 8, [0, 0, 2, 2]).unwrap();
    assert_eq!(place_placebo(&mask, &[other], 0, 1), None);
}
