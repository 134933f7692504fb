//! Telea inpainting against OpenCV.
//!
//! Reference: opencv-python-headless 5.0.0.93, `cv2.inpaint(img_bgr, mask, R, cv2.INPAINT_TELEA)`,
//! fixtures made by `tools/fixtures/telea_opencv.py` (provenance in tests/data/telea/provenance.json).

use std::path::{Path, PathBuf};

use image::RgbImage;
use twinaudit::render::mask::Mask;
use twinaudit::render::telea::{inpaint_telea, TeleaParams};

fn dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/data/telea")
}

fn rgb(name: &str) -> RgbImage {
    image::open(dir().join(name))
        .unwrap_or_else(|e| panic!("{name}: {e}"))
        .to_rgb8()
}

#[test]
fn telea_matches_opencv_fixtures() {
    let text = std::fs::read_to_string(dir().join("provenance.json")).expect("provenance.json");
    let prov: serde_json::Value = serde_json::from_str(&text).expect("provenance is JSON");
    assert_eq!(prov["library"], "opencv-python-headless");
    assert_eq!(prov["library_version"], "5.0.0.93");
    let cases = prov["cases"].as_array().expect("cases");
    assert!(cases.len() >= 4, "expected at least 4 fixture pairs");
    let mut checked = 0;
    for case in cases {
        let name = case["name"].as_str().expect("name");
        let image = rgb(case["image"].as_str().expect("image"));
        let gray = image::open(dir().join(case["mask"].as_str().expect("mask")))
            .expect("mask")
            .to_luma8();
        let mask = Mask::from_gray(&gray).expect("fixture mask is non-empty");
        for output in case["outputs"].as_array().expect("outputs") {
            let radius = output["radius"].as_f64().expect("radius") as f32;
            let expected = rgb(output["file"].as_str().expect("file"));
            let ours = inpaint_telea(&image, &mask, &TeleaParams { radius_px: radius });
            assert_eq!(ours.dimensions(), expected.dimensions());
            let (mut sum, mut n, mut max, mut exact) = (0u64, 0u64, 0u8, 0u64);
            for (x, y, p) in ours.enumerate_pixels() {
                if mask.contains(x, y) {
                    let q = expected.get_pixel(x, y);
                    for c in 0..3 {
                        let d = p.0[c].abs_diff(q.0[c]);
                        sum += u64::from(d);
                        max = max.max(d);
                        exact += u64::from(d == 0);
                        n += 1;
                    }
                } else {
                    // Outside the hole both must equal the input exactly.
                    assert_eq!(
                        p,
                        image.get_pixel(x, y),
                        "{name} r={radius}: outside pixel ({x},{y}) changed"
                    );
                    assert_eq!(
                        p,
                        expected.get_pixel(x, y),
                        "{name} r={radius}: outside pixel ({x},{y})"
                    );
                }
            }
            let mad = sum as f64 / n as f64;
            println!(
                "{name} r={radius}: MAD {mad:.4} levels, max |diff| {max}, exact {:.2}% of {n} channel values",
                100.0 * exact as f64 / n as f64
            );
            // reference: opencv-python-headless 5.0.0.93, cv2.inpaint INPAINT_TELEA,
            // fixture made by tools/fixtures/telea_opencv.py
            assert!(
                mad <= 2.0,
                "{name} r={radius}: mean absolute difference {mad:.3} > 2 levels vs OpenCV"
            );
            checked += 1;
        }
    }
    assert!(checked >= 5);
}
