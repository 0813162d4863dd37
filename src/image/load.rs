//! Load: a photo file to a grey working image in full precision.
//!
//! Goes in: a JPEG, PNG or TIFF (8 or 16 bit, grey or colour, EXIF orientation applied). Comes out:
//! a [`Photo`] read as f32 luma values 0..1 at full precision: 8- and 16-bit grey samples are
//! kept exactly as decoded (no copy four times larger), colour is converted to f32 luma (Rec. 709
//! weights on the stored values; a YCbCr JPEG gives its stored luma plane directly, which its
//! encoder made with the Rec. 601 weights, and its chroma is never decoded). A photo can be
//! decimated to block means for the detection of large balls. Decoding limits refuse hostile
//! files (a header claiming 100000 x 100000 pixels) before any large allocation, naming the size
//! claimed and the limits.

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
    /// The luma samples, row-major, as decoded.
    samples: Samples,
}

/// Luma samples as the decoder gave them: 8 or 16 bit kept exactly (read as f32 0..1, so a
/// 24-megapixel JPEG is not copied into a four times larger buffer), or f32 when the luma was
/// computed (a colour photo's Rec. 709 weighted sum, a rendered image).
#[derive(Debug, Clone)]
enum Samples {
    U8(Vec<u8>),
    U16(Vec<u16>),
    F32(Vec<f32>),
}

impl Photo {
    /// A photo from raw luma values (for tests and for rendered images held in memory).
    pub fn from_luma(path: &Path, width: usize, height: usize, luma: Vec<f32>) -> Photo {
        assert_eq!(luma.len(), width * height, "luma buffer matches the size");
        Photo {
            path: path.to_path_buf(),
            width,
            height,
            samples: Samples::F32(luma),
        }
    }

    /// Value at a pixel, luma 0..1.
    #[inline]
    pub fn at(&self, x: usize, y: usize) -> f32 {
        let i = y * self.width + x;
        match &self.samples {
            Samples::U8(v) => v[i] as f32 * (1.0 / 255.0),
            Samples::U16(v) => v[i] as f32 * (1.0 / 65535.0),
            Samples::F32(v) => v[i],
        }
    }

    /// Values of row `y`, columns `x0..x0 + out.len()`, luma 0..1.
    #[inline]
    pub fn row(&self, y: usize, x0: usize, out: &mut [f32]) {
        let i = y * self.width + x0;
        let n = out.len();
        match &self.samples {
            Samples::U8(v) => {
                for (o, &s) in out.iter_mut().zip(&v[i..i + n]) {
                    *o = s as f32 * (1.0 / 255.0);
                }
            }
            Samples::U16(v) => {
                for (o, &s) in out.iter_mut().zip(&v[i..i + n]) {
                    *o = s as f32 * (1.0 / 65535.0);
                }
            }
            Samples::F32(v) => out.copy_from_slice(&v[i..i + n]),
        }
    }

    /// The photo averaged over blocks of `d` x `d` pixels (the last row and column of blocks
    /// cut at the edge): block (i, j) is centred on full-resolution pixel
    /// (i d + (d - 1) / 2, j d + (d - 1) / 2).
    pub fn decimated(&self, d: usize) -> Photo {
        let d = d.max(1);
        let (w, h) = (self.width.div_ceil(d), self.height.div_ceil(d));
        let mut out = vec![0f32; w * h];
        let width = self.width;
        // Column sums over the block's rows (one vectorised add per sample), then sums of d
        // columns, scaled once per block.
        fn add<T: Copy>(src: &[T], col: &mut [f32], f: impl Fn(T) -> f32) {
            for (c, &v) in col.iter_mut().zip(src) {
                *c += f(v);
            }
        }
        let scale = match &self.samples {
            Samples::U8(_) => 1.0 / 255.0,
            Samples::U16(_) => 1.0 / 65535.0,
            Samples::F32(_) => 1.0,
        };
        out.par_chunks_mut(w.max(1))
            .enumerate()
            .for_each(|(j, row)| {
                let (y0, y1) = (j * d, (j * d + d).min(self.height));
                let mut col = vec![0f32; width];
                for y in y0..y1 {
                    let r = y * width..(y + 1) * width;
                    match &self.samples {
                        Samples::U8(v) => add(&v[r], &mut col, |s| s as f32),
                        Samples::U16(v) => add(&v[r], &mut col, |s| s as f32),
                        Samples::F32(v) => add(&v[r], &mut col, |s| s),
                    }
                }
                for (i, (o, chunk)) in row.iter_mut().zip(col.chunks(d)).enumerate() {
                    let n = ((i * d + d).min(width) - i * d) * (y1 - y0);
                    *o = chunk.iter().sum::<f32>() * (scale / n as f32);
                }
            });
        Photo::from_luma(&self.path, w, h, out)
    }

    /// All values, row-major, luma 0..1 (a copy).
    pub fn luma(&self) -> Vec<f32> {
        let mut out = vec![0f32; self.width * self.height];
        if self.width > 0 {
            out.par_chunks_mut(self.width)
                .enumerate()
                .for_each(|(y, row)| self.row(y, 0, row));
        }
        out
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
    let bytes = read_checked(path, options)?;
    load_bytes(path, &bytes, options)
}

/// The bytes of a photo file, refused early when it is a folder, empty or over the size limit.
fn read_checked(path: &Path, options: &LoadOptions) -> Result<Vec<u8>> {
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
    std::fs::read(path).map_err(|e| Error::io(path, e))
}

/// Decode a photo held in memory; `path` names it in errors. [`load`] reads the file and comes
/// here, so files and bytes go one way through.
pub fn load_bytes(path: &Path, bytes: &[u8], options: &LoadOptions) -> Result<Photo> {
    decode(path, bytes, options, true).map(|img| to_photo(path, img))
}

/// Load a photo file in colour, for drawing on: the same checks, limits and EXIF orientation as
/// [`load`], so a picture drawn from the numbers [`load`] gave lines up with them.
pub fn load_colour(path: &Path, options: &LoadOptions) -> Result<image::RgbImage> {
    let bytes = read_checked(path, options)?;
    decode(path, &bytes, options, false).map(|img| img.to_rgb8())
}

/// A photo in colour at the file's own precision (8-bit samples stay 8-bit, 16-bit stay 16-bit),
/// for reading a few regions of it.
pub enum ColourPhoto {
    /// 8 bits a sample.
    Rgb8(image::RgbImage),
    /// 16 bits a sample.
    Rgb16(image::ImageBuffer<image::Rgb<u16>, Vec<u16>>),
    /// Floating point.
    Rgb32F(image::Rgb32FImage),
}

impl ColourPhoto {
    /// Width and height, pixels.
    pub fn size(&self) -> (usize, usize) {
        let (w, h) = match self {
            ColourPhoto::Rgb8(i) => i.dimensions(),
            ColourPhoto::Rgb16(i) => i.dimensions(),
            ColourPhoto::Rgb32F(i) => i.dimensions(),
        };
        (w as usize, h as usize)
    }

    /// The stored value of channel `c` at (x, y), 0..1.
    pub fn at(&self, x: usize, y: usize, c: usize) -> f32 {
        let (x, y) = (x as u32, y as u32);
        match self {
            ColourPhoto::Rgb8(i) => i.get_pixel(x, y)[c] as f32 / 255.0,
            ColourPhoto::Rgb16(i) => i.get_pixel(x, y)[c] as f32 / 65535.0,
            ColourPhoto::Rgb32F(i) => i.get_pixel(x, y)[c],
        }
    }
}

/// Load a photo file in colour at its own precision, with the same checks, limits and EXIF
/// orientation as [`load`].
pub fn load_colour_exact(path: &Path, options: &LoadOptions) -> Result<ColourPhoto> {
    let bytes = read_checked(path, options)?;
    let img = decode(path, &bytes, options, false)?;
    Ok(match img {
        DynamicImage::ImageRgb8(i) => ColourPhoto::Rgb8(i),
        DynamicImage::ImageRgb16(i) => ColourPhoto::Rgb16(i),
        DynamicImage::ImageRgb32F(i) => ColourPhoto::Rgb32F(i),
        DynamicImage::ImageLuma16(_)
        | DynamicImage::ImageLumaA16(_)
        | DynamicImage::ImageRgba16(_) => ColourPhoto::Rgb16(img.into_rgb16()),
        DynamicImage::ImageRgba32F(_) => ColourPhoto::Rgb32F(img.into_rgb32f()),
        other => ColourPhoto::Rgb8(other.into_rgb8()),
    })
}

/// The one decoder: refuses empty, truncated, unknown or oversized images, applies the EXIF
/// orientation; with `luma_only` a YCbCr JPEG's luma plane is decoded alone.
fn decode(
    path: &Path,
    bytes: &[u8],
    options: &LoadOptions,
    luma_only: bool,
) -> Result<DynamicImage> {
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
    if reader.format() == Some(image::ImageFormat::Png)
        && let Some((w, h)) = png_claimed_size(bytes)
    {
        check_size(path, Some((w, h)), options)?;
    }
    let mut limits = image::Limits::default();
    limits.max_image_width = Some(options.max_side_px);
    limits.max_image_height = Some(options.max_side_px);
    limits.max_alloc = Some(options.max_alloc_bytes);
    reader.limits(limits);
    let reader_is_jpeg = reader.format() == Some(image::ImageFormat::Jpeg);
    let mut decoder = reader.into_decoder().map_err(|e| match e {
        image::ImageError::Limits(_) => too_large(path, None, options),
        e => decode_error(path, e),
    })?;
    check_size(
        path,
        Some(image::ImageDecoder::dimensions(&decoder)),
        options,
    )?;
    let orientation = image::ImageDecoder::orientation(&mut decoder)
        .unwrap_or(image::metadata::Orientation::NoTransforms);
    let grey = if reader_is_jpeg && luma_only {
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
        return Err(Error::Unusable {
            path: path.to_path_buf(),
            message: format!(
                "the image decodes, but {} x {} pixels is too small to hold a ball",
                img.width(),
                img.height()
            ),
        });
    }
    Ok(img)
}

/// The width and height a PNG's header claims (its first chunk, IHDR), read before any
/// decoding: a header-only file claiming 100000 x 100000 pixels is named as too large.
fn png_claimed_size(bytes: &[u8]) -> Option<(u32, u32)> {
    let be = |b: &[u8]| u32::from_be_bytes([b[0], b[1], b[2], b[3]]);
    (bytes.len() >= 24 && &bytes[12..16] == b"IHDR")
        .then(|| (be(&bytes[16..20]), be(&bytes[20..24])))
}

/// The error for an image over the limits: its size when known, and the limits.
fn too_large(path: &Path, size_px: Option<(u32, u32)>, options: &LoadOptions) -> Error {
    let what = match size_px {
        Some((w, h)) => format!("image of {w} x {h} px"),
        None => "image".to_string(),
    };
    Error::Unusable {
        path: path.to_path_buf(),
        message: format!(
            "{what} is larger than the limit of {} px a side and {} megapixels",
            options.max_side_px, options.max_megapixels
        ),
    }
}

/// Refuse an image of `size_px` (width, height) over the side or area limit.
fn check_size(path: &Path, size_px: Option<(u32, u32)>, options: &LoadOptions) -> Result<()> {
    match size_px {
        Some((w, h))
            if w > options.max_side_px
                || h > options.max_side_px
                || (w as f64) * (h as f64) > options.max_megapixels * 1e6 =>
        {
            Err(too_large(path, size_px, options))
        }
        _ => Ok(()),
    }
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

/// Rec. 709 luma of interleaved RGB samples, rows of `w` pixels in parallel, times `scale`.
fn rgb_luma<T: Copy + Into<f32> + Sync>(raw: &[T], w: usize, scale: f32) -> Vec<f32> {
    const KR: f32 = 0.2126;
    const KG: f32 = 0.7152;
    const KB: f32 = 0.0722;
    let mut luma = vec![0f32; raw.len() / 3];
    luma.par_chunks_mut(w.max(1))
        .zip(raw.par_chunks(3 * w.max(1)))
        .for_each(|(row, src)| {
            for (v, p) in row.iter_mut().zip(src.chunks_exact(3)) {
                *v = (KR * p[0].into() + KG * p[1].into() + KB * p[2].into()) * scale;
            }
        });
    luma
}

/// A decoded image as a grey photo: 8- and 16-bit grey kept as they are, colour converted to
/// Rec. 709 luma in f32 (rows in parallel).
pub fn to_photo(path: &Path, img: DynamicImage) -> Photo {
    let (w, h) = (img.width() as usize, img.height() as usize);
    let samples = match img {
        DynamicImage::ImageLuma8(b) => Samples::U8(b.into_raw()),
        DynamicImage::ImageLuma16(b) => Samples::U16(b.into_raw()),
        DynamicImage::ImageRgb8(b) => Samples::F32(rgb_luma(b.as_raw(), w, 1.0 / 255.0)),
        DynamicImage::ImageRgb16(b) => Samples::F32(rgb_luma(b.as_raw(), w, 1.0 / 65535.0)),
        other => Samples::F32(other.to_luma32f().into_raw()),
    };
    Photo {
        path: path.to_path_buf(),
        width: w,
        height: h,
        samples,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn decimation_averages_blocks_and_cuts_the_last_ones_at_the_edge() {
        // 5 x 3 pixels of 8-bit values v = 10 x + y, decimated by 2: blocks 2 x 2, the last
        // column and row of blocks 1 pixel wide or high. Truth: the mean of each block by hand.
        let (w, h) = (5usize, 3usize);
        let raw: Vec<u8> = (0..w * h).map(|i| (10 * (i % w) + i / w) as u8).collect();
        let img = DynamicImage::ImageLuma8(image::GrayImage::from_raw(5, 3, raw).unwrap());
        let photo = to_photo(Path::new("t.png"), img);
        assert_eq!(photo.at(4, 2), 42.0 / 255.0);
        let small = photo.decimated(2);
        assert_eq!((small.width, small.height), (3, 2));
        let want = [[5.5, 25.5, 40.5], [7.0, 27.0, 42.0]];
        for (j, row) in want.iter().enumerate() {
            for (i, &v) in row.iter().enumerate() {
                let got = small.at(i, j) * 255.0;
                assert!((got - v).abs() < 1e-4, "block ({i}, {j}): {got} vs {v}");
            }
        }
        // A 16-bit photo and the same values in f32 decimate alike.
        let raw16: Vec<u16> = (0..w * h)
            .map(|i| (10 * (i % w) + i / w) as u16 * 257)
            .collect();
        let img = DynamicImage::ImageLuma16(image::ImageBuffer::from_raw(5, 3, raw16).unwrap());
        let p16 = to_photo(Path::new("t.png"), img).decimated(2);
        let pf = Photo::from_luma(Path::new("t.png"), w, h, photo.luma()).decimated(2);
        for i in 0..6 {
            let (x, y) = (i % 3, i / 3);
            assert!((p16.at(x, y) - small.at(x, y)).abs() < 1e-6);
            assert!((pf.at(x, y) - small.at(x, y)).abs() < 1e-6);
        }
    }
}
