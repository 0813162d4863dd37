//! Background removal: what the photo would show without the ball.
//!
//! Goes in: the grey photo, optionally a clean plate (the same scene without the ball). Comes out:
//! a [`Background`] (the plate itself, or a smooth estimate on a coarse grid interpolated
//! bilinearly) and the [`Polarity`] of the ball against it.
//!
//! Method without a plate: a robust large-scale estimate. Each grid cell takes the median of a
//! sparse sample of its pixels; a median over a window of cells removes cells that the ball
//! covers; a second pass recomputes every cell from the samples that the first estimate does not
//! flag as ball (more than 3 robust sigmas away on the ball's side) and fills fully covered cells
//! from their neighbours. The noise level is the robust sigma (1.4826 x median absolute deviation)
//! of the sampled residuals.

use crate::core::light::Polarity;
use crate::core::stats::{median_f32, robust_sigma};
use crate::image::load::Photo;
use rayon::prelude::*;

/// Settings of the background stage.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct BackgroundOptions {
    /// Grid cell side, pixels (0 = automatic from the image size).
    pub cell_px: usize,
    /// Half-width of the median window over cells, in cells.
    pub window_cells: usize,
    /// Polarity; None detects it.
    pub polarity: Option<Polarity>,
}

impl Default for BackgroundOptions {
    fn default() -> Self {
        BackgroundOptions {
            cell_px: 0,
            window_cells: 3,
            polarity: None,
        }
    }
}

/// The background of a photo.
#[derive(Debug, Clone)]
pub struct Background {
    kind: Kind,
    /// Polarity of the ball against it.
    pub polarity: Polarity,
    /// Robust sigma of the photo's noise around the background (luma units).
    pub noise_sigma: f32,
}

#[derive(Debug, Clone)]
enum Kind {
    Plate(Photo),
    Grid {
        values: Vec<f32>,
        cols: usize,
        rows: usize,
        cell: f32,
    },
}

/// Grid position of pixel `p` along one axis (cell centres at (i + 0.5) * cell): the two cells
/// to interpolate between and the weight of the second.
#[inline]
fn grid_coord(p: f32, cell: f32, n: usize) -> (usize, usize, f32) {
    let g = ((p + 0.5) / cell - 0.5).clamp(0.0, (n - 1) as f32);
    let i = g as usize;
    (i, (i + 1).min(n - 1), g - i as f32)
}

impl Background {
    /// Background value at a pixel.
    #[inline]
    pub fn at(&self, x: usize, y: usize) -> f32 {
        match &self.kind {
            Kind::Plate(p) => p.at(x, y),
            Kind::Grid { .. } => self.grid_at(x as f32, y as f32),
        }
    }

    /// Background at a pixel without its pixel-to-pixel noise, with `f` applied to every value
    /// read: a plate's values mapped by `f` and averaged over the 5 x 5 pixels around (cut at the
    /// photo's edges); the grid, smooth already, is `f` of its value. Regressing on a plate's own
    /// noisy pixels (the shaded fit's hidden-backdrop term) fits its noise, which the difference
    /// photo - plate also holds, with the opposite sign, and scatters a dark ball's centres.
    pub fn smooth_at(&self, x: usize, y: usize, f: impl Fn(f32) -> f64) -> f64 {
        match &self.kind {
            Kind::Plate(p) => {
                const HALF: usize = 2;
                let (x0, x1) = (x.saturating_sub(HALF), (x + HALF).min(p.width - 1));
                let (y0, y1) = (y.saturating_sub(HALF), (y + HALF).min(p.height - 1));
                let mut sum = 0.0;
                for yy in y0..=y1 {
                    for xx in x0..=x1 {
                        sum += f(p.at(xx, yy));
                    }
                }
                sum / ((x1 - x0 + 1) * (y1 - y0 + 1)) as f64
            }
            Kind::Grid { .. } => f(self.grid_at(x as f32, y as f32)),
        }
    }

    /// The bilinear grid at a (sub-)pixel position; a plate is read at the nearest pixel.
    #[inline]
    fn grid_at(&self, x: f32, y: f32) -> f32 {
        match &self.kind {
            Kind::Plate(p) => p.at(x.round() as usize, y.round() as usize),
            Kind::Grid {
                values,
                cols,
                rows,
                cell,
            } => {
                let (ix, jx, fx) = grid_coord(x, *cell, *cols);
                let (iy, jy, fy) = grid_coord(y, *cell, *rows);
                let v = |i: usize, j: usize| values[j * cols + i];
                let a = v(ix, iy) * (1.0 - fx) + v(jx, iy) * fx;
                let b = v(ix, jy) * (1.0 - fx) + v(jx, jy) * fx;
                a * (1.0 - fy) + b * fy
            }
        }
    }

    /// Mean background over each block of side `b` in the rows `y0..y1` (end exclusive),
    /// block `i` spanning columns `i b..(i + 1) b` (the last one cut at the image's edge). A plate
    /// is summed; the grid is bilinear, so its mean over a block inside one interpolation cell
    /// is its value at the block centre, which is what is returned (blocks across a cell border
    /// differ from the exact mean only by the small kink of the interpolation there). `width`
    /// is the image's width, pixels.
    pub fn block_means(&self, y0: usize, y1: usize, b: usize, width: usize, out: &mut [f32]) {
        match &self.kind {
            Kind::Plate(p) => {
                out.fill(0.0);
                let mut line = vec![0f32; width];
                for y in y0..y1 {
                    p.row(y, 0, &mut line);
                    for (o, chunk) in out.iter_mut().zip(line.chunks(b)) {
                        *o += chunk.iter().sum::<f32>();
                    }
                }
                for (i, o) in out.iter_mut().enumerate() {
                    let n = ((i * b + b).min(width) - i * b) * (y1 - y0);
                    *o /= n as f32;
                }
            }
            Kind::Grid {
                values,
                cols,
                rows,
                cell,
            } => {
                let column = grid_row(values, *cols, *rows, *cell, 0.5 * (y0 + y1 - 1) as f32);
                for (i, o) in out.iter_mut().enumerate() {
                    let x1 = (i * b + b).min(width);
                    let (ix, jx, fx) = grid_coord(0.5 * (i * b + x1 - 1) as f32, *cell, *cols);
                    *o = column[ix] + (column[jx] - column[ix]) * fx;
                }
            }
        }
    }

    /// Background values of row `y`, columns `x0..x0 + out.len()`: the grid interpolated
    /// vertically once, then horizontally (much cheaper than [`Background::at`] per pixel).
    pub fn row(&self, y: usize, x0: usize, out: &mut [f32]) {
        match &self.kind {
            Kind::Plate(p) => p.row(y, x0, out),
            Kind::Grid {
                values,
                cols,
                rows,
                cell,
            } => {
                let column = grid_row(values, *cols, *rows, *cell, y as f32);
                let inv = 1.0 / cell;
                let last = (*cols - 1) as f32;
                let mut gx = (x0 as f32 + 0.5) * inv - 0.5;
                for o in out.iter_mut() {
                    let g = gx.clamp(0.0, last);
                    let ix = g as usize;
                    let jx = (ix + 1).min(cols - 1);
                    let fx = g - ix as f32;
                    *o = column[ix] + (column[jx] - column[ix]) * fx;
                    gx += inv;
                }
            }
        }
    }

    /// This background for `small`, the photo decimated by `d` (see [`Photo::decimated`]): a
    /// grid with `d` times smaller cells (exact: decimated pixel centre i lies at full
    /// resolution i d + (d - 1) / 2), the noise measured again on `small`'s pixels. A plate is
    /// decimated as the photo is.
    pub fn decimated(&self, d: usize, small: &Photo) -> Background {
        let kind = match &self.kind {
            Kind::Grid {
                values,
                cols,
                rows,
                cell,
            } => Kind::Grid {
                values: values.clone(),
                cols: *cols,
                rows: *rows,
                cell: cell / d as f32,
            },
            Kind::Plate(p) => Kind::Plate(p.decimated(d)),
        };
        let mut out = Background {
            kind,
            polarity: self.polarity,
            noise_sigma: self.noise_sigma,
        };
        // About 200 000 samples; residuals 3 full-resolution sigmas (an upper bound of the
        // decimated noise) on the ball's side are left out, as in `estimate`.
        let (w, h) = (small.width, small.height);
        let step = ((w * h / 200_000) as f64).sqrt().max(1.0) as usize;
        let sign = self.polarity.sign();
        let clip = 3.0 * self.noise_sigma;
        let mut resid: Vec<f32> = (0..h)
            .step_by(step)
            .flat_map(|y| (0..w).step_by(step).map(move |x| (x, y)))
            .map(|(x, y)| small.at(x, y) - out.at(x, y))
            .filter(|r| sign * r < clip)
            .collect();
        out.noise_sigma = robust_sigma(&mut resid).max(1e-6);
        out
    }

    /// The ball-positive difference at a pixel: sign * (photo - background).
    #[inline]
    pub fn difference(&self, photo: &Photo, x: usize, y: usize) -> f32 {
        self.polarity.sign() * (photo.at(x, y) - self.at(x, y))
    }
}

/// The grid interpolated vertically at row position `y`: one value per grid column.
fn grid_row(values: &[f32], cols: usize, rows: usize, cell: f32, y: f32) -> Vec<f32> {
    let (iy, jy, fy) = grid_coord(y, cell, rows);
    (0..cols)
        .map(|i| values[iy * cols + i] * (1.0 - fy) + values[jy * cols + i] * fy)
        .collect()
}

/// Automatic cell side for an image: about 48 cells across the short side, 16..128 px.
fn auto_cell(width: usize, height: usize) -> usize {
    (width.min(height) / 48).clamp(16, 128)
}

/// Sample stride inside a cell: at most about 8 x 8 samples per cell.
fn stride(cell: usize) -> usize {
    (cell / 8).max(1)
}

/// Estimate the background of `photo` (no clean plate).
pub fn estimate(photo: &Photo, options: &BackgroundOptions) -> Background {
    let (w, h) = (photo.width, photo.height);
    let cell = if options.cell_px == 0 {
        auto_cell(w, h)
    } else {
        options.cell_px
    };
    let cols = w.div_ceil(cell);
    let rows = h.div_ceil(cell);
    let step = stride(cell);
    let sample = |cx: usize, cy: usize| -> Vec<(usize, usize, f32)> {
        let mut out = Vec::with_capacity((cell / step + 1).pow(2));
        let (x0, y0) = (cx * cell + step / 2, cy * cell + step / 2);
        let mut y = y0;
        while y < ((cy + 1) * cell).min(h) {
            let mut x = x0;
            while x < ((cx + 1) * cell).min(w) {
                out.push((x, y, photo.at(x, y)));
                x += step;
            }
            y += step;
        }
        out
    };
    let samples: Vec<Vec<(usize, usize, f32)>> = (0..rows * cols)
        .into_par_iter()
        .map(|i| sample(i % cols, i / cols))
        .collect();
    let cell_medians: Vec<f32> = samples
        .par_iter()
        .map(|s| {
            let mut v: Vec<f32> = s.iter().map(|p| p.2).collect();
            median_f32(&mut v)
        })
        .collect();
    let first = window_quantile(&cell_medians, cols, rows, options.window_cells, 0.5);
    let grid = |values: Vec<f32>| Kind::Grid {
        values,
        cols,
        rows,
        cell: cell as f32,
    };
    let mut bg = Background {
        kind: grid(first),
        polarity: Polarity::Bright,
        noise_sigma: 0.0,
    };
    // Residuals of all samples against the first estimate: noise level and polarity.
    let mut resid: Vec<f32> = samples
        .par_iter()
        .flat_map_iter(|s| s.iter().map(|&(x, y, v)| v - bg.at(x, y)))
        .collect();
    let polarity = options.polarity.unwrap_or_else(|| detect_polarity(&resid));
    let sigma = robust_sigma(&mut resid).max(1e-6);
    bg.polarity = polarity;
    // A quantile on the background's side of the window: robust to cells the ball covers.
    let q = match polarity {
        Polarity::Bright => 0.25,
        Polarity::Dark => 0.75,
    };
    bg.kind = grid(window_quantile(
        &cell_medians,
        cols,
        rows,
        options.window_cells,
        q,
    ));
    // Second pass: drop samples that look like ball, recompute each cell.
    let sign = polarity.sign();
    let mut second: Vec<Option<f32>> = samples
        .par_iter()
        .map(|s| {
            let mut keep: Vec<f32> = s
                .iter()
                .filter(|&&(x, y, v)| sign * (v - bg.at(x, y)) < 3.0 * sigma)
                .map(|p| p.2)
                .collect();
            if keep.len() * 4 < s.len().max(1) {
                None
            } else {
                Some(median_f32(&mut keep))
            }
        })
        .collect();
    fill_holes(&mut second, cols, rows);
    let values: Vec<f32> = second
        .into_iter()
        .zip(match &bg.kind {
            Kind::Grid { values, .. } => values.clone(),
            Kind::Plate(..) => unreachable!("estimated backgrounds are grids"),
        })
        .map(|(s, f)| s.unwrap_or(f))
        .collect();
    bg.kind = grid(values);
    let bg_ref = &bg;
    let mut resid: Vec<f32> = samples
        .par_iter()
        .flat_map_iter(|s| {
            s.iter()
                .map(|&(x, y, v)| v - bg_ref.at(x, y))
                .filter(|r| sign * r < 3.0 * sigma)
        })
        .collect();
    // Residuals clipped on the ball side: the MAD of the kept ones slightly underestimates;
    // 3-sigma clipping of a Gaussian keeps 99.87 % of one tail, negligible.
    bg.noise_sigma = robust_sigma(&mut resid).max(1e-6);
    bg
}

/// Use a clean plate as the background.
pub fn from_plate(photo: &Photo, plate: &Photo, options: &BackgroundOptions) -> Background {
    let w = photo.width;
    let mut resid: Vec<f32> = (0..photo.width * photo.height)
        .step_by(7)
        .map(|i| photo.at(i % w, i / w) - plate.at(i % w, i / w))
        .collect();
    let polarity = options
        .polarity
        .unwrap_or_else(|| plate_polarity(photo, plate, &resid));
    let sigma = robust_sigma(&mut resid).max(1e-6);
    Background {
        kind: Kind::Plate(plate.clone()),
        polarity,
        noise_sigma: sigma,
    }
}

/// Polarity from the tails of the residuals: the ball makes one tail long.
fn detect_polarity(resid: &[f32]) -> Polarity {
    let (up, down) = tails(resid);
    if down > up {
        Polarity::Dark
    } else {
        Polarity::Bright
    }
}

/// The weight of the upper and the lower tail of `resid` beyond 5 robust sigmas of its median
/// (the sum of the distances in sigmas).
fn tails(resid: &[f32]) -> (f64, f64) {
    let mut v = resid.to_vec();
    let med = median_f32(&mut v);
    let sigma = robust_sigma(&mut v).max(1e-6);
    let (mut up, mut down) = (0f64, 0f64);
    for &r in resid {
        let d = (r - med) / sigma;
        if d > 5.0 {
            up += d as f64;
        } else if d < -5.0 {
            down -= d as f64;
        }
    }
    (up, down)
}

/// Side of the blocks over which [`plate_polarity`] also averages the residual, pixels.
const POLARITY_BLOCK_PX: usize = 4;

/// Polarity of the ball against its clean plate: the tails of the sampled pixel residuals
/// `pixel_resid` and of the residual's means over [`POLARITY_BLOCK_PX`] square blocks, summed.
/// A dark ball's images on a bright backdrop dim it by only about 1/N for N flashes: a few
/// quantisation steps, which no single pixel shows beyond 5 sigmas while a block mean, its noise
/// averaged down by the block side, does (the images are at least 6 px in radius).
fn plate_polarity(photo: &Photo, plate: &Photo, pixel_resid: &[f32]) -> Polarity {
    let b = POLARITY_BLOCK_PX;
    let (bw, bh) = (photo.width / b, photo.height / b);
    let block_resid: Vec<f32> = (0..bw * bh)
        .into_par_iter()
        .map(|i| {
            let (x0, y0) = ((i % bw) * b, (i / bw) * b);
            let mut sum = 0f32;
            for y in y0..y0 + b {
                for x in x0..x0 + b {
                    sum += photo.at(x, y) - plate.at(x, y);
                }
            }
            sum / (b * b) as f32
        })
        .collect();
    let (up_px, down_px) = tails(pixel_resid);
    let (up_block, down_block) = if block_resid.len() >= 16 {
        tails(&block_resid)
    } else {
        (0.0, 0.0)
    };
    if down_px + down_block > up_px + up_block {
        Polarity::Dark
    } else {
        Polarity::Bright
    }
}

/// Quantile `q` of the cell values over a (2 half + 1)^2 window of cells.
fn window_quantile(values: &[f32], cols: usize, rows: usize, half: usize, q: f32) -> Vec<f32> {
    let mut out = vec![0f32; values.len()];
    out.par_chunks_mut(cols).enumerate().for_each(|(j, row)| {
        let mut buf = Vec::with_capacity((2 * half + 1).pow(2));
        for (i, o) in row.iter_mut().enumerate() {
            buf.clear();
            for jj in j.saturating_sub(half)..=(j + half).min(rows - 1) {
                for ii in i.saturating_sub(half)..=(i + half).min(cols - 1) {
                    let v = values[jj * cols + ii];
                    if v.is_finite() {
                        buf.push(v);
                    }
                }
            }
            *o = if buf.is_empty() {
                f32::NAN
            } else {
                let k = ((buf.len() - 1) as f32 * q).round() as usize;
                *buf.select_nth_unstable_by(k, f32::total_cmp).1
            };
        }
    });
    out
}

/// Fill cells without an estimate from the mean of their filled neighbours, repeatedly.
fn fill_holes(values: &mut [Option<f32>], cols: usize, rows: usize) {
    for _ in 0..(cols + rows) {
        let holes: Vec<usize> = (0..values.len()).filter(|&i| values[i].is_none()).collect();
        if holes.is_empty() || holes.len() == values.len() {
            return;
        }
        let mut updates = Vec::new();
        for &i in &holes {
            let (x, y) = ((i % cols) as isize, (i / cols) as isize);
            let (mut sum, mut n) = (0f32, 0);
            for (dx, dy) in [(-1, 0), (1, 0), (0, -1), (0, 1)] {
                let (nx, ny) = (x + dx, y + dy);
                let inside = nx >= 0 && ny >= 0 && (nx as usize) < cols && (ny as usize) < rows;
                if let Some(v) = inside
                    .then(|| values[ny as usize * cols + nx as usize])
                    .flatten()
                {
                    sum += v;
                    n += 1;
                }
            }
            if n > 0 {
                updates.push((i, sum / n as f32));
            }
        }
        for (i, v) in updates {
            values[i] = Some(v);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_background_of_the_decimated_photo_is_the_decimated_background() {
        // A smooth backdrop with noise (a plane, which the bilinear grid holds exactly away from
        // the clamped border cells), estimated at full resolution and carried to the photo
        // decimated by 3: there it matches the plane at the decimated pixels' centres.
        let (w, h) = (960usize, 600usize);
        let plane = |x: f32, y: f32| 0.2 + 0.0002 * x + 0.0001 * y;
        // Noise: the MurmurHash3 finaliser of the pixel index, uniform in +-0.01 (sigma 0.0058).
        let noise = |i: usize| {
            let mut x = i as u64 + 1;
            x ^= x >> 33;
            x = x.wrapping_mul(0xff51_afd7_ed55_8ccd);
            x ^= x >> 33;
            x = x.wrapping_mul(0xc4ce_b9fe_1a85_ec53);
            x ^= x >> 33;
            (x % 2001) as f32 * 1e-5 - 0.01
        };
        let luma: Vec<f32> = (0..w * h)
            .map(|i| plane((i % w) as f32, (i / w) as f32) + noise(i))
            .collect();
        let photo = Photo::from_luma(std::path::Path::new("plane.png"), w, h, luma);
        let opts = BackgroundOptions {
            polarity: Some(Polarity::Bright),
            ..BackgroundOptions::default()
        };
        let full = estimate(&photo, &opts);
        let small = photo.decimated(3);
        let carried = full.decimated(3, &small);
        let mut worst = 0f32;
        for y in (50..150).step_by(3) {
            for x in (50..270).step_by(3) {
                let centre = plane((3 * x + 1) as f32, (3 * y + 1) as f32);
                worst = worst.max((carried.at(x, y) - centre).abs());
                // The same grid read at the same place at both resolutions.
                assert!((carried.at(x, y) - full.at(3 * x + 1, 3 * y + 1)).abs() < 1e-6);
            }
        }
        // Each cell is the median of about 64 samples: 1.25 x 0.0058 / 8 = 0.0009 of noise.
        assert!(worst < 0.003, "decimated grid off by {worst}");
        // The noise is measured again on the decimated photo. Full resolution: 1.4826 x MAD of a
        // uniform +-0.01 is 1.4826 x 0.005 = 0.0074; the mean of 9 such pixels is nearly
        // Gaussian, its standard deviation 0.02 / sqrt(12) / 3 = 0.0019 (the grid's own error
        // adds a little).
        assert!(
            (full.noise_sigma / 0.00741 - 1.0).abs() < 0.05,
            "{}",
            full.noise_sigma
        );
        let sd = 0.02 / 12f32.sqrt() / 3.0;
        assert!(
            (carried.noise_sigma / sd - 1.0).abs() < 0.1,
            "{}",
            carried.noise_sigma
        );
    }

    #[test]
    fn smooth_backdrop_is_the_mean_of_the_plates_five_by_five_pixels() {
        // A 7 x 6 plate of values 10 x + y: the 5 x 5 mean around an inner pixel is the value
        // there (the plane is symmetric about it), at a corner the mean of the 3 x 3 pixels left
        // inside the photo, x and y in 0..=2: 10 x 1 + 1 = 11. The mapping is applied to every
        // pixel before the mean: the mean of (10 x + y)^2 over a 5 x 5 block centred at (3, 3)
        // is 33^2 + the variance of 10 x + y, 100 x 2 + 2 = 202.
        let (w, h) = (7usize, 6usize);
        let luma: Vec<f32> = (0..w * h).map(|i| (10 * (i % w) + i / w) as f32).collect();
        let plate = Photo::from_luma(std::path::Path::new("plate.png"), w, h, luma);
        let bg = from_plate(&plate, &plate, &BackgroundOptions::default());
        let id = |v: f32| v as f64;
        assert!((bg.smooth_at(3, 3, id) - 33.0).abs() < 1e-9);
        assert!((bg.smooth_at(0, 0, id) - 11.0).abs() < 1e-9);
        // At (6, 5), x in 4..=6 and y in 3..=5: 10 x 5 + 4 = 54.
        assert!((bg.smooth_at(6, 5, id) - 54.0).abs() < 1e-9);
        let sq = bg.smooth_at(3, 3, |v| (v as f64) * (v as f64));
        assert!((sq - (33.0 * 33.0 + 202.0)).abs() < 1e-6, "{sq}");
        // A grid, smooth already, is read as it is.
        let grid = Background {
            kind: Kind::Grid {
                values: vec![0.25; 4],
                cols: 2,
                rows: 2,
                cell: 4.0,
            },
            polarity: Polarity::Bright,
            noise_sigma: 0.01,
        };
        assert!((grid.smooth_at(3, 2, |v| 2.0 * v as f64) - 0.5).abs() < 1e-9);
    }

    #[test]
    fn robust_sigma_of_gaussian_noise_and_of_quantised_noise() {
        // 1.4826 x MAD is the standard deviation of a Gaussian (the consistency constant,
        // 1 / Phi^-1(3/4)). Gaussian samples by the Box-Muller transform from a fixed sequence.
        let n = 20_000;
        let mut g: Vec<f32> = (0..n)
            .map(|i| {
                let u1 = (i as f64 + 0.5) / n as f64;
                let u2 = ((i * 7919) % n) as f64 / n as f64;
                ((-2.0 * u1.ln()).sqrt() * (2.0 * std::f64::consts::PI * u2).cos() * 0.01) as f32
            })
            .collect();
        let s = robust_sigma(&mut g);
        assert!((s - 0.01).abs() < 0.0005, "{s}");
        // The same noise quantised to steps of 0.02: most values are 0, the MAD is 0, and the
        // fallback still sees the noise (sample standard deviation of the quantised values
        // 0.0065 here).
        let mut q: Vec<f32> = (0..n)
            .map(|i| {
                let u1 = (i as f64 + 0.5) / n as f64;
                let u2 = ((i * 7919) % n) as f64 / n as f64;
                let v = (-2.0 * u1.ln()).sqrt() * (2.0 * std::f64::consts::PI * u2).cos() * 0.01;
                ((v / 0.02).round() * 0.02) as f32
            })
            .collect();
        let mean = q.iter().map(|&v| v as f64).sum::<f64>() / n as f64;
        let sd = (q.iter().map(|&v| (v as f64 - mean).powi(2)).sum::<f64>() / n as f64).sqrt();
        let s = robust_sigma(&mut q) as f64;
        assert!(s > 0.5 * sd && s < 1.5 * sd, "{s} vs {sd}");
    }
}
