//! Level and calibration: the camera roll from the direction of gravity, and the calibration
//! unknown (gravity, flash interval or scale) from the common curvature of the flight arcs.
//!
//! Goes in: the timed path (world frame, metres and seconds as computed with the nominal scale
//! and interval), its flight arcs and the [`MeasureOptions`]. Comes out: the roll with its
//! 1-sigma, the path rotated into the level frame, and a [`Calibration`] (gravity, interval and
//! scale with their 1-sigma and source), the path rescaled to it.
//!
//! Method: the flight arcs are fitted jointly with one quadratic coefficient per coordinate
//! ([`flight::joint_quadratic`]); the common acceleration (c_x, c_y) points down, so the roll is
//! atan2(-c_x, -c_y), its sigma by first-order propagation. In the level frame the common
//! coefficient c of y gives g_apparent = -2c, which ties gravity g, flash interval dt and scale s
//! (they enter as g dt^2 s / 2 in pixels per flash^2): given any two, the third follows, and the
//! given ones' relative sigmas are added in quadrature.

use super::{MeasureOptions, Quantity, TimedPoint, Unknown, fail, flight};
use crate::core::words::count;
use crate::error::{Error, PhysicsError, Result};
use std::ops::Range;

/// Camera roll from the common acceleration of the flight arcs `flights` of `points`: (roll,
/// 1-sigma), radians, positive for a picture turned clockwise. None when a joint fit fails.
pub(crate) fn estimate_roll(
    points: &[TimedPoint],
    flights: &[Range<usize>],
    covariance: super::fit::CovarianceScaling,
) -> Option<(f64, f64)> {
    let ax = flight::joint_quadratic(points, flights, |p| p.x_m, covariance);
    let ay = flight::joint_quadratic(points, flights, |p| p.y_m, covariance);
    match (ax, ay) {
        (Ok((cx, sx)), Ok((cy, sy))) => {
            let rho = (-cx).atan2(-cy);
            let r2 = cx * cx + cy * cy;
            let sigma = ((cy * sx).powi(2) + (cx * sy).powi(2)).sqrt() / r2;
            Some((rho, sigma))
        }
        _ => None,
    }
}

/// Rotate every point by the roll `rho` (radians) into the level frame.
pub(crate) fn level(points: &mut [TimedPoint], rho: f64) {
    let (s, c) = rho.sin_cos();
    for p in points {
        let (x, y) = (p.x_m, p.y_m);
        p.x_m = c * x - s * y;
        p.y_m = s * x + c * y;
    }
}

/// Gravity, flash interval and scale after the calibration.
#[derive(Debug, Clone)]
pub(crate) struct Calibration {
    /// Gravity, m/s^2.
    pub gravity: Quantity,
    /// Flash interval, seconds.
    pub interval: Quantity,
    /// Scale, pixels per metre.
    pub scale: Quantity,
}

impl Calibration {
    /// Relative 1-sigma of the length and time units: (scale, interval).
    pub fn unit_sigmas(&self) -> (f64, f64) {
        (self.scale.relative_sigma(), self.interval.relative_sigma())
    }
}

/// The apparent gravity -2c and its 1-sigma from the joint fit of the flight arcs `flights` of
/// the levelled `points`; an error when the fit fails or the arcs do not fall.
fn apparent_gravity(
    points: &[TimedPoint],
    flights: &[Range<usize>],
    options: &MeasureOptions,
) -> Result<(f64, f64)> {
    let (c2, c2_sigma) = flight::joint_quadratic(points, flights, |p| p.y_m, options.covariance)
        .map_err(|e| fail(options, "joint fit of the flight arcs", e))?;
    let g_app = -2.0 * c2;
    let g_app_sigma = 2.0 * c2_sigma;
    if g_app.is_nan() || g_app <= 0.0 {
        return Err(Error::physics(&options.source, PhysicsError::ArcsDoNotFall));
    }
    Ok((g_app, g_app_sigma))
}

/// The flash interval the path was timed with: the given one, or the median of t_s / n over the
/// points after the first flash.
fn nominal_interval(points: &[TimedPoint], options: &MeasureOptions) -> Quantity {
    options.interval.clone().unwrap_or_else(|| {
        let mut r: Vec<f64> = points
            .iter()
            .filter(|p| p.n > 0)
            .map(|p| p.t_s / p.n as f64)
            .collect();
        r.sort_by(f64::total_cmp);
        Quantity::new(
            r.get(r.len() / 2).copied().unwrap_or(f64::NAN),
            0.0,
            "given",
        )
    })
}

/// Estimate the calibration unknown from the flight arcs `flights` of the levelled path `points`
/// and rescale `points` to it (times for the interval, lengths and sigmas for the scale).
/// `timed` is the path as given (its times set the nominal interval when none is given).
pub(crate) fn calibrate(
    points: &mut [TimedPoint],
    timed: &[TimedPoint],
    flights: &[Range<usize>],
    options: &MeasureOptions,
) -> Result<Calibration> {
    let (g_app, g_app_sigma) = apparent_gravity(points, flights, options)?;
    let g_hint = options.gravity.value;
    let interval_nominal = nominal_interval(timed, options);
    let scale_nominal = options
        .scale
        .clone()
        .unwrap_or_else(|| Quantity::new(f64::NAN, f64::NAN, "not given"));
    let arcs_word = format!(
        "estimated from {}",
        count(flights.len(), "flight arc", "flight arcs")
    );
    let rel_g = g_app_sigma / g_app;
    // The arcs' curvature is in metres per flash interval squared: the given scale's and
    // interval's own uncertainties pass into what is estimated from it.
    let rel_scale = scale_nominal.relative_sigma();
    let rel_interval = interval_nominal.relative_sigma();
    let calibration = match options.unknown {
        Unknown::Gravity => {
            let rel = (rel_g.powi(2) + rel_scale.powi(2) + (2.0 * rel_interval).powi(2)).sqrt();
            Calibration {
                gravity: Quantity::new(g_app, g_app * rel, arcs_word),
                interval: interval_nominal,
                scale: scale_nominal,
            }
        }
        Unknown::Interval => {
            let tau = (g_app / g_hint).sqrt();
            for p in points.iter_mut() {
                p.t_s *= tau;
            }
            let v = interval_nominal.value * tau;
            let rel =
                (rel_g.powi(2) + options.gravity.relative_sigma().powi(2) + rel_scale.powi(2))
                    .sqrt()
                    / 2.0;
            Calibration {
                gravity: options.gravity.clone(),
                interval: Quantity::new(v, v * rel, arcs_word),
                scale: scale_nominal,
            }
        }
        Unknown::Scale => {
            let lambda = g_hint / g_app;
            for p in points.iter_mut() {
                p.x_m *= lambda;
                p.y_m *= lambda;
                p.sigma_m *= lambda;
            }
            let v = scale_nominal.value / lambda;
            let rel = (rel_g.powi(2)
                + options.gravity.relative_sigma().powi(2)
                + (2.0 * rel_interval).powi(2))
            .sqrt();
            Calibration {
                gravity: options.gravity.clone(),
                interval: interval_nominal,
                scale: Quantity::new(v, v * rel, arcs_word),
            }
        }
    };
    Ok(calibration)
}
