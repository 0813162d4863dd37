//! Checks of the spin read from the ball's markings against the path's motion.
//!
//! Goes in: spin rates (turns per second, counter-clockwise positive as seen) with their sigmas,
//! the slip read on an incline, and a bounce's horizontal velocity change with the ball's radius.
//! Comes out: the moment-of-inertia factor a bounce implies, and the checks `rolling_slip` and
//! `spin_at_bounce`.
//!
//! Method: at a bounce the floor's forces act through the contact point, so the ball's angular
//! momentum about that point is kept: k r omega - vx is the same before and after, and
//! omega_out - omega_in = (vx_out - vx_in) / (k r), with k = I / (m r^2) (rigid-body impact;
//! Garwin 1969, Am. J. Phys. 37, 88, from memory). A real ball's k lies between a solid sphere's
//! 2/5 and a thin shell's 2/3 (standard rigid-body formulas).

use super::checks::{Check, CheckOutcome, check};
use std::f64::consts::TAU;

/// The band of moment-of-inertia factors a ball can have: a solid sphere's 2/5 to a thin shell's
/// 2/3, widened by 10 % for a dense core or a heavy skin (common practice, no source).
pub const INERTIA_BAND: (f64, f64) = (0.36, 0.73);

/// A slip under this passes whatever its sigma: a ball on a real incline creeps by about a
/// percent (common practice, no source).
const SLIP_TOLERANCE: f64 = 0.02;

/// Sigmas of disagreement above which a spin check warns.
const WARN_Z: f64 = 3.0;

/// The spin on either side of a bounce with the velocity change there.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct BounceSpin {
    /// Spin before, turns per second, and its 1-sigma.
    pub before_hz: (f64, f64),
    /// Spin after, turns per second, and its 1-sigma.
    pub after_hz: (f64, f64),
    /// Horizontal velocity change vx_out - vx_in, m/s, and its 1-sigma.
    pub tangential_change_mps: (f64, f64),
    /// The ball's radius, metres.
    pub radius_m: f64,
}

impl BounceSpin {
    /// The spin change omega_out - omega_in, rad/s, and its 1-sigma.
    pub fn change_rad_per_s(&self) -> (f64, f64) {
        let (a, sa) = self.after_hz;
        let (b, sb) = self.before_hz;
        (TAU * (a - b), TAU * sa.hypot(sb))
    }

    /// k = (vx_out - vx_in) / (r (omega_out - omega_in)) and its 1-sigma, when both changes are
    /// over three sigmas (otherwise the ratio says nothing).
    pub fn inertia_factor(&self) -> Option<(f64, f64)> {
        let (dw, sw) = self.change_rad_per_s();
        let (dv, sv) = self.tangential_change_mps;
        if !(dw.abs() > WARN_Z * sw && dv.abs() > WARN_Z * sv && self.radius_m > 0.0) {
            return None;
        }
        let k = dv / (self.radius_m * dw);
        Some((k, k.abs() * (sv / dv).hypot(sw / dw)))
    }
}

/// `spin_at_bounce` for bounce `number` (1 = first): the spin change against the change the
/// velocity change implies for a k in [`INERTIA_BAND`]. Passes within three sigmas of that range
/// (both changes' sigmas), warns beyond.
pub fn bounce_check(number: usize, s: &BounceSpin) -> Check {
    let (dw, sw) = s.change_rad_per_s();
    let (dv, sv) = s.tangential_change_mps;
    let r = s.radius_m;
    // The spin change for the band's two ends (rad/s); the larger k gives the smaller change.
    let ends = [dv / (INERTIA_BAND.1 * r), dv / (INERTIA_BAND.0 * r)];
    let (lo, hi) = (ends[0].min(ends[1]), ends[0].max(ends[1]));
    let sigma = sw.hypot(sv / (INERTIA_BAND.0 * r));
    let off = if dw < lo {
        lo - dw
    } else if dw > hi {
        dw - hi
    } else {
        0.0
    };
    let z = off / sigma;
    let k_text = match s.inertia_factor() {
        Some((k, sk)) => format!(", a moment-of-inertia factor k = {k:.2} +- {sk:.2}"),
        None => String::new(),
    };
    let found = format!(
        "bounce {number}: the spin went from {:.3} to {:.3} turns/s (a change of {:.3} +- {:.3}) \
         while the horizontal velocity changed by {dv:.3} +- {sv:.3} m/s{k_text}",
        s.before_hz.0,
        s.after_hz.0,
        dw / TAU,
        sw / TAU
    );
    let (outcome, detail) = if !z.is_finite() || z <= WARN_Z {
        (CheckOutcome::Pass, found)
    } else {
        (
            CheckOutcome::Warn,
            format!(
                "{found}: no ball turned by the floor's grip alone changes its spin so (the floor \
                 turned it another way, as a soft ball's rolling contact does, or a spin was read \
                 wrong: look at the markings near this bounce)"
            ),
        )
    };
    check(
        "spin_at_bounce",
        outcome,
        z,
        format!(
            "a spin change of {:.3}..{:.3} turns/s, as a ball with k {}..{} takes from the floor's \
             grip (angular momentum about the contact point kept), within {WARN_Z} sigmas",
            lo / TAU,
            hi / TAU,
            INERTIA_BAND.0,
            INERTIA_BAND.1
        ),
        detail,
    )
}

/// `rolling_slip`: a slip read on an incline passes under `SLIP_TOLERANCE` (0.02) or within three
/// sigmas of 0 (rolling without slipping), and warns beyond.
pub fn slip_check(slip: f64, sigma: f64) -> Check {
    let z = slip.abs() / sigma;
    let found = format!(
        "the ball's turn on the incline is {:.1} +- {:.1} % short of rolling without slipping",
        100.0 * slip,
        100.0 * sigma
    );
    let rolling = slip.abs() <= SLIP_TOLERANCE || z <= WARN_Z;
    let (outcome, detail) = if rolling || !z.is_finite() {
        (CheckOutcome::Pass, found)
    } else {
        (
            CheckOutcome::Warn,
            format!(
                "{found}: the ball slides as it rolls (a slippery or dusty incline, or a ball \
                 launched onto it spinning), so the incline's acceleration is not that of a ball \
                 rolling without slipping"
            ),
        )
    };
    check(
        "rolling_slip",
        outcome,
        slip,
        format!(
            "a slip within {:.0} % or {WARN_Z} sigmas of 0",
            100.0 * SLIP_TOLERANCE
        ),
        detail,
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    fn bounce(dv: f64, k: f64) -> BounceSpin {
        let r = 0.04;
        BounceSpin {
            before_hz: (-3.0, 0.02),
            after_hz: (-3.0 + dv / (k * r) / TAU, 0.02),
            tangential_change_mps: (dv, 0.005),
            radius_m: r,
        }
    }

    #[test]
    fn a_grip_bounce_gives_back_its_ball_s_inertia_factor() {
        // Exact rigid-body impact (angular momentum about the contact point kept) of a solid
        // sphere (k = 2/5) and a thin shell (k = 2/3).
        for k in [0.4, 2.0 / 3.0] {
            let b = bounce(-0.2, k);
            let (got, sigma) = b.inertia_factor().unwrap();
            assert!((got - k).abs() < 1e-9 && sigma > 0.0, "{got} {sigma}");
            assert_eq!(bounce_check(1, &b).outcome, CheckOutcome::Pass);
        }
    }

    #[test]
    fn a_spin_change_the_floor_s_grip_cannot_give_warns() {
        // k = 0.1 would need a ball with its mass near its centre beyond a solid sphere's.
        let b = bounce(-0.2, 0.1);
        let c = bounce_check(2, &b);
        assert_eq!(c.outcome, CheckOutcome::Warn, "{}", c.detail);
        assert!(c.detail.contains("bounce 2"));
        // No velocity change and no spin change: nothing to tell, and it passes.
        let still = bounce(0.0, 0.4);
        assert!(still.inertia_factor().is_none());
        assert_eq!(bounce_check(1, &still).outcome, CheckOutcome::Pass);
    }

    #[test]
    fn a_slip_of_five_percent_warns_and_none_passes() {
        assert_eq!(slip_check(0.007, 0.007).outcome, CheckOutcome::Pass);
        assert_eq!(slip_check(0.059, 0.007).outcome, CheckOutcome::Warn);
        // Loose readings pass: a slip not told from 0.
        assert_eq!(slip_check(0.05, 0.03).outcome, CheckOutcome::Pass);
    }
}
