//! Least-squares fitting: weighted linear least squares by QR, straight lines and parabolas, a
//! small Levenberg-Marquardt solver for nonlinear models, and first-order propagation of a
//! covariance to a derived quantity.
//!
//! Goes in: a design matrix (or abscissae for a polynomial) with observations and optional 1-sigma
//! uncertainties. Comes out: coefficients, their covariance, the chi-square and its degrees of
//! freedom.
//!
//! Method: each row is divided by its sigma and the system is solved by Householder QR (no normal
//! equations), so the condition number enters once, not squared. Polynomial fits first centre and
//! scale the abscissa (u = (x - mean) / half-range), fit in u and transform the coefficients and
//! their covariance back to powers of x exactly. The covariance is (R^T R)^-1 of the weighted
//! problem, i.e. it trusts the given sigmas, or is multiplied by the reduced chi-square (the
//! residual variance estimate used by NIST StRD for its certified standard deviations), as chosen
//! by [`CovarianceScaling`]. Nonlinear fits use Levenberg-Marquardt (Marquardt 1963) with a
//! central-difference Jacobian and the same covariance rule at the solution.

use crate::error::{Error, PhysicsError, Result};
use nalgebra::{DMatrix, DVector};
use std::path::Path;

/// How the coefficient covariance is scaled.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum CovarianceScaling {
    /// Trust the given sigmas: covariance = (A^T W A)^-1. Without sigmas every weight is 1.
    #[default]
    Sigmas,
    /// Multiply by the reduced chi-square chi^2 / (n - p): the sigmas only set relative weights
    /// (with unit weights this is the textbook unweighted standard error).
    ReducedChiSquare,
    /// Multiply by the reduced chi-square when it exceeds 1: never claim better than the sigmas
    /// allow, and widen when the scatter is larger than they say.
    Conservative,
}

/// Options of the linear and polynomial fits.
#[derive(Debug, Clone, Copy, Default)]
pub struct FitOptions {
    /// Covariance scaling.
    pub covariance: CovarianceScaling,
}

/// Result of a linear least-squares fit.
#[derive(Debug, Clone)]
pub struct LinearFit {
    /// Fitted coefficients.
    pub coefficients: DVector<f64>,
    /// Covariance of the coefficients, scaled as requested.
    pub covariance: DMatrix<f64>,
    /// Sum of squared weighted residuals.
    pub chi_square: f64,
    /// Degrees of freedom, observations minus coefficients.
    pub dof: usize,
    /// Unweighted residuals, observed minus fitted.
    pub residuals: Vec<f64>,
}

impl LinearFit {
    /// Chi-square per degree of freedom (NaN with no degree of freedom).
    pub fn reduced_chi_square(&self) -> f64 {
        if self.dof == 0 {
            f64::NAN
        } else {
            self.chi_square / self.dof as f64
        }
    }

    /// 1-sigma uncertainty of coefficient `i`.
    pub fn sigma(&self, i: usize) -> f64 {
        self.covariance[(i, i)].max(0.0).sqrt()
    }

    /// Root-mean-square of the unweighted residuals.
    pub fn rms_residual(&self) -> f64 {
        rms(&self.residuals)
    }
}

fn rms(v: &[f64]) -> f64 {
    if v.is_empty() {
        0.0
    } else {
        (v.iter().map(|r| r * r).sum::<f64>() / v.len() as f64).sqrt()
    }
}

/// A fitting error (the caller names the data).
pub(crate) fn fit_error(message: impl Into<String>) -> Error {
    Error::physics(Path::new("<fit>"), PhysicsError::Fit(message.into()))
}

fn scale_factor(scaling: CovarianceScaling, chi_square: f64, dof: usize) -> f64 {
    let red = if dof == 0 {
        1.0
    } else {
        chi_square / dof as f64
    };
    match scaling {
        CovarianceScaling::Sigmas => 1.0,
        CovarianceScaling::ReducedChiSquare => red,
        CovarianceScaling::Conservative => red.max(1.0),
    }
}

fn check_inputs(rows: usize, y: &[f64], sigma: Option<&[f64]>) -> Result<()> {
    if y.len() != rows {
        return Err(fit_error(format!(
            "{} observations for {} design rows",
            y.len(),
            rows
        )));
    }
    if y.iter().any(|v| !v.is_finite()) {
        return Err(fit_error("an observation is not a finite number"));
    }
    if let Some(s) = sigma {
        if s.len() != rows {
            return Err(fit_error(format!(
                "{} sigmas for {} observations",
                s.len(),
                rows
            )));
        }
        if s.iter().any(|v| !(v.is_finite() && *v > 0.0)) {
            return Err(fit_error("every sigma must be a positive finite number"));
        }
    }
    Ok(())
}

/// Weighted linear least squares: minimise sum ((y - A c) / sigma)^2 by QR of the weighted design.
/// `sigma` = None gives unit weights. Refuses fewer observations than coefficients, non-finite
/// input and a rank-deficient design (e.g. repeated abscissae).
pub fn linear_least_squares(
    design: &DMatrix<f64>,
    y: &[f64],
    sigma: Option<&[f64]>,
    options: &FitOptions,
) -> Result<LinearFit> {
    let (n, p) = design.shape();
    check_inputs(n, y, sigma)?;
    if p == 0 {
        return Err(fit_error("no coefficient to fit"));
    }
    if n < p {
        return Err(fit_error(format!("needs at least {p} points, got {n}")));
    }
    if design.iter().any(|v| !v.is_finite()) {
        return Err(fit_error("a design value is not a finite number"));
    }
    let w: Vec<f64> = (0..n).map(|i| sigma.map_or(1.0, |s| 1.0 / s[i])).collect();
    let mut a = design.clone();
    let mut b = DVector::from_fn(n, |i, _| y[i] * w[i]);
    for i in 0..n {
        for j in 0..p {
            a[(i, j)] *= w[i];
        }
    }
    // Column scaling so the rank test compares like with like.
    let col_norm: Vec<f64> = (0..p).map(|j| a.column(j).norm()).collect();
    if col_norm.iter().any(|c| *c == 0.0 || !c.is_finite()) {
        return Err(fit_error(
            "a design column is zero: the model is degenerate",
        ));
    }
    for (j, c) in col_norm.iter().enumerate() {
        a.column_mut(j).scale_mut(1.0 / c);
    }
    let qr = a.clone().qr();
    let r = qr.r();
    let rmax = (0..p).map(|i| r[(i, i)].abs()).fold(0.0, f64::max);
    if (0..p).any(|i| r[(i, i)].abs() <= 1e-12 * rmax) {
        return Err(fit_error(
            "the design is rank-deficient (too few distinct points for the model)",
        ));
    }
    let qtb = qr.q().transpose() * &b;
    let rinv = r
        .clone()
        .try_inverse()
        .ok_or_else(|| fit_error("the design is singular"))?;
    let scaled = &rinv * qtb;
    let coefficients = DVector::from_fn(p, |j, _| scaled[j] / col_norm[j]);
    let fitted = design * &coefficients;
    let residuals: Vec<f64> = (0..n).map(|i| y[i] - fitted[i]).collect();
    b -= &a * &scaled;
    let chi_square = b.norm_squared();
    let dof = n - p;
    let k = scale_factor(options.covariance, chi_square, dof);
    let cs = &rinv * rinv.transpose();
    let covariance = DMatrix::from_fn(p, p, |i, j| k * cs[(i, j)] / (col_norm[i] * col_norm[j]));
    Ok(LinearFit {
        coefficients,
        covariance,
        chi_square,
        dof,
        residuals,
    })
}

/// A polynomial fit: coefficients of 1, x, x^2, ... in the original abscissa.
#[derive(Debug, Clone)]
pub struct PolyFit {
    /// Coefficients in ascending powers of x.
    pub coefficients: Vec<f64>,
    /// Their covariance.
    pub covariance: DMatrix<f64>,
    /// Sum of squared weighted residuals.
    pub chi_square: f64,
    /// Degrees of freedom.
    pub dof: usize,
    /// Root-mean-square of the unweighted residuals.
    pub rms_residual: f64,
}

impl PolyFit {
    /// Value at `x`.
    pub fn value(&self, x: f64) -> f64 {
        poly_value(&self.coefficients, x)
    }

    /// First derivative at `x`.
    pub fn slope(&self, x: f64) -> f64 {
        poly_slope(&self.coefficients, x)
    }

    /// 1-sigma uncertainty of coefficient `i`.
    pub fn sigma(&self, i: usize) -> f64 {
        self.covariance[(i, i)].max(0.0).sqrt()
    }
}

/// Value of a polynomial with coefficients in ascending powers at `x`.
pub fn poly_value(c: &[f64], x: f64) -> f64 {
    c.iter().rev().fold(0.0, |acc, &a| acc * x + a)
}

/// First derivative of a polynomial with coefficients in ascending powers at `x`.
pub fn poly_slope(c: &[f64], x: f64) -> f64 {
    c.iter()
        .enumerate()
        .skip(1)
        .rev()
        .fold(0.0, |acc, (i, &a)| acc * x + i as f64 * a)
}

fn binomial(n: usize, k: usize) -> f64 {
    (0..k).fold(1.0, |acc, i| acc * (n - i) as f64 / (i + 1) as f64)
}

/// Weighted polynomial fit of degree 1 or 2 (straight line, parabola) on a centred and scaled
/// abscissa; coefficients and covariance are returned for powers of the original x.
pub fn polynomial_fit(
    x: &[f64],
    y: &[f64],
    sigma: Option<&[f64]>,
    degree: usize,
    options: &FitOptions,
) -> Result<PolyFit> {
    if !(1..=2).contains(&degree) {
        return Err(Error::setting(
            "degree",
            format!("polynomial degree must be 1 or 2, got {degree}"),
        ));
    }
    if x.len() != y.len() {
        return Err(fit_error(format!(
            "{} abscissae for {} observations",
            x.len(),
            y.len()
        )));
    }
    if x.iter().any(|v| !v.is_finite()) {
        return Err(fit_error("an abscissa is not a finite number"));
    }
    let n = x.len();
    let p = degree + 1;
    if n < p {
        return Err(fit_error(format!(
            "a degree-{degree} fit needs at least {p} points, got {n}"
        )));
    }
    let mean = x.iter().sum::<f64>() / n as f64;
    let half = x.iter().map(|v| (v - mean).abs()).fold(0.0, f64::max);
    if half == 0.0 {
        return Err(fit_error("all abscissae are equal"));
    }
    let design = DMatrix::from_fn(n, p, |i, j| ((x[i] - mean) / half).powi(j as i32));
    let fit = linear_least_squares(&design, y, sigma, options)?;
    // u^i = ((x - m) / s)^i = sum_j C(i, j) x^j (-m)^(i - j) / s^i.
    let t = DMatrix::from_fn(p, p, |j, i| {
        if j > i {
            0.0
        } else {
            binomial(i, j) * (-mean).powi((i - j) as i32) / half.powi(i as i32)
        }
    });
    let coefficients = (&t * &fit.coefficients).iter().copied().collect();
    let covariance = &t * &fit.covariance * t.transpose();
    Ok(PolyFit {
        coefficients,
        covariance,
        chi_square: fit.chi_square,
        dof: fit.dof,
        rms_residual: fit.rms_residual(),
    })
}

/// Options of [`levenberg_marquardt`].
#[derive(Debug, Clone, Copy)]
pub struct LmOptions {
    /// Most iterations.
    pub max_iterations: usize,
    /// Stop when the relative decrease of the chi-square falls below this.
    pub tolerance: f64,
    /// Covariance scaling at the solution.
    pub covariance: CovarianceScaling,
}

impl Default for LmOptions {
    fn default() -> Self {
        LmOptions {
            max_iterations: 200,
            tolerance: 1e-12,
            covariance: CovarianceScaling::Sigmas,
        }
    }
}

/// Result of a nonlinear fit.
#[derive(Debug, Clone)]
pub struct NonlinearFit {
    /// Fitted parameters.
    pub parameters: Vec<f64>,
    /// Their covariance, scaled as requested.
    pub covariance: DMatrix<f64>,
    /// Sum of squared residuals at the solution.
    pub chi_square: f64,
    /// Degrees of freedom.
    pub dof: usize,
    /// Iterations used.
    pub iterations: usize,
}

impl NonlinearFit {
    /// 1-sigma uncertainty of parameter `i`.
    pub fn sigma(&self, i: usize) -> f64 {
        self.covariance[(i, i)].max(0.0).sqrt()
    }
}

fn chi2_of(r: &[f64]) -> f64 {
    let s: f64 = r.iter().map(|v| v * v).sum();
    if s.is_finite() { s } else { f64::INFINITY }
}

fn jacobian<F: FnMut(&[f64]) -> Vec<f64>>(f: &mut F, p: &[f64], m: usize) -> DMatrix<f64> {
    let mut j = DMatrix::zeros(m, p.len());
    let mut q = p.to_vec();
    for k in 0..p.len() {
        let h = 1e-6 * p[k].abs().max(1e-3);
        q[k] = p[k] + h;
        let up = f(&q);
        q[k] = p[k] - h;
        let down = f(&q);
        q[k] = p[k];
        for i in 0..m.min(up.len()).min(down.len()) {
            j[(i, k)] = (up[i] - down[i]) / (2.0 * h);
        }
    }
    j
}

/// Levenberg-Marquardt minimisation of sum r_i(p)^2, where `residuals` returns the weighted
/// residuals (observed minus model, divided by sigma) for parameters p. The Jacobian is taken by
/// central differences; the damping is multiplied by 10 after a rejected step and divided by 10
/// after an accepted one (Marquardt 1963).
pub fn levenberg_marquardt<F: FnMut(&[f64]) -> Vec<f64>>(
    mut residuals: F,
    start: &[f64],
    options: &LmOptions,
) -> Result<NonlinearFit> {
    let np = start.len();
    if np == 0 {
        return Err(fit_error("no parameter to fit"));
    }
    if start.iter().any(|v| !v.is_finite()) {
        return Err(fit_error("a start parameter is not a finite number"));
    }
    let mut p = start.to_vec();
    let mut r = residuals(&p);
    let m = r.len();
    if m < np {
        return Err(fit_error(format!("needs at least {np} residuals, got {m}")));
    }
    let mut chi2 = chi2_of(&r);
    if !chi2.is_finite() {
        return Err(fit_error("the model is not finite at the start parameters"));
    }
    let mut lambda = 1e-3;
    let mut iterations = 0;
    while iterations < options.max_iterations {
        iterations += 1;
        let j = jacobian(&mut residuals, &p, m);
        let jt = j.transpose();
        let jtj = &jt * &j;
        let rv = DVector::from_vec(r.clone());
        let g = &jt * rv;
        let mut improved = false;
        while lambda < 1e12 {
            let mut a = jtj.clone();
            for k in 0..np {
                a[(k, k)] += lambda * jtj[(k, k)].max(1e-300);
            }
            let Some(chol) = a.cholesky() else {
                lambda *= 10.0;
                continue;
            };
            let step = chol.solve(&g);
            // Gauss-Newton on r(p + d) ~ r + J d with damping: d = -(J^T J + lambda D)^-1 J^T r.
            let trial: Vec<f64> = (0..np).map(|k| p[k] - step[k]).collect();
            let rt = residuals(&trial);
            let c = chi2_of(&rt);
            if rt.len() == m && c < chi2 {
                let rel = (chi2 - c) / chi2.max(1e-300);
                p = trial;
                r = rt;
                chi2 = c;
                lambda = (lambda / 10.0).max(1e-12);
                improved = rel > options.tolerance;
                break;
            }
            lambda *= 10.0;
        }
        if !improved {
            break;
        }
    }
    let j = jacobian(&mut residuals, &p, m);
    let jtj = j.transpose() * &j;
    let inv = jtj
        .try_inverse()
        .filter(|c| c.iter().all(|v| v.is_finite()))
        .ok_or_else(|| fit_error("the parameters are not determined by the data"))?;
    let dof = m - np;
    let k = scale_factor(options.covariance, chi2, dof);
    Ok(NonlinearFit {
        parameters: p,
        covariance: inv * k,
        chi_square: chi2,
        dof,
        iterations,
    })
}

/// 1-sigma uncertainty of f(p) by first-order propagation, sqrt(g^T C g), with the gradient g
/// taken by central differences ([`gradient`]). Returns NaN when f is not finite near p.
pub fn propagate_sigma<F: Fn(&[f64]) -> f64>(f: F, p: &[f64], covariance: &DMatrix<f64>) -> f64 {
    if covariance.shape() != (p.len(), p.len()) {
        return f64::NAN;
    }
    let g = gradient(f, p, covariance);
    let v = (g.transpose() * covariance * &g)[(0, 0)];
    if v.is_finite() {
        v.max(0.0).sqrt()
    } else {
        f64::NAN
    }
}

/// Gradient of f at p by central differences, each step a thousandth of the parameter's 1-sigma
/// from `covariance` (or a relative 1e-7 where that sigma is zero).
pub fn gradient<F: Fn(&[f64]) -> f64>(f: F, p: &[f64], covariance: &DMatrix<f64>) -> DVector<f64> {
    let n = p.len();
    let mut q = p.to_vec();
    let mut g = DVector::zeros(n);
    for k in 0..n {
        let sd = if k < covariance.nrows() && k < covariance.ncols() {
            covariance[(k, k)].max(0.0).sqrt()
        } else {
            0.0
        };
        let h = if sd > 0.0 {
            1e-3 * sd
        } else {
            1e-7 * p[k].abs().max(1e-7)
        };
        q[k] = p[k] + h;
        let up = f(&q);
        q[k] = p[k] - h;
        let down = f(&q);
        q[k] = p[k];
        g[k] = (up - down) / (2.0 * h);
    }
    g
}

/// Block-diagonal covariance of independent parameter groups.
pub fn block_diagonal(blocks: &[&DMatrix<f64>]) -> DMatrix<f64> {
    let n: usize = blocks.iter().map(|b| b.nrows()).sum();
    let mut out = DMatrix::zeros(n, n);
    let mut at = 0;
    for b in blocks {
        let k = b.nrows().min(b.ncols());
        out.view_mut((at, at), (k, k))
            .copy_from(&b.view((0, 0), (k, k)));
        at += k;
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn straight_line_through_exact_points() {
        let x = [0.0, 1.0, 2.0, 3.0];
        let y: Vec<f64> = x.iter().map(|v| 2.0 - 0.5 * v).collect();
        let f = polynomial_fit(&x, &y, None, 1, &FitOptions::default()).unwrap();
        assert!((f.coefficients[0] - 2.0).abs() < 1e-14);
        assert!((f.coefficients[1] + 0.5).abs() < 1e-14);
    }

    #[test]
    fn refuses_bad_input_without_panicking() {
        let o = FitOptions::default();
        assert!(polynomial_fit(&[1.0, 2.0], &[1.0, 2.0], None, 2, &o).is_err());
        assert!(polynomial_fit(&[1.0, 1.0, 1.0], &[1.0, 2.0, 3.0], None, 1, &o).is_err());
        assert!(polynomial_fit(&[1.0, f64::NAN, 3.0], &[1.0, 2.0, 3.0], None, 1, &o).is_err());
        assert!(polynomial_fit(&[1.0, 2.0, 3.0], &[1.0, 2.0], None, 1, &o).is_err());
        assert!(polynomial_fit(&[1.0, 2.0, 3.0], &[1.0, 2.0, 3.0], None, 3, &o).is_err());
        let s = [1.0, 0.0, 1.0];
        assert!(polynomial_fit(&[1.0, 2.0, 3.0], &[1.0, 2.0, 3.0], Some(&s), 1, &o).is_err());
        assert!(levenberg_marquardt(|_| vec![], &[1.0], &LmOptions::default()).is_err());
    }

    #[test]
    fn levenberg_marquardt_fits_an_exponential() {
        // y = 3 exp(-0.7 t) sampled exactly: the minimiser must return the generating values.
        let t: Vec<f64> = (0..20).map(|i| i as f64 * 0.25).collect();
        let y: Vec<f64> = t.iter().map(|t| 3.0 * (-0.7 * t).exp()).collect();
        let fit = levenberg_marquardt(
            |p| {
                t.iter()
                    .zip(&y)
                    .map(|(t, y)| y - p[0] * (-p[1] * t).exp())
                    .collect()
            },
            &[1.0, 0.1],
            &LmOptions::default(),
        )
        .unwrap();
        assert!((fit.parameters[0] - 3.0).abs() < 1e-8);
        assert!((fit.parameters[1] - 0.7).abs() < 1e-8);
    }

    #[test]
    fn propagation_of_a_linear_function_is_exact() {
        let c = DMatrix::from_row_slice(2, 2, &[4.0, 1.0, 1.0, 9.0]);
        // f = 2 a - b: var = 4*4 + 9 - 2*2*1 = 21.
        let s = propagate_sigma(|p| 2.0 * p[0] - p[1], &[1.0, 2.0], &c);
        assert!((s - 21f64.sqrt()).abs() < 1e-9);
    }
}
