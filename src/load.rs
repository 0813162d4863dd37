//! Load: a photo file to a grey working image in full precision.
//!
//! Goes in: a JPEG, PNG or TIFF (8 or 16 bit, grey or colour, EXIF orientation applied). Comes out:
//! a [`Photo`] of f32 luma values 0..1 (Rec. 709 weights on the stored values; a YCbCr JPEG gives
//! its stored luma plane directly, which its encoder made with the Rec. 601 weights, and its
//! chroma is never decoded). Decoding limits refuse hostile files (a header claiming
//! 100000 x 100000 pixels) before any large allocation.

use crate::error::{Error, Result};
use image::DynamicImage;
use rayon::prelude::*;
use std::path::{Path, PathBuf};

/// Limits on what the loader accepts.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LoadOptions {
    /// Largest accepted width or height, pixels.
    pub max_side_px: u32,
    /// Largest accepted image area, megapixels.
    pub max_megapixels: f64,
    /// Largest allocation the decoder may make, bytes.
    pub max_alloc_bytes: u64,
}

impl Default for LoadOptions {
    fn default() -> Self {
        LoadOptions {
            max_side_px: 30_000,
            max_megapixels: 120.0,
            max_alloc_bytes: 1 << 30,
        }
    }
}

/// A grey working image.
#[derive(Debug, Clone)]
pub struct Photo {
    /// The file it came from.
    pub path: PathBuf,
    /// Width, pixels.
    pub width: usize,
    /// Height, pixels.
    pub height: usize,
    /// Luma 0..1, row-major.
    pub luma: Vec<f32>,
}

impl Photo {
    /// A photo from raw luma values (for tests and for rendered images held in memory).
    pub fn from_luma(path: &Path, width: usize, height: usize, luma: Vec<f32>) -> Photo {
        assert_eq!(luma.len(), width * height, "luma buffer matches the size");
        Photo {
            path: path.to_path_buf(),
            width,
            height,
            luma,
        }
    }

    /// Value at a pixel.
    pub fn at(&self, x: usize, y: usize) -> f32 {
        self.luma[y * self.width + x]
    }
}

fn decode_error(path: &Path, message: impl std::fmt::Display) -> Error {
    Error::Decode {
        path: path.to_path_buf(),
        message: message.to_string(),
    }
}

/// Load a photo file.
pub fn load(path: &Path, options: &LoadOptions) -> Result<Photo> {
    let meta = std::fs::metadata(path).map_err(|e| Error::io(path, e))?;
    if meta.is_dir() {
        return Err(decode_error(path, "is a folder, not a photo"));
    }
    if meta.len() == 0 {
        return Err(decode_error(path, "empty file"));
    }
    if meta.len() > options.max_alloc_bytes {
        return Err(decode_error(
            path,
            format!("{} bytes is over the file size limit", meta.len()),
        ));
    }
    let bytes = std::fs::read(path).map_err(|e| Error::io(path, e))?;
    load_bytes(path, &bytes, options)
}

/// Decode a photo held in memory; `path` names it in errors. [`load`] reads the file and comes
/// here, so files and bytes go one way through.
pub fn load_bytes(path: &Path, bytes: &[u8], options: &LoadOptions) -> Result<Photo> {
    if bytes.is_empty() {
        return Err(decode_error(path, "empty file"));
    }
    if bytes.len() as u64 > options.max_alloc_bytes {
        return Err(decode_error(
            path,
            format!("{} bytes is over the file size limit", bytes.len()),
        ));
    }
    let mut reader = image::ImageReader::new(std::io::Cursor::new(bytes))
        .with_guessed_format()
        .map_err(|e| Error::io(path, e))?;
    // The JPEG decoder fills a truncated file with grey; refuse it instead (no end-of-image
    // marker FF D9 near the end of the file).
    if reader.format() == Some(image::ImageFormat::Jpeg) {
        let tail = &bytes[bytes.len().saturating_sub(4096)..];
        if !tail.windows(2).any(|w| w == [0xFF, 0xD9]) {
            return Err(decode_error(
                path,
                "truncated JPEG (no end-of-image marker)",
            ));
        }
    }
    if reader.format().is_none() {
        return Err(decode_error(
            path,
            "not a JPEG, PNG or TIFF image (unknown format)",
        ));
    }
    let mut limits = image::Limits::default();
    limits.max_image_width = Some(options.max_side_px);
    limits.max_image_height = Some(options.max_side_px);
    limits.max_alloc = Some(options.max_alloc_bytes);
    reader.limits(limits);
    let reader_is_jpeg = reader.format() == Some(image::ImageFormat::Jpeg);
    let mut decoder = reader.into_decoder().map_err(|e| decode_error(path, e))?;
    let (w, h) = image::ImageDecoder::dimensions(&decoder);
    if (w as f64) * (h as f64) > options.max_megapixels * 1e6 {
        return Err(decode_error(
            path,
            format!(
                "{w} x {h} pixels is over the limit of {} megapixels",
                options.max_megapixels
            ),
        ));
    }
    let orientation = image::ImageDecoder::orientation(&mut decoder)
        .unwrap_or(image::metadata::Orientation::NoTransforms);
    let grey = if reader_is_jpeg {
        jpeg_luma(bytes, options).map_err(|e| decode_error(path, e))?
    } else {
        None
    };
    let mut img = match grey {
        Some(g) => DynamicImage::ImageLuma8(g),
        None => DynamicImage::from_decoder(decoder).map_err(|e| decode_error(path, e))?,
    };
    img.apply_orientation(orientation);
    if img.width() < 3 || img.height() < 3 {
        return Err(decode_error(
            path,
            format!(
                "{} x {} pixels is too small to hold a ball",
                img.width(),
                img.height()
            ),
        ));
    }
    Ok(to_photo(path, &img))
}

/// Decode only the luma plane of a YCbCr or grey JPEG (zune-jpeg skips the chroma's inverse
/// transforms, upsampling and colour conversion: about half the decoding time). The JPEG encoder
/// made that plane with the Rec. 601 weights. `None` for other colour models (CMYK, YCCK, RGB),
/// which go the general way.
fn jpeg_luma(
    bytes: &[u8],
    options: &LoadOptions,
) -> std::result::Result<Option<image::GrayImage>, String> {
    use zune_core::colorspace::ColorSpace;
    use zune_core::options::DecoderOptions;
    let side = options.max_side_px as usize;
    let opts = DecoderOptions::default()
        .set_max_width(side)
        .set_max_height(side)
        .jpeg_set_out_colorspace(ColorSpace::Luma);
    let mut dec =
        zune_jpeg::JpegDecoder::new_with_options(zune_core::bytestream::ZCursor::new(bytes), opts);
    dec.decode_headers().map_err(|e| e.to_string())?;
    if !matches!(
        dec.input_colorspace(),
        Some(ColorSpace::YCbCr | ColorSpace::Luma)
    ) {
        return Ok(None);
    }
    let (w, h) = match dec.info() {
        Some(i) => (i.width as u32, i.height as u32),
        None => return Ok(None),
    };
    let raw = dec.decode().map_err(|e| e.to_string())?;
    Ok(image::GrayImage::from_raw(w, h, raw))
}

/// Convert a decoded image to grey f32, rows in parallel.
pub fn to_photo(path: &Path, img: &DynamicImage) -> Photo {
    let (w, h) = (img.width() as usize, img.height() as usize);
    let mut luma = vec![0f32; w * h];
    const KR: f32 = 0.2126;
    const KG: f32 = 0.7152;
    const KB: f32 = 0.0722;
    match img {
        DynamicImage::ImageLuma8(b) => {
            let raw = b.as_raw();
            luma.par_chunks_mut(w).enumerate().for_each(|(y, row)| {
                for (x, v) in row.iter_mut().enumerate() {
                    *v = raw[y * w + x] as f32 / 255.0;
                }
            });
        }
        DynamicImage::ImageRgb8(b) => {
            let raw = b.as_raw();
            luma.par_chunks_mut(w).enumerate().for_each(|(y, row)| {
                let src = &raw[y * w * 3..(y + 1) * w * 3];
                for (v, p) in row.iter_mut().zip(src.chunks_exact(3)) {
                    *v = (KR * p[0] as f32 + KG * p[1] as f32 + KB * p[2] as f32) / 255.0;
                }
            });
        }
        DynamicImage::ImageLuma16(b) => {
            let raw = b.as_raw();
            luma.par_chunks_mut(w).enumerate().for_each(|(y, row)| {
                for (x, v) in row.iter_mut().enumerate() {
                    *v = raw[y * w + x] as f32 / 65535.0;
                }
            });
        }
        DynamicImage::ImageRgb16(b) => {
            let raw = b.as_raw();
            luma.par_chunks_mut(w).enumerate().for_each(|(y, row)| {
                let src = &raw[y * w * 3..(y + 1) * w * 3];
                for (v, p) in row.iter_mut().zip(src.chunks_exact(3)) {
                    *v = (KR * p[0] as f32 + KG * p[1] as f32 + KB * p[2] as f32) / 65535.0;
                }
            });
        }
        other => {
            let g = other.to_luma32f();
            luma.copy_from_slice(g.as_raw());
        }
    }
    Photo {
        path: path.to_path_buf(),
        width: w,
        height: h,
        luma,
    }
}
