//! Decoding images from disk, upright.
//!
//! Invariant: every image and mask is returned with its EXIF orientation applied, so region
//! coordinates always refer to the image as a viewer displays it. Decoding is bounded by
//! [`image::Limits`] so a hostile file cannot exhaust memory.

use std::io::BufReader;
use std::path::{Path, PathBuf};

use image::{DynamicImage, GrayImage, ImageDecoder, ImageReader, RgbImage};

/// Largest width or height we decode, in pixels.
pub const MAX_SIDE_PX: u32 = 16_384;
const MAX_ALLOC_BYTES: u64 = 1 << 30;

#[derive(Debug, thiserror::Error)]
pub enum ImageLoadError {
    #[error("cannot open image {path}: {source}")]
    Open {
        path: PathBuf,
        source: std::io::Error,
    },
    #[error("cannot decode image {path}: {message}; check the file is a valid PNG or JPEG")]
    Decode { path: PathBuf, message: String },
}

fn decode_upright(path: &Path) -> Result<DynamicImage, ImageLoadError> {
    let file = std::fs::File::open(path).map_err(|source| ImageLoadError::Open {
        path: path.to_path_buf(),
        source,
    })?;
    let decode_err = |e: image::ImageError| ImageLoadError::Decode {
        path: path.to_path_buf(),
        message: e.to_string(),
    };
    let mut reader = ImageReader::new(BufReader::new(file))
        .with_guessed_format()
        .map_err(|source| ImageLoadError::Open {
            path: path.to_path_buf(),
            source,
        })?;
    let mut limits = image::Limits::default();
    limits.max_image_width = Some(MAX_SIDE_PX);
    limits.max_image_height = Some(MAX_SIDE_PX);
    limits.max_alloc = Some(MAX_ALLOC_BYTES);
    reader.limits(limits);
    let mut decoder = reader.into_decoder().map_err(decode_err)?;
    let orientation = decoder.orientation().map_err(decode_err)?;
    let mut img = DynamicImage::from_decoder(decoder).map_err(decode_err)?;
    img.apply_orientation(orientation);
    Ok(img)
}

/// Loads an image as 8-bit RGB (alpha dropped, grey expanded), upright.
pub fn load_rgb(path: &Path) -> Result<RgbImage, ImageLoadError> {
    Ok(decode_upright(path)?.into_rgb8())
}

/// Loads a mask image as 8-bit grey, upright.
pub fn load_gray(path: &Path) -> Result<GrayImage, ImageLoadError> {
    Ok(decode_upright(path)?.into_luma8())
}
