//! Incline: the ball rolling from rest down a straight chute, and its launch into flight.
//!
//! Method: the slope direction is the principal axis of the incline points (total least squares
//! line); the distance along it is fitted by a parabola in t (constant acceleration). The launch
//! time is where the incline's velocity (x and y quadratics in t) and the first arc's velocity
//! agree best in least squares: position and velocity are continuous at the launch, only the
//! acceleration jumps, so matching velocities is well conditioned where matching positions (a
//! double root) is not. Rolling without slipping (standard rigid-body mechanics) gives a = g (sin
//! theta - c cos theta) / (1 + k) and v = sqrt(2 g h / (1 + k)) at c = 0, with k the
//! moment-of-inertia factor and c an effective rolling-loss coefficient, solved from the measured
//! a.

use super::TimedPoint;
use super::fit::{
    CovarianceScaling, FitOptions, PolyFit, block_diagonal, poly_slope, poly_value, polynomial_fit,
    propagate_sigma,
};
use super::flight::ArcFit;
use crate::error::Result;
use nalgebra::DMatrix;
use serde::Serialize;
use std::ops::Range;

/// A fitted incline.
pub(crate) struct InclineFit {
    pub range: Range<usize>,
    x: PolyFit,
    y: PolyFit,
    along: PolyFit,
    angle_rad: f64,
    angle_sigma_rad: f64,
    straightness_rms_m: f64,
    straightness_chi_square: f64,
}

/// Fit the incline on `points[range]`.
pub(crate) fn fit_incline(
    points: &[TimedPoint],
    range: Range<usize>,
    covariance: CovarianceScaling,
) -> Result<InclineFit> {
    let pts = &points[range.clone()];
    let n = pts.len() as f64;
    let t: Vec<f64> = pts.iter().map(|p| p.t_s).collect();
    let s: Vec<f64> = pts.iter().map(|p| p.sigma_m).collect();
    let x: Vec<f64> = pts.iter().map(|p| p.x_m).collect();
    let y: Vec<f64> = pts.iter().map(|p| p.y_m).collect();
    let o = FitOptions { covariance };
    let fx = polynomial_fit(&t, &x, Some(&s), 2, &o)?;
    let fy = polynomial_fit(&t, &y, Some(&s), 2, &o)?;
    let cx = x.iter().sum::<f64>() / n;
    let cy = y.iter().sum::<f64>() / n;
    let (mut sxx, mut syy, mut sxy) = (0.0, 0.0, 0.0);
    for p in pts {
        sxx += (p.x_m - cx).powi(2);
        syy += (p.y_m - cy).powi(2);
        sxy += (p.x_m - cx) * (p.y_m - cy);
    }
    let phi = 0.5 * (2.0 * sxy).atan2(sxx - syy);
    let mut u = [phi.cos(), phi.sin()];
    let last = pts[pts.len() - 1];
    if (last.x_m - pts[0].x_m) * u[0] + (last.y_m - pts[0].y_m) * u[1] < 0.0 {
        u = [-u[0], -u[1]];
    }
    let along: Vec<f64> = pts
        .iter()
        .map(|p| (p.x_m - cx) * u[0] + (p.y_m - cy) * u[1])
        .collect();
    let perp: Vec<f64> = pts
        .iter()
        .map(|p| -(p.x_m - cx) * u[1] + (p.y_m - cy) * u[0])
        .collect();
    let fa = polynomial_fit(&t, &along, Some(&s), 2, &o)?;
    let chi_perp: f64 = perp.iter().zip(&s).map(|(d, s)| (d / s).powi(2)).sum();
    let mean_var = s.iter().map(|v| v * v).sum::<f64>() / n;
    let inflate = if n > 2.0 {
        (chi_perp / (n - 2.0)).max(1.0)
    } else {
        1.0
    };
    let spread: f64 = along.iter().map(|a| a * a).sum();
    Ok(InclineFit {
        range,
        x: fx,
        y: fy,
        along: fa,
        angle_rad: (-u[1]).clamp(-1.0, 1.0).asin(),
        angle_sigma_rad: (mean_var * inflate / spread.max(1e-300)).sqrt(),
        straightness_rms_m: (perp.iter().map(|d| d * d).sum::<f64>() / n).sqrt(),
        straightness_chi_square: chi_perp,
    })
}

impl InclineFit {
    /// The fits of x(t) and y(t) over the incline (parabolas).
    pub fn position_fits(&self) -> (&PolyFit, &PolyFit) {
        (&self.x, &self.y)
    }
}

/// The ball leaving the incline.
#[derive(Debug, Clone, Serialize)]
pub struct Launch {
    /// Launch time, seconds (path time).
    pub t_s: f64,
    /// Its 1-sigma, seconds.
    pub t_sigma_s: f64,
    /// Centre x at launch, metres.
    pub x_m: f64,
    /// Centre y at launch, metres.
    pub y_m: f64,
    /// Velocity (x, y) at launch, m/s.
    pub velocity_mps: [f64; 2],
    /// Speed at launch, m/s.
    pub speed_mps: f64,
    /// Its 1-sigma, m/s.
    pub speed_sigma_mps: f64,
    /// Direction above horizontal, degrees (negative: downward).
    pub angle_deg: f64,
    /// Its 1-sigma, degrees.
    pub angle_sigma_deg: f64,
    /// Distance between the incline's and the arc's positions at the launch time, metres (zero
    /// when both phases meet; a miscounted flash between them shows here).
    pub position_gap_m: f64,
    /// Chi-square of that gap (x and y, each in its propagated 1-sigma; 2 degrees of freedom).
    pub position_gap_chi_square: f64,
    /// How far outside the span between the incline's last image and the arc's first the
    /// velocities agree best, in 1-sigmas of that time (0 inside): the launch time is then held
    /// at the span's end, and an image is probably in the wrong phase.
    pub outside_span_z: f64,
    /// How much the speed changes between that held time and where the velocities agree (m/s;
    /// 0 inside the span). An image near the launch fits either phase, so either time may be
    /// the launch: the shift joins the speed's 1-sigma in quadrature after the checks (which
    /// judge the statistical sigmas).
    pub hold_shift_mps: f64,
    /// The direction's shift likewise, degrees.
    pub hold_shift_deg: f64,
}

impl Launch {
    /// The launch with its hold shifts against the velocity `raw` where the phases' velocities
    /// agree (a non-finite velocity leaves them 0).
    pub(crate) fn with_hold_shift(mut self, raw: [f64; 2]) -> Launch {
        let speed = raw[0].hypot(raw[1]);
        let angle = raw[1].atan2(raw[0]).to_degrees();
        if speed.is_finite() && angle.is_finite() {
            self.hold_shift_mps = (speed - self.speed_mps).abs();
            self.hold_shift_deg = (angle - self.angle_deg).abs();
        }
        self
    }
}

/// Launch time from the parameter vector [incline x (3), incline y (3), arc x (2), arc y (3)].
fn launch_time(p: &[f64], bounds: (f64, f64)) -> f64 {
    let t = unclamped_launch_time(p, bounds);
    if t.is_finite() {
        t.clamp(bounds.0, bounds.1)
    } else {
        0.5 * (bounds.0 + bounds.1)
    }
}

/// Where the two phases' velocities agree best, before it is held between the phases' images.
fn unclamped_launch_time(p: &[f64], bounds: (f64, f64)) -> f64 {
    let bx = p[1] - p[7];
    let gx = 2.0 * p[2];
    let by = p[4] - p[9];
    let gy = 2.0 * (p[5] - p[10]);
    let den = gx * gx + gy * gy;
    if den > 0.0 {
        -(bx * gx + by * gy) / den
    } else {
        0.5 * (bounds.0 + bounds.1)
    }
}

/// Whether the velocities of an incline on `points[s..m]` and a flight arc on `points[m..e]`
/// agree best between the incline's last image and the arc's first (None when either phase is
/// too short to fit). An image taken a small part of a flash interval from the launch fits both
/// phases within its noise; only this test tells on which side of the launch it lies.
pub(crate) fn launch_in_span(points: &[TimedPoint], s: usize, m: usize, e: usize) -> Option<bool> {
    if m < s + 3 || e < m + 3 {
        return None;
    }
    let inc = fit_incline(points, s..m, CovarianceScaling::Sigmas).ok()?;
    let arc = super::flight::fit_arc(points, m..e, CovarianceScaling::Sigmas).ok()?;
    let mut p = Vec::new();
    for f in [&inc.x, &inc.y, &arc.x, &arc.y] {
        p.extend_from_slice(&f.coefficients);
    }
    let bounds = (points[m - 1].t_s, points[m].t_s);
    let t = unclamped_launch_time(&p, bounds);
    Some(t.is_finite() && t >= bounds.0 && t <= bounds.1)
}

/// Launch between the incline and the first arc, with 1-sigma from both fits' covariances.
pub(crate) fn launch(points: &[TimedPoint], inc: &InclineFit, arc: &ArcFit) -> Launch {
    let bounds = (points[inc.range.end - 1].t_s, points[arc.range.start].t_s);
    let mut p = Vec::new();
    for f in [&inc.x, &inc.y, &arc.x, &arc.y] {
        p.extend_from_slice(&f.coefficients);
    }
    let covariance = block_diagonal(&[
        &inc.x.covariance,
        &inc.y.covariance,
        &arc.x.covariance,
        &arc.y.covariance,
    ]);
    let velocity = move |p: &[f64]| {
        let t = launch_time(p, bounds);
        (t, [p[7], p[9] + 2.0 * p[10] * t])
    };
    let (t, v) = velocity(&p);
    let speed = |p: &[f64]| {
        let v = velocity(p).1;
        v[0].hypot(v[1])
    };
    let angle = |p: &[f64]| {
        let v = velocity(p).1;
        v[1].atan2(v[0]).to_degrees()
    };
    let gap = move |p: &[f64], axis: usize| {
        let t = launch_time(p, bounds);
        let (inc, arc) = if axis == 0 {
            (&p[0..3], &p[6..8])
        } else {
            (&p[3..6], &p[8..11])
        };
        poly_value(inc, t) - poly_value(arc, t)
    };
    let (gap_x, gap_y) = (gap(&p, 0), gap(&p, 1));
    let sigma_x = propagate_sigma(|p| gap(p, 0), &p, &covariance);
    let sigma_y = propagate_sigma(|p| gap(p, 1), &p, &covariance);
    Launch {
        t_s: t,
        t_sigma_s: propagate_sigma(|p| velocity(p).0, &p, &covariance),
        x_m: poly_value(&arc.x.coefficients, t),
        y_m: poly_value(&arc.y.coefficients, t),
        velocity_mps: v,
        speed_mps: v[0].hypot(v[1]),
        speed_sigma_mps: propagate_sigma(speed, &p, &covariance),
        angle_deg: v[1].atan2(v[0]).to_degrees(),
        angle_sigma_deg: propagate_sigma(angle, &p, &covariance),
        position_gap_m: gap_x.hypot(gap_y),
        position_gap_chi_square: (gap_x / sigma_x).powi(2) + (gap_y / sigma_y).powi(2),
        outside_span_z: {
            let raw = |p: &[f64]| unclamped_launch_time(p, bounds);
            let t_raw = raw(&p);
            let outside = (bounds.0 - t_raw).max(t_raw - bounds.1).max(0.0);
            outside / propagate_sigma(raw, &p, &covariance)
        },
        hold_shift_mps: 0.0,
        hold_shift_deg: 0.0,
    }
    .with_hold_shift({
        let t_raw = unclamped_launch_time(&p, bounds);
        [p[7], p[9] + 2.0 * p[10] * t_raw]
    })
}

/// The incline measured against ideal rolling without slipping.
#[derive(Debug, Clone, Serialize)]
pub struct InclineResult {
    /// First flash index on the incline.
    pub first_n: usize,
    /// Last flash index on the incline.
    pub last_n: usize,
    /// Slope angle above horizontal, degrees (from the path).
    pub angle_deg: f64,
    /// Its 1-sigma, degrees.
    pub angle_sigma_deg: f64,
    /// Root-mean-square distance of the points from a straight line, metres.
    pub straightness_rms_m: f64,
    /// Chi-square of those distances per degree of freedom (points - 2), in the points' sigmas.
    pub straightness_reduced_chi_square: f64,
    /// Chi-square per degree of freedom of the constant-acceleration fit along the slope.
    pub along_reduced_chi_square: f64,
    /// Points on the incline.
    pub points: usize,
    /// Measured acceleration along the slope, m/s^2.
    pub accel_mps2: f64,
    /// Its 1-sigma, m/s^2.
    pub accel_sigma_mps2: f64,
    /// Speed along the slope at the launch time, m/s.
    pub end_speed_mps: f64,
    /// Its 1-sigma, m/s.
    pub end_speed_sigma_mps: f64,
    /// Time the ball was at rest, extrapolated from the fit, seconds (path time).
    pub rest_t_s: f64,
    /// Height the centre dropped from rest to the launch, metres.
    pub drop_height_m: f64,
    /// Moment-of-inertia factor k = I / (m r^2) used.
    pub inertia_factor: f64,
    /// Ideal rolling acceleration g sin(theta) / (1 + k), m/s^2.
    pub ideal_accel_mps2: f64,
    /// Ideal end speed sqrt(2 g h / (1 + k)) for the measured drop height, m/s.
    pub ideal_end_speed_mps: f64,
    /// Effective rolling-loss coefficient c from a = g (sin theta - c cos theta) / (1 + k).
    pub rolling_loss: f64,
    /// Its 1-sigma.
    pub rolling_loss_sigma: f64,
}

/// Compare the incline with rolling without slipping for gravity `g` (1-sigma `g_sigma`) and
/// inertia factor `k`, up to the launch time `t_launch_s`.
pub(crate) fn incline_result(
    points: &[TimedPoint],
    inc: &InclineFit,
    t_launch_s: f64,
    g: f64,
    g_sigma: f64,
    k: f64,
) -> InclineResult {
    let a = &inc.along.coefficients;
    let accel = 2.0 * a[2];
    let end_speed = poly_slope(a, t_launch_s);
    let rest_t = -a[1] / (2.0 * a[2]);
    let st = inc.angle_rad.sin();
    let drop = end_speed * end_speed / (4.0 * a[2]) * st;
    let mut p = a.clone();
    p.extend([inc.angle_rad, g]);
    let extra = DMatrix::from_diagonal(&nalgebra::DVector::from_vec(vec![
        inc.angle_sigma_rad.powi(2),
        g_sigma * g_sigma,
    ]));
    let covariance = block_diagonal(&[&inc.along.covariance, &extra]);
    let loss = |p: &[f64]| (p[3].sin() - 2.0 * p[2] * (1.0 + k) / p[4]) / p[3].cos();
    InclineResult {
        first_n: points[inc.range.start].n,
        last_n: points[inc.range.end - 1].n,
        angle_deg: inc.angle_rad.to_degrees(),
        angle_sigma_deg: inc.angle_sigma_rad.to_degrees(),
        straightness_rms_m: inc.straightness_rms_m,
        straightness_reduced_chi_square: inc.straightness_chi_square
            / (inc.range.len().saturating_sub(2).max(1)) as f64,
        along_reduced_chi_square: inc.along.chi_square / inc.along.dof.max(1) as f64,
        points: inc.range.len(),
        accel_mps2: accel,
        accel_sigma_mps2: 2.0 * inc.along.sigma(2),
        end_speed_mps: end_speed,
        end_speed_sigma_mps: propagate_sigma(|p| poly_slope(&p[..3], t_launch_s), &p, &covariance),
        rest_t_s: rest_t,
        drop_height_m: drop,
        inertia_factor: k,
        ideal_accel_mps2: g * st / (1.0 + k),
        ideal_end_speed_mps: (2.0 * g * drop.max(0.0) / (1.0 + k)).sqrt(),
        rolling_loss: loss(&p),
        rolling_loss_sigma: propagate_sigma(loss, &p, &covariance),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::physics::flight::fit_arc;

    /// Exact kinematics (no noise; our test case): a ball rolling from rest at t = -0.3 s down a
    /// 50 degree incline at 4.5 m/s^2, launched at 0.49 s into vacuum flight (g 9.80665), seen
    /// every 0.05 s. The image at 0.50 s, 0.2 interval after the launch, is put on the incline
    /// (it fits either phase within a centre sigma of 0.1 mm).
    #[test]
    fn a_launch_held_at_a_flight_image_carries_its_hold_shift() {
        let (theta, a, t0, t_launch, g) = (50f64.to_radians(), 4.5, -0.3, 0.49, 9.80665);
        let u = [theta.cos(), -theta.sin()];
        let v_launch = a * (t_launch - t0);
        let s_launch = 0.5 * a * (t_launch - t0) * (t_launch - t0);
        let points: Vec<TimedPoint> = (0..20)
            .map(|n| {
                let t = n as f64 * 0.05;
                let (x, y) = if t <= t_launch {
                    let s = 0.5 * a * (t - t0) * (t - t0);
                    (s * u[0], s * u[1])
                } else {
                    let d = t - t_launch;
                    (
                        s_launch * u[0] + v_launch * u[0] * d,
                        s_launch * u[1] + v_launch * u[1] * d - 0.5 * g * d * d,
                    )
                };
                TimedPoint {
                    n,
                    t_s: t,
                    x_m: x,
                    y_m: y,
                    sigma_m: 1e-4,
                }
            })
            .collect();
        let inc = fit_incline(&points, 0..11, CovarianceScaling::Sigmas).unwrap();
        let arc = fit_arc(&points, 11..20, CovarianceScaling::Sigmas).unwrap();
        let l = launch(&points, &inc, &arc);
        // Held at the image at 0.50 s, the speed is the flight's there, not at the launch.
        assert!((l.t_s - 0.5).abs() < 1e-12, "held at {}", l.t_s);
        let error = (l.speed_mps - v_launch).abs();
        assert!(
            error > 3.0 * l.speed_sigma_mps,
            "{error} against {}",
            l.speed_sigma_mps
        );
        // With the shift, inside 2 sigma (the sweep's coverage interval).
        let sigma = l.speed_sigma_mps.hypot(l.hold_shift_mps);
        assert!(error < 2.0 * sigma, "{error} against {sigma}");
    }
}
