//! Flash recount at the start of an incline: how many flashes the crowded first images span.
//!
//! Goes in: the path's timed points, the measurement made of them and the measurement itself as
//! a function. Comes out: the points with more flashes counted in the steps between the first
//! incline images, and their measurement, when that count makes the incline and the flight meet
//! (the launch checks pass) where the path's own count did not; None otherwise.
//!
//! Method (ours): a ball starting from rest moves little per flash, its first images merge and
//! some are not found; the walk bridges at most one missing flash per step, and its prediction
//! on an incline of two or three images is rough. The flight arcs fix the speed at the launch
//! and the incline's images fix where it was, so only the right count makes the incline's
//! constant acceleration end at the flight's speed and place. Each of the first three steps on
//! the incline is given 0 to 3 more flashes; the physics is run on
//! each count and the count with the fewest failed checks, then warnings, then the fewest flashes
//! added, is kept when it has fewer failed checks than the path's own and no failed launch check.
//!
//! [`recount_steps`] does the same for any one step of the path when a check fails: a gap the
//! walk bridged by its distance rule may hold one flash more or less than it counted, and two
//! images less than a radius apart may have merged into one found image between two others.
//! Every gap is tried with one flash fewer and one more, every step shorter than
//! [`CROWDED_RADII`] radii with one more; the count with the fewest failed checks, then
//! warnings, is kept when it fails fewer checks than the path's own and measures the same
//! phases in the same order (two rounds at most). When no count fails fewer checks, a step
//! inside a flight is counted again by the flight's horizontal steps (x quadratic in n: a
//! steady speed, a little drag, a slow motion in depth).

use super::checks::CheckOutcome;
use super::{Measurement, PhaseKind, TimedPoint};
use crate::error::Result;
use rayon::prelude::*;

/// Steps on the incline recounted, from its first image.
const STEPS: usize = 3;
/// Most flashes added to one step.
const EXTRA: usize = 3;
/// The checks that say the incline and the flight do not meet at the launch.
const LAUNCH_CHECKS: [&str; 2] = ["launch_speed_agreement", "launch_continuity"];

/// How a recount ranks: failed checks, warnings, flashes added (fewer is better).
type Rank = (usize, usize, usize);

/// Failed and warned checks of `m`.
fn outcome_counts(m: &Measurement) -> (usize, usize) {
    (
        m.checks_with(CheckOutcome::Fail),
        m.checks_with(CheckOutcome::Warn),
    )
}

fn launch_fails(m: &Measurement) -> bool {
    m.checks
        .iter()
        .any(|c| c.outcome == CheckOutcome::Fail && LAUNCH_CHECKS.contains(&c.check))
}

/// See the module documentation; `measure` runs the physics on a set of points.
pub fn recount_incline(
    points: &[TimedPoint],
    first: &Measurement,
    measure: impl Fn(&[TimedPoint]) -> Result<Measurement>,
) -> Option<(Vec<TimedPoint>, Measurement)> {
    if first.incline.is_none() || !launch_fails(first) {
        return None;
    }
    let incline = first.phases.iter().find(|p| p.kind == PhaseKind::Incline)?;
    let on_incline = points
        .iter()
        .filter(|p| p.n >= incline.first_n && p.n <= incline.last_n)
        .count();
    let steps = on_incline.saturating_sub(1).min(STEPS);
    let start = points.iter().position(|p| p.n >= incline.first_n)?;
    let dt = points
        .iter()
        .find(|p| p.n > 0)
        .map(|p| p.t_s / p.n as f64)?;
    if steps == 0 || !(dt.is_finite() && dt > 0.0) {
        return None;
    }
    let mut best: Option<(Rank, Vec<TimedPoint>, Measurement)> = None;
    let combos = (EXTRA + 1).pow(steps as u32);
    for code in 1..combos {
        let extra: Vec<usize> = (0..steps)
            .map(|s| code / (EXTRA + 1).pow(s as u32) % (EXTRA + 1))
            .collect();
        let shifted = shift(points, start, &extra, dt);
        let Ok(m) = measure(&shifted) else {
            continue;
        };
        if launch_fails(&m) {
            continue;
        }
        let (fails, warns) = outcome_counts(&m);
        let key = (fails, warns, extra.iter().sum::<usize>());
        if best.as_ref().is_none_or(|(k, ..)| key < *k) {
            best = Some((key, shifted, m));
        }
    }
    let (key, shifted, m) = best?;
    (key.0 < outcome_counts(first).0).then_some((shifted, m))
}

/// `points` with `extra[s]` more flashes in step `s` after point `start` (the step from point
/// `start + s` to the next); later points keep their place in time relative to the last step.
fn shift(points: &[TimedPoint], start: usize, extra: &[usize], dt: f64) -> Vec<TimedPoint> {
    let mut added = 0;
    points
        .iter()
        .enumerate()
        .map(|(i, p)| {
            if i > start && i - start - 1 < extra.len() {
                added += extra[i - start - 1];
            }
            let n = p.n + added;
            TimedPoint {
                n,
                t_s: n as f64 * dt,
                ..*p
            }
        })
        .collect()
}

/// A step shorter than this many ball radii may hide a merged image (two images of the ball
/// under one found spot are at most a diameter apart, plus the step beside them).
pub const CROWDED_RADII: f64 = 2.5;
/// Rounds of single-step recounts (each keeps one changed step).
const STEP_ROUNDS: usize = 2;
/// Most trials per round, gaps first, then the shortest steps.
const STEP_TRIALS: usize = 24;

/// See the module documentation: one step of the path counted again when a check fails.
/// `radius_m` is the ball's radius in the points' units.
pub fn recount_steps(
    points: &[TimedPoint],
    first: &Measurement,
    radius_m: f64,
    measure: impl Fn(&[TimedPoint]) -> Result<Measurement> + Sync,
) -> Option<(Vec<TimedPoint>, Measurement)> {
    let dt = points
        .iter()
        .find(|p| p.n > 0)
        .map(|p| (p.t_s - points[0].t_s) / (p.n - points[0].n) as f64)?;
    if !(dt.is_finite() && dt > 0.0 && radius_m > 0.0) {
        return None;
    }
    let mut kept: Option<(Vec<TimedPoint>, Measurement)> = None;
    for _ in 0..STEP_ROUNDS {
        let (now, m_now) = match &kept {
            Some((p, m)) => (p.as_slice(), m),
            None => (points, first),
        };
        let (fails_now, _) = outcome_counts(m_now);
        if fails_now == 0 {
            break;
        }
        // Trials in parallel; the first of equal rank in trial order wins (shortest step).
        let best = step_trials(now, radius_m)
            .par_iter()
            .enumerate()
            .filter_map(|(order, &(step, change))| {
                let trial = recounted(now, step, change, dt);
                let m = measure(&trial).ok()?;
                same_motion(&m, first).then(|| ((outcome_counts(&m), order), trial, m))
            })
            .min_by(|a, b| a.0.cmp(&b.0))
            .map(|((key, _), trial, m)| (key, trial, m));
        match best {
            Some((key, trial, m)) if key.0 < fails_now => kept = Some((trial, m)),
            _ => break,
        }
    }
    kept.or_else(|| across_flight(points, first, dt, &measure))
}

/// A flight's horizontal position changes smoothly with time (constant speed, a little drag,
/// a slow motion in depth), so the flashes a gap inside a flight holds are told by the
/// horizontal steps on both sides of it: the count whose x fits one quadratic in n at least
/// [`X_GAIN`] times better (chi-square) than the path's own, and by [`X_DELTA`] or more, is
/// kept when it fails no more checks and measures the same motion. The arcs' own chi-squares
/// cannot tell: where a ball leaves the plane, the arcs misfit by far more than a flash
/// miscounted at an apex moves them (the real photo in testimages/: its second apex's x steps
/// are 23 px, the gap there 69 px, three flashes, not the two of the walk's count).
fn across_flight(
    points: &[TimedPoint],
    first: &Measurement,
    dt: f64,
    measure: &(impl Fn(&[TimedPoint]) -> Result<Measurement> + Sync),
) -> Option<(Vec<TimedPoint>, Measurement)> {
    let (fails_now, _) = outcome_counts(first);
    let mut best: Option<(f64, Vec<TimedPoint>, Measurement)> = None;
    for flight in first.phases.iter().filter(|p| p.kind == PhaseKind::Flight) {
        let inside = |n: usize| n >= flight.first_n && n <= flight.last_n;
        let arc: Vec<usize> = (0..points.len()).filter(|&i| inside(points[i].n)).collect();
        if arc.len() < X_MIN_POINTS {
            continue;
        }
        let Some(own) = x_chi_square(points, &arc) else {
            continue;
        };
        for pair in arc.windows(2) {
            let step = pair[0];
            for change in [-1i64, 1] {
                if points[step + 1].n as i64 - points[step].n as i64 + change < 1 {
                    continue;
                }
                let trial = recounted(points, step, change, dt);
                let Some(chi) = x_chi_square(&trial, &arc) else {
                    continue;
                };
                let gain = own / chi.max(f64::MIN_POSITIVE);
                if gain < X_GAIN
                    || own - chi < X_DELTA
                    || best.as_ref().is_some_and(|b| b.0 >= gain)
                {
                    continue;
                }
                let Ok(m) = measure(&trial) else {
                    continue;
                };
                if outcome_counts(&m).0 <= fails_now && same_motion(&m, first) {
                    best = Some((gain, trial, m));
                }
            }
        }
    }
    best.map(|(_, trial, m)| (trial, m))
}

/// Fewest images of a flight whose horizontal steps count a gap.
const X_MIN_POINTS: usize = 6;
/// Least factor by which a recount must lower the flight's horizontal chi-square.
const X_GAIN: f64 = 2.0;
/// Least drop of that chi-square (25: five sigmas).
const X_DELTA: f64 = 25.0;

/// Chi-square of one quadratic in n through the x of `points[arc]` (their own sigmas).
fn x_chi_square(points: &[TimedPoint], arc: &[usize]) -> Option<f64> {
    let n: Vec<f64> = arc.iter().map(|&i| points[i].n as f64).collect();
    let x: Vec<f64> = arc.iter().map(|&i| points[i].x_m).collect();
    let sigma: Vec<f64> = arc.iter().map(|&i| points[i].sigma_m).collect();
    let options = super::fit::FitOptions {
        covariance: super::fit::CovarianceScaling::Sigmas,
    };
    super::fit::polynomial_fit(&n, &x, Some(&sigma), 2, &options)
        .ok()
        .map(|f| f.chi_square)
}

/// A recount measures the same motion: the same phases in the same order, so the same
/// bounces (a count that makes a bounce vanish fails fewer checks by measuring less).
fn same_motion(m: &Measurement, first: &Measurement) -> bool {
    m.phases.len() == first.phases.len()
        && m.phases
            .iter()
            .zip(&first.phases)
            .all(|(a, b)| a.kind == b.kind)
}

/// The steps to recount and by how much: each gap one flash fewer and one more, then each
/// crowded step one more, shortest first; at most [`STEP_TRIALS`].
fn step_trials(points: &[TimedPoint], radius_m: f64) -> Vec<(usize, i64)> {
    let mut steps: Vec<(f64, usize, i64)> = Vec::new();
    for (i, pair) in points.windows(2).enumerate() {
        let (a, b) = (&pair[0], &pair[1]);
        let gap = b.n - a.n;
        let length = (b.x_m - a.x_m).hypot(b.y_m - a.y_m) / gap as f64;
        if gap >= 2 {
            steps.push((0.0, i, -1));
            steps.push((0.0, i, 1));
        } else if length < CROWDED_RADII * radius_m {
            steps.push((length, i, 1));
        }
    }
    steps.sort_by(|x, y| x.0.total_cmp(&y.0));
    steps
        .into_iter()
        .take(STEP_TRIALS)
        .map(|(_, i, c)| (i, c))
        .collect()
}

/// `points` with `change` flashes more in the step after point `step`; later points move
/// with it.
fn recounted(points: &[TimedPoint], step: usize, change: i64, dt: f64) -> Vec<TimedPoint> {
    points
        .iter()
        .enumerate()
        .map(|(i, p)| {
            let n = if i > step {
                (p.n as i64 + change).max(0) as usize
            } else {
                p.n
            };
            TimedPoint {
                n,
                t_s: p.t_s + (n as f64 - p.n as f64) * dt,
                ..*p
            }
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::physics::{MeasureOptions, Quantity, measure};

    /// A throw that bounces once, 40 flashes per second, timed as a walk would number it: two
    /// images missing at the second arc's apex (flashes 20 and 21) and the images after them
    /// numbered one flash early (the walk bridged one flash). The vertical positions wobble by
    /// 8 mm (a ball leaving the plane, a lens): every arc misfits whatever the count, so the
    /// checks cannot tell the counts apart; the horizontal steps (0.05 m a flash) can.
    fn throw(miscount: bool) -> Vec<TimedPoint> {
        let (dt, g, vx) = (0.025, 9.80665, 2.0);
        let (vy0, e) = (1.8, 0.8);
        let t_bounce = 2.0 * vy0 / g;
        let mut out = Vec::new();
        for n in 0..34usize {
            if n == 20 || n == 21 {
                continue;
            }
            let t = n as f64 * dt;
            let y = if t < t_bounce {
                vy0 * t - 0.5 * g * t * t
            } else {
                let s = t - t_bounce;
                e * vy0 * s - 0.5 * g * s * s
            };
            let counted = if miscount && n > 21 { n - 1 } else { n };
            out.push(TimedPoint {
                n: counted,
                t_s: counted as f64 * dt,
                x_m: vx * t,
                y_m: y + 0.008 * (n as f64 * 0.9).sin(),
                sigma_m: 2e-4,
            });
        }
        out
    }

    #[test]
    fn a_gap_inside_a_flight_is_counted_by_the_horizontal_steps() {
        let options = MeasureOptions {
            interval: Some(Quantity::new(0.025, 0.0, "given flash rate")),
            ..Default::default()
        };
        let radius_m = 0.02;
        let run = |p: &[TimedPoint]| measure(p, radius_m, &options);
        let walked = throw(true);
        let first = run(&walked).expect("the walked path is measured");
        let (recounted, _) =
            recount_steps(&walked, &first, radius_m, run).expect("the gap is recounted");
        let truth = throw(false);
        let numbers = |p: &[TimedPoint]| p.iter().map(|q| q.n).collect::<Vec<_>>();
        assert_eq!(numbers(&recounted), numbers(&truth));
        // The right count stays as it is.
        let right = run(&truth).expect("the true path is measured");
        let again = recount_steps(&truth, &right, radius_m, run);
        assert!(again.is_none_or(|(p, _)| numbers(&p) == numbers(&truth)));
    }
}
