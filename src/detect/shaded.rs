//! Shaded-sphere fit: a lit sphere's image fitted to the pixels around one ball image.
//!
//! Goes in: the [`WindowPixel`]s around one image in linear light and a start [`Circle`]. Comes
//! out: a [`ShadedFit`] with the silhouette, a 1-sigma centre uncertainty and the light direction.
//!
//! Method: the pixels are modelled as a Lambertian sphere under one distant light plus fill:
//! exact disc coverage times (a + b max(0, n . l)), plus the hidden backdrop and a constant;
//! (cx, cy, r, light) by Levenberg-Marquardt, the brightness terms linearly (variable projection,
//! Golub & Pereyra, SIAM J. Numer. Anal. 10, 1973), outliers left out. Where the Lambert term is
//! not significant (Schwarz's criterion), a uniform disc's silhouette is kept. An image that
//! overlaps others is fitted with them held in place and their light added to its own
//! ([`shaded_fit_held`]), its sigma widened by a sector jackknife (Quenouille 1956) and by the
//! neighbours' own errors propagated to first order.

use crate::core::geometry::{disc_coverage, sphere_normal};
use crate::core::stats::{MAD_TO_SIGMA, median_f32};
use crate::detect::circle::Circle;
use std::f64::consts::FRAC_1_SQRT_2;

/// One pixel of a shaded-sphere fit window.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct WindowPixel {
    /// Pixel centre x, pixels.
    pub x_px: f64,
    /// Pixel centre y, pixels.
    pub y_px: f64,
    /// Linear light of the photo minus that of the backdrop.
    pub value: f64,
    /// Linear light of the backdrop (minus its window mean), which the ball hides where it covers.
    pub backdrop: f64,
    /// Weight of the pixel in the fit: 1, or less for a pixel whose residuals scatter more.
    pub weight: f64,
    /// The neighbouring images held in place over this pixel, summed: their disc coverage, that
    /// times their Lambert term, that times the backdrop; zero for a lone image.
    pub others: [f64; 3],
}

/// Result of a shaded-sphere fit.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ShadedFit {
    /// The silhouette.
    pub circle: Circle,
    /// 1-sigma centre uncertainty per axis, pixels.
    pub sigma_px: f64,
    /// Direction to the light as (u, v, 1) in the camera frame (x right, y down, z to the lens).
    pub light_uv: [f64; 2],
    /// 1-sigma of u and of v.
    pub light_sigma: [f64; 2],
    /// RMS residual, linear light units.
    pub rms: f64,
    /// Fraction of the window's pixels kept (not outliers).
    pub kept: f64,
    /// The silhouette is that of a uniform disc: the Lambert term was not significant.
    pub flat: bool,
}

pub(crate) const SHADED_LINEAR: usize = 4;

/// How the ball's own light is modelled inside its silhouette.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Shading {
    /// a + b max(0, n . l): a Lambertian sphere under one light (u, v) plus fill.
    Lambert,
    /// a alone: a uniform disc (a dark ball, whose own shading is below the noise); the light
    /// parameters are held and its column is zero.
    Flat,
    /// As [`Shading::Lambert`] with the light held at the photo's: an image overlapping its
    /// neighbours, whose pixels mix their light with its own.
    Held,
}

/// Linear basis of the shaded-sphere model at one pixel for nonlinear parameters
/// p = (cx, cy, r, u, v): exact disc coverage, coverage x Lambert term max(0, n . l) with the
/// sphere's normal at the pixel centre, coverage x backdrop (hidden by the ball), a constant.
pub(crate) fn shaded_basis(
    q: &WindowPixel,
    p: &[f64; 5],
    shading: Shading,
) -> [f64; SHADED_LINEAR] {
    let [a, b, c] = own_terms(q, p, shading);
    [a + q.others[0], b + q.others[1], c + q.others[2], 1.0]
}

/// The first three columns of [`shaded_basis`] for the image at p alone: disc coverage, coverage
/// x Lambert term (zero for a flat disc), coverage x backdrop.
fn own_terms(q: &WindowPixel, p: &[f64; 5], shading: Shading) -> [f64; 3] {
    let (dx, dy) = (q.x_px - p[0], q.y_px - p[1]);
    let d2 = dx * dx + dy * dy;
    // A pixel lies wholly inside or outside the disc when its centre is more than half its
    // diagonal from the rim.
    let (inner, outer) = (p[2] - FRAC_1_SQRT_2, p[2] + FRAC_1_SQRT_2);
    let coverage = if inner > 0.0 && d2 <= inner * inner {
        1.0
    } else if d2 >= outer * outer {
        return [0.0; 3];
    } else {
        disc_coverage(q.x_px, q.y_px, p[0], p[1], p[2])
    };
    if coverage <= 0.0 {
        return [0.0; 3];
    }
    if shading == Shading::Flat {
        return [coverage, 0.0, coverage * q.backdrop];
    }
    let [nx, ny, nz] = sphere_normal(dx, dy, p[2], coverage);
    let ln = (p[3] * p[3] + p[4] * p[4] + 1.0).sqrt();
    let lambert = ((nx * p[3] + ny * p[4] + nz) / ln).max(0.0);
    [coverage, coverage * lambert, coverage * q.backdrop]
}

/// What the image `c`, lit from `light_uv`, adds to [`WindowPixel::others`] at pixel `q` when it
/// is held in place beside the image fitted.
pub(crate) fn held_terms(q: &WindowPixel, c: Circle, light_uv: [f64; 2]) -> [f64; 3] {
    let p = [c.x_px, c.y_px, c.r_px, light_uv[0], light_uv[1]];
    own_terms(q, &p, Shading::Held)
}

/// Evidence that a shaded fit's light `fit_uv`, and not `other_uv`, lit the ball image in
/// `window`: `n ln(RSS_other / RSS_fit)` at the fitted silhouette `c`, less Schwarz's penalty
/// for the two light parameters (`2 ln n`), `n` the pixels divided by the correlation factor of
/// their residuals (BIC, Schwarz, Ann. Statist. 6, 1978). Positive: the pixels tell the two
/// lights apart and prefer the fit's; at or below zero, the other light explains them as well (a
/// small image whose shading is mostly blur, where the fitted light wanders). None when either
/// residual cannot be computed.
pub fn light_evidence(
    window: &[WindowPixel],
    c: Circle,
    fit_uv: [f64; 2],
    other_uv: [f64; 2],
) -> Option<f64> {
    let mut res = Vec::with_capacity(window.len());
    let p_fit = [c.x_px, c.y_px, c.r_px, fit_uv[0], fit_uv[1]];
    let rss_fit = shaded_residuals(window, &p_fit, Shading::Lambert, &mut res)?;
    let n_eff = window.len() as f64 / pixel_correlation_factor(window, &res);
    let p_other = [c.x_px, c.y_px, c.r_px, other_uv[0], other_uv[1]];
    let rss_other = shaded_residuals(window, &p_other, Shading::Lambert, &mut res)?;
    if !(rss_fit > 0.0 && rss_other.is_finite() && n_eff > 1.0) {
        return None;
    }
    Some(n_eff * (rss_other / rss_fit).ln() - 2.0 * n_eff.ln())
}

/// [`light_evidence`] over the pixels that neither light leaves as outliers (residual within 4
/// robust sigmas under both, and no closer than 2 px to a structure of either's outliers): on a
/// printed ball the marks are outliers under any light, and a light that happens to darken
/// where a few marks run explains them a little better than the true one (a panel-lined
/// image under JPEG 85 on the real-balls bench: the fitted light 51 degrees off the photo's,
/// evidence 4.1 over the whole window).
pub fn light_evidence_without_marks(
    window: &[WindowPixel],
    c: Circle,
    fit_uv: [f64; 2],
    other_uv: [f64; 2],
) -> Option<f64> {
    let mut kept = window.to_vec();
    for uv in [fit_uv, other_uv] {
        let mut res = Vec::with_capacity(kept.len());
        let p = [c.x_px, c.y_px, c.r_px, uv[0], uv[1]];
        shaded_residuals(&kept, &p, Shading::Lambert, &mut res)?;
        let cut = SHADED_OUTLIER_SIGMAS * MAD_TO_SIGMA * median_abs(&res);
        kept = without_outliers(&kept, &res, cut, SHADED_MASK_GROW);
    }
    if kept.len() < 30 {
        return None;
    }
    light_evidence(&kept, c, fit_uv, other_uv)
}

/// Residuals of the best linear coefficients for nonlinear parameters `p` (variable projection).
fn shaded_residuals(
    window: &[WindowPixel],
    p: &[f64; 5],
    shading: Shading,
    out: &mut Vec<f64>,
) -> Option<f64> {
    use nalgebra::{SMatrix, SVector};
    let mut ata = SMatrix::<f64, SHADED_LINEAR, SHADED_LINEAR>::zeros();
    let mut atb = SVector::<f64, SHADED_LINEAR>::zeros();
    thread_local! {
        static BASIS: std::cell::RefCell<Vec<[f64; SHADED_LINEAR]>> =
            const { std::cell::RefCell::new(Vec::new()) };
    }
    BASIS.with_borrow_mut(|basis| {
        basis.clear();
        basis.extend(window.iter().map(|q| shaded_basis(q, p, shading)));
        for (b, q) in basis.iter().zip(window) {
            let v = SVector::<f64, SHADED_LINEAR>::from_column_slice(b);
            ata += v * v.transpose() * q.weight;
            atb += v * q.value * q.weight;
        }
        // A small ridge keeps the solve defined when the backdrop is flat (its column vanishes)
        // and for a flat disc's zero Lambert column.
        let ridge = 1e-9 * (0..SHADED_LINEAR).map(|i| ata[(i, i)]).sum::<f64>();
        for i in 0..SHADED_LINEAR {
            ata[(i, i)] += ridge;
        }
        let c = ata.cholesky()?.solve(&atb);
        out.clear();
        let mut rss = 0.0;
        for (b, q) in basis.iter().zip(window) {
            let m: f64 = (0..SHADED_LINEAR).map(|i| b[i] * c[i]).sum();
            let r = (q.value - m) * q.weight.sqrt();
            rss += r * r;
            out.push(r);
        }
        Some(rss)
    })
}

/// Residuals at every pixel of `window` of the model whose linear coefficients are solved on the
/// pixels `fit` alone, for nonlinear parameters `p`.
fn residuals_beyond(
    window: &[WindowPixel],
    fit: &[WindowPixel],
    p: &[f64; 5],
    shading: Shading,
) -> Option<Vec<f64>> {
    use nalgebra::{SMatrix, SVector};
    let mut ata = SMatrix::<f64, SHADED_LINEAR, SHADED_LINEAR>::zeros();
    let mut atb = SVector::<f64, SHADED_LINEAR>::zeros();
    for q in fit {
        let v = SVector::<f64, SHADED_LINEAR>::from(shaded_basis(q, p, shading));
        ata += v * v.transpose();
        atb += v * q.value;
    }
    let ridge = 1e-9 * ata.trace();
    for i in 0..SHADED_LINEAR {
        ata[(i, i)] += ridge;
    }
    let c = ata.cholesky()?.solve(&atb);
    Some(
        window
            .iter()
            .map(|q| {
                let b = shaded_basis(q, p, shading);
                q.value - (0..SHADED_LINEAR).map(|i| b[i] * c[i]).sum::<f64>()
            })
            .collect(),
    )
}

/// Where a shaded fit ended: the parameters, the residual sum of squares, the residuals and the
/// Gauss-Newton normal matrix.
type ShadedState = (
    [f64; SHADED_NP],
    f64,
    Vec<f64>,
    nalgebra::SMatrix<f64, SHADED_NP, SHADED_NP>,
);

/// Levenberg-Marquardt on the projected residuals from `p`: the parameters, the residual sum of
/// squares, the residuals and the Gauss-Newton normal matrix at the end.
fn shaded_lm(
    window: &[WindowPixel],
    mut p: [f64; SHADED_NP],
    shading: Shading,
) -> Option<ShadedState> {
    use nalgebra::{SMatrix, SVector};
    const NP: usize = SHADED_NP;
    let mut res = Vec::with_capacity(window.len());
    let mut f = shaded_residuals(window, &p, shading, &mut res)?;
    // A flat disc or a held light holds the light: its parameters get a unit diagonal and no
    // gradient, so their step is zero and the centre's covariance is that of (cx, cy, r) alone.
    let free = if shading == Shading::Lambert { NP } else { 3 };
    let mut lambda = 1e-3;
    let mut trial_res = Vec::with_capacity(window.len());
    let mut scratch = Vec::with_capacity(window.len());
    // Jacobian of the projected residuals by forward differences (the coverage is in closed
    // form, smooth in the parameters), accumulated straight into the normal equations.
    let mut normal = |p: &[f64; NP], base: &[f64]| {
        let mut cols = vec![Vec::new(); NP];
        for (k, col) in cols.iter_mut().enumerate().take(free) {
            let h = if k < 3 {
                1e-4
            } else {
                1e-4 * (1.0 + p[k].abs())
            };
            let mut q = *p;
            q[k] += h;
            shaded_residuals(window, &q, shading, &mut scratch)?;
            *col = scratch.iter().zip(base).map(|(a, b)| (a - b) / h).collect();
        }
        let mut jtj = SMatrix::<f64, NP, NP>::zeros();
        let mut jtr = SVector::<f64, NP>::zeros();
        for a in 0..free {
            jtr[a] = cols[a].iter().zip(base).map(|(j, r)| j * r).sum();
            for b in a..free {
                let v: f64 = cols[a].iter().zip(&cols[b]).map(|(x, y)| x * y).sum();
                jtj[(a, b)] = v;
                jtj[(b, a)] = v;
            }
        }
        for a in free..NP {
            jtj[(a, a)] = 1.0;
        }
        Some((jtj, jtr))
    };
    let (mut jtj, mut jtr) = normal(&p, &res)?;
    for _ in 0..40 {
        let mut a = jtj;
        for i in 0..NP {
            a[(i, i)] += lambda * jtj[(i, i)].max(1e-12);
        }
        let Some(step) = a.lu().solve(&(-jtr)) else {
            break;
        };
        let mut trial = p;
        for k in 0..NP {
            trial[k] += step[k];
        }
        let ft = if trial[2] > 1.0 && trial.iter().all(|v| v.is_finite()) {
            shaded_residuals(window, &trial, shading, &mut trial_res)
        } else {
            None
        };
        match ft {
            Some(ft) if ft <= f => {
                let done = (f - ft) <= 1e-6 * f || step.rows(0, 3).norm() < 1e-3;
                p = trial;
                std::mem::swap(&mut res, &mut trial_res);
                f = ft;
                lambda = (lambda * 0.3).max(1e-9);
                // The normal matrix one small step back serves the covariance as well.
                if done {
                    break;
                }
                (jtj, jtr) = normal(&p, &res)?;
            }
            _ => {
                lambda *= 10.0;
                if lambda > 1e9 {
                    break;
                }
            }
        }
    }
    Some((p, f, res, jtj))
}

const SHADED_NP: usize = 5;

/// A dense map over the bounding box of a window's pixels (pixel centres are integers).
struct WindowGrid<T> {
    x0: i64,
    y0: i64,
    w: i64,
    h: i64,
    cells: Vec<T>,
    fill: T,
}

impl<T: Copy> WindowGrid<T> {
    fn new(pixels: &[WindowPixel], fill: T) -> WindowGrid<T> {
        let (mut x0, mut y0, mut x1, mut y1) = (i64::MAX, i64::MAX, i64::MIN, i64::MIN);
        for q in pixels {
            let (x, y) = (q.x_px as i64, q.y_px as i64);
            (x0, y0, x1, y1) = (x0.min(x), y0.min(y), x1.max(x), y1.max(y));
        }
        let (w, h) = ((x1 - x0 + 1).max(0), (y1 - y0 + 1).max(0));
        WindowGrid {
            x0,
            y0,
            w,
            h,
            cells: vec![fill; (w * h) as usize],
            fill,
        }
    }

    fn index(&self, q: &WindowPixel, dx: i64, dy: i64) -> Option<usize> {
        let (x, y) = (q.x_px as i64 + dx - self.x0, q.y_px as i64 + dy - self.y0);
        (x >= 0 && y >= 0 && x < self.w && y < self.h).then(|| (y * self.w + x) as usize)
    }

    /// The value at the pixel offset (dx, dy) from q's.
    fn get(&self, q: &WindowPixel, dx: i64, dy: i64) -> T {
        self.index(q, dx, dy).map_or(self.fill, |i| self.cells[i])
    }

    fn set(&mut self, q: &WindowPixel, v: T) {
        if let Some(i) = self.index(q, 0, 0) {
            self.cells[i] = v;
        }
    }
}

/// Variance inflation for residuals correlated between neighbouring pixels (JPEG blocks, a
/// demosaiced sensor): lag-1 correlations along x and along y, AR(1) factor (1 + rho) / (1 - rho)
/// for each axis.
pub(crate) fn pixel_correlation_factor(pixels: &[WindowPixel], res: &[f64]) -> f64 {
    let mut grid = WindowGrid::new(pixels, f64::NAN);
    for (q, r) in pixels.iter().zip(res) {
        grid.set(q, *r);
    }
    let var: f64 = res.iter().map(|r| r * r).sum::<f64>() / res.len().max(1) as f64;
    if var <= 0.0 {
        return 1.0;
    }
    let mut factor = 1.0;
    for (dx, dy) in [(1, 0), (0, 1)] {
        let (mut sum, mut n) = (0.0, 0usize);
        for (q, r) in pixels.iter().zip(res) {
            let s = grid.get(q, dx, dy);
            if !s.is_nan() {
                sum += r * s;
                n += 1;
            }
        }
        if n > 0 {
            let rho = (sum / n as f64 / var).clamp(0.0, 0.9);
            factor *= (1.0 + rho) / (1.0 - rho);
        }
    }
    factor
}

/// Residuals beyond this many robust sigmas are left out of the shaded fit (an edge of the
/// backdrop that the background estimate does not hold, a neighbouring object).
const SHADED_OUTLIER_SIGMAS: f64 = 4.0;

/// Pixels within this many pixels (chessboard distance) of a structure of outliers are left out,
/// or within fewer where this many would leave less than [`SHADED_MIN_KEPT`] of the window.
const SHADED_MASK_GROW: i64 = 2;

/// Flat fits are tried when a uniform disc at the Lambert fit's circle misses by less than this
/// many times Schwarz's penalty (in n ln RSS).
const FLAT_TRY_FACTOR: f64 = 4.0;

/// Outliers are left out only while this fraction of the window remains.
const SHADED_MIN_KEPT: f64 = 0.6;

/// Most noise, as a fraction of the image's contrast, of an image whose outliers may be printed
/// marks.
const MARKS_NOISE_FRACTION: f64 = 0.06;

/// Least fraction of the window that the widest margin keeps for the outliers to be a few marks.
const MARKS_WIDE_KEPT: f64 = 0.4;

/// The outliers look like a few marks printed on the ball, which may be left out with a narrow
/// margin: the image stands well above its noise (`noise_fraction`, the residuals' robust sigma
/// over the image's contrast, at most [`MARKS_NOISE_FRACTION`]) and the widest margin leaves
/// most of what the fit needs (`wide_kept`, at least [`MARKS_WIDE_KEPT`] of the window).
/// Outliers all over the window are the model's misfit or the noise of a faint image (JPEG
/// blocks on a dark ball): on the sweep's dark JPEG photos a narrow margin for those moved their
/// centres (5 photos of 300, seed 1: four values right before turned wrong, all flagged).
fn printed_marks(noise_fraction: f64, wide_kept: f64) -> bool {
    noise_fraction <= MARKS_NOISE_FRACTION && wide_kept >= MARKS_WIDE_KEPT
}

/// A start for the fit: the circle as given and, of a few light directions, the one whose
/// projected residual is least: the unclamped Lambert term a + b nx + c ny + d nz solved
/// linearly ((b, c, d) is the light direction scaled), light from the lens, and sixteen lights
/// around it at 31 and 61 degrees off the lens axis (a grazing light is far from the linear
/// estimate, which would start the fit in the wrong valley).
fn light_start(window: &[WindowPixel], c: Circle) -> [f64; SHADED_NP] {
    use nalgebra::{SMatrix, SVector};
    let (cx, cy, r) = (c.x_px, c.y_px, c.r_px);
    let mut ata = SMatrix::<f64, 6, 6>::zeros();
    let mut atb = SVector::<f64, 6>::zeros();
    for q in window {
        let coverage = disc_coverage(q.x_px, q.y_px, cx, cy, r);
        let [nx, ny, nz] = sphere_normal(q.x_px - cx, q.y_px - cy, r, coverage);
        let v = SVector::<f64, 6>::from_column_slice(&[
            coverage,
            coverage * nx,
            coverage * ny,
            coverage * nz,
            coverage * q.backdrop,
            1.0,
        ]);
        ata += v * v.transpose();
        atb += v * q.value;
    }
    let ridge = 1e-9 * ata.trace();
    for i in 0..6 {
        ata[(i, i)] += ridge;
    }
    let mut lights = vec![[0.0, 0.0]];
    if let Some(sol) = ata.cholesky().map(|ch| ch.solve(&atb))
        && sol[3].abs() > 1e-12
    {
        lights.push([
            (sol[1] / sol[3]).clamp(-3.0, 3.0),
            (sol[2] / sol[3]).clamp(-3.0, 3.0),
        ]);
    }
    for tilt in [0.6, 1.8] {
        for k in 0..8 {
            let a = k as f64 * std::f64::consts::FRAC_PI_4;
            lights.push([tilt * a.cos(), tilt * a.sin()]);
        }
    }
    let mut scratch = Vec::with_capacity(window.len());
    let mut best = ([cx, cy, r, 0.0, 0.0], f64::INFINITY);
    for [u, v] in lights {
        let p = [cx, cy, r, u, v];
        if let Some(f) = shaded_residuals(window, &p, Shading::Lambert, &mut scratch)
            && f < best.1
        {
            best = (p, f);
        }
    }
    best.0
}

/// The pixels whose residual is within `cut`, less those near a structure of outliers.
/// Outliers next to other outliers are a structure (the edge of an incline, a streak): the pixels
/// within `g` pixels of it are left out too, since where it meets the rim the rim's pixels mix
/// the two.
fn without_outliers(pixels: &[WindowPixel], res: &[f64], cut: f64, g: i64) -> Vec<WindowPixel> {
    let (outlier, structured) = outlier_structures(pixels, res, cut);
    pixels
        .iter()
        .filter(|q| {
            !outlier.get(q, 0, 0)
                && !(-g..=g).any(|dy| (-g..=g).any(|dx| structured.get(q, dx, dy)))
        })
        .copied()
        .collect()
}

/// The outliers of `pixels` (residual beyond `cut`) and, of those, the ones next to another
/// (a structure: a mark, an edge, a streak).
fn outlier_structures(
    pixels: &[WindowPixel],
    res: &[f64],
    cut: f64,
) -> (WindowGrid<bool>, WindowGrid<bool>) {
    let mut outlier = WindowGrid::new(pixels, false);
    for (q, r) in pixels.iter().zip(res) {
        if r.abs() > cut {
            outlier.set(q, true);
        }
    }
    let mut structured = WindowGrid::new(pixels, false);
    for q in pixels {
        if outlier.get(q, 0, 0) {
            let joined =
                (-1..=1).any(|dy| (-1..=1).any(|dx| (dx, dy) != (0, 0) && outlier.get(q, dx, dy)));
            structured.set(q, joined);
        }
    }
    (outlier, structured)
}

/// The median of the residuals' absolute values (the upper of the middle two); NaN for none.
fn median_abs(res: &[f64]) -> f64 {
    let mut abs: Vec<f32> = res.iter().map(|r| r.abs() as f32).collect();
    median_f32(&mut abs) as f64
}

/// The pixels left out of a shaded fit only for lying near a structure of outliers, given back
/// ring by ring (chessboard distance 1, then 2 from the structure) with a weight: the inverse of
/// the ring's mean square residual at the fit in units of the kept pixels' robust variance (at
/// most 1). A ring next to a printed seam mixes a little of the seam into its pixels: weighted
/// so, it adds the rim it holds without its bias counting as much as clean pixels. The kept
/// pixels `pixels` with their residuals `res` at parameters `p`; None when no ring comes back.
/// This is feasible weighted least squares with one variance per group of pixels (Aitken,
/// "On least squares and linear combination of observations", Proc. R. Soc. Edinb. 55, 1935).
fn restore_rings(
    window: &[WindowPixel],
    pixels: &[WindowPixel],
    p: &[f64; SHADED_NP],
    res: &[f64],
) -> Option<Vec<WindowPixel>> {
    let all = residuals_beyond(window, pixels, p, Shading::Lambert)?;
    let sigma = MAD_TO_SIGMA * median_abs(res);
    if sigma.is_nan() || sigma <= 0.0 {
        return None;
    }
    let contrast = pixels.iter().fold(0.0f64, |m, q| m.max(q.value.abs()));
    let cut = (SHADED_OUTLIER_SIGMAS * sigma).max(0.01 * contrast);
    let mut kept = WindowGrid::new(window, false);
    for q in pixels {
        kept.set(q, true);
    }
    let ring = structure_distance(window, &all, cut);
    let mut restored = pixels.to_vec();
    for d in 1..=SHADED_MASK_GROW {
        let members: Vec<(&WindowPixel, f64)> = window
            .iter()
            .zip(&all)
            .filter(|(q, r)| !kept.get(q, 0, 0) && ring.get(q, 0, 0) == d && r.abs() <= cut)
            .map(|(q, r)| (q, *r / sigma))
            .collect();
        if members.is_empty() {
            break;
        }
        let ms = members.iter().map(|(_, z)| z * z).sum::<f64>() / members.len() as f64;
        let weight = (1.0 / ms).min(1.0);
        restored.extend(members.iter().map(|(q, _)| WindowPixel { weight, ..**q }));
    }
    (restored.len() > pixels.len()).then_some(restored)
}

/// Chessboard distance of each pixel of `window` from the nearest structure of outliers (an
/// outlier beyond `cut` next to another), up to [`SHADED_MASK_GROW`]; larger elsewhere.
fn structure_distance(window: &[WindowPixel], res: &[f64], cut: f64) -> WindowGrid<i64> {
    let (_, structured) = outlier_structures(window, res, cut);
    let mut near = WindowGrid::new(window, i64::MAX);
    let g = SHADED_MASK_GROW;
    for q in window.iter().filter(|q| structured.get(q, 0, 0)) {
        for dy in -g..=g {
            for dx in -g..=g {
                if let Some(i) = near.index(q, dx, dy) {
                    near.cells[i] = near.cells[i].min(dx.abs().max(dy.abs()));
                }
            }
        }
    }
    near
}

/// The fit again with the rings round its outliers given back ([`restore_rings`]), kept when its
/// centre lies within [`RESTORED_AGREES`] sigmas of the fit without them (the rings add to what
/// the clean pixels say, they must not overrule it).
fn with_rings_restored(
    window: &[WindowPixel],
    pixels: &[WindowPixel],
    fit: &ShadedState,
    shading: Shading,
) -> Option<(Vec<WindowPixel>, ShadedState)> {
    let (p, f, res, jtj) = fit;
    if pixels.len() >= window.len() {
        return None;
    }
    let restored = restore_rings(window, pixels, p, res)?;
    let state = shaded_lm(&restored, *p, shading)?;
    let dof = pixels
        .len()
        .saturating_sub(SHADED_NP + SHADED_LINEAR)
        .max(1) as f64;
    let cov = jtj.try_inverse()? * (f / dof) * pixel_correlation_factor(pixels, res);
    let sigma = (0.5 * (cov[(0, 0)] + cov[(1, 1)])).max(0.0).sqrt();
    let q = state.0;
    ((q[0] - p[0]).hypot(q[1] - p[1]) <= RESTORED_AGREES * sigma).then_some((restored, state))
}

/// A refit with the rings given back is kept within this many sigmas of the fit without them.
const RESTORED_AGREES: f64 = 3.0;

/// The fit from `p` with its outliers left out: pixels whose residual lies beyond 4 robust sigmas,
/// and a margin round their structures, twice at most; on a printed ball (`printed`) the margin's
/// rings given back ([`with_rings_restored`]). The pixels fitted and where the fit ended.
fn fit_clean(
    window: &[WindowPixel],
    mut p: [f64; SHADED_NP],
    shading: Shading,
    printed: bool,
) -> Option<(Vec<WindowPixel>, ShadedState)> {
    let mut pixels: Vec<WindowPixel> = window.to_vec();
    let mut out = None;
    for round in 0..3 {
        if pixels.len() < 30 {
            return None;
        }
        let (q, f, res, jtj) = shaded_lm(&pixels, p, shading)?;
        p = q;
        let mad = median_abs(&res);
        // Noise-free pixels (a rendered photo without noise) leave only the model's own small
        // misfit, which is not an outlier: the cut is at least 1 % of the image's contrast.
        let contrast = pixels.iter().fold(0.0f64, |m, q| m.max(q.value.abs()));
        let cut = (SHADED_OUTLIER_SIGMAS * MAD_TO_SIGMA * mad).max(0.01 * contrast);
        if res.iter().all(|r| r.abs() <= cut) || round == 2 {
            out = Some((f, jtj, pixels.len(), res));
            break;
        }
        // The widest margin round the outliers' structures that keeps enough of the window:
        // seam lines crossing a small image cover much of it once each is widened by 2 px.
        // Only printed marks get a narrower one (see [`printed_marks`]).
        let enough = |v: &Vec<WindowPixel>| v.len() as f64 >= SHADED_MIN_KEPT * window.len() as f64;
        let wide = without_outliers(&pixels, &res, cut, SHADED_MASK_GROW);
        let wide_kept = wide.len() as f64 / window.len() as f64;
        let next = if enough(&wide) {
            Some(wide)
        } else if printed_marks(MAD_TO_SIGMA * mad / contrast, wide_kept) {
            (0..SHADED_MASK_GROW)
                .rev()
                .map(|g| without_outliers(&pixels, &res, cut, g))
                .find(enough)
        } else {
            None
        };
        // Misfit spread over much of the window is the model's (a grazing light on a small
        // image), not something else in the window: the fit stands as it is.
        let Some(next) = next else {
            out = Some((f, jtj, pixels.len(), res));
            break;
        };
        pixels = next;
    }
    let (f, jtj, _, res) = out?;
    let clean = (p, f, res, jtj);
    let restored = printed
        .then(|| with_rings_restored(window, &pixels, &clean, shading))
        .flatten();
    Some(restored.unwrap_or((pixels, clean)))
}

/// Fit a Lambertian sphere's image to the pixels of a window around one ball image: the
/// silhouette (centre, radius) and the light direction are the nonlinear parameters, the
/// brightness terms are solved linearly at every step (variable projection, Golub & Pereyra,
/// "The differentiation of pseudo-inverses and nonlinear least squares problems", SIAM J. Numer.
/// Anal. 10, 1973), the step by Levenberg-Marquardt. Pixels whose residual is an outlier
/// (beyond 4 robust sigmas), and a margin round their structures, are left out and the fit
/// repeated, twice at most. The covariance is
/// the Gauss-Newton one scaled by the residual variance.
pub fn shaded_fit(window: &[WindowPixel], start: Circle) -> Option<ShadedFit> {
    shaded_fit_of(window, start, false)
}

/// [`shaded_fit`] of an image on a photo whose balls carry printed marks (`printed`, the
/// photo-wide decision of [`crate::detect::hough::settle_marks`]): the pixels left out beside
/// a mark's outliers come back, weighted, ring by ring. On a plain ball the outliers are an
/// incline's or backdrop's edge, a highlight or compression blocks, and their margin stays.
pub fn shaded_fit_of(window: &[WindowPixel], start: Circle, printed: bool) -> Option<ShadedFit> {
    const NP: usize = SHADED_NP;
    let p = light_start(window, start);
    let (pixels, (p, f, res, jtj)) = fit_clean(window, p, Shading::Lambert, printed)?;
    let n = pixels.len();
    let dof = n.saturating_sub(NP + SHADED_LINEAR).max(1) as f64;
    let correlation = pixel_correlation_factor(&pixels, &res);
    let covariance = jtj.try_inverse()? * (f / dof) * correlation;
    // The silhouette of a uniform disc where the Lambert term does not earn its three parameters
    // (b, u, v) by Schwarz's criterion (BIC, "Estimating the dimension of a model", Ann. Statist.
    // 6, 1978): n ln(RSS_flat / RSS_lambert) < 3 ln n, n the pixels' number divided by the
    // correlation factor of their residuals (correlated neighbours are fewer independent
    // residuals: with n itself, JPEG blocks pass for shading). A dark ball against its plate
    // shows no shading above the noise, and fitting one anyway scatters its centre.
    // The flat fit starts from the given circle and from the Lambert fit's; the better is kept.
    // The light stays the Lambert fit's either way.
    let nf = n as f64;
    // Neighbouring residuals that are correlated (JPEG blocks) are fewer independent ones.
    let n_eff = nf / correlation;
    let penalty = 3.0 * n_eff.ln();
    // A disc at the Lambert fit's circle that misses by far more than the penalty is a lit
    // sphere: moving the circle cannot make up for shading inside it, so the flat fits are not
    // tried (they would cost two more fits per lit image).
    let mut scratch = Vec::with_capacity(n);
    let plausible = shaded_residuals(&pixels, &p, Shading::Flat, &mut scratch)
        .is_some_and(|ff| n_eff * (ff / f).ln() < FLAT_TRY_FACTOR * penalty);
    let flat = [p, [start.x_px, start.y_px, start.r_px, p[3], p[4]]]
        .into_iter()
        .filter(|_| plausible)
        .filter_map(|q| shaded_lm(&pixels, q, Shading::Flat))
        .filter(|(q, ..)| q.iter().all(|v| v.is_finite()))
        .min_by(|a, b| a.1.total_cmp(&b.1))
        .filter(|(_, ff, ..)| n_eff * (ff / f).ln() < penalty);
    let is_flat = flat.is_some();
    let (circle_p, var, rss) = match flat {
        Some((q, ff, rf, jf)) => {
            let dof = n.saturating_sub(3 + SHADED_LINEAR - 1).max(1) as f64;
            let covariance_flat =
                jf.try_inverse()? * (ff / dof) * pixel_correlation_factor(&pixels, &rf);
            (
                q,
                0.5 * (covariance_flat[(0, 0)] + covariance_flat[(1, 1)]),
                ff,
            )
        }
        None => (p, 0.5 * (covariance[(0, 0)] + covariance[(1, 1)]), f),
    };
    if !(var.is_finite() && p.iter().chain(&circle_p).all(|v| v.is_finite())) {
        return None;
    }
    Some(ShadedFit {
        circle: Circle {
            x_px: circle_p[0],
            y_px: circle_p[1],
            r_px: circle_p[2],
        },
        sigma_px: var.max(0.0).sqrt(),
        light_uv: [p[3], p[4]],
        light_sigma: [
            covariance[(3, 3)].max(0.0).sqrt(),
            covariance[(4, 4)].max(0.0).sqrt(),
        ],
        rms: (rss / nf).sqrt(),
        kept: nf / window.len() as f64,
        flat: is_flat,
    })
}

/// The variance per axis that the neighbours' centre errors carry into a held fit at `p` of
/// `pixels`: each neighbour's centre moved along x and y changes the residuals by d, which moves
/// the fit by -(J^T J)^-1 J^T d (J the fit's own Jacobian in cx, cy, r); those moves, scaled by
/// the neighbour's sigma, are summed in quadrature (first-order propagation of errors, the
/// neighbours' errors taken as independent).
fn neighbours_variance(
    pixels: &[WindowPixel],
    p: &[f64; SHADED_NP],
    light_uv: [f64; 2],
    neighbours: &[(Circle, f64)],
) -> Option<f64> {
    use nalgebra::{Matrix3, Vector3};
    const H: f64 = 1e-3;
    let mut base = Vec::with_capacity(pixels.len());
    shaded_residuals(pixels, p, Shading::Held, &mut base)?;
    let mut scratch = Vec::with_capacity(pixels.len());
    let mut change = |pix: &[WindowPixel], q: &[f64; SHADED_NP]| -> Option<Vec<f64>> {
        shaded_residuals(pix, q, Shading::Held, &mut scratch)?;
        Some(
            scratch
                .iter()
                .zip(&base)
                .map(|(a, b)| (a - b) / H)
                .collect(),
        )
    };
    let mut own = Vec::with_capacity(3);
    for k in 0..3 {
        let mut q = *p;
        q[k] += H;
        own.push(change(pixels, &q)?);
    }
    let dot = |a: &[f64], b: &[f64]| a.iter().zip(b).map(|(x, y)| x * y).sum::<f64>();
    let jtj = Matrix3::from_fn(|a, b| dot(&own[a], &own[b]));
    let inverse = jtj.try_inverse()?;
    let mut var = 0.0;
    for (c, sigma_px) in neighbours {
        for axis in 0..2 {
            let mut moved = *c;
            if axis == 0 {
                moved.x_px += H;
            } else {
                moved.y_px += H;
            }
            let shifted: Vec<WindowPixel> = pixels
                .iter()
                .map(|q| {
                    let (old, new) = (held_terms(q, *c, light_uv), held_terms(q, moved, light_uv));
                    let others = std::array::from_fn(|k| q.others[k] + new[k] - old[k]);
                    WindowPixel { others, ..*q }
                })
                .collect();
            let d = change(&shifted, p)?;
            let g = inverse * Vector3::from_fn(|a, _| dot(&own[a], &d));
            var += 0.5 * (g[0] * g[0] + g[1] * g[1]) * sigma_px * sigma_px;
        }
    }
    Some(var)
}

/// Sectors of [`sector_jackknife`].
const JACKKNIFE_SECTORS: usize = 8;

/// The delete-a-group jackknife variance per axis of a held fit's centre (Quenouille 1956, Tukey
/// 1958): the fit repeated without each of [`JACKKNIFE_SECTORS`] sectors of its pixels round the
/// centre, (K - 1) / K times the sum of the squared moves about their mean. Misfit that the
/// noise model does not hold (pixels beside a mark, a neighbour's rim) moves the fit when its
/// sector goes.
fn sector_jackknife(pixels: &[WindowPixel], p: &[f64; SHADED_NP]) -> Option<f64> {
    let k = JACKKNIFE_SECTORS;
    let sector = |q: &WindowPixel| {
        let a = (q.y_px - p[1]).atan2(q.x_px - p[0]) + std::f64::consts::PI;
        ((a / std::f64::consts::TAU * k as f64) as usize).min(k - 1)
    };
    let mut centres = Vec::with_capacity(k);
    for s in 0..k {
        let rest: Vec<WindowPixel> = pixels.iter().filter(|q| sector(q) != s).copied().collect();
        let (q, ..) = shaded_lm(&rest, *p, Shading::Held)?;
        centres.push([q[0], q[1]]);
    }
    let mean: [f64; 2] =
        std::array::from_fn(|a| centres.iter().map(|c| c[a]).sum::<f64>() / k as f64);
    let ss: f64 = centres
        .iter()
        .map(|c| (c[0] - mean[0]).powi(2) + (c[1] - mean[1]).powi(2))
        .sum();
    Some(0.5 * ss * (k - 1) as f64 / k as f64)
}

/// Rounds of [`held_clean`].
const HELD_ROUNDS: usize = 8;

/// Each round of [`held_clean`] lowers its cut by this factor, down to its floor.
const HELD_CUT_STEP: f64 = 0.6;

/// Least fraction of the window a held fit keeps.
const HELD_MIN_KEPT: f64 = 0.4;

/// The held fit from `p` with its outliers left out. An overlapping image's window holds its
/// neighbours' marks beside its own, a quarter of it or more, and they lift every robust scale of
/// the residuals at the start; a single cut at four of those scales leaves the marks in. So the
/// cut starts there (the scale read from the lower quartile of the residuals) and falls by
/// [`HELD_CUT_STEP`] each round to 4 x `noise`, the outliers read afresh over the whole window
/// at each fit (a pixel left out early comes back once the fit has moved); the margin round their
/// structures is the widest of 2, 1, 0 px that keeps [`SHADED_MIN_KEPT`] of the window, or none
/// down to [`HELD_MIN_KEPT`]. The pixels fitted and where the fit ended.
fn held_clean(window: &[WindowPixel], mut p: [f64; SHADED_NP], noise: f64) -> Option<HeldClean> {
    let contrast = window.iter().fold(0.0f64, |m, q| m.max(q.value.abs()));
    let mut res = Vec::with_capacity(window.len());
    shaded_residuals(window, &p, Shading::Held, &mut res)?;
    let floor = (SHADED_OUTLIER_SIGMAS * noise).max(0.01 * contrast);
    let mut cut =
        (SHADED_OUTLIER_SIGMAS * MAD_TO_SIGMA * QUARTER_TO_MAD * quarter_abs(&res)).max(floor);
    let share = |v: &Vec<WindowPixel>| v.len() as f64 / window.len() as f64;
    let mut last: Option<HeldClean> = None;
    for _ in 0..HELD_ROUNDS {
        let (margin, next) = (0..=SHADED_MASK_GROW)
            .rev()
            .map(|g| (g, without_outliers(window, &res, cut, g)))
            .find(|(_, v)| share(v) >= SHADED_MIN_KEPT)
            .or_else(|| {
                Some((0, without_outliers(window, &res, cut, 0)))
                    .filter(|(_, v)| share(v) >= HELD_MIN_KEPT)
            })?;
        let settled = cut <= floor && last.as_ref().is_some_and(|l| l.pixels.len() == next.len());
        let state = shaded_lm(&next, p, Shading::Held)?;
        p = state.0;
        let chosen = (std::mem::take(&mut res), cut, margin);
        last = Some(HeldClean {
            pixels: next,
            state,
            chosen,
        });
        if settled {
            break;
        }
        let l = last.as_ref()?;
        res = residuals_beyond(window, &l.pixels, &p, Shading::Held)?;
        cut = (cut * HELD_CUT_STEP).max(floor);
    }
    last
}

/// What [`held_clean`] ended with: the pixels fitted, where the fit ended, and how the pixels
/// were chosen (the residuals over the window, the cut, the margin in pixels).
struct HeldClean {
    pixels: Vec<WindowPixel>,
    state: ShadedState,
    chosen: (Vec<f64>, f64, i64),
}

/// The variance per axis of a held fit from the margin left round its outliers: half the
/// squared move of the centre when the margin is one pixel wider (the pixels beside a mark mix
/// some of it in; a fit that moves when they go was pulled by them). Zero when the wider margin
/// would leave less than [`MARGIN_PROBE_MIN_KEPT`] of the window.
fn margin_variance(window: &[WindowPixel], clean: &HeldClean) -> Option<f64> {
    let (res, cut, margin) = &clean.chosen;
    let wider = without_outliers(window, res, *cut, margin + 1);
    if (wider.len() as f64) < MARGIN_PROBE_MIN_KEPT * window.len() as f64 {
        return Some(0.0);
    }
    let p = clean.state.0;
    let (q, ..) = shaded_lm(&wider, p, Shading::Held)?;
    Some(0.5 * ((q[0] - p[0]).powi(2) + (q[1] - p[1]).powi(2)))
}

/// Least fraction of the window the probe of [`margin_variance`] keeps. Below the held fit's own
/// [`HELD_MIN_KEPT`]: the images of a crowded start keep 0.45-0.55 of their windows with no
/// margin, so a probe held to 0.4 found no wider margin there and gave nothing, where the fits
/// were least sure (on the real-balls bench, panel lines under JPEG 85: RMS error over sigma of
/// the overlapping images 1.35 with 0.4, 1.27 with 0.3, images beyond 3 sigma 6 -> 3 of 147;
/// with 0.2, 1.11 and none, but the larger sigmas then lost an image at the crowded start).
const MARGIN_PROBE_MIN_KEPT: f64 = 0.3;

/// The median absolute value of normal noise over its lower quartile (0.6745 / 0.3186).
const QUARTER_TO_MAD: f64 = 0.6745 / 0.3186;

/// The lower quartile of the residuals' absolute values; NaN for none.
fn quarter_abs(res: &[f64]) -> f64 {
    let mut abs: Vec<f64> = res.iter().map(|r| r.abs()).collect();
    if abs.is_empty() {
        return f64::NAN;
    }
    let k = abs.len() / 4;
    *abs.select_nth_unstable_by(k, f64::total_cmp).1
}

/// Fraction of the window a [`held_start`] scores its grid points by.
const TRIMMED_SHARE: f64 = 0.6;

/// The robust misfit of the held model at `p`: the sum of the smallest [`TRIMMED_SHARE`] of the
/// squared residuals, the brightness terms solved on those pixels after a first solve on all
/// (least trimmed squares, Rousseeuw 1984, one concentration step).
fn trimmed_misfit(window: &[WindowPixel], p: &[f64; SHADED_NP]) -> Option<f64> {
    let mut res = Vec::with_capacity(window.len());
    shaded_residuals(window, p, Shading::Held, &mut res)?;
    let h = ((TRIMMED_SHARE * window.len() as f64) as usize).max(1);
    let mut abs: Vec<f64> = res.iter().map(|r| r.abs()).collect();
    let cut = *abs.select_nth_unstable_by(h - 1, f64::total_cmp).1;
    let kept: Vec<WindowPixel> = window
        .iter()
        .zip(&res)
        .filter(|(_, r)| r.abs() <= cut)
        .map(|(q, _)| *q)
        .collect();
    let mut sq: Vec<f64> = residuals_beyond(window, &kept, p, Shading::Held)?
        .iter()
        .map(|r| r * r)
        .collect();
    sq.select_nth_unstable_by(h - 1, f64::total_cmp);
    Some(sq[..h].iter().sum())
}

/// The start for a held fit of an image near `start`: the point of least trimmed misfit
/// (`trimmed_misfit`, under the photo's light `light_uv`, the radius held) on a grid 0.1 radius
/// apart within `reach` radii of it, then on one 0.05 radius apart round the best. A candidate
/// pulled a quarter radius off an image (by its marks' edges) puts the image's window over what
/// lies beside it, an incline's bar say; a held fit from there can stall, while the misfit of
/// the model's best pixels still points to the image.
pub fn held_start(
    window: &[WindowPixel],
    start: Circle,
    light_uv: [f64; 2],
    reach: f64,
) -> Option<Circle> {
    let r = start.r_px;
    let within = |c: &Circle| (c.x_px - start.x_px).hypot(c.y_px - start.y_px) <= reach * r;
    let best_of = |centre: Circle, step: f64, n: i64| {
        let mut best: Option<(f64, Circle)> = None;
        for (i, j) in (-n..=n).flat_map(|i| (-n..=n).map(move |j| (i, j))) {
            let c = Circle {
                x_px: centre.x_px + i as f64 * step,
                y_px: centre.y_px + j as f64 * step,
                r_px: r,
            };
            let p = [c.x_px, c.y_px, r, light_uv[0], light_uv[1]];
            let Some(m) = within(&c).then(|| trimmed_misfit(window, &p)).flatten() else {
                continue;
            };
            if best.is_none_or(|(b, _)| m < b) {
                best = Some((m, c));
            }
        }
        best.map(|(_, c)| c)
    };
    let coarse = best_of(start, 0.1 * r, (reach / 0.1).floor() as i64)?;
    best_of(coarse, 0.05 * r, 1)
}

/// Fit the image at `start` that overlaps its neighbours, held in place in the window's
/// [`WindowPixel::others`], under the photo's light `light_uv`, held too: the neighbours' light
/// and the image's own add in the pixels they share (one long exposure), and their brightness
/// terms are the image's (one ball, one flash). As [`shaded_fit_of`] otherwise, without the flat
/// disc; its outliers are left out under a cut that falls to 4 x `noise` (the residual RMS of
/// the photo's lone images). The variance per axis adds four parts: the fit's own (Gauss-Newton,
/// scaled by the residual variance and correlation), a delete-a-sector jackknife's (misfit the
/// noise model does not hold), the move when the margin round the marks widens by a pixel, and
/// the neighbours' errors carried in to first order (`neighbours`: the circles held in the
/// window's pixels, each with its 1-sigma per axis). The jackknife's holds the noise again, so
/// the sum is on the safe side: on the real-balls bench the overlapping images' RMS error over
/// sigma is 0.9-1.3.
pub fn shaded_fit_held(
    window: &[WindowPixel],
    start: Circle,
    light: ([f64; 2], f64),
    neighbours: &[(Circle, f64)],
) -> Option<ShadedFit> {
    shaded_fit_held_with_evidence(window, start, light, neighbours).map(|(fit, _)| fit)
}

/// [`shaded_fit_held`] and the evidence that the pixels hold the image fitted: `n ln(RSS_without
/// / RSS_with)` over the pixels the fit kept, the image left out of the model for RSS_without
/// (its neighbours and the constant stay, the brightness terms solved again), `n` the pixels
/// over the correlation factor of the fit's residuals (a likelihood ratio, as
/// [`light_evidence`]).
pub fn shaded_fit_held_with_evidence(
    window: &[WindowPixel],
    start: Circle,
    (light_uv, noise): ([f64; 2], f64),
    neighbours: &[(Circle, f64)],
) -> Option<(ShadedFit, f64)> {
    let p = [start.x_px, start.y_px, start.r_px, light_uv[0], light_uv[1]];
    let clean = held_clean(window, p, noise)?;
    let (pixels, (p, f, res, jtj)) = (&clean.pixels, &clean.state);
    let n = pixels.len();
    let dof = n.saturating_sub(3 + SHADED_LINEAR).max(1) as f64;
    let covariance = jtj.try_inverse()? * (f / dof) * pixel_correlation_factor(pixels, res);
    let var = 0.5 * (covariance[(0, 0)] + covariance[(1, 1)])
        + neighbours_variance(pixels, p, light_uv, neighbours)?
        + margin_variance(window, &clean)?;
    let var = var + sector_jackknife(pixels, p)?;
    if !(var.is_finite() && p.iter().all(|v| v.is_finite())) {
        return None;
    }
    let fit = ShadedFit {
        circle: Circle {
            x_px: p[0],
            y_px: p[1],
            r_px: p[2],
        },
        sigma_px: var.max(0.0).sqrt(),
        light_uv,
        light_sigma: [0.0; 2],
        rms: (f / n as f64).sqrt(),
        kept: n as f64 / window.len() as f64,
        flat: false,
    };
    let mut scratch = Vec::with_capacity(n);
    let absent = [p[0], p[1], 0.0, p[3], p[4]];
    let rss_without = shaded_residuals(pixels, &absent, Shading::Held, &mut scratch)?;
    let n_eff = n as f64 / pixel_correlation_factor(pixels, res);
    Some((fit, n_eff * (rss_without / f).ln()))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn light_evidence_prefers_the_light_that_lit_the_pixels() {
        // A sphere lit from upper left (u, v) = (-0.3, -0.4) with noise of 1 % of its contrast
        // (a fixed pseudo-random sequence). Its own light against the mirror image's
        // (-0.3, +0.4): the pixels tell them apart. A light wandered to the lower right
        // (2, 2) against the true one: the true one explains the pixels better, no evidence.
        let (cx, cy, r) = (20.3, 19.8, 10.0);
        let mut window = sphere_window(cx, cy, r, [-0.3, -0.4, 1.0]);
        let mut state = 12345u64;
        for q in &mut window {
            state = state
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            q.value += 0.01 * (((state >> 11) as f64 / (1u64 << 53) as f64) - 0.5) * 12f64.sqrt();
        }
        let circle = Circle {
            x_px: cx,
            y_px: cy,
            r_px: r,
        };
        let own = light_evidence(&window, circle, [-0.3, -0.4], [-0.3, 0.4]).unwrap();
        assert!(own > 50.0, "{own}");
        let wandered = light_evidence(&window, circle, [2.0, 2.0], [-0.3, -0.4]).unwrap();
        assert!(wandered < 0.0, "{wandered}");
    }

    /// A Lambertian sphere under a distant light plus fill, imaged by integrating the irradiance
    /// over each pixel numerically (16 x 16 samples; the fit's model shades at the pixel centre
    /// instead, so this also checks that approximation), on a backdrop of 0.02.
    fn sphere_window(cx: f64, cy: f64, r: f64, light: [f64; 3]) -> Vec<WindowPixel> {
        marked_sphere_window(cx, cy, r, light, 0.2, |_, _| 1.0)
    }

    /// As [`sphere_window`], with fill `fill` and the surface's albedo at (dx, dy) px from the
    /// centre given by `albedo` (printed marks), sampled at each of the 16 x 16 points.
    fn marked_sphere_window(
        cx: f64,
        cy: f64,
        r: f64,
        light: [f64; 3],
        fill: f64,
        albedo: impl Fn(f64, f64) -> f64,
    ) -> Vec<WindowPixel> {
        let ln = (light[0] * light[0] + light[1] * light[1] + light[2] * light[2]).sqrt();
        let l = [light[0] / ln, light[1] / ln, light[2] / ln];
        let mut out = Vec::new();
        let n = (r + 4.0) as i64;
        let (ix, iy) = (cx.round() as i64, cy.round() as i64);
        for y in iy - n..=iy + n {
            for x in ix - n..=ix + n {
                let (xf, yf) = (x as f64, y as f64);
                let d = (xf - cx).hypot(yf - cy);
                if d < 0.65 * r || d > r + 2.5 {
                    continue;
                }
                let mut sum = 0.0;
                for j in 0..16 {
                    for i in 0..16 {
                        let sx = xf - 0.5 + (i as f64 + 0.5) / 16.0;
                        let sy = yf - 0.5 + (j as f64 + 0.5) / 16.0;
                        let (nx, ny) = ((sx - cx) / r, (sy - cy) / r);
                        let n2 = nx * nx + ny * ny;
                        sum += if n2 < 1.0 {
                            let nz = (1.0 - n2).sqrt();
                            let lambert = (nx * l[0] + ny * l[1] + nz * l[2]).max(0.0);
                            albedo(sx - cx, sy - cy) * (fill + (1.0 - fill) * lambert)
                        } else {
                            0.02
                        };
                    }
                }
                out.push(WindowPixel {
                    x_px: xf,
                    y_px: yf,
                    value: sum / 256.0 - 0.02,
                    backdrop: 0.0,
                    weight: 1.0,
                    others: [0.0; 3],
                });
            }
        }
        out
    }

    #[test]
    fn shaded_fit_finds_a_lit_sphere_that_the_edge_would_misplace() {
        for &(cx, cy, r, light) in &[
            (20.3, 21.7, 8.0, [-0.3, -0.4, 1.0]),
            (30.45, 29.1, 14.2, [0.6, -0.2, 1.0]),
            (25.0, 25.5, 6.0, [0.0, 0.9, 0.5]),
        ] {
            let window = sphere_window(cx, cy, r, light);
            // Start where an edge fit could leave it: 0.15 px off, radius 0.2 px small.
            let start = Circle {
                x_px: cx + 0.15,
                y_px: cy - 0.1,
                r_px: r - 0.2,
            };
            let fit = shaded_fit(&window, start)
                .unwrap_or_else(|| panic!("r {r}: no fit of {} pixels", window.len()));
            let err = (fit.circle.x_px - cx).hypot(fit.circle.y_px - cy);
            // The model shades a rim pixel by the mean normal of a radial strip, the photo
            // integrates over the pixel: they differ by about 0.01 px in the centre and 0.02 px
            // in the radius at r = 8 (measured by this test).
            assert!(err < 0.02, "r {r}: centre off by {err} px");
            assert!(
                (fit.circle.r_px - r).abs() < 0.05,
                "r {r}: radius {}",
                fit.circle.r_px
            );
            // The light direction is found as well, (u, v) = (lx / lz, ly / lz).
            let (u, v) = (light[0] / light[2], light[1] / light[2]);
            assert!(
                (fit.light_uv[0] - u).abs() < 0.05 && (fit.light_uv[1] - v).abs() < 0.05,
                "light {:?} vs ({u}, {v})",
                fit.light_uv
            );
        }
    }

    #[test]
    fn shaded_fit_leaves_out_a_bar_touching_the_ball() {
        // A bright straight bar (an incline's edge) touching the sphere from below, not in the
        // backdrop estimate: its pixels are outliers and the rim next to them is left out.
        let (cx, cy, r) = (20.4, 20.2, 10.0);
        let mut window = sphere_window(cx, cy, r, [-0.3, -0.4, 1.0]);
        for q in &mut window {
            if q.y_px - cy > r - 0.5
                && q.y_px - cy < r + 3.0
                && (q.x_px - cx).hypot(q.y_px - cy) > r
            {
                q.value += 0.4;
            }
        }
        let start = Circle {
            x_px: cx,
            y_px: cy,
            r_px: r,
        };
        let fit = shaded_fit(&window, start).expect("fit converges");
        let err = (fit.circle.x_px - cx).hypot(fit.circle.y_px - cy);
        // With the bottom arc gone the top arc and the shading hold the centre.
        assert!(err < 0.1, "centre off by {err} px");
        assert!(fit.kept < 0.99, "the bar's pixels were kept: {}", fit.kept);
    }

    #[test]
    fn shaded_fit_leaves_out_seams_across_a_small_ball() {
        // Four dark seam lines (albedo 0.25 of the ball's, 1.4 px wide: 0.1 radius, as the
        // real-balls bench's seams) across a 14 px sphere with noise of 0.5 % of its contrast.
        // Widened by 2 px each, their outliers would leave under 60 % of the window and the fit
        // would stand with the seams in it (kept 1, centre sigma 0.19 px, 0.04 px off: measured
        // by this test); a narrower margin leaves them out (kept 0.61, sigma 0.004 px).
        let (cx, cy, r) = (30.4, 29.7, 14.0);
        let mut window = sphere_window(cx, cy, r, [-0.4, -0.5, 1.0]);
        let seams: [(f64, f64); 4] = [(0.3, 2.0), (1.4, -3.0), (2.5, 5.0), (0.9, -7.0)];
        let mut noise = normals(3);
        for q in &mut window {
            let (dx, dy) = (q.x_px - cx, q.y_px - cy);
            let on_seam = seams
                .iter()
                .any(|&(angle, offset)| (dx * angle.sin() - dy * angle.cos() - offset).abs() < 0.7);
            if on_seam && dx.hypot(dy) < r {
                q.value = 0.02 + 0.25 * q.value;
            }
            q.value += 0.005 * noise();
        }
        let start = Circle {
            x_px: cx + 0.1,
            y_px: cy - 0.1,
            r_px: r - 0.1,
        };
        let fit = shaded_fit(&window, start).expect("fit converges");
        let err = (fit.circle.x_px - cx).hypot(fit.circle.y_px - cy);
        assert!(fit.kept < 0.9, "the seams were kept: {}", fit.kept);
        assert!(fit.sigma_px < 0.02, "sigma {} px", fit.sigma_px);
        assert!(err < 0.03, "centre off by {err} px");
    }

    #[test]
    fn seams_across_a_side_lit_limb_cost_little_of_the_centre() {
        // A 20 px sphere lit from the side (light (1, -0.15, 0.25), fill 0.05: a crescent, as
        // the real-balls bench's side_lit look) with three dark seams (albedo 0.25, 2 px wide:
        // 0.1 radius), sampled 16 x 16 per pixel so that the pixels along a seam's edges mix it
        // with the ball, under noise of 0.5 % of the contrast; 24 trials with the seams turned
        // and shifted and the centre moved by sub-pixel steps. Leaving out 2 px round each seam
        // takes much of the crescent; weighted back ring by ring, the pixels beside the seams
        // keep the centre's error near that of the plain ball and the sigma honest.
        // Measured by this test: RMS error 0.012 px, RMS of error / sigma 1.04 (without the
        // rings: 0.023 px, 1.05).
        let (r, trials) = (20.0, 24);
        let mut noise = normals(11);
        let (mut err2, mut z2) = (0.0, 0.0);
        for k in 0..trials {
            let (cx, cy) = (30.0 + 0.173 * k as f64 % 1.0, 30.0 + 0.311 * k as f64 % 1.0);
            let turn = 0.41 * k as f64;
            let seams: Vec<(f64, f64)> = (0..3)
                .map(|i| {
                    (
                        turn + 1.05 * i as f64,
                        (7.0 * i as f64 + 3.0 * k as f64) % 17.0 - 8.5,
                    )
                })
                .collect();
            let on_seam = |dx: f64, dy: f64| {
                seams
                    .iter()
                    .any(|&(a, off)| (dx * a.sin() - dy * a.cos() - off).abs() < 1.0)
            };
            let light = [1.0, -0.15, 0.25];
            let albedo = |dx: f64, dy: f64| if on_seam(dx, dy) { 0.25 } else { 1.0 };
            let mut window = marked_sphere_window(cx, cy, r, light, 0.05, albedo);
            for q in &mut window {
                q.value += 0.005 * noise();
            }
            let start = Circle {
                x_px: cx - 0.2,
                y_px: cy + 0.1,
                r_px: r + 0.1,
            };
            let fit = shaded_fit_of(&window, start, true).expect("fit converges");
            let (ex, ey) = (fit.circle.x_px - cx, fit.circle.y_px - cy);
            err2 += ex * ex + ey * ey;
            z2 += (ex * ex + ey * ey) / (fit.sigma_px * fit.sigma_px);
        }
        let rms = (err2 / trials as f64).sqrt();
        let chi = (z2 / (2.0 * trials as f64)).sqrt();
        assert!(rms < 0.016, "centre RMS {rms} px");
        assert!(chi < 1.5, "RMS of error / sigma {chi}");
    }

    #[test]
    fn a_held_fit_sees_its_image_through_a_neighbour_and_both_sets_of_seams() {
        // Two 14 px spheres 0.8-1.3 radii apart (an incline's crowded start), lit from the upper
        // left (light (-0.3, -0.4, 1), fill 0.2), each with three dark seams (albedo 0.25, 1.4 px
        // wide: 0.1 radius) turned its own way, their light added in the pixels they share (one
        // long exposure), sampled 16 x 16 per pixel, noise 0.5 % of the contrast; 16 trials.
        // The first is fitted from 0.2 px off with the second held in place at its true circle
        // (sigma 0.02 px). Measured by this test: RMS error 0.006 px, RMS of error / sigma
        // 0.78; the lone shaded fit of the same window, the neighbour's light not modelled,
        // misses by 6.2 px RMS.
        let (r, trials) = (14.0, 16);
        let light = [-0.3, -0.4, 1.0];
        let mut noise = normals(5);
        let (mut err2, mut z2, mut alone2) = (0.0, 0.0, 0.0);
        for k in 0..trials {
            let a = (30.0 + 0.173 * k as f64 % 1.0, 30.0 + 0.311 * k as f64 % 1.0);
            let (gap, towards) = (r * (0.8 + 0.033 * k as f64), 0.7 * k as f64);
            let b = (a.0 + gap * towards.cos(), a.1 + gap * towards.sin());
            let seams = |turn: f64| {
                move |dx: f64, dy: f64| {
                    let on = (0..3).any(|i| {
                        let t = turn + 1.05 * i as f64;
                        (dx * t.sin() - dy * t.cos() - (4.0 * i as f64 - 4.0)).abs() < 0.7
                    });
                    if on { 0.25 } else { 1.0 }
                }
            };
            let mut window = marked_sphere_window(a.0, a.1, r, light, 0.2, seams(0.41 * k as f64));
            let held = Circle {
                x_px: b.0,
                y_px: b.1,
                r_px: r,
            };
            for q in &mut window {
                q.value += sampled_sphere(q.x_px, q.y_px, b, r, light, 0.2, seams(1.3 * k as f64))
                    + 0.005 * noise();
                q.others = held_terms(q, held, [-0.3, -0.4]);
            }
            let start = Circle {
                x_px: a.0 - 0.2,
                y_px: a.1 + 0.1,
                r_px: r + 0.1,
            };
            let fit = shaded_fit_held(&window, start, ([-0.3, -0.4], 0.005), &[(held, 0.02)])
                .expect("held fit converges");
            let (ex, ey) = (fit.circle.x_px - a.0, fit.circle.y_px - a.1);
            err2 += ex * ex + ey * ey;
            z2 += (ex * ex + ey * ey) / (fit.sigma_px * fit.sigma_px);
            let lone: Vec<WindowPixel> = window
                .iter()
                .map(|q| WindowPixel {
                    others: [0.0; 3],
                    ..*q
                })
                .collect();
            if let Some(f) = shaded_fit_of(&lone, start, true) {
                alone2 += (f.circle.x_px - a.0).powi(2) + (f.circle.y_px - a.1).powi(2);
            }
        }
        let rms = (err2 / trials as f64).sqrt();
        let chi = (z2 / (2.0 * trials as f64)).sqrt();
        let alone = (alone2 / trials as f64).sqrt();
        assert!(rms < 0.02, "centre RMS {rms} px");
        assert!(chi > 0.5 && chi < 1.5, "RMS of error / sigma {chi}");
        assert!(alone > 10.0 * rms, "lone fit RMS {alone} px");
    }

    #[test]
    fn light_evidence_without_marks_prefers_the_true_light_of_a_marked_ball() {
        // A 14 px sphere lit from the upper left (-0.3, -0.4) with five dark panel lines
        // (albedo 0.25, 1 px wide), noise 1 % of the contrast. Read without the marks, a light
        // from the right (0.8, -0.37: the wandered fit of a panel-lined JPEG image on the
        // real-balls bench) is no better than the true one, and the true one is told apart from
        // its mirror image below (-0.3, +0.4). Measured by this test: -15.5 and +73.4 (the whole
        // window gives -11.5 for the wandered light here; on that bench image, +4.1).
        let (cx, cy, r) = (30.2, 29.7, 14.0);
        let panels = |dx: f64, dy: f64| {
            let on = (0..5).any(|i| {
                let t = 0.6 * i as f64 + 0.2;
                (dx * t.sin() - dy * t.cos() - (3.0 * i as f64 - 6.0)).abs() < 0.5
            });
            if on { 0.25 } else { 1.0 }
        };
        let mut window = marked_sphere_window(cx, cy, r, [-0.3, -0.4, 1.0], 0.2, panels);
        let mut noise = normals(23);
        for q in &mut window {
            q.value += 0.01 * noise();
        }
        let c = Circle {
            x_px: cx,
            y_px: cy,
            r_px: r,
        };
        let wandered = light_evidence_without_marks(&window, c, [0.8, -0.37], [-0.3, -0.4]);
        let mirror = light_evidence_without_marks(&window, c, [-0.3, -0.4], [-0.3, 0.4]);
        assert!(wandered.is_some_and(|e| e <= 0.0), "{wandered:?}");
        assert!(mirror.is_some_and(|e| e > 0.0), "{mirror:?}");
    }

    #[test]
    fn the_evidence_of_a_held_fit_tells_an_image_between_two_others_from_none() {
        // Three plain 20 px spheres in a row 1.0 radius apart (lit from the upper left, fill
        // 0.2, sampled 16 x 16 per pixel, noise 0.5 % of the contrast): the window of the
        // middle one with its two neighbours held at their true circles. With the middle image
        // in the pixels the held fit finds it from 4 px off and its evidence is far above the
        // five-sigma 25; with the middle image absent (only the neighbours' light) the fit from
        // the same start finds no image (no fit, or evidence below 25). Measured by this test:
        // evidence 8055 with the image, error 0.002 px; without, a 12 px circle with evidence
        // 1.9 and a sigma of 0.21 px.
        let (r, light, uv) = (20.0, [-0.3, -0.4, 1.0], [-0.3, -0.4]);
        let mut noise = normals(17);
        let centre = (60.3, 40.6);
        let sides = [(centre.0 - r, centre.1), (centre.0 + r, centre.1)];
        let held: Vec<(Circle, f64)> = sides
            .iter()
            .map(|&(x, y)| {
                let c = Circle {
                    x_px: x,
                    y_px: y,
                    r_px: r,
                };
                (c, 0.01)
            })
            .collect();
        let start = Circle {
            x_px: centre.0 - 3.0,
            y_px: centre.1 + 2.5,
            r_px: r,
        };
        let mut found = Vec::new();
        for present in [true, false] {
            let albedo = |_: f64, _: f64| if present { 1.0 } else { 0.0 };
            let mut window = marked_sphere_window(centre.0, centre.1, r, light, 0.2, albedo);
            for q in &mut window {
                if !present {
                    // The backdrop the absent image would hide is not hidden.
                    q.value = 0.0;
                }
                for &(c, _) in &held {
                    let (x, y) = (c.x_px, c.y_px);
                    q.value += sampled_sphere(q.x_px, q.y_px, (x, y), r, light, 0.2, |_, _| 1.0);
                    let t = held_terms(q, c, uv);
                    q.others = std::array::from_fn(|k| q.others[k] + t[k]);
                }
                q.value += 0.005 * noise();
            }
            found.push(shaded_fit_held_with_evidence(
                &window,
                start,
                (uv, 0.005),
                &held,
            ));
        }
        let (fit, evidence) = found[0].expect("the image between two others is fitted");
        let error = (fit.circle.x_px - centre.0).hypot(fit.circle.y_px - centre.1);
        assert!(evidence > 1000.0, "evidence {evidence}");
        assert!(error < 0.05, "error {error} px");
        assert!(found[1].is_none_or(|(_, e)| e < 25.0), "{:?}", found[1]);
    }

    #[test]
    fn a_held_start_finds_an_image_a_quarter_radius_from_its_candidate() {
        // Three seamed 20 px spheres in a row 1.0 radius apart on a bright bar (an incline:
        // level 0.4, from 0.5 px below their rims; three dark seams, albedo 0.25, 2 px wide,
        // each ball turned its own way; lit from the upper left, fill 0.2, sampled 16 x 16 per
        // pixel, noise 0.5 % of the contrast), the middle one's candidate 5 px (a quarter
        // radius) off in one of 8 directions, the window built round the candidate as for a
        // rescue. Measured by this test: the held fit from a window round the grid start finds
        // the image to 0.006 px RMS; straight from the candidate, 1.8 px RMS (towards the bar
        // the window takes in so much of it that the fit stalls, or finds no fit: counted as
        // 5 px). The grid start itself lies up to 5.7 px off, along the row (where the
        // neighbours' light is, the trimmed misfit is shallow), not towards the bar.
        let (r, uv, light) = (20.0, [-0.3, -0.4], [-0.3, -0.4, 1.0]);
        let mut noise = normals(29);
        let seams = |turn: f64| {
            move |dx: f64, dy: f64| {
                let on = (0..3).any(|i| {
                    let t = turn + 1.05 * i as f64;
                    (dx * t.sin() - dy * t.cos() - (6.0 * i as f64 - 6.0)).abs() < 1.0
                });
                if on { 0.25 } else { 1.0 }
            }
        };
        let (mut worst_start, mut err2, mut straight2) = (0.0f64, 0.0, 0.0);
        let trials = 8;
        for k in 0..trials {
            let centre = (60.3 + 0.13 * k as f64, 40.6 - 0.07 * k as f64);
            let held: Vec<(Circle, f64)> = [-r, r]
                .iter()
                .map(|dx| {
                    let c = Circle {
                        x_px: centre.0 + dx,
                        y_px: centre.1,
                        r_px: r,
                    };
                    (c, 0.01)
                })
                .collect();
            let turns = [
                0.3 + 0.7 * k as f64,
                1.1 + 0.5 * k as f64,
                2.0 + 0.9 * k as f64,
            ];
            let mut pixel = |x: f64, y: f64| {
                let own = sampled_sphere(x, y, centre, r, light, 0.2, seams(turns[0]));
                let sides: f64 = held
                    .iter()
                    .zip(&turns[1..])
                    .map(|(&(c, _), &t)| {
                        sampled_sphere(x, y, (c.x_px, c.y_px), r, light, 0.2, seams(t))
                    })
                    .sum();
                let bar = if y > centre.1 + r + 0.5 && y < centre.1 + r + 8.0 {
                    0.4
                } else {
                    0.0
                };
                own + sides + bar + 0.005 * noise()
            };
            let mut window_round = |c: Circle| -> Vec<WindowPixel> {
                let mut out = Vec::new();
                for y in (c.y_px - r - 3.0) as i64..=(c.y_px + r + 3.0) as i64 {
                    for x in (c.x_px - r - 3.0) as i64..=(c.x_px + r + 3.0) as i64 {
                        let (xf, yf) = (x as f64, y as f64);
                        let d = (xf - c.x_px).hypot(yf - c.y_px);
                        if d < r - 6.0 || d > r + 2.5 {
                            continue;
                        }
                        let mut q = WindowPixel {
                            x_px: xf,
                            y_px: yf,
                            value: pixel(xf, yf),
                            backdrop: 0.0,
                            weight: 1.0,
                            others: [0.0; 3],
                        };
                        for &(h, _) in &held {
                            let t = held_terms(&q, h, uv);
                            q.others = std::array::from_fn(|i| q.others[i] + t[i]);
                        }
                        out.push(q);
                    }
                }
                out
            };
            let towards = std::f64::consts::FRAC_PI_4 * k as f64;
            let candidate = Circle {
                x_px: centre.0 + 5.0 * towards.cos(),
                y_px: centre.1 + 5.0 * towards.sin(),
                r_px: r,
            };
            let window = window_round(candidate);
            if let Some(f) = shaded_fit_held(&window, candidate, (uv, 0.005), &held) {
                straight2 +=
                    (f.circle.x_px - centre.0).powi(2) + (f.circle.y_px - centre.1).powi(2);
            } else {
                straight2 += 25.0;
            }
            let from = held_start(&window, candidate, uv, 0.5).expect("a grid start");
            worst_start = worst_start.max((from.x_px - centre.0).hypot(from.y_px - centre.1));
            let window = window_round(from);
            let fit = shaded_fit_held(&window, from, (uv, 0.005), &held).expect("a held fit");
            err2 += (fit.circle.x_px - centre.0).powi(2) + (fit.circle.y_px - centre.1).powi(2);
        }
        let rms = (err2 / trials as f64).sqrt();
        let straight = (straight2 / trials as f64).sqrt();
        assert!(
            worst_start < 0.3 * r,
            "grid start {worst_start} px from the image"
        );
        assert!(
            rms < 0.02,
            "held fit from the grid start: RMS error {rms} px"
        );
        assert!(
            straight > 20.0 * rms,
            "held fit from the candidate: RMS error {straight} px"
        );
    }

    /// The light of a sphere at `c` of radius `r` (as [`marked_sphere_window`]) reaching the
    /// pixel (x, y), less the backdrop of 0.02 it hides there.
    fn sampled_sphere(
        x: f64,
        y: f64,
        c: (f64, f64),
        r: f64,
        light: [f64; 3],
        fill: f64,
        albedo: impl Fn(f64, f64) -> f64,
    ) -> f64 {
        let ln = (light[0] * light[0] + light[1] * light[1] + light[2] * light[2]).sqrt();
        let l = [light[0] / ln, light[1] / ln, light[2] / ln];
        let mut sum = 0.0;
        for j in 0..16 {
            for i in 0..16 {
                let sx = x - 0.5 + (i as f64 + 0.5) / 16.0;
                let sy = y - 0.5 + (j as f64 + 0.5) / 16.0;
                let (nx, ny) = ((sx - c.0) / r, (sy - c.1) / r);
                let n2 = nx * nx + ny * ny;
                if n2 < 1.0 {
                    let nz = (1.0 - n2).sqrt();
                    let lambert = (nx * l[0] + ny * l[1] + nz * l[2]).max(0.0);
                    sum += albedo(sx - c.0, sy - c.1) * (fill + (1.0 - fill) * lambert) - 0.02;
                }
            }
        }
        sum / 256.0
    }

    /// Standard normal deviates from a seed (splitmix64 and Box-Muller), for repeatable noise.
    fn normals(seed: u64) -> impl FnMut() -> f64 {
        let mut state = seed;
        move || {
            let mut next = || {
                state = state.wrapping_add(0x9E37_79B9_7F4A_7C15);
                let mut z = state;
                z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
                z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
                ((z ^ (z >> 31)) >> 11) as f64 / (1u64 << 53) as f64
            };
            let (a, b) = (next().max(1e-300), next());
            (-2.0 * a.ln()).sqrt() * (std::f64::consts::TAU * b).cos()
        }
    }

    #[test]
    fn shaded_fit_keeps_a_faint_uniform_disc_flat_with_honest_sigma() {
        // A dark ball against its plate: a uniform disc of contrast -0.01 (exact pixel coverage,
        // 16 x 16 samples per pixel) under white noise of sd 0.004, as in the bench's dark
        // photos, at 40 sub-pixel centres. The uniform disc is the true model here, so the fit
        // must keep it (not a Lambert term fitted to the noise), and its sigma must match the
        // scatter of its centres against the rendered truth.
        let (r, contrast, noise_sd) = (12.0, -0.01, 0.004);
        let mut noise = normals(7);
        let (mut err2, mut sig2, mut flat) = (0.0, 0.0, 0usize);
        let trials = 40;
        for k in 0..trials {
            let (cx, cy) = (20.0 + 0.137 * k as f64 % 1.0, 20.0 + 0.291 * k as f64 % 1.0);
            let mut window = Vec::new();
            for y in 2..=38 {
                for x in 2..=38 {
                    let (xf, yf) = (x as f64, y as f64);
                    let d = (xf - cx).hypot(yf - cy);
                    if d < 0.65 * r || d > r + 2.5 {
                        continue;
                    }
                    let mut inside = 0usize;
                    for j in 0..16 {
                        for i in 0..16 {
                            let sx = xf - 0.5 + (i as f64 + 0.5) / 16.0;
                            let sy = yf - 0.5 + (j as f64 + 0.5) / 16.0;
                            inside += usize::from((sx - cx).hypot(sy - cy) < r);
                        }
                    }
                    window.push(WindowPixel {
                        x_px: xf,
                        y_px: yf,
                        value: contrast * inside as f64 / 256.0 + noise_sd * noise(),
                        backdrop: 0.0,
                        weight: 1.0,
                        others: [0.0; 3],
                    });
                }
            }
            let start = Circle {
                x_px: cx + 0.2,
                y_px: cy - 0.15,
                r_px: r + 0.2,
            };
            let fit = shaded_fit(&window, start).expect("fit converges");
            flat += usize::from(fit.flat);
            err2 += (fit.circle.x_px - cx).powi(2) + (fit.circle.y_px - cy).powi(2);
            sig2 += 2.0 * fit.sigma_px * fit.sigma_px;
        }
        assert!(flat >= trials * 9 / 10, "flat on {flat} of {trials}");
        // RMS error over RMS sigma: the factor 1.5 either way (40 trials of two axes
        // put the ratio's own 2-sigma spread at about 0.16).
        let ratio = (err2 / sig2).sqrt();
        assert!((1.0 / 1.5..1.5).contains(&ratio), "error / sigma {ratio}");
        // Cramer-Rao bound of the centre of a sharp disc edge under white noise: per axis
        // sd / (|contrast| sqrt(pi r)) (Fisher information c^2 / sd^2 x pi r for a one-pixel
        // ramp around the rim, derived here) = 0.065 px, 0.092 px over both axes.
        let rms = (err2 / trials as f64).sqrt();
        assert!(rms < 1.5 * 0.092, "RMS centre error {rms} px");
    }

    #[test]
    fn shaded_fit_keeps_the_lambert_term_of_a_lit_sphere_under_noise() {
        let mut noise = normals(11);
        let mut window = sphere_window(20.3, 21.7, 12.0, [0.4, -0.3, 1.0]);
        for q in &mut window {
            q.value += 0.004 * noise();
        }
        let start = Circle {
            x_px: 20.4,
            y_px: 21.6,
            r_px: 11.8,
        };
        let fit = shaded_fit(&window, start).expect("fit converges");
        assert!(!fit.flat, "a lit sphere was fitted as a uniform disc");
        let err = (fit.circle.x_px - 20.3).hypot(fit.circle.y_px - 21.7);
        assert!(err < 0.05, "centre off by {err} px");
    }
}
