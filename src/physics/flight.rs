//! Flight arcs: per arc a weighted straight line x(t) and parabola y(t); a joint fit of several
//! arcs with one common quadratic coefficient (common acceleration; linear, solved by QR). The
//! optional quadratic-drag fit of the arcs lives in [`super::drag`].
//!
//! Goes in: the timed path (metres, seconds) and the index ranges of its arcs. Comes out: per
//! arc its fits (`ArcFit`, crate-internal) and the common quadratic coefficient with its sigma.

use super::TimedPoint;
pub use super::drag::DragFit;
use super::fit::{CovarianceScaling, FitOptions, PolyFit, linear_least_squares, polynomial_fit};
use crate::error::Result;
use nalgebra::DMatrix;
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
