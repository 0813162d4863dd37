//! Self-checks of a measurement: does the model fit the pixels and the physics?
//!
//! Goes in: a [`super::Measurement`] (and, from the pipeline, the counts of the images found, on
//! the path and stray). Comes out: a list of [`Check`]s, each `pass`, `warn` or `fail` with the
//! value tested, what was expected and a sentence for a test engineer saying what to do. A
//! measurement with a failed check is printed but not to be trusted (exit status 4 of
//! `beadline measure`, rig status `doubtful`).

use serde::Serialize;

/// Outcome of one check.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum CheckOutcome {
    /// The measurement passed.
    Pass,
    /// Suspicious: the numbers are printed, read them with care.
    Warn,
    /// The model does not fit: the numbers it touches are not to be trusted.
    Fail,
}

impl CheckOutcome {
    /// The outcome's name, as in the documents.
    pub fn name(self) -> &'static str {
        match self {
            CheckOutcome::Pass => "pass",
            CheckOutcome::Warn => "warn",
            CheckOutcome::Fail => "fail",
        }
    }
}

/// One self-check.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Check {
    /// Name of the check, e.g. `arc_fit` .
    pub check: &'static str,
    /// Pass, warn or fail.
    pub outcome: CheckOutcome,
    /// The value tested (None when there is none to give).
    pub value: Option<f64>,
    /// What a passing value is, in words and numbers.
    pub expected: String,
    /// What was found and what to do about it.
    pub detail: String,
}

/// The worst outcome of `checks` (pass when there is none).
pub fn worst(checks: &[Check]) -> CheckOutcome {
    checks
        .iter()
        .map(|c| c.outcome)
        .max()
        .unwrap_or(CheckOutcome::Pass)
}

use super::{ArcResult, Measurement, PhaseKind, Unknown};
use crate::core::numbers::measured;

/// Reduced chi-square above which a fit fails outright: residuals five times the centre sigmas
/// (common practice, no source: a point from another phase or a wrong image, not noise).
const FAIL_REDUCED_CHI_SQUARE: f64 = 25.0;

/// Standard normal quantile of the one-sided 99.9 % level (3.0902; any normal table).
const Z_999: f64 = 3.090_232;

/// Cross-check disagreement, in sigmas of the difference, above which a check warns and fails.
const WARN_Z: f64 = 3.0;
const FAIL_Z: f64 = 5.0;

/// Restitution estimates closer than this agree whatever their sigmas (twice this fails): a
/// coefficient of restitution is quoted to 0.01 (common practice, no source).
const RESTITUTION_TOLERANCE: f64 = 0.005;

/// Earth's normal gravity at sea level runs from 9.7803 m/s^2 at the equator to 9.8322 m/s^2 at
/// the poles (WGS 84 normal gravity formula, from memory); the band adds a margin for altitude
/// and local anomalies.
const GRAVITY_BAND_MPS2: (f64, f64) = (9.76, 9.84);

/// Relative 1-sigma above which an estimated gravity says little: a path that leaves it this
/// loose is too short or too disordered to check anything against (common practice, no source).
const GRAVITY_LOOSE: f64 = 0.05;

/// Upper 99.9 % point of the chi-square distribution with `dof` degrees of freedom, by the
/// Wilson-Hilferty cube-root approximation (Wilson & Hilferty 1931).
pub fn chi_square_999(dof: usize) -> f64 {
    let k = dof.max(1) as f64;
    let c = 2.0 / (9.0 * k);
    k * (1.0 - c + Z_999 * c.sqrt()).powi(3)
}

/// Reduced chi-square up to which a fit passes even above its 99.9 % point: residuals up to
/// twice the centre sigmas only widen the fit's uncertainties by that Birge ratio (every fit's
/// covariance is scaled so), as sub-pixel centre sigmas are trusted to a factor 2 (common
/// practice, no source).
const PASS_REDUCED_CHI_SQUARE: f64 = 4.0;

/// The largest reduced chi-square that passes with `dof` degrees of freedom.
pub(super) fn pass_limit(dof: usize) -> f64 {
    (chi_square_999(dof) / dof.max(1) as f64).max(PASS_REDUCED_CHI_SQUARE)
}

/// Pass up to the 99.9 % point (or residuals twice the sigmas), warn up to residuals five times
/// the sigmas, fail beyond.
pub(super) fn chi_square_outcome(chi_square: f64, dof: usize) -> CheckOutcome {
    if !chi_square.is_finite() {
        CheckOutcome::Fail
    } else if dof == 0
        || chi_square <= chi_square_999(dof).max(PASS_REDUCED_CHI_SQUARE * dof as f64)
    {
        CheckOutcome::Pass
    } else if chi_square / dof as f64 <= FAIL_REDUCED_CHI_SQUARE {
        CheckOutcome::Warn
    } else {
        CheckOutcome::Fail
    }
}

pub(super) fn check(
    name: &'static str,
    outcome: CheckOutcome,
    value: f64,
    expected: String,
    detail: String,
) -> Check {
    Check {
        check: name,
        outcome,
        value: value.is_finite().then_some(value),
        expected,
        detail,
    }
}

/// What the physics stage can check by itself, in the order of the path.
pub(crate) fn physics_checks(m: &Measurement, unknown: Unknown, fit_drag: bool) -> Vec<Check> {
    let mut out = Vec::new();
    if let Some(i) = &m.incline {
        out.extend(incline_checks(i));
    }
    if let (Some(l), Some(i)) = (&m.launch, &m.incline) {
        out.push(launch_speed_check(l, i));
    }
    if let Some(l) = &m.launch {
        let outcome = chi_square_outcome(l.position_gap_chi_square, 2);
        out.push(check(
            "launch_continuity",
            outcome,
            l.position_gap_chi_square,
            format!(
                "chi-square <= {:.1} (2 degrees of freedom)",
                chi_square_999(2)
            ),
            format!(
                "the incline and the first arc meet {:.1} mm apart at the launch{}",
                l.position_gap_m * 1e3,
                advice(
                    outcome,
                    "a flash may be miscounted between the incline and the flight"
                )
            ),
        ));
    }
    out.extend(m.arcs.iter().map(arc_check));
    out.extend(match &m.drag {
        Some(d) => Some(super::drag_checks::drag_agreement(d)),
        None => arc_agreement(&m.arcs),
    });
    out.extend(floor_checks(m));
    out.extend(bounce_checks(m, fit_drag));
    if unknown == Unknown::Gravity {
        out.push(gravity_check(m.gravity_mps2.value, m.gravity_mps2.sigma));
    }
    out
}

/// ", <what to do>" for a check that did not pass, else nothing.
pub(super) fn advice(outcome: CheckOutcome, what: &str) -> String {
    match outcome {
        CheckOutcome::Pass => String::new(),
        _ => format!(": {what}; check the overlay"),
    }
}

/// An arc's fit: with drag fitted over it, the drag model's residuals on the arc; otherwise
/// the vacuum parabola's.
fn arc_check(a: &ArcResult) -> Check {
    let (reduced, dof, model) = match (a.drag_reduced_chi_square, a.drag_dof) {
        (Some(r), Some(dof)) => (r, dof, " from the drag model"),
        _ => (a.reduced_chi_square, a.dof, ""),
    };
    let outcome = chi_square_outcome(reduced * dof as f64, dof);
    let kind = if a.kind == PhaseKind::Flight {
        "flight arc"
    } else {
        "floor run"
    };
    let what = match outcome {
        _ if reduced <= 1.0 => String::new(),
        CheckOutcome::Pass | CheckOutcome::Warn => format!(
            "; its uncertainties are widened by the Birge ratio {:.1}",
            reduced.sqrt()
        ),
        CheckOutcome::Fail => advice(
            outcome,
            "it does not follow one parabola (a point of another phase, a wrong image on the \
             path, a miscounted flash, air drag, or motion out of the plane)",
        ),
    };
    check(
        "arc_fit",
        outcome,
        reduced,
        format!(
            "reduced chi-square <= {:.2} ({} degrees of freedom)",
            pass_limit(dof),
            dof
        ),
        format!(
            "{kind} n {}..{}: residuals{model} {:.1} x the centre sigmas{what}",
            a.first_n,
            a.last_n,
            reduced.max(0.0).sqrt()
        ),
    )
}

fn incline_checks(i: &super::incline::InclineResult) -> Vec<Check> {
    let dof_line = i.points.saturating_sub(2);
    let dof_along = i.points.saturating_sub(3);
    let worst_fit = chi_square_outcome(
        i.straightness_reduced_chi_square * dof_line as f64,
        dof_line,
    )
    .max(chi_square_outcome(
        i.along_reduced_chi_square * dof_along as f64,
        dof_along,
    ));
    let fit = check(
        "incline_fit",
        worst_fit,
        i.straightness_reduced_chi_square
            .max(i.along_reduced_chi_square),
        format!(
            "reduced chi-square <= {:.2} across and {:.2} along the slope",
            pass_limit(dof_line),
            pass_limit(dof_along)
        ),
        format!(
            "incline n {}..{}: {:.2} mm RMS off a straight line, constant-acceleration fit \
             reduced chi-square {:.2}{}",
            i.first_n,
            i.last_n,
            i.straightness_rms_m * 1e3,
            i.along_reduced_chi_square,
            advice(
                worst_fit,
                "the points are not one straight roll at constant acceleration (a flight image \
                 counted as rolling, or a miscounted flash)"
            )
        ),
    );
    let (loss, sigma) = (i.rolling_loss, i.rolling_loss_sigma.max(0.0));
    let margin = (3.0 * sigma).max(0.02);
    let outcome = if !loss.is_finite() || loss < -margin || loss > 1.0 + margin {
        CheckOutcome::Fail
    } else {
        CheckOutcome::Pass
    };
    let rolling = check(
        "incline_rolling",
        outcome,
        loss,
        format!("rolling loss between 0 and 1 (within {margin:.3})"),
        format!(
            "slope {:.2} deg from the line, acceleration {:.4} m/s^2 against {:.4} for ideal \
             rolling{}",
            i.angle_deg,
            i.accel_mps2,
            i.ideal_accel_mps2,
            advice(
                outcome,
                "the acceleration does not fit the slope angle for this ball build (check --ball \
                 and the scale; a sliding ball also goes faster than rolling)"
            )
        ),
    );
    vec![fit, rolling]
}

/// Every flight arc of 4 or more points should show the same vertical acceleration.
fn arc_agreement(arcs: &[ArcResult]) -> Option<Check> {
    let flying: Vec<&ArcResult> = arcs
        .iter()
        .filter(|a| a.kind == PhaseKind::Flight && a.points >= 4 && a.accel_y_sigma_mps2 > 0.0)
        .collect();
    if flying.len() < 2 {
        return None;
    }
    let w: Vec<f64> = flying
        .iter()
        .map(|a| a.accel_y_sigma_mps2.powi(-2))
        .collect();
    let sw: f64 = w.iter().sum();
    let mean = flying
        .iter()
        .zip(&w)
        .map(|(a, w)| a.accel_y_mps2 * w)
        .sum::<f64>()
        / sw;
    let chi2: f64 = flying
        .iter()
        .zip(&w)
        .map(|(a, w)| (a.accel_y_mps2 - mean).powi(2) * w)
        .sum();
    let dof = flying.len() - 1;
    let outcome = chi_square_outcome(chi2, dof);
    let spread = flying
        .iter()
        .map(|a| a.accel_y_mps2)
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), v| {
            (lo.min(v), hi.max(v))
        });
    Some(check(
        "arc_agreement",
        outcome,
        chi2 / dof as f64,
        format!(
            "reduced chi-square <= {:.2} ({} arcs)",
            pass_limit(dof),
            flying.len()
        ),
        format!(
            "the flight arcs' vertical accelerations run from {:.4} to {:.4} m/s^2{}",
            spread.0,
            spread.1,
            advice(
                outcome,
                "they should be one gravity (air drag, a miscounted flash, or a scale that \
                 changes across the photo: give --plane)"
            )
        ),
    ))
}

fn gravity_check(g: f64, sigma: f64) -> Check {
    let (lo, hi) = GRAVITY_BAND_MPS2;
    let outside = (lo - g).max(g - hi).max(0.0);
    let outcome = if !g.is_finite() || outside > 3.0 * sigma.max(0.0) {
        CheckOutcome::Fail
    } else if sigma.is_nan() || sigma > GRAVITY_LOOSE * g {
        CheckOutcome::Warn
    } else {
        CheckOutcome::Pass
    };
    check(
        "gravity_plausible",
        outcome,
        g,
        format!(
            "{lo}..{hi} m/s^2 within 3 sigma (Earth's surface), 1-sigma under {:.0} %",
            GRAVITY_LOOSE * 100.0
        ),
        format!(
            "gravity estimated from the arcs: {}{}",
            measured(g, sigma, "m/s^2"),
            match outcome {
                CheckOutcome::Warn => advice(
                    outcome,
                    "the arcs hold too few images, or too disordered ones, to pin gravity down"
                ),
                _ => advice(
                    outcome,
                    "the scale, the flash rate or the path is wrong (on a tilted plane of motion, \
                     give its gravity with --gravity and estimate the interval)"
                ),
            }
        ),
    )
}

/// The floor: found when the path bounces, its contacts at one height.
fn floor_checks(m: &Measurement) -> Vec<Check> {
    let flights = m
        .arcs
        .iter()
        .filter(|a| a.kind == PhaseKind::Flight)
        .count();
    let mut out = Vec::new();
    if flights >= 2 || !m.bounces.is_empty() {
        let found = m.floor.y_m.is_finite() && m.floor.sigma_m.is_finite();
        let outcome = if found {
            CheckOutcome::Pass
        } else {
            CheckOutcome::Fail
        };
        out.push(check(
            "floor_found",
            outcome,
            m.floor.y_m,
            "a finite floor height when the path has two or more flight arcs".into(),
            format!(
                "{}, floor {}{}",
                crate::core::words::count(flights, "flight arc", "flight arcs"),
                m.floor.source,
                advice(
                    outcome,
                    "no bounce could be measured between the arcs (too few images near a \
                     contact, or arcs that do not meet)"
                )
            ),
        ));
    }
    if let Some(red) = m.floor.contacts_reduced_chi_square {
        let dof = m.floor.contacts - 1;
        let outcome = chi_square_outcome(red * dof as f64, dof);
        out.push(check(
            "floor_contacts",
            outcome,
            red,
            format!(
                "reduced chi-square <= {:.2} ({} contacts)",
                pass_limit(dof),
                m.floor.contacts
            ),
            format!(
                "the bounce contacts lie on one floor line within {:.1} x their sigmas{}",
                red.max(0.0).sqrt(),
                advice(
                    outcome,
                    "the contacts are not at one height (a tilted floor, a miscounted flash at a \
                     bounce, or a camera roll not corrected)"
                )
            ),
        ));
    }
    out
}

/// Per bounce: the three restitution estimates agree, the two arcs meet at the contact in time,
/// and each arc has points to spare.
fn bounce_checks(m: &Measurement, fit_drag: bool) -> Vec<Check> {
    let dt = m.flash_interval_s.value;
    let mut out = Vec::new();
    for (k, b) in m.bounces.iter().enumerate() {
        out.push(match b.drag_model {
            Some(fit) => super::drag_checks::model_agreement(k, b, fit),
            None => vacuum_agreement(k, b, fit_drag),
        });
        out.push(contact_check(k, b, dt));
        out.push(restitution_range(k, b));
    }
    out.extend(coverage_checks(m));
    out
}

/// A vacuum bounce: the restitution from velocities against the apex and flight-time estimates.
/// With drag fitted, such a bounce (an arc outside the drag fit) is biased: at least a warning.
fn vacuum_agreement(k: usize, b: &super::bounce::Bounce, fit_drag: bool) -> Check {
    let z = [b.apex_check_z, b.flight_time_check_z]
        .into_iter()
        .flatten()
        .map(f64::abs)
        .fold(f64::NAN, f64::max);
    let spread = [b.restitution_from_apex, b.restitution_from_flight_times]
        .into_iter()
        .flatten()
        .map(|v| (v - b.restitution).abs())
        .fold(0.0, f64::max);
    let mut outcome = if !z.is_finite() {
        CheckOutcome::Warn
    } else if z > FAIL_Z && spread > 2.0 * RESTITUTION_TOLERANCE {
        CheckOutcome::Fail
    } else if z > WARN_Z && spread > RESTITUTION_TOLERANCE {
        CheckOutcome::Warn
    } else {
        CheckOutcome::Pass
    };
    if fit_drag {
        outcome = outcome.max(CheckOutcome::Warn);
    }
    let show = |v: Option<f64>| v.map_or("none".to_string(), |v| format!("{v:.4}"));
    check(
        "restitution_agreement",
        outcome,
        z,
        format!(
            "apex and flight-time estimates within {WARN_Z} sigma or {RESTITUTION_TOLERANCE} of e"
        ),
        format!(
            "bounce {}: e = {} from velocities, {} from apex heights, {} from flight times{}",
            k + 1,
            measured(b.restitution, b.restitution_sigma, ""),
            show(b.restitution_from_apex),
            show(b.restitution_from_flight_times),
            advice(
                outcome,
                if fit_drag {
                    "drag is fitted, but an arc of this bounce is outside the drag fit (too \
                     few images), so the bounce is measured in vacuum"
                } else {
                    "the arcs around this bounce do not tell one story (air drag, spin, a \
                     wrong image or flash count in an arc)"
                }
            )
        ),
    )
}

/// A passive ball rebounds slower than it hits: 0 <= e <= 1 within 3 sigma.
fn restitution_range(k: usize, b: &super::bounce::Bounce) -> Check {
    let margin = 3.0 * b.restitution_sigma.max(0.0);
    let e = b.restitution;
    let outcome = if e.is_finite() && e >= -margin && e <= 1.0 + margin {
        CheckOutcome::Pass
    } else {
        CheckOutcome::Fail
    };
    check(
        "restitution_range",
        outcome,
        e,
        "0 <= e <= 1 within 3 sigma".into(),
        format!(
            "bounce {}: e = {}{}",
            k + 1,
            measured(e, b.restitution_sigma, ""),
            advice(
                outcome,
                "a ball cannot rebound faster than it hit the floor: the arcs around this bounce \
                 are not the ball's (images of two legs taken in the wrong order, or flashes \
                 miscounted)"
            )
        ),
    )
}

/// The ball leaves the incline at the speed it rolled down with: the first arc's speed at the
/// launch against the incline fit's end speed.
fn launch_speed_check(l: &super::incline::Launch, i: &super::incline::InclineResult) -> Check {
    // Velocities that agree best outside the span between the phases' images mean a phase
    // boundary one image off: the speeds then agree only because both fits share the error.
    let z = if l.outside_span_z > WARN_Z || !l.outside_span_z.is_finite() {
        l.outside_span_z.max(FAIL_Z + 1.0)
    } else {
        (l.speed_mps - i.end_speed_mps) / l.speed_sigma_mps.hypot(i.end_speed_sigma_mps)
    };
    let outcome = if !z.is_finite() || z.abs() > FAIL_Z {
        CheckOutcome::Fail
    } else if z.abs() > WARN_Z {
        CheckOutcome::Warn
    } else {
        CheckOutcome::Pass
    };
    check(
        "launch_speed_agreement",
        outcome,
        z,
        format!("within {WARN_Z} sigma"),
        format!(
            "launch {} from the first arc, {} at the end of the incline; the phases' \
             velocities meet {:.1} sigma outside the gap between their images{}",
            measured(l.speed_mps, l.speed_sigma_mps, "m/s"),
            measured(i.end_speed_mps, i.end_speed_sigma_mps, "m/s"),
            l.outside_span_z,
            advice(
                outcome,
                "the phases do not meet at one speed (an image of the flight counted on the \
                 incline, or the reverse)"
            )
        ),
    )
}

/// No image of the ball lies below the floor: every centre at least the contact level (floor +
/// radius), less 3 sigma of both and a tenth of the radius (the ball's squash and blur; common
/// practice, no source).
pub(crate) fn above_floor(
    pts: &[super::TimedPoint],
    floor: &super::FloorLine,
    radius_m: f64,
) -> Option<Check> {
    if !(floor.y_m.is_finite() && floor.sigma_m.is_finite()) || pts.is_empty() {
        return None;
    }
    let level = floor.y_m + radius_m;
    // (excess over the tolerance, depth below the contact level, both in radii; flash index)
    let (excess, depth, worst) = pts
        .iter()
        .map(|p| {
            let tolerance = 3.0 * floor.sigma_m.hypot(p.sigma_m) + 0.1 * radius_m;
            let depth = level - p.y_m;
            ((depth - tolerance) / radius_m, depth / radius_m, p.n)
        })
        .fold(
            (f64::NEG_INFINITY, 0.0, 0),
            |a, b| if b.0 > a.0 { b } else { a },
        );
    let outcome = if excess > 0.0 {
        CheckOutcome::Fail
    } else {
        CheckOutcome::Pass
    };
    Some(check(
        "above_floor",
        outcome,
        depth,
        "every image at or above the floor contact".into(),
        format!(
            "the lowest image (n {worst}) lies {:.2} radii {} the contact level{}",
            depth.abs(),
            if depth > 0.0 { "below" } else { "above" },
            advice(
                outcome,
                "the floor found from the bounces is not where the ball touched it (the path's \
                 order or its bounces are wrong)"
            )
        ),
    ))
}

/// The arc before a bounce reaches the contact level when the arc after leaves it.
fn contact_check(k: usize, b: &super::bounce::Bounce, dt: f64) -> Check {
    let excess = b.contact_gap_s.abs() - 3.0 * b.contact_gap_sigma_s.max(0.0);
    let outcome = if !excess.is_finite() {
        CheckOutcome::Warn
    } else if excess <= 0.1 * dt {
        CheckOutcome::Pass
    } else if excess <= 0.4 * dt {
        CheckOutcome::Warn
    } else {
        CheckOutcome::Fail
    };
    check(
        "bounce_timing",
        outcome,
        b.contact_gap_s / dt,
        "|gap| <= 3 sigma + 0.1 flash interval".into(),
        format!(
            "bounce {}: the arcs reach and leave the contact level {} flash intervals apart{}",
            k + 1,
            measured(b.contact_gap_s / dt, b.contact_gap_sigma_s / dt, ""),
            advice(
                outcome,
                "a flash may be missing or miscounted at this bounce"
            )
        ),
    )
}

/// Longest extrapolation from the nearest image to a bounce's contact, in flash intervals,
/// above which the check warns and fails: the contact lies within one interval of an image on
/// each side unless flashes are missing there.
const EXTRAPOLATION_WARN: f64 = 1.5;
const EXTRAPOLATION_FAIL: f64 = 3.0;

/// Each bounce's contact is reached from images close to it on both sides.
fn coverage_checks(m: &Measurement) -> Vec<Check> {
    let dt = m.flash_interval_s.value;
    let bounce_ns = m.phases.iter().filter(|p| p.kind == PhaseKind::Bounce);
    let mut out = Vec::new();
    for (k, (phase, b)) in bounce_ns.zip(&m.bounces).enumerate() {
        let before = b.t_s / dt - phase.first_n as f64;
        let after = phase.last_n as f64 - b.t_s / dt;
        let longest = before.max(after);
        let outcome = if !longest.is_finite() || longest > EXTRAPOLATION_FAIL {
            CheckOutcome::Fail
        } else if longest > EXTRAPOLATION_WARN {
            CheckOutcome::Warn
        } else {
            CheckOutcome::Pass
        };
        out.push(check(
            "bounce_coverage",
            outcome,
            longest,
            format!("contact within {EXTRAPOLATION_WARN} flash intervals of an image on each side"),
            format!(
                "bounce {}: the contact lies {before:.2} flash intervals after the last image \
                 before it and {after:.2} before the first image after it{}",
                k + 1,
                advice(
                    outcome,
                    "flashes are missing near this bounce, so its speeds are extrapolated far"
                )
            ),
        ));
    }
    out
}

/// Every image found is on the path or a stray with a reason; images on other paths are
/// unexplained (a second ball, or the ordering split the ball's path), and so are strays of the
/// ball's size lying on the path's own track (`on_track`): where the ball passes the same place
/// twice (a drop's rise over its fall) merged images are taken for single ones, and the path may
/// have been threaded through the wrong ones.
pub fn images_accounted(
    found: usize,
    on_path: usize,
    strays: usize,
    on_others: usize,
    on_track: usize,
) -> Check {
    let outcome = if on_path + strays + on_others != found {
        CheckOutcome::Fail
    } else if on_others > 0 || on_track > 0 {
        CheckOutcome::Warn
    } else {
        CheckOutcome::Pass
    };
    let track = if on_track > 0 {
        format!(
            ", {on_track} of the strays of the ball's size on the path's own track (merged or \
             misordered images: values read near them may be wrong)"
        )
    } else {
        String::new()
    };
    check(
        "images_accounted",
        outcome,
        (on_others + on_track) as f64,
        "every image on the path or a stray with a reason".into(),
        format!(
            "{found} images: {on_path} on the path, {strays} strays, {on_others} on other \
             paths{track}{}",
            advice(
                outcome,
                "images off the path may be the ball's own (a split path: give --start) or a \
                 second ball"
            )
        ),
    )
}

/// Relative change of the ball's size along the path above which it moves in depth (common
/// practice, no source: 3 %, beyond the radius noise of a well-lit ball), and above which the
/// distances along the path are off by several per cent (10 %): warn, fail.
const DEPTH_CHANGE: f64 = 0.03;
const DEPTH_CHANGE_FAIL: f64 = 0.10;

/// The ball's size in the plane of motion should not change along the path: a trend means
/// motion in depth, which the in-plane model cannot follow. `flash_n` and `r_m` are the path's
/// flash indexes and image radii in metres (pixels over the local scale).
pub fn radius_trend(flash_n: &[f64], r_m: &[f64]) -> Option<Check> {
    let n = flash_n.len();
    if n < 6 || r_m.len() != n {
        return None;
    }
    let line = super::fit::polynomial_fit(
        flash_n,
        r_m,
        None,
        1,
        &super::fit::FitOptions {
            covariance: super::fit::CovarianceScaling::ReducedChiSquare,
        },
    )
    .ok()?;
    let mean = r_m.iter().sum::<f64>() / n as f64;
    let span = flash_n[n - 1] - flash_n[0];
    let change = line.coefficients[1] * span / mean;
    let z = line.coefficients[1] / line.sigma(1);
    let outcome = if change.abs() > DEPTH_CHANGE_FAIL && z.abs() > 5.0 {
        CheckOutcome::Fail
    } else if change.abs() > DEPTH_CHANGE && z.abs() > 5.0 {
        CheckOutcome::Warn
    } else {
        CheckOutcome::Pass
    };
    Some(check(
        "radius_trend",
        outcome,
        change,
        format!(
            "size change along the path within {:.0} %",
            DEPTH_CHANGE * 100.0
        ),
        format!(
            "the ball's image {} by {:.1} % from first to last image{}",
            if change >= 0.0 { "grows" } else { "shrinks" },
            change.abs() * 100.0,
            advice(
                outcome,
                "the ball moves towards or away from the camera, so distances in the plane are \
                 off; aim the shot square to the motion"
            )
        ),
    ))
}

/// Tolerance of the ball-size cross-check (common practice, no source: an edge fit's radius may
/// sit a few tenths of a pixel off on a small ball).
const SIZE_TOLERANCE: f64 = 0.06;

/// The ball's diameter measured through the scale against the diameter given.
pub fn ball_size(measured_m: f64, given_m: f64) -> Check {
    let ratio = measured_m / given_m;
    let outcome = if ratio.is_finite() && (ratio - 1.0).abs() <= SIZE_TOLERANCE {
        CheckOutcome::Pass
    } else {
        CheckOutcome::Warn
    };
    check(
        "ball_size",
        outcome,
        ratio,
        format!(
            "within {:.0} % of the diameter given",
            SIZE_TOLERANCE * 100.0
        ),
        format!(
            "the ball measures {:.2} mm through the scale, {:.2} mm given{}",
            measured_m * 1e3,
            given_m * 1e3,
            advice(outcome, "the scale or the ball's diameter is wrong")
        ),
    )
}

/// The checks of the motion in the plane that a ball out of that plane makes fail (the floor
/// too: the contact level of one bounce is not the floor's where the ball is nearer or farther).
const PLANE_CHECKS: [&str; 8] = [
    "above_floor",
    "arc_fit",
    "arc_agreement",
    "restitution_agreement",
    "bounce_timing",
    "launch_continuity",
    "launch_speed_agreement",
    "gravity_plausible",
];

/// When `radius_trend` fails (the ball's size changes along the path more than the plane, or
/// the motion in depth, explains), every failed or warned check of the motion in the plane is
/// told that this is its likeliest cause: its own list of causes cannot know it.
pub fn name_depth_cause(checks: &mut [Check]) {
    let depth_failed = checks
        .iter()
        .any(|c| c.check == "radius_trend" && c.outcome == CheckOutcome::Fail);
    if !depth_failed {
        return;
    }
    for c in checks.iter_mut() {
        if c.outcome != CheckOutcome::Pass && PLANE_CHECKS.contains(&c.check) {
            c.detail += "; likeliest cause: the ball does not stay in one plane (see \
                         radius_trend), so its path is not seen as one plane's";
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn check(name: &'static str, outcome: CheckOutcome) -> Check {
        Check {
            check: name,
            outcome,
            value: None,
            expected: String::new(),
            detail: "found".into(),
        }
    }

    #[test]
    fn a_ball_leaving_the_plane_is_named_on_the_checks_it_fails() {
        // The floor check too: a floor drawn through one bounce's contact is not the floor's
        // where the ball is nearer or farther (the real photo in testimages/).
        let mut checks = vec![
            check("radius_trend", CheckOutcome::Fail),
            check("above_floor", CheckOutcome::Fail),
            check("arc_fit", CheckOutcome::Warn),
            check("arc_agreement", CheckOutcome::Pass),
            check("images_accounted", CheckOutcome::Warn),
        ];
        name_depth_cause(&mut checks);
        let named = |c: &Check| c.detail.contains("does not stay in one plane");
        let names: Vec<&str> = checks
            .iter()
            .filter(|c| named(c))
            .map(|c| c.check)
            .collect();
        assert_eq!(names, ["above_floor", "arc_fit"]);
        // Without the radius trend failing, nothing is named.
        let mut calm = vec![
            check("radius_trend", CheckOutcome::Pass),
            check("above_floor", CheckOutcome::Fail),
        ];
        name_depth_cause(&mut calm);
        assert!(!calm.iter().any(named));
    }
}
