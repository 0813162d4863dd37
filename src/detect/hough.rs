//! Circular Hough transform (ours): edge points of a region vote for circle centres along their
//! gradient direction.
//!
//! Goes in: a region of the photo around one blob, its background and a radius range (or, at
//! full resolution after a decimated search, the circles found there). Comes out: a [`Region`]
//! with sub-pixel edge points and [`Candidate`] centres.
//!
//! Method: the ball-positive difference is smoothed with a Gaussian (imageproc; in a faint
//! photo by a fifth of the smallest radius searched, see [`FAINT_SNR`] and the search's
//! choice), differentiated with the Sobel operator, thinned by non-maximum suppression along
//! the gradient, and each edge point is placed at sub-pixel precision by a parabola through the
//! gradient magnitude across the edge (after Devernay, "A non-maxima suppression method for
//! edge detection with sub-pixel accuracy", INRIA RR-2724, 1995). Where the rims are strong
//! (median edge magnitude at least `fine_snr` noise sigmas), the points are placed again, by
//! the same parabola, on the gradient of the unsmoothed difference: without smoothing, a lit
//! ball's limb shading does not pull them inwards. Each edge point also records whether the
//! level rises again across its dark side (a printed mark's edge, see [`MARK_RISE`]; ours).
//! Every edge point then votes, with bilinear splatting, for the centres at distances
//! rmin..rmax along its gradient (the gradient of a bright disc points at its centre: Kimme,
//! Ballard & Sklansky, "Finding circles by an array of accumulators", CACM 18, 1975). Peaks are
//! local maxima of the smoothed accumulator within a disc of `nms_fraction` x radius, so
//! neighbours down to 0.8 radius apart stay separate.

use crate::core::stats::robust_sigma;
use crate::image::background::Background;
use crate::image::load::Photo;
use crate::image::threshold::Blob;
use image::{ImageBuffer, Luma};

/// Settings of the Hough stage.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct HoughOptions {
    /// Gaussian smoothing before differentiation, pixels (sigma).
    pub smooth_px: f32,
    /// A region's rims are strong when the median edge magnitude is this many gradient-noise
    /// sigmas: their points are then placed on the unsmoothed gradient.
    pub fine_snr: f64,
    /// Edge points need a gradient above this many robust sigmas of the gradient noise.
    pub edge_k_sigma: f32,
    /// Step between voted radii, pixels (at least [`LARGE_STEP_FRACTION`] of the radius).
    pub radius_step_px: f64,
    /// Peaks are maxima within this fraction of the radius.
    pub nms_fraction: f64,
    /// Smallest peak, as a fraction of the votes a complete rim would give.
    pub min_peak_fraction: f64,
}

impl Default for HoughOptions {
    fn default() -> Self {
        HoughOptions {
            smooth_px: 0.7,
            fine_snr: 20.0,
            edge_k_sigma: 4.0,
            radius_step_px: 1.0,
            nms_fraction: 0.35,
            min_peak_fraction: 0.12,
        }
    }
}

/// Smallest step between voted radii as a fraction of the radius (2 px at 80 px).
pub const LARGE_STEP_FRACTION: f64 = 0.025;

/// A sub-pixel edge point; the unit gradient points into the ball (to brighter difference).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct EdgePoint {
    /// x, pixels (photo coordinates).
    pub x_px: f64,
    /// y, pixels.
    pub y_px: f64,
    /// Unit gradient x.
    pub ux: f64,
    /// Unit gradient y.
    pub uy: f64,
    /// Gradient magnitude, luma per pixel.
    pub magnitude: f32,
    /// Distance across the dark side at which the level rises again, pixels: the width of a
    /// dark mark whose edge this may be (infinite: the dark side stays dark, as past a rim).
    /// See [`MARK_RISE`] and [`settle_marks`].
    pub mark_px: f32,
}

impl EdgePoint {
    /// This point is the edge of a dark mark printed on the ball image of centre (`cx`, `cy`)
    /// and radius `r_px`: the level rises again inside its disc, not past its rim (where a
    /// neighbouring image or a plate the ball touches may lie).
    pub fn marks_inside(&self, cx: f64, cy: f64, r_px: f64) -> bool {
        let rho = (self.x_px - cx).hypot(self.y_px - cy);
        rho + self.mark_px as f64 <= r_px + MARK_INSIDE_PX
    }
}

/// A crop of the photo around a blob, with its edge points.
#[derive(Debug, Clone)]
pub struct Region {
    /// Left column of the crop in the photo, pixels.
    pub x0: usize,
    /// Top row of the crop, pixels.
    pub y0: usize,
    /// Width of the crop, pixels.
    pub width: usize,
    /// Height of the crop, pixels.
    pub height: usize,
    /// Edge points inside the crop.
    pub edges: Vec<EdgePoint>,
    /// The crop's strongest gradients (99.5th percentile of the magnitude) in noise sigmas of
    /// one gradient component: about 3.5 where no rim stands above the noise.
    pub rim_snr: f32,
}

/// A centre proposed by the vote.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Candidate {
    /// Centre x, pixels (photo coordinates).
    pub x_px: f64,
    /// Centre y, pixels.
    pub y_px: f64,
    /// Radius guess, pixels.
    pub r_px: f64,
    /// Peak height as a fraction of a complete rim's votes.
    pub strength: f64,
}

/// Cut the region around `blob` (with `margin_px`), smooth, differentiate and extract edge points.
pub fn prepare_region(
    photo: &Photo,
    background: &Background,
    blob: &Blob,
    margin_px: usize,
    options: &HoughOptions,
) -> Region {
    let x0 = blob.x0.saturating_sub(margin_px);
    let y0 = blob.y0.saturating_sub(margin_px);
    let x1 = (blob.x1 + margin_px).min(photo.width - 1);
    let y1 = (blob.y1 + margin_px).min(photo.height - 1);
    let (w, h) = (x1 - x0 + 1, y1 - y0 + 1);
    let raw = difference_crop(photo, background, x0, y0, w, h);
    let (edges, rim_snr) = edge_points(&raw, (w, h, x0, y0), options, |_, _| true);
    Region {
        x0,
        y0,
        width: w,
        height: h,
        edges,
        rim_snr,
    }
}

/// The region `x0..=x1` x `y0..=y1` of the photo with the edge points of the given circles only:
/// those within `band_px` of one of their rims, each taken from a crop around its own circle
/// (for a large ball found on a decimated photo: the full-resolution rims cost a fraction of
/// the region's area). A point near two rims is kept once.
pub fn prepare_band(
    photo: &Photo,
    background: &Background,
    (x0, y0, x1, y1): (usize, usize, usize, usize),
    circles: &[(f64, f64, f64)],
    band_px: f64,
    options: &HoughOptions,
) -> Region {
    let x1 = x1.min(photo.width - 1);
    let y1 = y1.min(photo.height - 1);
    let in_band = |k: usize, x: f64, y: f64| {
        let (cx, cy, r) = circles[k];
        ((x - cx).hypot(y - cy) - r).abs() <= band_px
    };
    // Room for the smoothing, the Sobel operator and the sub-pixel peak's neighbours.
    const HALO_PX: f64 = 6.0;
    let mut edges = Vec::new();
    let mut rim_snr = 0f32;
    for (k, &(cx, cy, r)) in circles.iter().enumerate() {
        let reach = r + band_px + HALO_PX;
        let clip = |v: f64, lo: usize, hi: usize| (v.max(lo as f64).min(hi as f64)) as usize;
        let (cx0, cx1) = (clip(cx - reach, x0, x1), clip(cx + reach, x0, x1));
        let (cy0, cy1) = (clip(cy - reach, y0, y1), clip(cy + reach, y0, y1));
        if cx1 < cx0 + 4 || cy1 < cy0 + 4 {
            continue;
        }
        let (w, h) = (cx1 - cx0 + 1, cy1 - cy0 + 1);
        let raw = difference_crop(photo, background, cx0, cy0, w, h);
        let keep = |x: f64, y: f64| in_band(k, x, y) && (0..k).all(|j| !in_band(j, x, y));
        let (own, snr) = edge_points(&raw, (w, h, cx0, cy0), options, keep);
        edges.extend(own);
        rim_snr = rim_snr.max(snr);
    }
    Region {
        x0,
        y0,
        width: x1 - x0 + 1,
        height: y1 - y0 + 1,
        edges,
        rim_snr,
    }
}

/// The ball-positive difference (photo - background, signed by the polarity) over the crop of
/// `w` x `h` pixels at (`x0`, `y0`), row-major.
fn difference_crop(
    photo: &Photo,
    background: &Background,
    x0: usize,
    y0: usize,
    w: usize,
    h: usize,
) -> Vec<f32> {
    let mut raw = Vec::with_capacity(w * h);
    let mut bg_row = vec![0f32; w];
    let mut luma = vec![0f32; w];
    let sign = background.polarity.sign();
    for y in y0..y0 + h {
        background.row(y, x0, &mut bg_row);
        photo.row(y, x0, &mut luma);
        raw.extend(luma.iter().zip(&bg_row).map(|(v, g)| sign * (v - g)));
    }
    raw
}

/// A region whose strongest gradients stand less than this many noise sigmas above zero shows
/// no rim at the default smoothing (the noise's own tail reaches about 3.5).
pub const FAINT_SNR: f32 = 6.0;
/// Smoothing of a faint photo's crops, as a fraction of the smallest radius searched. A
/// Gaussian keeps a disc's centre and moves its rim inwards by about sigma^2 / 2r (from
/// memory; checked by integrating the smoothed gradient of a disc: 0.377 px at r = 21,
/// sigma = 4 against 0.381), which the radius keeps (for a small ball, the shaded fit's edge
/// bias corrects it); heavier smoothing merges images closer than about a radius (0.4 lost 4 of
/// the 37 images of the dark demo, crowded at its start).
pub const FAINT_SMOOTH_R: f64 = 0.2;
/// Smallest smoothing of a faint photo's crops, pixels: a small ball's rim holds few pixels
/// and needs more than a fifth of its radius (sweep shot 103, r 6 px: 3 of 60 images found at
/// 0.2 r, 49 at 1.6 px).
pub const FAINT_SMOOTH_MIN_PX: f64 = 1.6;
/// Largest smoothing of a faint photo's crops, as a fraction of the smallest radius searched.
pub const FAINT_SMOOTH_SMALL_R: f64 = 0.4;
/// Largest smoothing of a faint photo's crops, pixels.
pub const FAINT_SMOOTH_MAX_PX: f64 = 4.0;

/// The smoothed gradient of a crop (x, y, magnitude), the noise sigma of one component and the
/// 99.5th percentile of the magnitude.
fn smoothed_gradient(raw: &[f32], w: usize, h: usize, sigma_px: f32) -> GradientCrop {
    let (gx, gy, mag) = gradient(raw, w, h, sigma_px);
    // Noise of one gradient component: robust sigma over the crop (edges are a minority).
    let mut sample: Vec<f32> = gx.iter().step_by(3).copied().collect();
    let sigma_g = robust_sigma(&mut sample).max(1e-7);
    let mut sorted: Vec<f32> = mag.iter().step_by(2).copied().collect();
    let k = sorted.len().saturating_sub(1) * 995 / 1000;
    let strong = if sorted.is_empty() {
        0.0
    } else {
        *sorted.select_nth_unstable_by(k, f32::total_cmp).1
    };
    GradientCrop {
        gx,
        gy,
        mag,
        sigma_g,
        strong,
    }
}

/// A crop's gradient and its statistics (see [`smoothed_gradient`]).
struct GradientCrop {
    gx: Vec<f32>,
    gy: Vec<f32>,
    mag: Vec<f32>,
    sigma_g: f32,
    strong: f32,
}

/// Sub-pixel edge points of a difference crop (`w` x `h` at `x0`, `y0` in the photo) whose
/// photo position (x, y) passes `keep`, and the crop's rim signal-to-noise
/// ([`Region::rim_snr`]).
fn edge_points(
    raw: &[f32],
    (w, h, x0, y0): (usize, usize, usize, usize),
    options: &HoughOptions,
    keep: impl Fn(f64, f64) -> bool,
) -> (Vec<EdgePoint>, f32) {
    let GradientCrop {
        gx,
        gy,
        mag,
        sigma_g,
        strong,
    } = smoothed_gradient(raw, w, h, options.smooth_px);
    let rim_snr = strong / sigma_g;
    let noise = pixel_noise(raw, w);
    let threshold = (options.edge_k_sigma * sigma_g).max(0.08 * strong);
    let mut edges = Vec::new();
    let mut at_pixel = Vec::new();
    for y in 2..h.saturating_sub(2) {
        for x in 2..w.saturating_sub(2) {
            let m = mag[y * w + x];
            if m <= threshold {
                continue;
            }
            let (ux, uy) = ((gx[y * w + x] / m) as f64, (gy[y * w + x] / m) as f64);
            let Some(offset) = peak_offset(|i, j| mag[j * w + i], w, h, x, y, ux, uy) else {
                continue;
            };
            let (ex, ey) = ((x0 + x) as f64 + offset * ux, (y0 + y) as f64 + offset * uy);
            if !keep(ex, ey) {
                continue;
            }
            let local = (ex - x0 as f64, ey - y0 as f64);
            let mark_px = mark_reach(raw, (w, h), local, (ux, uy), noise);
            edges.push(EdgePoint {
                x_px: ex,
                y_px: ey,
                ux,
                uy,
                magnitude: m,
                mark_px,
            });
            at_pixel.push((x, y));
        }
    }
    drop((gx, gy, mag));
    // Strong rims: place the points again on the unsmoothed gradient. The shading just inside
    // a lit sphere's limb blurs into the step under heavy smoothing and moves the gradient peak
    // inwards where the rim is dim; no smoothing keeps them apart (the detection above
    // stays on the smoother gradient, which is what faint rims need).
    if !edges.is_empty() {
        let mut m: Vec<f32> = edges.iter().map(|e| e.magnitude).collect();
        let mid = m.len() / 2;
        let snr = *m.select_nth_unstable_by(mid, f32::total_cmp).1 / sigma_g;
        if snr as f64 >= options.fine_snr {
            for (e, &(px, py)) in edges.iter_mut().zip(&at_pixel) {
                let fine = |i, j| raw_magnitude(raw, w, h, i, j);
                if let Some(offset) = peak_offset(fine, w, h, px, py, e.ux, e.uy) {
                    e.x_px = (x0 + px) as f64 + offset * e.ux;
                    e.y_px = (y0 + py) as f64 + offset * e.uy;
                }
            }
        }
    }
    (edges, rim_snr)
}

/// How far across the dark side of an edge a printed mark may end, pixels.
pub const MARK_REACH_PX: f64 = 6.0;
/// A mark's far side lies inside a disc when it is less than this past the rim, pixels.
pub const MARK_INSIDE_PX: f64 = 0.5;
/// A rise of at least this fraction of the bright side's level, back to at least
/// [`MARK_BACK`] of it, within [`MARK_REACH_PX`] across an edge's dark side shows a dark line
/// on the ball (a seam, a panel line), not a rim: past a rim lies the backdrop. Near a
/// neighbouring image or a plate the ball touches a rim shows the same rise, hence the
/// photo-wide decision of [`settle_marks`].
pub const MARK_RISE: f32 = 0.3;
/// See [`MARK_RISE`].
pub const MARK_BACK: f32 = 0.6;
/// The dark side of a mark's edge stays above this fraction of the bright side (printed ink
/// reflects some light; the gap between two images that nearly touch falls to the backdrop).
pub const MARK_FLOOR: f32 = 0.1;

/// A photo's balls carry printed marks when at least this fraction of its regions' edge points
/// are marks' edges (see [`MARK_RISE`]). Measured on the bench photos (bench/out, 2026-12-05):
/// plain balls 0.000-0.057 (the rise of rims near a neighbour or a plate: 0.057 with images
/// half a radius apart), marked balls 0.118-0.435 (seams, panels, a band; 0.118 lit from one
/// side, most of the ball dark); the real photo in testimages/ (a seamed ball) 0.28-0.31.
pub const MARKED_FRACTION: f64 = 0.08;

/// Keep the marks' edges of `regions` as such when the photo's balls carry printed marks (see
/// [`MARKED_FRACTION`]): the rims alone vote a second time ([`vote`]: a seam's edges vote for
/// circles of their own, which can hide an image's peak), no circle whose disc holds a mark's
/// far side fits it ([`EdgePoint::marks_inside`]), and a circle fitted mostly to marks' edges
/// is no image ([`crate::detect::joint::MARKS_MAKE_NO_RIM`]). Otherwise forget them (every
/// `mark_px` infinite): a plain ball's rim next to a neighbour or a plate rises again too, and
/// that rim is the ball's. Gives whether the photo's balls carry marks.
pub fn settle_marks(regions: &mut [Region]) -> bool {
    let (marks, all) = regions.iter().fold((0usize, 0usize), |(m, n), r| {
        let k = r.edges.iter().filter(|e| e.mark_px.is_finite()).count();
        (m + k, n + r.edges.len())
    });
    let printed = all > 0 && marks as f64 >= MARKED_FRACTION * all as f64;
    if !printed {
        for e in regions.iter_mut().flat_map(|r| r.edges.iter_mut()) {
            e.mark_px = f32::INFINITY;
        }
    }
    printed
}

/// Robust noise sigma of one pixel of a difference crop `w` wide, from the differences of
/// horizontal neighbours.
fn pixel_noise(raw: &[f32], w: usize) -> f32 {
    let mut d: Vec<f32> = raw
        .windows(2)
        .enumerate()
        .filter(|(i, _)| (i + 1) % w != 0)
        .step_by(3)
        .map(|(_, p)| (p[1] - p[0]) * std::f32::consts::FRAC_1_SQRT_2)
        .collect();
    robust_sigma(&mut d)
}

/// How far across the dark side of the edge at `p` (crop pixels, unit gradient `u`) the level,
/// having fallen to a floor above [`MARK_FLOOR`] of the bright side, rises again (see
/// [`MARK_RISE`]), pixels; infinite where it does not within [`MARK_REACH_PX`], or where the
/// bright side does not stand 8 noise sigmas clear.
fn mark_reach(
    raw: &[f32],
    (w, h): (usize, usize),
    p: (f64, f64),
    u: (f64, f64),
    noise: f32,
) -> f32 {
    let at = |t: f64| -> Option<f32> {
        let (x, y) = (p.0 + t * u.0, p.1 + t * u.1);
        let (fx, fy) = (x.floor(), y.floor());
        if fx < 0.0 || fy < 0.0 || fx as usize + 1 >= w || fy as usize + 1 >= h {
            return None;
        }
        let (ix, iy) = (fx as usize, fy as usize);
        let (ax, ay) = ((x - fx) as f32, (y - fy) as f32);
        let v = |i: usize, j: usize| raw[j * w + i];
        Some(
            (v(ix, iy) * (1.0 - ax) + v(ix + 1, iy) * ax) * (1.0 - ay)
                + (v(ix, iy + 1) * (1.0 - ax) + v(ix + 1, iy + 1) * ax) * ay,
        )
    };
    let none = f32::INFINITY;
    let Some(bright) = at(1.5) else {
        return none;
    };
    if bright < 8.0 * noise {
        return none;
    }
    let mut floor = f32::INFINITY;
    let mut t = 0.5;
    while t <= MARK_REACH_PX {
        let Some(v) = at(-t) else {
            return none;
        };
        floor = floor.min(v);
        if floor < MARK_FLOOR * bright {
            return none;
        }
        if v - floor >= MARK_RISE * bright && v >= MARK_BACK * bright {
            return t as f32;
        }
        t += 0.5;
    }
    none
}

/// Smoothed (Gaussian, sigma in pixels; 0 = none) Sobel gradient of a crop: x, y components and
/// magnitude, luma per pixel.
fn gradient(raw: &[f32], w: usize, h: usize, sigma_px: f32) -> (Vec<f32>, Vec<f32>, Vec<f32>) {
    let d: Vec<f32> = if sigma_px > 0.0 {
        let img: ImageBuffer<Luma<f32>, Vec<f32>> =
            ImageBuffer::from_raw(w as u32, h as u32, raw.to_vec()).expect("crop size matches");
        imageproc::filter::gaussian_blur_f32(&img, sigma_px).into_raw()
    } else {
        raw.to_vec()
    };
    let mut gx = vec![0f32; w * h];
    let mut gy = vec![0f32; w * h];
    if w >= 3 && h >= 3 {
        for y in 1..h - 1 {
            for x in 1..w - 1 {
                (gx[y * w + x], gy[y * w + x]) = sobel(&d, w, x, y);
            }
        }
    }
    drop(d);
    let mag = gx
        .iter()
        .zip(&gy)
        .map(|(a, b)| (a * a + b * b).sqrt())
        .collect();
    (gx, gy, mag)
}

/// Sobel gradient (x, y), divided by 8, of a row-major image of width `w` at an inner pixel.
#[inline]
fn sobel(d: &[f32], w: usize, x: usize, y: usize) -> (f32, f32) {
    let p = |dx: usize, dy: usize| d[(y + dy - 1) * w + x + dx - 1];
    let gx = (p(2, 0) + 2.0 * p(2, 1) + p(2, 2) - p(0, 0) - 2.0 * p(0, 1) - p(0, 2)) / 8.0;
    let gy = (p(0, 2) + 2.0 * p(1, 2) + p(2, 2) - p(0, 0) - 2.0 * p(1, 0) - p(2, 0)) / 8.0;
    (gx, gy)
}

/// Sobel gradient magnitude of the unsmoothed crop at one pixel (0 on the border).
fn raw_magnitude(raw: &[f32], w: usize, h: usize, x: usize, y: usize) -> f32 {
    if x == 0 || y == 0 || x + 1 >= w || y + 1 >= h {
        return 0.0;
    }
    let (gx, gy) = sobel(raw, w, x, y);
    (gx * gx + gy * gy).sqrt()
}

/// Sub-pixel offset along the unit direction (ux, uy) of the gradient-magnitude peak at pixel
/// (x, y), from a parabola through the magnitude there and one pixel before and after
/// (bilinear); None when (x, y) is not a peak along that direction. `mag(x, y)` gives the
/// magnitude at a pixel of the w x h crop.
fn peak_offset(
    mag: impl Fn(usize, usize) -> f32,
    w: usize,
    h: usize,
    x: usize,
    y: usize,
    ux: f64,
    uy: f64,
) -> Option<f64> {
    let interp = |x: f64, y: f64| -> f32 {
        let (fx, fy) = (x.floor(), y.floor());
        if fx < 0.0 || fy < 0.0 || fx as usize + 1 >= w || fy as usize + 1 >= h {
            return 0.0;
        }
        let (ix, iy) = (fx as usize, fy as usize);
        let (ax, ay) = ((x - fx) as f32, (y - fy) as f32);
        (mag(ix, iy) * (1.0 - ax) + mag(ix + 1, iy) * ax) * (1.0 - ay)
            + (mag(ix, iy + 1) * (1.0 - ax) + mag(ix + 1, iy + 1) * ax) * ay
    };
    let m = mag(x, y);
    let (xf, yf) = (x as f64, y as f64);
    let before = interp(xf - ux, yf - uy);
    let after = interp(xf + ux, yf + uy);
    if m < before || m <= after {
        return None;
    }
    let denom = before - 2.0 * m + after;
    Some(if denom < 0.0 {
        (0.5 * (before - after) / denom).clamp(-0.5, 0.5) as f64
    } else {
        0.0
    })
}

/// Vote for centres of circles with radii in `r_min_px..r_max_px` and return the peaks, strongest
/// first, plus (when `keep_votes`, for debugging) the smoothed accumulator, row-major over the
/// region; else an empty vector.
pub fn vote(
    region: &Region,
    r_min_px: f64,
    r_max_px: f64,
    options: &HoughOptions,
    keep_votes: bool,
) -> (Vec<Candidate>, Vec<f32>) {
    // Votes of neighbouring radii land within the 3 x 3 box below up to about 1.5 px apart, so
    // large balls can use a coarser step.
    let step_px = options
        .radius_step_px
        .max(LARGE_STEP_FRACTION * 0.5 * (r_min_px + r_max_px));
    let steps = (((r_max_px - r_min_px) / step_px).ceil() as usize).max(1);
    let radii: Vec<f64> = (0..=steps)
        .map(|s| r_min_px + (r_max_px - r_min_px) * s as f64 / steps as f64)
        .collect();
    let (mut peaks, sm) = peaks_of(region, &radii, options, false);
    // Marks' edges vote for circles of the marks, strong enough to hide an image's own peak
    // where images crowd: the rims alone vote again, and their peaks join.
    if region.edges.iter().any(|e| e.mark_px.is_finite()) {
        let nms = nms_px(options, r_min_px);
        let (rims, _) = peaks_of(region, &radii, options, true);
        for c in rims {
            if peaks
                .iter()
                .all(|p| (p.x_px - c.x_px).hypot(p.y_px - c.y_px) > nms)
            {
                peaks.push(c);
            }
        }
    }
    peaks.sort_by(|a, b| b.strength.total_cmp(&a.strength));
    (peaks, if keep_votes { sm } else { Vec::new() })
}

/// Peaks are maxima within this distance, pixels: `nms_fraction` of the smallest radius
/// searched, at least 1.5 px.
fn nms_px(options: &HoughOptions, r_min_px: f64) -> f64 {
    (options.nms_fraction * r_min_px).max(1.5)
}

/// The peaks of the votes of `region`'s edge points (of its rims only when `rims_only`: no
/// marks' edges) for circles of the given radii, and the smoothed accumulator.
fn peaks_of(
    region: &Region,
    radii: &[f64],
    options: &HoughOptions,
    rims_only: bool,
) -> (Vec<Candidate>, Vec<f32>) {
    let (r_min_px, r_max_px) = (radii[0], radii[radii.len() - 1]);
    let steps = radii.len() - 1;
    let (acc, rsum) = accumulate(region, radii, rims_only);
    let sm = box_smooth(&acc, region.width, region.height);
    let r_mid = 0.5 * (r_min_px + r_max_px);
    // A complete rim: about 2 pi r edge points, each landing (steps + 1) votes spread over the
    // radii; the ones near the true radius (within the 3 x 3 box) count.
    let per_point =
        (1.5 / ((r_max_px - r_min_px) / steps as f64).max(1e-9)).min(steps as f64 + 1.0);
    let full = (2.0 * std::f64::consts::PI * r_mid * per_point) as f32;
    let votes = Votes {
        acc: &acc,
        rsum: &rsum,
        sm: &sm,
        w: region.width,
        h: region.height,
    };
    let min_peak = (options.min_peak_fraction as f32) * full;
    let nms = nms_px(options, r_min_px);
    let mut peaks = Vec::new();
    for y in 1..votes.h.saturating_sub(1) {
        for x in 1..votes.w.saturating_sub(1) {
            let v = sm[y * votes.w + x];
            if v >= min_peak
                && votes.is_peak(x, y, nms)
                && let Some(c) = votes.centroid(region, x, y, full)
            {
                peaks.push(c);
            }
        }
    }
    (peaks, sm)
}

/// Every edge point's votes for the centres at the given radii along its gradient, splatted
/// bilinearly. Goes in: the region and the radii; comes out: the accumulator and the
/// vote-weighted sum of radii per cell (a radius histogram per cell is too costly), row-major
/// over the region.
fn accumulate(region: &Region, radii: &[f64], rims_only: bool) -> (Vec<f32>, Vec<f32>) {
    let (w, h) = (region.width, region.height);
    let mut acc = vec![0f32; w * h];
    let mut rsum = vec![0f32; w * h];
    let (wf, hf) = ((w - 1) as f64, (h - 1) as f64);
    for e in region
        .edges
        .iter()
        .filter(|e| !rims_only || e.mark_px.is_infinite())
    {
        let (ex, ey) = (e.x_px - region.x0 as f64, e.y_px - region.y0 as f64);
        for &r in radii {
            let (cx, cy) = (ex + r * e.ux, ey + r * e.uy);
            // In range for the 2 x 2 splat (also rejects NaN); truncation is floor here.
            if !(cx >= 0.0 && cy >= 0.0 && cx < wf && cy < hf) {
                continue;
            }
            let (ix, iy) = (cx as usize, cy as usize);
            let (ax, ay) = ((cx - ix as f64) as f32, (cy - iy as f64) as f32);
            let rf = r as f32;
            let k = iy * w + ix;
            for (i, wgt) in [
                (k, (1.0 - ax) * (1.0 - ay)),
                (k + 1, ax * (1.0 - ay)),
                (k + w, (1.0 - ax) * ay),
                (k + w + 1, ax * ay),
            ] {
                acc[i] += wgt;
                rsum[i] += wgt * rf;
            }
        }
    }
    (acc, rsum)
}

/// The accumulator `acc` (w x h, row-major) smoothed with a 3 x 3 box; the border stays 0.
fn box_smooth(acc: &[f32], w: usize, h: usize) -> Vec<f32> {
    let mut sm = vec![0f32; w * h];
    for y in 1..h.saturating_sub(1) {
        for x in 1..w.saturating_sub(1) {
            let mut s = 0.0;
            for j in y - 1..=y + 1 {
                for i in x - 1..=x + 1 {
                    s += acc[j * w + i];
                }
            }
            sm[y * w + x] = s;
        }
    }
    sm
}

/// A region's accumulators, w x h, row-major: raw votes, vote-weighted radii, smoothed votes.
struct Votes<'a> {
    acc: &'a [f32],
    rsum: &'a [f32],
    sm: &'a [f32],
    w: usize,
    h: usize,
}

impl Votes<'_> {
    /// Whether the smoothed votes at (x, y) (not on the border) are a maximum over the disc of
    /// radius `nms` around it; ties go to the first in scan order.
    fn is_peak(&self, x: usize, y: usize, nms: f64) -> bool {
        let (w, h, sm) = (self.w, self.h, self.sm);
        let v = sm[y * w + x];
        // A maximum over the disc is one over its 3 x 3 neighbours first (same tie rule): that
        // cheap test leaves the disc scan to a few pixels per peak.
        let beaten = |dx: isize, dy: isize| {
            let o = sm[(y as isize + dy) as usize * w + (x as isize + dx) as usize];
            o > v || (o == v && (dy < 0 || (dy == 0 && dx < 0)))
        };
        if (-1..=1).any(|dy| (-1..=1).any(|dx| (dx, dy) != (0, 0) && beaten(dx, dy))) {
            return false;
        }
        let nms_i = nms.ceil() as isize;
        for dy in -nms_i..=nms_i {
            for dx in -nms_i..=nms_i {
                if (dx == 0 && dy == 0) || ((dx * dx + dy * dy) as f64) > nms * nms {
                    continue;
                }
                let (xx, yy) = (x as isize + dx, y as isize + dy);
                if xx < 0 || yy < 0 || xx as usize >= w || yy as usize >= h {
                    continue;
                }
                let o = sm[yy as usize * w + xx as usize];
                // Ties go to the first in scan order.
                if o > v || (o == v && (dy < 0 || (dy == 0 && dx < 0))) {
                    return false;
                }
            }
        }
        true
    }

    /// The candidate at peak (x, y): sub-pixel centre by the centroid of the raw votes in the
    /// 3 x 3 box, radius by their weighted mean, strength as the smoothed votes over those of a
    /// `full` rim. None when the box holds no vote.
    fn centroid(&self, region: &Region, x: usize, y: usize, full: f32) -> Option<Candidate> {
        let w = self.w;
        let (mut sx, mut sy, mut s, mut sr) = (0.0, 0.0, 0.0, 0.0);
        for j in y - 1..=y + 1 {
            for i in x - 1..=x + 1 {
                let a = self.acc[j * w + i] as f64;
                sx += a * i as f64;
                sy += a * j as f64;
                s += a;
                sr += self.rsum[j * w + i] as f64;
            }
        }
        if s <= 0.0 {
            return None;
        }
        Some(Candidate {
            x_px: region.x0 as f64 + sx / s,
            y_px: region.y0 as f64 + sy / s,
            r_px: sr / s,
            strength: (self.sm[y * w + x] / full) as f64,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A disc of radius `r` (level 1, edge by 4 x 4 supersampling) centred in a `w` x `w` crop,
    /// with a dark line (level 0.25, `line_w` px wide) along the chord at `chord` from the
    /// centre, when given, and a bright bar (level `bar`) from 1 px below the disc's bottom,
    /// 3 px thick; noise of 0.005 from a fixed linear congruential sequence.
    fn crop(w: usize, r: f64, chord: Option<(f64, f64)>, bar: f32) -> Vec<f32> {
        let c = (w as f64 - 1.0) / 2.0;
        let mut seed = 12345u64;
        let mut out = vec![0f32; w * w];
        for y in 0..w {
            for x in 0..w {
                let mut v = 0.0;
                for k in 0..16 {
                    let (sx, sy) = (x as f64 + (k % 4) as f64 / 4.0 - 0.375, y as f64);
                    let sy = sy + (k / 4) as f64 / 4.0 - 0.375;
                    let (dx, dy) = (sx - c, sy - c);
                    if dx.hypot(dy) > r {
                        let below = dy - r - 1.0;
                        v += if (0.0..3.0).contains(&below) {
                            bar
                        } else {
                            0.0
                        };
                    } else if chord.is_some_and(|(d, lw)| (dy - d).abs() < lw / 2.0) {
                        v += 0.25;
                    } else {
                        v += 1.0;
                    }
                }
                seed = seed
                    .wrapping_mul(6364136223846793005)
                    .wrapping_add(1442695040888963407);
                let n = ((seed >> 33) as f32 / (1u64 << 31) as f32 - 0.5) * 0.01;
                out[y * w + x] = v / 16.0 + n;
            }
        }
        out
    }

    /// The edge points of a crop with their distance from its centre.
    fn edges_of(raw: &[f32], w: usize) -> Vec<(EdgePoint, f64)> {
        let c = (w as f64 - 1.0) / 2.0;
        let (edges, _) = edge_points(raw, (w, w, 0, 0), &HoughOptions::default(), |_, _| true);
        edges
            .into_iter()
            .map(|e| (e, (e.x_px - c).hypot(e.y_px - c)))
            .collect()
    }

    /// A `w` x `w` region holding the edge points `found`.
    fn region_of(found: &[(EdgePoint, f64)], w: usize) -> Region {
        Region {
            x0: 0,
            y0: 0,
            width: w,
            height: w,
            edges: found.iter().map(|(e, _)| *e).collect(),
            rim_snr: 0.0,
        }
    }

    #[test]
    fn a_dark_line_on_the_ball_is_told_from_the_rim() {
        // A 20 px disc crossed by a 2 px line 12 px below its centre: the line's edges are
        // marks (the level rises again 2-3 px across their dark side), the rim away from the
        // line is not (the backdrop stays dark).
        let (w, r) = (61, 20.0);
        let found = edges_of(&crop(w, r, Some((12.0, 2.0)), 0.0), w);
        let c = (w as f64 - 1.0) / 2.0;
        let rim: Vec<_> = found
            .iter()
            .filter(|(e, rho)| (rho - r).abs() < 1.0 && e.y_px - c < 8.0)
            .collect();
        let line: Vec<_> = found
            .iter()
            .filter(|(e, rho)| *rho < r - 3.0 && (e.y_px - c - 12.0).abs() < 2.5)
            .collect();
        assert!(
            rim.len() > 60 && line.len() > 30,
            "{} {}",
            rim.len(),
            line.len()
        );
        let marked = |v: &[&(EdgePoint, f64)]| {
            v.iter().filter(|(e, _)| e.mark_px.is_finite()).count() as f64 / v.len() as f64
        };
        assert_eq!(marked(&rim), 0.0);
        assert!(
            marked(&line) > 0.9,
            "{:.2} of the line's edges",
            marked(&line)
        );
        let mut regions = vec![region_of(&found, w)];
        assert!(settle_marks(&mut regions));
        let (cx, cy) = (c, c);
        let line_marks = |cr: f64| {
            line.iter()
                .filter(|(e, _)| e.marks_inside(cx, cy, cr))
                .count()
        };
        assert_eq!(
            line_marks(r),
            line.iter().filter(|(e, _)| e.mark_px.is_finite()).count()
        );
        // A circle drawn by the line's edge (its far side past that circle's rim) keeps them.
        assert_eq!(line_marks(r - 8.0), 0);
    }

    #[test]
    fn a_plain_ball_on_a_plate_keeps_every_edge() {
        // The rim just above a bright plate rises again across its dark side like a mark's
        // edge; too few such points make no printed ball, and every edge point stays.
        let (w, r) = (61, 20.0);
        let found = edges_of(&crop(w, r, None, 0.6), w);
        let near_plate = found
            .iter()
            .filter(|(e, rho)| (rho - r).abs() < 1.0 && e.mark_px.is_finite())
            .count();
        assert!(near_plate > 0, "the plate's contact shows no rise");
        let mut regions = vec![region_of(&found, w)];
        assert!(!settle_marks(&mut regions));
        assert!(regions[0].edges.iter().all(|e| e.mark_px.is_infinite()));
    }
}
