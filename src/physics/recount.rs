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

use super::checks::CheckOutcome;
use super::{Measurement, PhaseKind, TimedPoint};
use crate::error::Result;

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
    let count = |o: CheckOutcome| m.checks.iter().filter(|c| c.outcome == o).count();
    (count(CheckOutcome::Fail), count(CheckOutcome::Warn))
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
