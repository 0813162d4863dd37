//! The quadratic-drag model of the flight arcs and the results it drives when drag is fitted.
//!
//! Goes in: the timed path (metres, seconds), its fitted flight arcs (the vacuum fits start the
//! search) and, when gravity is not estimated, the gravity to hold. Comes out: a `DragModel`:
//! the joint fit of a = (0, -g) - D |v| v ([`super::dynamics`], RK4) with per arc the state at
//! its mean time, a common D and (when estimated) a common g, their covariance, the chi-square of
//! every arc; and from it the contacts of the bounces (where two arcs' trajectories meet, and
//! where each reaches the contact level), each bounce's restitution e = -v_out_y / v_in_y from
//! the model's velocities at the contact level (Newton's experimental law), and the first arc's
//! velocity at the launch.
//!
//! Method: Levenberg-Marquardt on the weighted residuals of every centre (Marquardt 1963); a
//! contact is found by marching the model in RK4 steps until the height crosses the level and
//! refining the crossing time by Newton's method on the model's own vertical velocity; every
//! derived quantity's 1-sigma is first-order propagation of the fit covariance (a central-
//! difference Jacobian of the quantity with respect to the fit parameters).

use super::TimedPoint;
use super::bounce::Bounce;
use super::dynamics::{QuadraticDrag, SpeedNorm, State};
use super::fit::{CovarianceScaling, LmOptions, block_diagonal, levenberg_marquardt};
use super::fit::{PolyFit, gradient, poly_slope, poly_value, propagate_sigma};
use super::flight::ArcFit;
use super::incline::Launch;
use crate::error::Result;
use nalgebra::DMatrix;
use serde::Serialize;
use std::ops::Range;

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
    /// Its degrees of freedom (2 per centre less the parameters).
    pub dof: usize,
}

/// Largest RK4 step of the drag model, seconds.
const DRAG_STEP_S: f64 = 5e-4;

/// Newton refinements of a crossing time (each squares the error; three reach rounding).
const NEWTON_STEPS: usize = 4;

/// The fitted drag model of the flight arcs.
#[derive(Debug, Clone)]
pub(crate) struct DragModel {
    /// The summary reported as `drag`.
    pub summary: DragFit,
    /// The arcs' ranges of the path, in time order.
    pub ranges: Vec<Range<usize>>,
    /// Per arc: the model's chi-square over its centres and its degrees of freedom (2 per
    /// centre less its 4 state parameters and a share, counted as 1, of the common ones).
    pub arc_chi_square: Vec<(f64, usize)>,
    params: Vec<f64>,
    covariance: DMatrix<f64>,
    refs: Vec<f64>,
    held_gravity: Option<f64>,
}

/// The model of the fit parameters `p` for `na` arcs (gravity `held` or the last parameter).
fn dynamics_of(p: &[f64], na: usize, held: Option<f64>) -> QuadraticDrag {
    QuadraticDrag {
        gravity_mps2: held.unwrap_or_else(|| p.get(4 * na + 1).copied().unwrap_or(f64::NAN)),
        drag_per_m: p[4 * na],
        speed: SpeedNorm::Hypot,
    }
}

/// Weighted residuals of the model `p` at every centre of every arc (x then y per centre).
fn residuals(
    points: &[TimedPoint],
    ranges: &[Range<usize>],
    refs: &[f64],
    held: Option<f64>,
    p: &[f64],
) -> Vec<f64> {
    let dynamics = dynamics_of(p, ranges.len(), held);
    let mut out = Vec::new();
    for (k, r) in ranges.iter().enumerate() {
        let s0 = [p[4 * k], p[4 * k + 1], p[4 * k + 2], p[4 * k + 3]];
        let pts = &points[r.clone()];
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
}

/// Joint drag fit of the flight arcs: per arc the state at its mean time (4 parameters), a common
/// drag coefficient and, when `gravity` is None, a common gravity. Starts from the vacuum fits.
pub(crate) fn fit_drag(
    points: &[TimedPoint],
    arcs: &[ArcFit],
    gravity: Option<f64>,
    vacuum_gravity: f64,
    covariance: CovarianceScaling,
) -> Result<DragModel> {
    let ranges: Vec<Range<usize>> = arcs.iter().map(|a| a.range.clone()).collect();
    let refs: Vec<f64> = ranges
        .iter()
        .map(|r| points[r.clone()].iter().map(|q| q.t_s).sum::<f64>() / r.len() as f64)
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
    let f = |p: &[f64]| residuals(points, &ranges, &refs, gravity, p);
    let fit = levenberg_marquardt(
        f,
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
    let r = f(&fit.parameters);
    let mut at = 0;
    let arc_chi_square = ranges
        .iter()
        .map(|range| {
            let m = 2 * range.len();
            let chi2: f64 = r[at..at + m].iter().map(|v| v * v).sum();
            at += m;
            (chi2, m.saturating_sub(5))
        })
        .collect();
    Ok(DragModel {
        summary: DragFit {
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
            dof: fit.dof,
        },
        ranges,
        arc_chi_square,
        params: fit.parameters,
        covariance: fit.covariance,
        refs,
        held_gravity: gravity,
    })
}

/// Where the model of arc `k` reaches the contact: its time and state.
type Reach = (f64, State);

impl DragModel {
    /// The index of the arc over `range` of the path, if it is in the fit.
    pub fn arc_of(&self, range: &Range<usize>) -> Option<usize> {
        self.ranges.iter().position(|r| r == range)
    }

    fn dynamics(&self, p: &[f64]) -> QuadraticDrag {
        dynamics_of(p, self.ranges.len(), self.held_gravity)
    }

    /// State of arc `k` at time `t` for the parameters `p`.
    fn state_at(&self, p: &[f64], k: usize, t: f64) -> State {
        let s0 = [p[4 * k], p[4 * k + 1], p[4 * k + 2], p[4 * k + 3]];
        self.dynamics(p).advance(s0, t - self.refs[k], DRAG_STEP_S)
    }

    /// Where arc `k` first reaches the height `level` marching from its reference time towards
    /// `until_t` (forward: descending to the contact; backward: the contact it rose from).
    /// None when it starts below the level or does not reach it by `until_t`.
    fn reach_level(&self, p: &[f64], k: usize, level: f64, until_t: f64) -> Option<Reach> {
        let dynamics = self.dynamics(p);
        let mut t = self.refs[k];
        let mut s = [p[4 * k], p[4 * k + 1], p[4 * k + 2], p[4 * k + 3]];
        if s[1].is_nan() || s[1] <= level {
            return None;
        }
        let h = DRAG_STEP_S.copysign(until_t - t);
        let steps = ((until_t - t) / h).ceil().max(0.0) as usize;
        for _ in 0..steps {
            let next = dynamics.step(s, h);
            if next[1] <= level {
                let mut tau = h * (s[1] - level) / (s[1] - next[1]);
                for _ in 0..NEWTON_STEPS {
                    let at = dynamics.step(s, tau);
                    tau -= (at[1] - level) / at[3];
                }
                return tau.is_finite().then(|| (t + tau, dynamics.step(s, tau)));
            }
            s = next;
            t += h;
        }
        None
    }

    /// Where the trajectories of arcs `k` and `k + 1` meet in the gap `(t_a, t_b)` between
    /// their images (searched up to a gap's length either side): the time and arc `k`'s state.
    fn meet(&self, p: &[f64], k: usize, gap: (f64, f64)) -> Option<Reach> {
        let width = (gap.1 - gap.0).abs() + 1e-9;
        let (from, to) = (gap.0.min(gap.1) - width, gap.0.max(gap.1) + width);
        let dynamics = self.dynamics(p);
        let (mut a, mut b) = (self.state_at(p, k, from), self.state_at(p, k + 1, from));
        if a[1].is_nan() || b[1].is_nan() || a[1] <= b[1] {
            return None;
        }
        let mut t = from;
        let steps = ((to - from) / DRAG_STEP_S).ceil() as usize;
        for _ in 0..steps {
            let (na, nb) = (dynamics.step(a, DRAG_STEP_S), dynamics.step(b, DRAG_STEP_S));
            if na[1] <= nb[1] {
                let d0 = a[1] - b[1];
                let mut tau = DRAG_STEP_S * d0 / (d0 - (na[1] - nb[1]));
                for _ in 0..NEWTON_STEPS {
                    let (sa, sb) = (dynamics.step(a, tau), dynamics.step(b, tau));
                    tau -= (sa[1] - sb[1]) / (sa[3] - sb[3]);
                }
                return tau.is_finite().then(|| (t + tau, dynamics.step(a, tau)));
            }
            a = na;
            b = nb;
            t += DRAG_STEP_S;
        }
        None
    }

    /// The contacts of the bounces after arcs `ks` (each between arc k and k + 1, `gaps` the
    /// times of the last image before and the first after): per contact its x and height, and
    /// the covariance of the heights. None when any pair of trajectories does not meet.
    pub fn contacts(
        &self,
        ks: &[usize],
        gaps: &[(f64, f64)],
    ) -> Option<(Vec<[f64; 2]>, DMatrix<f64>)> {
        let mut at = Vec::with_capacity(ks.len());
        let mut jac = DMatrix::zeros(ks.len(), self.params.len());
        for (i, (&k, &gap)) in ks.iter().zip(gaps).enumerate() {
            let (_, s) = self.meet(&self.params, k, gap)?;
            at.push([s[0], s[1]]);
            let height = |p: &[f64]| self.meet(p, k, gap).map_or(f64::NAN, |m| m.1[1]);
            let g = gradient(height, &self.params, &self.covariance);
            if g.iter().any(|v| !v.is_finite()) {
                return None;
            }
            jac.row_mut(i).copy_from(&g.transpose());
        }
        let cov = &jac * &self.covariance * jac.transpose();
        Some((at, cov))
    }

    /// The bounce between arcs `k` and `k + 1` at the contact level `level_m` (floor + radius,
    /// 1-sigma `level_sigma_m`) from the model's velocities where each arc reaches the level.
    /// Fields the model does not give are the vacuum bounce's; its apex and flight-time
    /// cross-checks, which hold in vacuum only, are left out. None when an arc does not reach
    /// the level between the two arcs' reference times.
    pub fn bounce(
        &self,
        k: usize,
        level_m: f64,
        level_sigma_m: f64,
        vacuum: &Bounce,
    ) -> Option<Bounce> {
        let np = self.params.len();
        let mut q = self.params.clone();
        q.push(level_m);
        let level_var = DMatrix::from_element(1, 1, level_sigma_m.max(0.0).powi(2));
        let cov = block_diagonal(&[&self.covariance, &level_var]);
        let (t_lo, t_hi) = (self.refs[k], self.refs[k + 1]);
        let contact = |q: &[f64]| -> Option<(Reach, Reach)> {
            let (p, level) = (&q[..np], q[np]);
            Some((
                self.reach_level(p, k, level, t_hi)?,
                self.reach_level(p, k + 1, level, t_lo)?,
            ))
        };
        let ((t_in, s_in), (t_out, s_out)) = contact(&q)?;
        let of = |f: fn(&Reach, &Reach) -> f64| {
            move |q: &[f64]| contact(q).map_or(f64::NAN, |(a, b)| f(&a, &b))
        };
        let e = of(|a, b| -b.1[3] / a.1[3]);
        let ratio = of(|a, b| b.1[2] / a.1[2]);
        let normal = of(|a, _| a.1[3].abs());
        let gap = of(|a, b| b.0 - a.0);
        let sideways = s_in[2].abs() > 1e-3 * s_in[3].abs().max(1e-9);
        let model_chi = [self.arc_chi_square[k], self.arc_chi_square[k + 1]];
        Some(Bounce {
            t_s: 0.5 * (t_in + t_out),
            x_m: s_in[0],
            restitution: e(&q),
            restitution_sigma: propagate_sigma(e, &q, &cov),
            impact_speed_mps: s_in[2].hypot(s_in[3]),
            rebound_speed_mps: s_out[2].hypot(s_out[3]),
            impact_normal_speed_mps: s_in[3].abs(),
            impact_normal_speed_sigma_mps: propagate_sigma(normal, &q, &cov),
            impact_velocity_mps: [s_in[2], s_in[3]],
            rebound_velocity_mps: [s_out[2], s_out[3]],
            tangential_ratio: sideways.then(|| ratio(&q)),
            tangential_ratio_sigma: sideways.then(|| propagate_sigma(ratio, &q, &cov)),
            restitution_from_apex: None,
            restitution_from_flight_times: None,
            apex_check_z: None,
            flight_time_check_z: None,
            contact_gap_s: t_out - t_in,
            contact_gap_sigma_s: propagate_sigma(gap, &q, &cov),
            drag_model: Some(super::bounce::ModelFit {
                chi_square: model_chi[0].0 + model_chi[1].0,
                dof: model_chi[0].1 + model_chi[1].1,
            }),
            ..vacuum.clone()
        })
    }

    /// The launch off the incline `inc` into arc `k`: the time where the incline's velocity
    /// and the model's agree best (Newton steps on their difference from the vacuum launch's
    /// time, held within `bounds`: the incline's last image and the arc's first), the model's
    /// position and velocity there, the gap between the incline's position and the model's,
    /// each 1-sigma propagated from the incline's fits and the drag fit together.
    pub fn launch(
        &self,
        k: usize,
        inc: (&PolyFit, &PolyFit),
        bounds: (f64, f64),
        vacuum: &Launch,
    ) -> Launch {
        let mut q = inc.0.coefficients.clone();
        q.extend_from_slice(&inc.1.coefficients);
        q.extend_from_slice(&self.params);
        let cov = block_diagonal(&[&inc.0.covariance, &inc.1.covariance, &self.covariance]);
        let t0 = vacuum.t_s;
        let (lo, hi) = (bounds.0.min(bounds.1), bounds.0.max(bounds.1));
        let raw = |q: &[f64]| {
            let (p, dynamics) = (&q[6..], self.dynamics(&q[6..]));
            let mut t = t0;
            for _ in 0..NEWTON_STEPS {
                let s = self.state_at(p, k, t);
                let a = dynamics.accel([s[2], s[3]]);
                let dv = [
                    poly_slope(&q[0..3], t) - s[2],
                    poly_slope(&q[3..6], t) - s[3],
                ];
                let da = [2.0 * q[2] - a[0], 2.0 * q[5] - a[1]];
                t -= (dv[0] * da[0] + dv[1] * da[1]) / (da[0] * da[0] + da[1] * da[1]);
            }
            t
        };
        let time = |q: &[f64]| {
            let t = raw(q);
            if t.is_finite() { t.clamp(lo, hi) } else { t0 }
        };
        let state = |q: &[f64]| self.state_at(&q[6..], k, time(q));
        let speed = |q: &[f64]| {
            let s = state(q);
            s[2].hypot(s[3])
        };
        let angle = |q: &[f64]| {
            let s = state(q);
            s[3].atan2(s[2]).to_degrees()
        };
        let gap = |q: &[f64], axis: usize| {
            let t = time(q);
            poly_value(&q[3 * axis..3 * axis + 3], t) - self.state_at(&q[6..], k, t)[axis]
        };
        let (t, s) = (time(&q), state(&q));
        let (gap_x, gap_y) = (gap(&q, 0), gap(&q, 1));
        let sigma_x = propagate_sigma(|q| gap(q, 0), &q, &cov);
        let sigma_y = propagate_sigma(|q| gap(q, 1), &q, &cov);
        let t_raw = raw(&q);
        let outside = (lo - t_raw).max(t_raw - hi).max(0.0);
        Launch {
            t_s: t,
            t_sigma_s: propagate_sigma(time, &q, &cov),
            x_m: s[0],
            y_m: s[1],
            velocity_mps: [s[2], s[3]],
            speed_mps: s[2].hypot(s[3]),
            speed_sigma_mps: propagate_sigma(speed, &q, &cov),
            angle_deg: s[3].atan2(s[2]).to_degrees(),
            angle_sigma_deg: propagate_sigma(angle, &q, &cov),
            position_gap_m: gap_x.hypot(gap_y),
            position_gap_chi_square: (gap_x / sigma_x).powi(2) + (gap_y / sigma_y).powi(2),
            outside_span_z: if outside > 0.0 {
                outside / propagate_sigma(raw, &q, &cov)
            } else {
                0.0
            },
            hold_shift_mps: 0.0,
            hold_shift_deg: 0.0,
        }
        .with_hold_shift({
            let s = self.state_at(&q[6..], k, t_raw);
            [s[2], s[3]]
        })
    }
}

impl DragModel {
    /// The model's gravity as the headline quantity, its sigma widened by the units' own.
    pub fn gravity(&self, units: &super::UnitSigmas) -> super::Quantity {
        let (g, sigma) = (self.summary.gravity_mps2, self.summary.gravity_sigma_mps2);
        super::Quantity::new(
            g,
            units.widen(g, sigma, 2.0),
            format!(
                "estimated with the drag model from {}",
                crate::core::words::count(self.ranges.len(), "flight arc", "flight arcs")
            ),
        )
    }
}

/// Iterations of the one-arc drag fit that scores a phase boundary.
const ARC_ITERATIONS: usize = 30;

/// Chi-square of one arc `points[range]` fitted alone with the drag model, gravity held at
/// `gravity_mps2` and its own drag coefficient (infinite when the fit fails): the cost of a
/// flight in the search for phase boundaries. Starts from the arc's vacuum fit.
pub(crate) fn arc_chi_square(points: &[TimedPoint], range: Range<usize>, gravity_mps2: f64) -> f64 {
    let Ok(vacuum) = super::flight::fit_arc(points, range.clone(), CovarianceScaling::Sigmas)
    else {
        return f64::INFINITY;
    };
    let pts = &points[range.clone()];
    let m = pts.iter().map(|q| q.t_s).sum::<f64>() / pts.len() as f64;
    let start = [
        vacuum.x.value(m),
        vacuum.y.value(m),
        vacuum.x.slope(m),
        vacuum.y.slope(m),
        0.0,
    ];
    let ranges = [range];
    let refs = [m];
    let f = |p: &[f64]| residuals(points, &ranges, &refs, Some(gravity_mps2), p);
    let options = LmOptions {
        max_iterations: ARC_ITERATIONS,
        ..LmOptions::default()
    };
    levenberg_marquardt(f, &start, &options).map_or(f64::INFINITY, |fit| fit.chi_square)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A model of one arc with the state `s0` at t = 0, no drag and gravity held at `g`.
    fn vacuum_model(s0: State, g: f64) -> DragModel {
        DragModel {
            summary: DragFit {
                drag_per_m: 0.0,
                drag_sigma_per_m: 0.0,
                gravity_mps2: g,
                gravity_sigma_mps2: 0.0,
                arcs: 1,
                reduced_chi_square: 0.0,
                dof: 0,
            },
            ranges: std::iter::once(0..4).collect(),
            arc_chi_square: vec![(0.0, 3)],
            params: vec![s0[0], s0[1], s0[2], s0[3], 0.0],
            covariance: DMatrix::identity(5, 5) * 1e-8,
            refs: vec![0.0],
            held_gravity: Some(g),
        }
    }

    #[test]
    fn the_contact_level_is_reached_where_free_fall_says() {
        // Without drag the model is free fall: from rest at height h the ball falls to the level
        // L in t = sqrt(2 (h - L) / g) at speed g t (constant-acceleration kinematics).
        let g = 9.81;
        let m = vacuum_model([0.0, 1.0, 0.5, 0.0], g);
        let (t, s) = m.reach_level(&m.params, 0, 0.02, 5.0).unwrap();
        let t_true = (2.0 * 0.98 / g).sqrt();
        assert!((t - t_true).abs() < 1e-9, "{t} vs {t_true}");
        assert!((s[3] + g * t_true).abs() < 1e-8, "vy {}", s[3]);
        assert!((s[0] - 0.5 * t_true).abs() < 1e-9, "x {}", s[0]);
        // Backwards in time the same ball rose through the level, as fast, as long before.
        let (t, s) = m.reach_level(&m.params, 0, 0.02, -5.0).unwrap();
        assert!((t + t_true).abs() < 1e-9, "{t}");
        assert!((s[3] - g * t_true).abs() < 1e-8, "vy {}", s[3]);
        // Not reached within the time allowed, or started below the level: none.
        assert!(m.reach_level(&m.params, 0, 0.02, 0.1).is_none());
        assert!(m.reach_level(&m.params, 0, 1.5, 5.0).is_none());
    }
}
