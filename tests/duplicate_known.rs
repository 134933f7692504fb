//! `duplicate` end to end with the committed known-answer model `count_red` (tests/data/known:
//! answers the number of red 6×6 tiles, a pixel being red when R > 0.6, G < 0.35, B < 0.35 of
//! 255) on the invented scene `tiles_a.png` (3 red, 2 orange, 1 blue tile on flat grey; region
//! boxes as in tests/data/known/specs/counting.json).
//!
//! Expected by hand: one copy of one red tile adds exactly 36 red pixels, so the count goes from
//! 3 to 4 (derived expectation n + copies·k = 3 + 1·1), verdict `moved_to_expected`; two copies
//! give 5; a copy of an orange tile adds no red pixel (derived `same`, verdict `held`).
//!
//! Both blends keep the copy red here: the copied patch is the tile plus a 3-pixel margin of the
//! flat grey background, and the grey around the new place is the same grey, so the Poisson
//! solution (source gradients, destination values on the boundary) is the source patch itself,
//! bit for bit. Poisson blending would pull the tile's colour toward a destination background
//! that differed from the source's; on this flat scene it does not, and the test checks the two
//! edited images are identical.

mod common;

use common::{config, known};
use image::RgbImage;
use twinaudit::audit::results::{read_results, PairRecord, Status};
use twinaudit::audit::run_audit;
use twinaudit::render::mask::Mask;

const SPEC: &str = r#"{
  "format_version": 1,
  "description": "Invented test spec: duplicate red and orange tiles of tiles_a (known-answer scene).",
  "cases": [
    {
      "id": "a-dup",
      "image": "IMAGE",
      "question": "How many red tiles are there?",
      "question_kind": "count",
      "answer": "3",
      "regions": [
        {"id": "red1", "label": "red tile", "role": "target", "box": [8, 8, 6, 6]},
        {"id": "red2", "label": "red tile", "role": "target", "box": [30, 8, 6, 6]},
        {"id": "red3", "label": "red tile", "role": "target", "box": [22, 42, 6, 6]},
        {"id": "or1", "label": "orange tile", "role": "distractor", "box": [50, 12, 6, 6]},
        {"id": "or2", "label": "orange tile", "role": "distractor", "box": [8, 28, 6, 6]},
        {"id": "blue1", "label": "blue tile", "role": "distractor", "box": [36, 28, 6, 6]}
      ],
      "edits": [
        {"id": "dup-red1-paste", "operation": "duplicate", "regions": {"ids": ["red1"]}, "params": {"blend": "paste"}},
        {"id": "dup-red1-poisson", "operation": "duplicate", "regions": {"ids": ["red1"]}, "params": {"blend": "poisson"}},
        {"id": "dup-red2-twice", "operation": "duplicate", "regions": {"ids": ["red2"]}, "params": {"copies": 2, "blend": "paste"}},
        {"id": "dup-or1", "operation": "duplicate", "regions": {"ids": ["or1"]}}
      ]
    }
  ]
}"#;

/// Top-left corners of the scene's 6×6 tiles (counting.json).
const TILES: [[u32; 2]; 6] = [[8, 8], [30, 8], [22, 42], [50, 12], [8, 28], [36, 28]];

fn box_mask(b: [u32; 4]) -> Mask {
    let inside = (0..64 * 64)
        .map(|i| {
            let (x, y) = (i % 64, i / 64);
            x >= b[0] && x < b[0] + b[2] && y >= b[1] && y < b[1] + b[3]
        })
        .collect();
    Mask::from_vec(64, 64, inside).unwrap()
}

fn is_red(p: &image::Rgb<u8>) -> bool {
    let [r, g, b] = p.0.map(|c| c as f64 / 255.0);
    r > 0.6 && g < 0.35 && b < 0.35
}

fn n_red(image: &RgbImage) -> usize {
    image.pixels().filter(|p| is_red(p)).count()
}

#[test]
fn duplicating_a_red_tile_adds_one_to_the_count() {
    let dir = tempfile::tempdir().unwrap();
    let image_path = known("images/tiles_a.png");
    let spec = dir.path().join("dup.json");
    std::fs::write(&spec, SPEC.replace("IMAGE", image_path.to_str().unwrap())).unwrap();
    let out = dir.path().join("run");
    let mut cfg = config(&spec, &known("count_red.manifest.json"), &out);
    cfg.save_edits = true;
    let outcome = run_audit(&cfg).unwrap_or_else(|e| panic!("audit failed: {e}"));
    assert_eq!(outcome.summary.n_errors, 0);
    let rows = read_results(&out.join("results.jsonl")).unwrap();
    let row = |id: &str| -> &PairRecord {
        rows.iter()
            .find(|r| r.pair_id == format!("a-dup/{id}"))
            .unwrap_or_else(|| panic!("no row for {id}"))
    };
    let original = image::open(&image_path).unwrap().to_rgb8();
    assert_eq!(n_red(&original), 3 * 36);

    for (id, method, after, verdict, n_added) in [
        ("dup-red1-paste", "paste", "4", "moved_to_expected", 1),
        ("dup-red1-poisson", "poisson", "4", "moved_to_expected", 1),
        ("dup-red2-twice", "paste", "5", "moved_to_expected", 2),
        ("dup-or1", "poisson", "3", "held", 1),
    ] {
        let r = row(id);
        assert_eq!(r.status, Status::Ok, "{id}: {:?}", r.error);
        assert_eq!(r.method.as_deref(), Some(method), "{id}");
        assert_eq!(r.before.as_ref().unwrap().answer, "3", "{id}");
        assert_eq!(r.after.as_ref().unwrap().answer, after, "{id}");
        assert_eq!(r.verdict.unwrap().as_str(), verdict, "{id}");
        assert!(r.expectation_derived, "{id}");
        assert_eq!(r.added_regions.len(), n_added, "{id}");
        let edited = image::open(out.join(r.edited_image.as_ref().unwrap()))
            .unwrap()
            .to_rgb8();
        for &[x, y, w, h] in &r.added_regions {
            assert_eq!((w, h), (6, 6), "{id}: a copy has the tile's size");
            // The copy grown by the 3-px margin and every tile grown by it share no pixel.
            let grown = box_mask([x, y, w, h]).dilate(3);
            for b in TILES {
                let tile = box_mask([b[0], b[1], 6, 6]).dilate(3);
                let touching = grown
                    .as_slice()
                    .iter()
                    .zip(tile.as_slice())
                    .any(|(&a, &b)| a && b);
                assert!(!touching, "{id}: copy at ({x}, {y}) too near tile {b:?}");
            }
        }
        let red_added = if id.starts_with("dup-red") {
            36 * n_added
        } else {
            0
        };
        assert_eq!(n_red(&edited), 3 * 36 + red_added, "{id}: red pixels");
    }
    // Flat grey all round: both blends put the tile and its 3-px grey margin down bit for bit
    // (the Poisson solution equals the source patch; see the module documentation).
    for id in ["dup-red1-paste", "dup-red1-poisson"] {
        let edited = image::open(out.join(row(id).edited_image.as_ref().unwrap()))
            .unwrap()
            .to_rgb8();
        let [x, y, ..] = row(id).added_regions[0];
        for dy in -3i64..9 {
            for dx in -3i64..9 {
                let (ex, ey) = ((x as i64 + dx) as u32, (y as i64 + dy) as u32);
                let (sx, sy) = ((8 + dx) as u32, (8 + dy) as u32);
                assert_eq!(
                    edited.get_pixel(ex, ey),
                    original.get_pixel(sx, sy),
                    "{id}: pixel ({dx}, {dy}) of the copy"
                );
            }
        }
    }
}
