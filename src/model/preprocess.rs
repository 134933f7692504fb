//! Decoded RGB image to model input tensor: resize (stretch or letterbox), channel
//! order, layout and per-channel normalisation.
//!
//! Parity target: Pillow `Image.resize` + `Image.paste` on a padded canvas, then numpy
//! float32 arithmetic `(v * scale - mean[c]) / std[c]` (see
//! `tools/fixtures/preprocess_pil.py` and `tests/preprocess_parity.rs`).

use image::{Rgb, RgbImage};
use ndarray::Array4;

use super::resize::{resize_like_pil, ResizeFilter};

/// Memory layout of the model's image input.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Layout {
    /// `[1, 3, H, W]`.
    Nchw,
    /// `[1, H, W, 3]`.
    Nhwc,
}

/// Order of the colour channels in the tensor.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum ChannelOrder {
    /// Channel 0 is red.
    Rgb,
    /// Channel 0 is blue.
    Bgr,
}

/// How the image is fitted to the model's input size.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum ResizeMode {
    /// Resize to exactly width × height, ignoring aspect ratio.
    Stretch,
    /// Keep aspect ratio, centre on a canvas filled with `pad_rgb` (see [`letterbox_geometry`]).
    Letterbox {
        /// Padding colour, as 8-bit RGB before normalisation.
        pad_rgb: [u8; 3],
    },
}

/// Everything needed to turn an RGB image into the model's input tensor.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ImagePreprocess {
    /// Model input width in pixels.
    pub width: u32,
    /// Model input height in pixels.
    pub height: u32,
    /// Tensor layout.
    pub layout: Layout,
    /// Tensor channel order.
    pub channel_order: ChannelOrder,
    /// Stretch or letterbox.
    pub resize: ResizeMode,
    /// Resampling filter (Pillow-compatible).
    pub filter: ResizeFilter,
    /// Multiplies the 0..=255 value before mean subtraction (e.g. 1/255).
    pub scale: f32,
    /// Per tensor channel, in the model's channel order.
    pub mean: [f32; 3],
    /// Per tensor channel, in the model's channel order.
    pub std: [f32; 3],
}

/// Largest accepted model input side; far above real models, small enough that tensors
/// and canvases cannot overflow `usize` or `isize`.
pub const MAX_INPUT_SIDE: u32 = 16_384;

/// Why an [`ImagePreprocess`] cannot be used.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum PreprocessError {
    /// Width or height is 0 or above [`MAX_INPUT_SIDE`].
    #[error("model input size {width}x{height} must be between 1 and {MAX_INPUT_SIDE} per side")]
    Size {
        /// Requested width.
        width: u32,
        /// Requested height.
        height: u32,
    },
    /// Scale, mean or std is NaN or infinite, or a std is zero.
    #[error("normalisation {field} must be finite{}", if *.nonzero { " and non-zero" } else { "" })]
    Normalisation {
        /// Offending field: `scale`, `mean` or `std`.
        field: &'static str,
        /// Whether zero is also rejected for this field.
        nonzero: bool,
    },
}

impl ImagePreprocess {
    /// Checks sizes and normalisation constants; call once when a manifest is loaded.
    /// [`image_to_tensor`] does not require it (it never panics on invalid values, it just
    /// produces NaN/inf or empty tensors), but valid settings guarantee finite output.
    ///
    /// # Errors
    /// [`PreprocessError::Size`] or [`PreprocessError::Normalisation`] naming the bad field.
    pub fn validate(&self) -> Result<(), PreprocessError> {
        let side_ok = |n: u32| (1..=MAX_INPUT_SIDE).contains(&n);
        if !side_ok(self.width) || !side_ok(self.height) {
            return Err(PreprocessError::Size {
                width: self.width,
                height: self.height,
            });
        }
        let bad = |field, nonzero| Err(PreprocessError::Normalisation { field, nonzero });
        if !self.scale.is_finite() {
            return bad("scale", false);
        }
        if !self.mean.iter().all(|m| m.is_finite()) {
            return bad("mean", false);
        }
        if !self.std.iter().all(|s| s.is_finite() && *s != 0.0) {
            return bad("std", true);
        }
        Ok(())
    }
}

/// Placement of an aspect-preserving resize of a `w` × `h` image on a `canvas_w` ×
/// `canvas_h` canvas: returns `(new_w, new_h, left, top)`.
///
/// s = min(W / w, H / h) in f64; new_w = max(1, floor(w * s + 0.5)) clamped to W (same
/// for new_h); left = (W - new_w) / 2 and top = (H - new_h) / 2 with integer division.
/// If any size is 0 there is nothing to place: `(0, 0, W / 2, H / 2)`.
#[must_use]
pub fn letterbox_geometry(w: u32, h: u32, canvas_w: u32, canvas_h: u32) -> (u32, u32, u32, u32) {
    if w == 0 || h == 0 || canvas_w == 0 || canvas_h == 0 {
        return (0, 0, canvas_w / 2, canvas_h / 2);
    }
    let s = (f64::from(canvas_w) / f64::from(w)).min(f64::from(canvas_h) / f64::from(h));
    // Float-to-int `as` saturates, so huge ratios cannot overflow; clamp keeps it on canvas.
    let fit = |n: u32, limit: u32| ((f64::from(n) * s + 0.5).floor() as u32).clamp(1, limit);
    let new_w = fit(w, canvas_w);
    let new_h = fit(h, canvas_h);
    (new_w, new_h, (canvas_w - new_w) / 2, (canvas_h - new_h) / 2)
}

/// The 8-bit RGB image the model sees, before normalisation: `p.width` × `p.height`,
/// stretched or letterboxed with `p.filter`.
#[must_use]
pub fn fit_to_input(image: &RgbImage, p: &ImagePreprocess) -> RgbImage {
    match p.resize {
        ResizeMode::Stretch => resize_like_pil(image, p.width, p.height, p.filter),
        ResizeMode::Letterbox { pad_rgb } => {
            let (w, h) = image.dimensions();
            let (new_w, new_h, left, top) = letterbox_geometry(w, h, p.width, p.height);
            let mut canvas = RgbImage::from_pixel(p.width, p.height, Rgb(pad_rgb));
            if new_w > 0 && new_h > 0 {
                let resized = resize_like_pil(image, new_w, new_h, p.filter);
                // Geometry guarantees left + new_w <= width and top + new_h <= height.
                image::imageops::replace(&mut canvas, &resized, i64::from(left), i64::from(top));
            }
            canvas
        }
    }
}

/// Builds the model input tensor: x = (v * scale - mean[c]) / std[c], computed in f32
/// per element, `c` being the tensor channel. Shape `[1, 3, H, W]` (NCHW) or
/// `[1, H, W, 3]` (NHWC). A zero width or height gives an empty tensor. Does not panic for
/// sizes accepted by [`ImagePreprocess::validate`] (beyond that, allocation may fail).
#[must_use]
pub fn image_to_tensor(image: &RgbImage, p: &ImagePreprocess) -> Array4<f32> {
    let fitted = fit_to_input(image, p);
    let (w, h) = (p.width as usize, p.height as usize);
    let shape = match p.layout {
        Layout::Nchw => [1, 3, h, w],
        Layout::Nhwc => [1, h, w, 3],
    };
    let mut out = Array4::<f32>::zeros(shape);
    for (x, y, px) in fitted.enumerate_pixels() {
        let (x, y) = (x as usize, y as usize);
        for c in 0..3 {
            let src = match p.channel_order {
                ChannelOrder::Rgb => c,
                ChannelOrder::Bgr => 2 - c,
            };
            // Same operation order as numpy float32: multiply, subtract, divide.
            let v = (f32::from(px.0[src]) * p.scale - p.mean[c]) / p.std[c];
            match p.layout {
                Layout::Nchw => out[[0, c, y, x]] = v,
                Layout::Nhwc => out[[0, y, x, c]] = v,
            }
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    const MEAN: [f32; 3] = [0.485, 0.456, 0.406];
    const STD: [f32; 3] = [0.229, 0.224, 0.225];

    fn params(
        width: u32,
        height: u32,
        layout: Layout,
        order: ChannelOrder,
        resize: ResizeMode,
    ) -> ImagePreprocess {
        ImagePreprocess {
            width,
            height,
            layout,
            channel_order: order,
            resize,
            filter: ResizeFilter::Bilinear,
            scale: 1.0 / 255.0,
            mean: MEAN,
            std: STD,
        }
    }

    fn noise(w: u32, h: u32, seed: u32) -> RgbImage {
        RgbImage::from_fn(w, h, |x, y| {
            let v = (x ^ seed.rotate_left(7))
                .wrapping_mul(2_654_435_761)
                .wrapping_add(y.wrapping_mul(2_246_822_519));
            Rgb([(v >> 24) as u8, (v >> 13) as u8, (v >> 5) as u8])
        })
    }

    #[test]
    fn geometry_examples() {
        // Wide image into 64x48: full width, vertical bands.
        assert_eq!(letterbox_geometry(97, 61, 64, 48), (64, 40, 0, 4));
        // Tall image: full height, horizontal bands.
        assert_eq!(letterbox_geometry(40, 120, 64, 48), (16, 48, 24, 0));
        // Upscaling fills the limiting side.
        assert_eq!(letterbox_geometry(10, 5, 100, 100), (100, 50, 0, 25));
        // Extreme aspect ratio still keeps at least one pixel.
        assert_eq!(letterbox_geometry(10_000, 1, 64, 48), (64, 1, 0, 23));
        assert_eq!(letterbox_geometry(0, 5, 64, 48), (0, 0, 32, 24));
        assert_eq!(
            letterbox_geometry(u32::MAX, 1, 1, u32::MAX),
            (1, 1, 0, u32::MAX / 2)
        );
    }

    #[test]
    fn bgr_swaps_channels() {
        let img = RgbImage::from_pixel(2, 2, Rgb([10, 20, 30]));
        let mut p = params(2, 2, Layout::Nchw, ChannelOrder::Bgr, ResizeMode::Stretch);
        p.scale = 1.0;
        p.mean = [0.0; 3];
        p.std = [1.0; 3];
        let t = image_to_tensor(&img, &p);
        assert_eq!(t[[0, 0, 1, 1]], 30.0);
        assert_eq!(t[[0, 2, 0, 0]], 10.0);
    }

    #[test]
    fn degenerate_inputs_do_not_panic() {
        let one = RgbImage::from_pixel(1, 1, Rgb([255, 0, 9]));
        let empty = RgbImage::new(0, 0);
        let pad = ResizeMode::Letterbox {
            pad_rgb: [114, 90, 30],
        };
        for img in [&one, &empty] {
            for mode in [ResizeMode::Stretch, pad] {
                for (w, h) in [(0, 0), (1, 1), (64, 48), (3, 500)] {
                    let p = params(w, h, Layout::Nhwc, ChannelOrder::Rgb, mode);
                    let t = image_to_tensor(img, &p);
                    assert_eq!(t.shape(), &[1, h as usize, w as usize, 3]);
                }
            }
        }
    }

    #[test]
    fn validate_rejects_unusable_settings() {
        let ok = params(64, 48, Layout::Nchw, ChannelOrder::Rgb, ResizeMode::Stretch);
        assert_eq!(ok.validate(), Ok(()));
        let mut p = ok;
        p.width = 0;
        assert!(matches!(p.validate(), Err(PreprocessError::Size { .. })));
        p = ok;
        p.height = MAX_INPUT_SIDE + 1;
        assert!(matches!(p.validate(), Err(PreprocessError::Size { .. })));
        p = ok;
        p.std[1] = 0.0;
        assert!(p.validate().unwrap_err().to_string().contains("std"));
        p = ok;
        p.mean[2] = f32::NAN;
        assert!(p.validate().is_err());
        p = ok;
        p.scale = f32::INFINITY;
        assert!(p.validate().is_err());
    }

    proptest! {
        #[test]
        fn output_shape(w in 1u32..50, h in 1u32..50, tw in 0u32..40, th in 0u32..40,
                        nchw: bool, letterbox: bool, seed: u32) {
            let layout = if nchw { Layout::Nchw } else { Layout::Nhwc };
            let mode = if letterbox { ResizeMode::Letterbox { pad_rgb: [1, 2, 3] } } else { ResizeMode::Stretch };
            let t = image_to_tensor(&noise(w, h, seed), &params(tw, th, layout, ChannelOrder::Rgb, mode));
            let (tw, th) = (tw as usize, th as usize);
            let expected = if nchw { [1, 3, th, tw] } else { [1, th, tw, 3] };
            prop_assert_eq!(t.shape(), &expected[..]);
        }

        #[test]
        fn letterbox_pad_is_normalised_pad_colour(w in 1u32..60, h in 1u32..60, tw in 1u32..40,
                                                  th in 1u32..40, bgr: bool, seed: u32) {
            let pad = [114u8, 90, 30];
            let order = if bgr { ChannelOrder::Bgr } else { ChannelOrder::Rgb };
            let p = params(tw, th, Layout::Nchw, order, ResizeMode::Letterbox { pad_rgb: pad });
            let t = image_to_tensor(&noise(w, h, seed), &p);
            let (nw, nh, left, top) = letterbox_geometry(w, h, tw, th);
            prop_assert!(left + nw <= tw && top + nh <= th && nw >= 1 && nh >= 1);
            for c in 0..3 {
                let src = if bgr { 2 - c } else { c };
                let want = (f32::from(pad[src]) * p.scale - p.mean[c]) / p.std[c];
                for y in 0..th {
                    for x in 0..tw {
                        let inside = x >= left && x < left + nw && y >= top && y < top + nh;
                        if !inside {
                            prop_assert_eq!(t[[0, c, y as usize, x as usize]], want);
                        }
                    }
                }
            }
        }

        #[test]
        fn stretch_to_same_size_keeps_pixels(w in 1u32..30, h in 1u32..30, seed: u32) {
            let img = noise(w, h, seed);
            let mut p = params(w, h, Layout::Nhwc, ChannelOrder::Rgb, ResizeMode::Stretch);
            p.scale = 1.0;
            p.mean = [0.0; 3];
            p.std = [1.0; 3];
            let t = image_to_tensor(&img, &p);
            for (x, y, px) in img.enumerate_pixels() {
                for c in 0..3 {
                    prop_assert_eq!(t[[0, y as usize, x as usize, c]], f32::from(px.0[c]));
                }
            }
        }
    }
}
