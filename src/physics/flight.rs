//! Flight arcs: per arc a weighted straight line x(t) and parabola y(t); a joint fit of several
//! arcs with one common quadratic coefficient (common acceleration; linear, solved by QR); and an
//! optional quadratic-drag fit of the arcs by Levenberg-Marquardt on the equations of motion
//! a = (0, -g) - D |v| v integrated by RK4 ([`super::dynamics`]).
//!
//! Goes in: the timed path (metres, seconds) and the index ranges of its arcs. Comes out: per
//! arc its fits (`ArcFit`, crate-internal), the common quadratic coefficient with its sigma,
//! and a [`DragFit`].

use super::TimedPoint;
use super::dynamics::{QuadraticDrag, SpeedNorm};
use super::fit::{
    CovarianceScaling, FitOptions, LmOptions, PolyFit, levenberg_marquardt, linear_least_squares,
    polynomial_fit,
};
use crate::error::Result;
use nalgebra::DMatrix;
use serde::Serialize;
use std::ops::Range;

/// A fitted flight arc: x(t) straight, y(t) parabola, over `range` of the path.
#[derive(Debug, Clone)]
pub(crate) struct ArcFit {
    pub range: Range<usize>,
    pub x: PolyFit,
    pub y: PolyFit,
}

impl ArcFit {
    /// Sum of both chi-squares.
    pub fn chi_square(&self) -> f64 {
        self.x.chi_square + self.y.chi_square
    }
}

fn columns(points: &[TimedPoint]) -> (Vec<f64>, Vec<f64>, Vec<f64>, Vec<f64>) {
    (
        points.iter().map(|p| p.t_s).collect(),
        points.iter().map(|p| p.x_m).collect(),
        points.iter().map(|p| p.y_m).collect(),
        points.iter().map(|p| p.sigma_m).collect(),
    )
}

/// Fit x linear and y quadratic in t to `points[range]`.
pub(crate) fn fit_arc(
    points: &[TimedPoint],
    range: Range<usize>,
    covariance: CovarianceScaling,
) -> Result<ArcFit> {
    let (t, x, y, s) = columns(&points[range.clone()]);
    let o = FitOptions { covariance };
    Ok(ArcFit {
        x: polynomial_fit(&t, &x, Some(&s), 1, &o)?,
        y: polynomial_fit(&t, &y, Some(&s), 2, &o)?,
        range,
    })
}

/// Chi-square of the flight model on `points[range]`, 0 when there are too few points to fit.
pub(crate) fn flight_chi_square(points: &[TimedPoint], range: Range<usize>) -> f64 {
    if range.len() < 3 {
        return 0.0;
    }
    fit_arc(points, range, CovarianceScaling::Sigmas).map_or(f64::INFINITY, |f| f.chi_square())
}

/// Common quadratic coefficient of one coordinate over several arcs: coord = a_i + b_i (t - m_i)
/// + c (t - m_i)^2 with m_i the mean time of arc i. Returns (c, sigma of c).
pub(crate) fn joint_quadratic(
    points: &[TimedPoint],
    arcs: &[Range<usize>],
    coord: fn(&TimedPoint) -> f64,
    covariance: CovarianceScaling,
) -> Result<(f64, f64)> {
    let rows: usize = arcs.iter().map(|r| r.len()).sum();
    let p = 2 * arcs.len() + 1;
    let mut design = DMatrix::zeros(rows, p);
    let mut obs = Vec::with_capacity(rows);
    let mut sig = Vec::with_capacity(rows);
    let mut row = 0;
    for (k, r) in arcs.iter().enumerate() {
        let m = points[r.clone()].iter().map(|q| q.t_s).sum::<f64>() / r.len().max(1) as f64;
        for q in &points[r.clone()] {
            let u = q.t_s - m;
            design[(row, 2 * k)] = 1.0;
            design[(row, 2 * k + 1)] = u;
            design[(row, p - 1)] = u * u;
            obs.push(coord(q));
            sig.push(q.sigma_m);
            row += 1;
        }
    }
    let fit = linear_least_squares(&design, &obs, Some(&sig), &FitOptions { covariance })?;
    Ok((fit.coefficients[p - 1], fit.sigma(p - 1)))
}

/// Result of the optional quadratic-drag fit.
#[derive(Debug, Clone, Serialize)]
pub struct DragFit {
    /// Quadratic drag coefficient D in a = -D |v| v, per metre.
    pub drag_per_m: f64,
    /// Its 1-sigma.
    pub drag_sigma_per_m: f64,
    /// Gravity in the drag model, m/s^2 (fitted with the drag when gravity is estimated).
    pub gravity_mps2: f64,
    /// Its 1-sigma (0 when held at the given value).
    pub gravity_sigma_mps2: f64,
    /// Number of flight arcs in the fit.
    pub arcs: usize,
    /// Chi-square per degree of freedom of the drag model.
    pub reduced_chi_square: f64,
}

/// Largest RK4 step of the drag model, seconds.
const DRAG_STEP_S: f64 = 5e-4;

/// Joint drag fit of the flight arcs: per arc the state at its mean time (4 parameters), a common
/// drag coefficient and, when `gravity` is None, a common gravity. Starts from the vacuum fits.
pub(crate) fn fit_drag(
    points: &[TimedPoint],
    arcs: &[ArcFit],
    gravity: Option<f64>,
    vacuum_gravity: f64,
    covariance: CovarianceScaling,
) -> Result<DragFit> {
    let refs: Vec<f64> = arcs
        .iter()
        .map(|a| points[a.range.clone()].iter().map(|q| q.t_s).sum::<f64>() / a.range.len() as f64)
        .collect();
    let mut start = Vec::new();
    for (a, &m) in arcs.iter().zip(&refs) {
        start.extend([a.x.value(m), a.y.value(m), a.x.slope(m), a.y.slope(m)]);
    }
    start.push(0.0);
    if gravity.is_none() {
        start.push(vacuum_gravity);
    }
    let na = arcs.len();
    let residuals = |p: &[f64]| {
        let d = p[4 * na];
        let g = gravity.unwrap_or_else(|| p.get(4 * na + 1).copied().unwrap_or(vacuum_gravity));
        let dynamics = QuadraticDrag {
            gravity_mps2: g,
            drag_per_m: d,
            speed: SpeedNorm::Hypot,
        };
        let mut out = Vec::new();
        for (k, a) in arcs.iter().enumerate() {
            let s0 = [p[4 * k], p[4 * k + 1], p[4 * k + 2], p[4 * k + 3]];
            let pts = &points[a.range.clone()];
            // March outwards from the reference time in both directions.
            let mut model = vec![[0.0; 2]; pts.len()];
            let split = pts.partition_point(|q| q.t_s < refs[k]);
            let (mut s, mut t) = (s0, refs[k]);
            for i in split..pts.len() {
                s = dynamics.advance(s, pts[i].t_s - t, DRAG_STEP_S);
                t = pts[i].t_s;
                model[i] = [s[0], s[1]];
            }
            let (mut s, mut t) = (s0, refs[k]);
            for i in (0..split).rev() {
                s = dynamics.advance(s, pts[i].t_s - t, DRAG_STEP_S);
                t = pts[i].t_s;
                model[i] = [s[0], s[1]];
            }
            for (q, m) in pts.iter().zip(&model) {
                out.push((q.x_m - m[0]) / q.sigma_m);
                out.push((q.y_m - m[1]) / q.sigma_m);
            }
        }
        out
    };
    let fit = levenberg_marquardt(
        residuals,
        &start,
        &LmOptions {
            covariance,
            ..LmOptions::default()
        },
    )?;
    let (g, gs) = match gravity {
        Some(g) => (g, 0.0),
        None => (fit.parameters[4 * na + 1], fit.sigma(4 * na + 1)),
    };
    Ok(DragFit {
        drag_per_m: fit.parameters[4 * na],
        drag_sigma_per_m: fit.sigma(4 * na),
        gravity_mps2: g,
        gravity_sigma_mps2: gs,
        arcs: na,
        reduced_chi_square: if fit.dof > 0 {
            fit.chi_square / fit.dof as f64
        } else {
            f64::NAN
        },
    })
}
