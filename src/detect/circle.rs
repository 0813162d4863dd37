//! Circle fits to edge points: the circle, its algebraic and geometric least-squares fits, the
//! rim coverage of a fit and the variance inflation for correlated residuals along the rim.
//!
//! Goes in: sub-pixel edge points (x, y) and, for the geometric fit, a start circle. Comes out: a
//! [`Circle`] ([`kasa_fit`]), a [`GeometricFit`] with the covariance of (x, y, r) and the RMS
//! residual ([`geometric_fit`]); [`CircleFit`] is a fitted ball image candidate.
//!
//! Method: an algebraic start (Kasa's fit, "A circle fitting procedure and its error analysis",
//! IEEE Trans. Instrum. Meas. 25, 1976) and a geometric fit minimising the orthogonal distances by
//! Levenberg-Marquardt (Gander, Golub & Strebel, "Least-squares fitting of circles and ellipses",
//! BIT 34, 1994). The covariance is the Gauss-Newton one scaled by the residual variance, then
//! inflated for the correlation of neighbouring edge points (lag-1 autocorrelation of the
//! residuals along the rim, AR(1) variance factor (1 + rho)/(1 - rho)).

use nalgebra::{Matrix3, Vector3};

/// Euclidean length of (dx, dy) as sqrt(dx^2 + dy^2): pixel distances cannot overflow, so the
/// fits do without `hypot`'s scaling.
#[inline]
pub(crate) fn dist(dx: f64, dy: f64) -> f64 {
    (dx * dx + dy * dy).sqrt()
}

/// A circle.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Circle {
    /// Centre x, pixels.
    pub x_px: f64,
    /// Centre y, pixels.
    pub y_px: f64,
    /// Radius, pixels.
    pub r_px: f64,
}

/// Result of a geometric fit.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct GeometricFit {
    /// The fitted circle.
    pub circle: Circle,
    /// Covariance of (x, y, r) (r row and column zero when the radius was held), pixels^2.
    pub covariance: Matrix3<f64>,
    /// RMS orthogonal residual, pixels.
    pub rms_px: f64,
}

/// Kasa's algebraic fit: least squares of x^2 + y^2 + D x + E y + F = 0. Needs 3 points not on
/// one line.
pub fn kasa_fit(points: &[[f64; 2]]) -> Option<Circle> {
    if points.len() < 3 {
        return None;
    }
    let n = points.len() as f64;
    let (mx, my) = points
        .iter()
        .fold((0.0, 0.0), |(a, b), p| (a + p[0] / n, b + p[1] / n));
    let mut ata = Matrix3::<f64>::zeros();
    let mut atb = Vector3::<f64>::zeros();
    for p in points {
        let (x, y) = (p[0] - mx, p[1] - my);
        let row = Vector3::new(x, y, 1.0);
        let z = -(x * x + y * y);
        ata += row * row.transpose();
        atb += row * z;
    }
    let sol = ata.lu().solve(&atb)?;
    let (cx, cy) = (-sol[0] / 2.0, -sol[1] / 2.0);
    let r2 = cx * cx + cy * cy - sol[2];
    if r2.is_nan() || r2 <= 0.0 || !r2.is_finite() {
        return None;
    }
    Some(Circle {
        x_px: cx + mx,
        y_px: cy + my,
        r_px: r2.sqrt(),
    })
}

/// Geometric circle fit by Levenberg-Marquardt from `start`; `fixed_r` holds the radius.
pub fn geometric_fit(
    points: &[[f64; 2]],
    start: Circle,
    fixed_r: Option<f64>,
) -> Option<GeometricFit> {
    weighted_geometric_fit(points, None, start, fixed_r)
}

/// [`geometric_fit`] with a weight per point (None: all 1): the weighted sum of squared
/// orthogonal distances is minimised, the residual variance is that sum over the weights' sum
/// less the parameters, and the RMS residual is weighted alike.
pub fn weighted_geometric_fit(
    points: &[[f64; 2]],
    weights: Option<&[f64]>,
    start: Circle,
    fixed_r: Option<f64>,
) -> Option<GeometricFit> {
    let p = if fixed_r.is_some() { 2 } else { 3 };
    let w = |k: usize| weights.map_or(1.0, |w| w[k]);
    let total: f64 = (0..points.len()).map(w).sum();
    if points.len() <= p || total <= p as f64 {
        return None;
    }
    let mut c = start;
    if let Some(r) = fixed_r {
        c.r_px = r;
    }
    let cost = |c: &Circle| -> f64 {
        points
            .iter()
            .enumerate()
            .map(|(k, q)| {
                let d = dist(q[0] - c.x_px, q[1] - c.y_px) - c.r_px;
                w(k) * d * d
            })
            .sum()
    };
    let normal = |c: &Circle| -> (Matrix3<f64>, Vector3<f64>) {
        let mut jtj = Matrix3::zeros();
        let mut jtr = Vector3::zeros();
        for (k, q) in points.iter().enumerate() {
            let (dx, dy) = (q[0] - c.x_px, q[1] - c.y_px);
            let rho = dist(dx, dy).max(1e-12);
            let res = rho - c.r_px;
            let j = Vector3::new(
                -dx / rho,
                -dy / rho,
                if fixed_r.is_some() { 0.0 } else { -1.0 },
            );
            jtj += w(k) * j * j.transpose();
            jtr += w(k) * j * res;
        }
        if fixed_r.is_some() {
            jtj[(2, 2)] = 1.0;
        }
        (jtj, jtr)
    };
    let mut lambda = 1e-3;
    let mut f = cost(&c);
    for _ in 0..100 {
        let (jtj, jtr) = normal(&c);
        let mut a = jtj;
        for i in 0..3 {
            a[(i, i)] *= 1.0 + lambda;
        }
        let Some(step) = a.lu().solve(&(-jtr)) else {
            break;
        };
        let trial = Circle {
            x_px: c.x_px + step[0],
            y_px: c.y_px + step[1],
            r_px: if fixed_r.is_some() {
                c.r_px
            } else {
                c.r_px + step[2]
            },
        };
        let ft = cost(&trial);
        if ft <= f {
            let small = step.norm() < 1e-10 * (1.0 + c.r_px);
            c = trial;
            let done = (f - ft) <= 1e-14 * f.max(1e-300) || small;
            f = ft;
            lambda = (lambda * 0.3).max(1e-12);
            if done {
                break;
            }
        } else {
            lambda *= 10.0;
            if lambda > 1e12 {
                break;
            }
        }
    }
    if c.r_px.is_nan() || c.r_px <= 0.0 || !c.x_px.is_finite() || !c.y_px.is_finite() {
        return None;
    }
    let (jtj, _) = normal(&c);
    let dof = total - p as f64;
    let s2 = f / dof;
    let mut covariance = jtj.try_inverse()? * s2;
    if fixed_r.is_some() {
        for i in 0..3 {
            covariance[(2, i)] = 0.0;
            covariance[(i, 2)] = 0.0;
        }
    }
    Some(GeometricFit {
        circle: c,
        covariance,
        rms_px: (f / total).sqrt(),
    })
}

/// A refined ball image candidate.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CircleFit {
    /// The circle.
    pub circle: Circle,
    /// 1-sigma centre uncertainty per axis, pixels.
    pub sigma_px: f64,
    /// Fraction of the rim (64 angular bins) with owned edge points within 1 px.
    pub coverage: f64,
    /// RMS residual, pixels.
    pub rms_px: f64,
    /// Owned edge points.
    pub points: usize,
    /// Median gradient magnitude of the owned points (contrast of the rim).
    pub edge_strength: f64,
    /// Upper quartile of the gradient magnitudes of those edge points: the contrast of the
    /// rim's brightest part (a ball lit from one side: its lit limb).
    pub limb_strength: f64,
    /// The radius was held at the common radius.
    pub radius_held: bool,
}

/// Angular bins of the rim coverage.
pub const RIM_BINS: usize = 64;

/// Rim coverage of `c`: the fraction of [`RIM_BINS`] angular bins holding a point of `pts` within
/// 1 px of the rim.
pub(crate) fn rim_coverage(c: &Circle, pts: &[[f64; 2]]) -> f64 {
    let mut bins = [false; RIM_BINS];
    for q in pts {
        let (dx, dy) = (q[0] - c.x_px, q[1] - c.y_px);
        if (dist(dx, dy) - c.r_px).abs() <= 1.0 {
            let a = dy.atan2(dx) + std::f64::consts::PI;
            let b = ((a / (2.0 * std::f64::consts::PI)) * RIM_BINS as f64) as usize % RIM_BINS;
            bins[b] = true;
        }
    }
    bins.iter().filter(|b| **b).count() as f64 / RIM_BINS as f64
}

/// Variance inflation for residuals correlated along the rim (AR(1) model).
pub(crate) fn correlation_factor(c: &Circle, pts: &[[f64; 2]]) -> f64 {
    let mut r: Vec<(f64, f64)> = pts
        .iter()
        .map(|q| {
            let (dx, dy) = (q[0] - c.x_px, q[1] - c.y_px);
            (dy.atan2(dx), dist(dx, dy) - c.r_px)
        })
        .collect();
    if r.len() < 6 {
        return 1.0;
    }
    r.sort_by(|a, b| a.0.total_cmp(&b.0));
    let mean = r.iter().map(|v| v.1).sum::<f64>() / r.len() as f64;
    let var: f64 = r.iter().map(|v| (v.1 - mean).powi(2)).sum();
    if var <= 0.0 {
        return 1.0;
    }
    let lag: f64 = r
        .windows(2)
        .map(|w| (w[0].1 - mean) * (w[1].1 - mean))
        .sum();
    let rho = (lag / var).clamp(0.0, 0.9);
    (1.0 + rho) / (1.0 - rho)
}
