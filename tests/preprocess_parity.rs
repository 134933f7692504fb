//! Parity of image preprocessing with the reference pipeline in
//! `tools/fixtures/preprocess_pil.py`: Pillow 13.0.0 `PIL.Image.Image.resize` (BILINEAR /
//! BICUBIC) + `Image.new`/`paste` letterbox + numpy 2.4.6 float32 normalisation.
//! Versions and formula are recorded in `tests/data/preprocess/cases.json` ("provenance").

use std::path::{Path, PathBuf};

use image::RgbImage;
use serde_json::Value;
use twinaudit::model::preprocess::{
    image_to_tensor, ChannelOrder, ImagePreprocess, Layout, ResizeMode,
};
use twinaudit::model::resize::{resize_like_pil, ResizeFilter};

fn data_dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/data/preprocess")
}

fn cases_json() -> Value {
    let text = std::fs::read_to_string(data_dir().join("cases.json")).expect("read cases.json");
    serde_json::from_str(&text).expect("parse cases.json")
}

fn load_rgb(name: &str) -> RgbImage {
    image::open(data_dir().join(name))
        .unwrap_or_else(|e| panic!("open {name}: {e}"))
        .to_rgb8()
}

fn filter(v: &Value) -> ResizeFilter {
    match v.as_str() {
        Some("bilinear") => ResizeFilter::Bilinear,
        Some("bicubic") => ResizeFilter::Bicubic,
        other => panic!("unknown filter {other:?}"),
    }
}

/// The script stores exact float32 values as JSON numbers; f64 -> f32 is then lossless.
fn f32_of(v: &Value) -> f32 {
    v.as_f64().expect("number") as f32
}

fn triple(v: &Value) -> [f32; 3] {
    let a = v.as_array().expect("array of 3");
    [f32_of(&a[0]), f32_of(&a[1]), f32_of(&a[2])]
}

fn u32_of(v: &Value) -> u32 {
    u32::try_from(v.as_u64().expect("integer")).expect("fits u32")
}

fn preprocess_of(case: &Value) -> ImagePreprocess {
    let resize = match case["resize"].as_str() {
        Some("stretch") => ResizeMode::Stretch,
        Some("letterbox") => {
            let pad = case["pad_rgb"].as_array().expect("pad_rgb");
            let b = |i: usize| u8::try_from(pad[i].as_u64().expect("pad")).expect("u8");
            ResizeMode::Letterbox {
                pad_rgb: [b(0), b(1), b(2)],
            }
        }
        other => panic!("unknown resize {other:?}"),
    };
    ImagePreprocess {
        width: u32_of(&case["width"]),
        height: u32_of(&case["height"]),
        layout: match case["layout"].as_str() {
            Some("nchw") => Layout::Nchw,
            Some("nhwc") => Layout::Nhwc,
            other => panic!("unknown layout {other:?}"),
        },
        channel_order: match case["channel_order"].as_str() {
            Some("rgb") => ChannelOrder::Rgb,
            Some("bgr") => ChannelOrder::Bgr,
            other => panic!("unknown channel order {other:?}"),
        },
        resize,
        filter: filter(&case["filter"]),
        scale: f32_of(&case["scale"]),
        mean: triple(&case["mean"]),
        std: triple(&case["std"]),
    }
}

fn read_f32(name: &str) -> Vec<f32> {
    let bytes = std::fs::read(data_dir().join(name)).expect("read tensor");
    assert_eq!(bytes.len() % 4, 0);
    bytes
        .chunks_exact(4)
        .map(|b| f32::from_le_bytes([b[0], b[1], b[2], b[3]]))
        .collect()
}

/// Source: Pillow 13.0.0 `Image.resize(..., resample=BILINEAR|BICUBIC)` + numpy 2.4.6
/// float32 `(v * scale - mean[c]) / std[c]`; tolerance 1e-3 per element.
#[test]
fn tensors_match_pillow_numpy_reference() {
    let doc = cases_json();
    let cases = doc["cases"].as_array().expect("cases");
    assert!(!cases.is_empty());
    let mut worst = 0.0f32;
    for case in cases {
        let p = preprocess_of(case);
        let img = load_rgb(case["image"].as_str().expect("image"));
        let got = image_to_tensor(&img, &p);
        let shape: Vec<usize> = case["shape"]
            .as_array()
            .expect("shape")
            .iter()
            .map(|v| v.as_u64().expect("dim") as usize)
            .collect();
        assert_eq!(got.shape(), &shape[..], "shape of {case}");
        let want = read_f32(case["tensor"].as_str().expect("tensor"));
        let got: Vec<f32> = got.iter().copied().collect(); // standard (C) order
        assert_eq!(got.len(), want.len());
        let max = got
            .iter()
            .zip(&want)
            .map(|(a, b)| (a - b).abs())
            .fold(0.0f32, f32::max);
        let not_bit_equal = got
            .iter()
            .zip(&want)
            .filter(|(a, b)| a.to_bits() != b.to_bits())
            .count();
        println!(
            "{:<60} max|diff| = {max:e}, elements not bit-identical: {not_bit_equal}",
            case["tensor"].as_str().unwrap_or("?")
        );
        worst = worst.max(max);
        assert!(max <= 1e-3, "max |diff| {max} > 1e-3 for {case}");
    }
    println!("tensor cases: {}, worst max|diff| = {worst:e}", cases.len());
}

/// Source: Pillow 13.0.0 `PIL.Image.Image.resize((w, h), resample=BILINEAR|BICUBIC)` on
/// mode "RGB"; expected byte-for-byte equality.
#[test]
fn resize_is_byte_exact_with_pillow() {
    let doc = cases_json();
    let cases = doc["resize_cases"].as_array().expect("resize_cases");
    assert!(!cases.is_empty());
    for case in cases {
        let img = load_rgb(case["image"].as_str().expect("image"));
        let (w, h) = (u32_of(&case["width"]), u32_of(&case["height"]));
        let got = resize_like_pil(&img, w, h, filter(&case["filter"]));
        let want = load_rgb(case["expected"].as_str().expect("expected"));
        assert_eq!(got.dimensions(), want.dimensions());
        let differing = got
            .as_raw()
            .iter()
            .zip(want.as_raw())
            .filter(|(a, b)| a != b)
            .count();
        assert_eq!(differing, 0, "{differing} bytes differ for {case}");
    }
}

/// Source: Pillow 13.0.0 `PIL.Image.Image.resize((w, h), resample=BILINEAR|BICUBIC)` of
/// `sweep_31x23.png` to 48 sizes in 1..=40 (up, down, mixed, both pass orders, tie);
/// expected byte-for-byte equality.
#[test]
fn resize_sweep_is_byte_exact_with_pillow() {
    let doc = cases_json();
    let sweep = &doc["resize_sweep"];
    let img = load_rgb(sweep["image"].as_str().expect("image"));
    let blob =
        std::fs::read(data_dir().join(sweep["file"].as_str().expect("file"))).expect("read sweep");
    let entries = sweep["entries"].as_array().expect("entries");
    assert!(!entries.is_empty());
    for e in entries {
        let (w, h) = (u32_of(&e["width"]), u32_of(&e["height"]));
        let offset = e["offset"].as_u64().expect("offset") as usize;
        let got = resize_like_pil(&img, w, h, filter(&e["filter"]));
        let want = &blob[offset..offset + got.as_raw().len()];
        assert!(got.as_raw() == want, "bytes differ for {e}");
    }
}
