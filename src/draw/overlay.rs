//! Overlay: the photo with what Beadline found drawn on it, so a person can check at a glance.
//!
//! Goes in: the photo file and shapes (circles, numbered points, polylines, labels), or a
//! command's results. Comes out: an RGB image written atomically as PNG ([`Canvas::save`]) or
//! its PNG bytes ([`Canvas::png`]). Text uses a built-in 3 x 5 pixel font scaled up.
//!
//! Every picture with a path ([`path_overlay`], [`measure_overlay`]) numbers the ball images by
//! flash number, the `n` of the documents, and marks each missing flash with a dashed circle
//! where it was ([`missing_places`]); the spot finder's picture ([`spots_overlay`]), which has no
//! path, labels the images `s0`, `s1`... by their index in the `spots` list instead.

use crate::detect::SpotReport;
use crate::error::{Error, Result};
use crate::image::load::{LoadOptions, load_colour};
use crate::physics::PhaseKind;
use crate::report::measure::MeasureDoc;
use crate::track::confirm::predicted_position;
use crate::track::{BallPath, PathPoint, PathResult};
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
/// Missing flashes (dashed circles where the ball was).
pub const MAGENTA: Colour = [240, 70, 240];

/// Angle of one dash (and of one gap) of a dashed circle, radians.
pub const DASH_RAD: f64 = std::f64::consts::PI / 10.0;

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

    /// A dashed circle outline: dashes of [`DASH_RAD`] from angle 0 (x right) counter-clockwise
    /// as seen (y down), with gaps of the same angle between them.
    pub fn dashed_circle(&mut self, x_px: f64, y_px: f64, r_px: f64, colour: Colour) {
        let r_px = r_px.max(1.0);
        let steps = (2.0 * std::f64::consts::PI * r_px * 2.0).ceil() as usize;
        let (w, h) = (self.image.width() as f64, self.image.height() as f64);
        for k in 0..steps {
            let a = 2.0 * std::f64::consts::PI * k as f64 / steps as f64;
            if !dash_on(a) {
                continue;
            }
            let (x, y) = (
                (x_px + r_px * a.cos()).round(),
                (y_px - r_px * a.sin()).round(),
            );
            if x >= 0.0 && y >= 0.0 && x < w && y < h {
                self.image.put_pixel(x as u32, y as u32, Rgb(colour));
            }
        }
    }

    /// A diagonal cross (an x) at a point, arms `size_px` long each way.
    pub fn x_mark(&mut self, x_px: f64, y_px: f64, size_px: f64, colour: Colour) {
        let (x, y, s) = (x_px as f32, y_px as f32, size_px as f32);
        draw_line_segment_mut(&mut self.image, (x - s, y - s), (x + s, y + s), Rgb(colour));
        draw_line_segment_mut(&mut self.image, (x - s, y + s), (x + s, y - s), Rgb(colour));
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

    /// The canvas as PNG bytes; `path` names the file they are for in an error.
    pub fn png(&self, path: &Path) -> Result<Vec<u8>> {
        let mut buf = std::io::Cursor::new(Vec::new());
        self.image
            .write_to(&mut buf, image::ImageFormat::Png)
            .map_err(|e| Error::io(path, std::io::Error::other(e)))?;
        Ok(buf.into_inner())
    }

    /// Write the canvas as PNG, atomically.
    pub fn save(&self, path: &Path) -> Result<()> {
        let bytes = self.png(path)?;
        crate::core::output::write_atomic(path, |w| w.write_all(&bytes))
    }
}

/// Whether angle `a` (radians, from x right) lies on a dash of [`Canvas::dashed_circle`].
pub fn dash_on(a: f64) -> bool {
    (a.rem_euclid(2.0 * std::f64::consts::PI) / DASH_RAD).floor() as i64 % 2 == 0
}

/// Glyph size of the labels on a photo of this size: font pixels per glyph pixel.
pub fn label_scale(width_px: usize, height_px: usize) -> u32 {
    (width_px.max(height_px) as f64 / 800.0).ceil().max(1.0) as u32
}

/// Top-left corner of the label of a ball image centred at (x, y) with radius `r_px`.
pub fn label_origin(x_px: f64, y_px: f64, r_px: f64, scale: u32) -> [f64; 2] {
    [x_px - 4.0, y_px - r_px - 6.0 * scale as f64 - 2.0]
}

/// A missing flash: where the ball was when it fired, in pixels.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct MissingFlash {
    /// Flash number.
    pub n: usize,
    /// Centre x, pixels.
    pub x_px: f64,
    /// Centre y, pixels.
    pub y_px: f64,
    /// Radius of the ball's image there, pixels (the mean of its neighbours' on the path).
    pub r_px: f64,
    /// Placed by the physics (quadratics through its phase's images: constant acceleration);
    /// false: halfway along the straight line between the path images either side.
    pub from_physics: bool,
}

/// Where each missing flash of `path` was: predicted from its phase's motion when one of
/// `phases` (flash ranges of constant acceleration) holds it, else interpolated in a straight line
/// between the path images either side, in proportion to the flash numbers.
pub fn missing_places(path: &BallPath, phases: &[(usize, usize)]) -> Vec<MissingFlash> {
    path.missing
        .iter()
        .filter_map(|&n| {
            let before = path.points.iter().rev().find(|p| p.n < n)?;
            let after = path.points.iter().find(|p| p.n > n)?;
            let r_px = 0.5 * (before.r_px + after.r_px);
            if let Some([x_px, y_px]) = predicted_position(path, phases, n) {
                return Some(MissingFlash {
                    n,
                    x_px,
                    y_px,
                    r_px,
                    from_physics: true,
                });
            }
            let f = (n - before.n) as f64 / (after.n - before.n) as f64;
            Some(MissingFlash {
                n,
                x_px: before.x_px + f * (after.x_px - before.x_px),
                y_px: before.y_px + f * (after.y_px - before.y_px),
                r_px,
                from_physics: false,
            })
        })
        .collect()
}

/// The path of a measure document as the tracker's [`BallPath`] (pixels, flash numbers).
fn ball_path(doc: &MeasureDoc) -> BallPath {
    BallPath {
        points: doc
            .path
            .iter()
            .enumerate()
            .map(|(i, p)| PathPoint {
                n: p.n,
                spot_index: i,
                x_px: p.x_px,
                y_px: p.y_px,
                r_px: p.r_px,
                sigma_px: p.sigma_px,
            })
            .collect(),
        missing: doc.missing.clone(),
    }
}

/// The path's images (green circles, each labelled with its flash number) and its missing
/// flashes (magenta dashed circles, labelled too).
fn draw_path(c: &mut Canvas, path: &BallPath, missing: &[MissingFlash]) {
    let scale = label_scale(c.image.width() as usize, c.image.height() as usize);
    for p in &path.points {
        c.circle(p.x_px, p.y_px, p.r_px, GREEN);
        c.cross(p.x_px, p.y_px, 2.0, GREEN);
    }
    for m in missing {
        c.dashed_circle(m.x_px, m.y_px, m.r_px, MAGENTA);
    }
    for p in &path.points {
        let [x, y] = label_origin(p.x_px, p.y_px, p.r_px, scale);
        c.text(x, y, &p.n.to_string(), scale, YELLOW);
    }
    for m in missing {
        let [x, y] = label_origin(m.x_px, m.y_px, m.r_px, scale);
        c.text(x, y, &m.n.to_string(), scale, MAGENTA);
    }
}

/// The spot finder's overlay: ball images (green, labelled `s` and their index in the `spots`
/// list: there is no path, so no flash number) and rejected candidates (red circles).
pub fn spots_overlay(photo: &Path, report: &SpotReport, out: &Path) -> Result<()> {
    let mut c = Canvas::open(photo)?;
    let scale = label_scale(report.width_px, report.height_px);
    for (i, s) in report.spots.iter().enumerate() {
        c.circle(s.x_px, s.y_px, s.r_px, GREEN);
        c.cross(s.x_px, s.y_px, 3.0, GREEN);
        let [x, y] = label_origin(s.x_px, s.y_px, s.r_px, scale);
        c.text(x, y, &format!("s{i}"), scale, YELLOW);
    }
    for s in &report.rejected {
        c.circle(s.x_px, s.y_px, s.r_px, RED);
    }
    c.save(out)
}

/// The path command's overlay: the first path's images numbered by flash, its missing flashes
/// (dashed, interpolated: no physics here), the other paths' images in cyan and the strays in
/// red.
pub fn path_overlay(
    photo: &Path,
    report: &SpotReport,
    result: &PathResult,
    out: &Path,
) -> Result<()> {
    let mut c = Canvas::open(photo)?;
    for s in &result.strays {
        let r = report.spots.get(s.spot_index).map_or(5.0, |p| p.r_px);
        c.circle(s.x_px, s.y_px, r, RED);
    }
    for other in result.paths.iter().skip(1) {
        for p in &other.points {
            c.circle(p.x_px, p.y_px, p.r_px, CYAN);
        }
    }
    if let Some(path) = result.paths.first() {
        draw_path(&mut c, path, &missing_places(path, &[]));
    }
    c.save(out)
}

/// The measure overlay on the photo: rejected candidates (red x), strays (red circles), the path
/// by phase, its images numbered by flash, its missing flashes where the phase's motion puts them
/// (dashed), the floor line and each bounce labelled with its restitution.
pub fn measure_canvas(photo: &Path, m: &crate::pipeline::Measured) -> Result<Canvas> {
    let mut c = Canvas::open(photo)?;
    let doc = &m.doc;
    let scale = label_scale(doc.width_px, doc.height_px);
    let path = ball_path(doc);
    for r in &m.spots.rejected {
        // A candidate the second pass took is on the path already.
        let taken = doc
            .path
            .iter()
            .any(|p| (p.x_px - r.x_px).hypot(p.y_px - r.y_px) < 0.3 * p.r_px);
        if !taken {
            c.x_mark(r.x_px, r.y_px, (0.3 * r.r_px).max(3.0), RED);
        }
    }
    for s in &doc.strays {
        let r = m.spots.spots.get(s.spot_index).map_or(5.0, |p| p.r_px);
        c.circle(s.x_px, s.y_px, r, RED);
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
    let phases: Vec<(usize, usize)> = doc
        .measurement
        .phases
        .iter()
        .filter(|p| !matches!(p.kind, PhaseKind::Bounce | PhaseKind::Unfitted))
        .map(|p| (p.first_n, p.last_n))
        .collect();
    draw_path(&mut c, &path, &missing_places(&path, &phases));
    draw_floor_and_bounces(&mut c, m, scale);
    Ok(c)
}

/// The floor line across the path (world y = floor, in the calibrated frame) and each bounce's
/// contact with its restitution.
fn draw_floor_and_bounces(c: &mut Canvas, m: &crate::pipeline::Measured, scale: u32) {
    let doc = &m.doc;
    let floor = doc.measurement.floor.y_m;
    if floor.is_finite() {
        let (lo, hi) = doc
            .path
            .iter()
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), p| {
                (a.min(p.x_m), b.max(p.x_m))
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
}

/// [`measure_canvas`] written as PNG to `out`, atomically.
pub fn measure_overlay(photo: &Path, m: &crate::pipeline::Measured, out: &Path) -> Result<()> {
    measure_canvas(photo, m)?.save(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn point(n: usize, x_px: f64, y_px: f64) -> PathPoint {
        PathPoint {
            n,
            spot_index: n,
            x_px,
            y_px,
            r_px: 10.0,
            sigma_px: 0.05,
        }
    }

    #[test]
    fn a_missing_flash_outside_every_phase_lies_on_the_line_between_its_neighbours() {
        // Flashes 2 and 3 missing between images 1 and 4: a third and two thirds of the way.
        let path = BallPath {
            points: vec![
                point(0, 0.0, 0.0),
                point(1, 30.0, 0.0),
                point(4, 120.0, 60.0),
            ],
            missing: vec![2, 3],
        };
        let places = missing_places(&path, &[]);
        assert_eq!(places.len(), 2);
        assert!(!places[0].from_physics);
        assert!((places[0].x_px - 60.0).abs() < 1e-9 && (places[0].y_px - 20.0).abs() < 1e-9);
        assert!((places[1].x_px - 90.0).abs() < 1e-9 && (places[1].y_px - 40.0).abs() < 1e-9);
    }

    #[test]
    fn a_missing_flash_inside_a_phase_is_placed_by_its_motion() {
        // x = 30 n, y = n^2 (constant acceleration): flash 3 at (90, 9), not on the chord.
        let path = BallPath {
            points: [0, 1, 2, 4, 5, 6]
                .iter()
                .map(|&n| point(n, 30.0 * n as f64, (n * n) as f64))
                .collect(),
            missing: vec![3],
        };
        let places = missing_places(&path, &[(0, 6)]);
        assert!(places[0].from_physics);
        assert!((places[0].x_px - 90.0).abs() < 1e-6 && (places[0].y_px - 9.0).abs() < 1e-6);
    }
}
