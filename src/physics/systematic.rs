//! The relative systematic 1-sigma of the measured physics values.
//!
//! Goes in: a finished [`Measurement`] and which calibration quantity it estimated. Comes out:
//! the same measurement with [`SYSTEMATIC_REL`] of each measured value added in quadrature to
//! its 1-sigma: the estimated one of gravity, flash interval and scale (a given one stays as
//! given), each bounce's restitution and tangential ratio, the launch speed, the incline's
//! acceleration and end speed. The launch's speed and angle also take their hold shifts (how
//! much they change between the launch time held between the phases' images and where the
//! phases' velocities agree: an image near the launch fits either phase). The self-checks are
//! judged before, on the statistical sigmas alone, so these terms never hide a disagreement
//! (the acceptance verdicts test values only, not sigmas).
//!
//! Why: the sigmas of the fits come from the centres' scatter and the arcs' residuals. What
//! is common to many images and does not average out (the edge's place on a blurred,
//! compressed limb that changes along the path with speed and light, the centre of a sphere's
//! image against its projected centre under perspective, a slightly rolled or tilted plane)
//! biases a value by about 1e-3 of itself while its statistical sigma can be 1e-4. The value
//! is common practice, no source; the sweep bench (bench/SWEEP_RESULTS.md, two draws of 300
//! shots) measured the relative error of the values it scores right at a 90th percentile of
//! 1e-3 to 3e-3, and counts how often the truth falls inside 2 sigma with this term.

use super::{Measurement, Unknown};

/// Relative systematic 1-sigma of a measured physics value.
pub const SYSTEMATIC_REL: f64 = 1e-3;

/// `sigma` with `SYSTEMATIC_REL` of `value` added in quadrature (a non-finite pair unchanged).
fn widened(value: f64, sigma: f64) -> f64 {
    if value.is_finite() && sigma.is_finite() {
        sigma.hypot(SYSTEMATIC_REL * value)
    } else {
        sigma
    }
}

/// Add the relative systematic to every measured value of `m` (see the module doc).
pub(crate) fn add_systematic(m: &mut Measurement, unknown: Unknown) {
    let estimated = match unknown {
        Unknown::Gravity => &mut m.gravity_mps2,
        Unknown::Interval => &mut m.flash_interval_s,
        Unknown::Scale => &mut m.scale_px_per_m,
    };
    estimated.sigma = widened(estimated.value, estimated.sigma);
    if let (Some(d), Unknown::Gravity) = (m.drag.as_mut(), unknown) {
        d.gravity_sigma_mps2 = widened(d.gravity_mps2, d.gravity_sigma_mps2);
    }
    for b in &mut m.bounces {
        b.restitution_sigma = widened(b.restitution, b.restitution_sigma);
        if let (Some(r), Some(s)) = (b.tangential_ratio, b.tangential_ratio_sigma.as_mut()) {
            *s = widened(r, *s);
        }
    }
    if let Some(l) = m.launch.as_mut() {
        l.speed_sigma_mps = widened(l.speed_mps, l.speed_sigma_mps.hypot(l.hold_shift_mps));
        l.angle_sigma_deg = l.angle_sigma_deg.hypot(l.hold_shift_deg);
    }
    if let Some(i) = m.incline.as_mut() {
        i.accel_sigma_mps2 = widened(i.accel_mps2, i.accel_sigma_mps2);
        i.end_speed_sigma_mps = widened(i.end_speed_mps, i.end_speed_sigma_mps);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_systematic_joins_in_quadrature() {
        // 3-4-5: a statistical 4e-3 on a value of 3 gets 3e-3, so 5e-3.
        assert!((widened(3.0, 4e-3) - 5e-3).abs() < 1e-12);
        assert!(widened(f64::NAN, 0.1).eq(&0.1));
        assert!(widened(1.0, f64::INFINITY).is_infinite());
    }
}
