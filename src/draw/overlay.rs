//! Overlay: the photo with what Beadline found drawn on it, so a person can check at a glance.
//!
//! Goes in: the photo file and shapes (circles, numbered points, polylines, labels). Comes out: an
//! RGB image written atomically as PNG. Text uses a built-in 3 x 5 pixel font scaled up.

use crate::error::{Error, Result};
use crate::image::load::{LoadOptions, load_colour};
use image::{Rgb, RgbImage};
use imageproc::drawing::{draw_hollow_circle_mut, draw_line_segment_mut};
use std::path::Path;

/// A colour.
pub type Colour = [u8; 3];
/// Accepted ball images.
pub const GREEN: Colour = [40, 230, 90];
/// Rejected candidates.
pub const RED: Colour = [240, 60, 50];
/// Fits and lines.
pub const CYAN: Colour = [60, 200, 255];
/// Labels.
pub const YELLOW: Colour = [255, 220, 40];

/// A drawing canvas over a photo.
pub struct Canvas {
    /// The image drawn on.
    pub image: RgbImage,
}

/// Glyphs of the built-in font: 3 columns x 5 rows, bit 14 = top-left.
fn glyph(c: char) -> Option<u16> {
    Some(match c {
        '0' => 0b111_101_101_101_111,
        '1' => 0b010_110_010_010_111,
        '2' => 0b111_001_111_100_111,
        '3' => 0b111_001_111_001_111,
        '4' => 0b101_101_111_001_001,
        '5' => 0b111_100_111_001_111,
        '6' => 0b111_100_111_101_111,
        '7' => 0b111_001_001_010_010,
        '8' => 0b111_101_111_101_111,
        '9' => 0b111_101_111_001_111,
        '.' => 0b000_000_000_000_010,
        '-' => 0b000_000_111_000_000,
        '=' => 0b000_111_000_111_000,
        'e' => 0b000_111_111_100_111,
        'g' => 0b111_101_111_001_111,
        'm' => 0b000_111_111_101_101,
        's' => 0b000_111_110_011_111,
        'x' => 0b000_101_010_101_000,
        ' ' => 0,
        _ => return None,
    })
}

impl Canvas {
    /// Open the photo at `path` as a canvas (dimmed so the drawing stands out), decoded by
    /// [`load_colour`]: the orientation and limits of the numbers it is drawn from.
    pub fn open(path: &Path) -> Result<Canvas> {
        let mut image = load_colour(path, &LoadOptions::default())?;
        for p in image.pixels_mut() {
            for c in p.0.iter_mut() {
                *c = (*c as f32 * 0.75) as u8;
            }
        }
        Ok(Canvas { image })
    }

    /// A canvas from grey values 0..1.
    pub fn from_luma(width: usize, height: usize, luma: &[f32]) -> Canvas {
        let mut image = RgbImage::new(width as u32, height as u32);
        for (p, v) in image.pixels_mut().zip(luma) {
            let g = (v.clamp(0.0, 1.0) * 255.0 * 0.75) as u8;
            *p = Rgb([g, g, g]);
        }
        Canvas { image }
    }

    /// A circle outline.
    pub fn circle(&mut self, x_px: f64, y_px: f64, r_px: f64, colour: Colour) {
        let c = (x_px.round() as i32, y_px.round() as i32);
        draw_hollow_circle_mut(
            &mut self.image,
            c,
            r_px.round().max(1.0) as i32,
            Rgb(colour),
        );
    }

    /// A small cross at a point.
    pub fn cross(&mut self, x_px: f64, y_px: f64, size_px: f64, colour: Colour) {
        let (x, y, s) = (x_px as f32, y_px as f32, size_px as f32);
        draw_line_segment_mut(&mut self.image, (x - s, y), (x + s, y), Rgb(colour));
        draw_line_segment_mut(&mut self.image, (x, y - s), (x, y + s), Rgb(colour));
    }

    /// A polyline through points (pixels).
    pub fn polyline(&mut self, points: &[[f64; 2]], colour: Colour) {
        for w in points.windows(2) {
            draw_line_segment_mut(
                &mut self.image,
                (w[0][0] as f32, w[0][1] as f32),
                (w[1][0] as f32, w[1][1] as f32),
                Rgb(colour),
            );
        }
    }

    /// Text with its top-left corner at (x, y), glyphs `scale` pixels per font pixel.
    pub fn text(&mut self, x_px: f64, y_px: f64, text: &str, scale: u32, colour: Colour) {
        let (w, h) = (self.image.width() as i64, self.image.height() as i64);
        let mut cx = x_px.round() as i64;
        let cy = y_px.round() as i64;
        let s = scale.max(1) as i64;
        for ch in text.chars() {
            if let Some(bits) = glyph(ch) {
                for row in 0..5 {
                    for col in 0..3 {
                        if bits & (1 << (14 - (row * 3 + col))) == 0 {
                            continue;
                        }
                        for dy in 0..s {
                            for dx in 0..s {
                                let (px, py) = (cx + col * s + dx, cy + row * s + dy);
                                if px >= 0 && py >= 0 && px < w && py < h {
                                    self.image.put_pixel(px as u32, py as u32, Rgb(colour));
                                }
                            }
                        }
                    }
                }
            }
            cx += 4 * s;
        }
    }

    /// Write the canvas as PNG, atomically.
    pub fn save(&self, path: &Path) -> Result<()> {
        let mut buf = std::io::Cursor::new(Vec::new());
        self.image
            .write_to(&mut buf, image::ImageFormat::Png)
            .map_err(|e| Error::io(path, std::io::Error::other(e)))?;
        crate::core::output::write_atomic(path, |w| w.write_all(buf.get_ref()))
    }
}

/// The measure overlay: ball images numbered by flash, strays, the path by phase, the floor line
/// and each bounce labelled with its restitution.
pub fn measure_overlay(photo: &Path, m: &crate::pipeline::Measured, out: &Path) -> Result<()> {
    let mut c = Canvas::open(photo)?;
    let doc = &m.doc;
    let scale = (doc.width_px.max(doc.height_px) as f64 / 800.0)
        .ceil()
        .max(1.0) as u32;
    for s in &doc.strays {
        let r = m.spots.spots.get(s.spot_index).map_or(5.0, |p| p.r_px);
        c.circle(s.x_px, s.y_px, r, RED);
    }
    for p in &doc.path {
        c.circle(p.x_px, p.y_px, p.r_px, GREEN);
        c.cross(p.x_px, p.y_px, 2.0, GREEN);
    }
    for ph in &doc.measurement.phases {
        let pts: Vec<[f64; 2]> = doc
            .path
            .iter()
            .filter(|p| p.n >= ph.first_n && p.n <= ph.last_n)
            .map(|p| [p.x_px, p.y_px])
            .collect();
        c.polyline(&pts, CYAN);
    }
    for p in &doc.path {
        c.text(
            p.x_px - 4.0,
            p.y_px - p.r_px - 6.0 * scale as f64 - 2.0,
            &p.n.to_string(),
            scale,
            YELLOW,
        );
    }
    // Floor line across the photo (world y = floor), in the calibrated frame.
    let floor = doc.measurement.floor.y_m;
    if floor.is_finite() {
        let xs: Vec<f64> = doc.path.iter().map(|p| p.x_m).collect();
        let (lo, hi) = xs
            .iter()
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &x| {
                (a.min(x), b.max(x))
            });
        let span = (hi - lo).max(0.01);
        let line: Vec<[f64; 2]> = (0..=20)
            .map(|i| {
                let x = lo - 0.1 * span + 1.2 * span * i as f64 / 20.0;
                m.calibration.to_pixel(x, floor)
            })
            .collect();
        c.polyline(&line, YELLOW);
    }
    for b in &doc.measurement.bounces {
        let p = m.calibration.to_pixel(b.x_m, floor);
        c.cross(p[0], p[1], 6.0, YELLOW);
        c.text(
            p[0] - 12.0 * scale as f64,
            p[1] + 4.0,
            &format!("e={:.3}", b.restitution),
            scale,
            YELLOW,
        );
    }
    c.save(out)
}
