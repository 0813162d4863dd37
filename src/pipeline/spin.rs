//! The spin read from the ball's markings along the measured path.
//!
//! Goes in: the photo (read again in colour, linear light, less the clean plate when given) and
//! the measure document with its path and phases. Comes out: the document with each path
//! image's turn since the first image read (`spin_angle_deg`, with its sigma), the mean spin per
//! phase (turns per second), the slip on an incline, and a note on the images that give no
//! reading. The turns between images come from [`crate::detect::spin`]; the sigma of one turn
//! is the robust scatter of the differences of consecutive turns within a phase (1.4826 MAD /
//! sqrt 2; constant or steadily changing spin leaves only the noise), and an image's angle adds
//! the turns' variances from the first image read; a relative systematic of 0.7 % of the angle
//! and of the spin is added in quadrature (the largest bias on the real-balls bench).

use super::MeasureSettings;
use crate::detect::spin::{NoReading, Signature, rings, signatures, steps, turn_deg};
use crate::image::load::{ColourPhoto, load_colour_exact};
use crate::physics::spin::{BounceSpin, bounce_check, slip_check};
use crate::physics::{PhaseKind, checks::Check};
use crate::report::measure::{MeasureDoc, PathEntry, SpinBounce, SpinPhase};
use std::path::Path;

/// The smallest sigma given to one turn, degrees (the correlation grid's resolution).
const MIN_STEP_SIGMA_DEG: f64 = 0.05;
/// The largest turn between flashes taken as read, degrees.
const MAX_TURN_DEG: f64 = 90.0;
/// The largest move between flashes, in radii, over which a turn is taken as read.
const MAX_ROLL_RAD: f64 = 4.0;
/// The most flashes a bridge over turns not read spans.
const MAX_BRIDGE: usize = 4;
/// A bridged turn read this far (degrees) from the phases' prediction is not taken.
const BRIDGE_TOLERANCE_DEG: f64 = 45.0;
/// A relative systematic of the spin read (the partly covered images and the grid's pull):
/// the largest bias seen on the real-balls bench was 0.7 %.
const SPIN_SYSTEMATIC: f64 = 0.007;

/// Fill the document's spin fields from the photo at `photo_path`.
pub(super) fn read(photo_path: &Path, settings: &MeasureSettings, doc: &mut MeasureDoc) {
    let load = |p: &Path| load_colour_exact(p, &settings.load).ok();
    let Some(rgb) = load(photo_path) else {
        doc.spin_note = Some("the photo could not be read again in colour".into());
        return;
    };
    let plate = settings.plate.as_deref().and_then(load);
    let tone = settings.spots.tone;
    let (w, h) = rgb.size();
    let light = |x: i64, y: i64| -> Option<f64> {
        if x < 0 || y < 0 || x >= w as i64 || y >= h as i64 {
            return None;
        }
        let (x, y) = (x as usize, y as usize);
        let grey = |p: &ColourPhoto| {
            0.2126 * tone.to_linear(p.at(x, y, 0))
                + 0.7152 * tone.to_linear(p.at(x, y, 1))
                + 0.0722 * tone.to_linear(p.at(x, y, 2))
        };
        Some(grey(&rgb) - plate.as_ref().map_or(0.0, grey))
    };
    let discs: Vec<(f64, f64, f64)> = doc.path.iter().map(|p| (p.x_px, p.y_px, p.r_px)).collect();
    let sampled: Vec<_> = discs.iter().map(|&d| rings(&light, d, &discs)).collect();
    let sigs: Vec<Result<Signature, NoReading>> = signatures(&sampled);
    let n: Vec<usize> = doc.path.iter().map(|p| p.n).collect();
    let turns = rolled(consecutive(&sigs, &doc.path), &sigs, doc);
    let sigma = step_sigma_deg(&turns, &n, doc);
    doc.spin = phases(doc, &turns, sigma);
    checks(doc, settings);
    let links = links(&sigs, &turns, doc);
    // The angles count from the first image a link leaves and follow the links; an image no
    // link reaches has none (the whole turns before it are unknown).
    let mut angle: Vec<Option<(f64, f64)>> = vec![None; doc.path.len()];
    if let Some(first) = links.first().map(|l| l.0) {
        angle[first] = Some((0.0, 0.0));
        for &(j, l, t, weight) in &links {
            if let (Some((a, m)), true) = (angle[j], j >= first) {
                angle[l] = Some((a + t, m + weight));
            }
        }
    }
    for (e, a) in doc.path.iter_mut().zip(&angle) {
        e.spin_angle_deg = a.map(|(a, _)| a);
        e.spin_angle_sigma_deg = a.map(|(a, m)| (sigma * m.sqrt()).hypot(SPIN_SYSTEMATIC * a));
    }
    doc.spin_note = note(&sigs, angle.iter().filter(|a| a.is_none()).count());
}

/// The spin checks: the slip of each incline read (`rolling_slip`), and, for each bounce with a
/// spin read on both sides, the spin before and after (`spin_bounces`) and the spin change
/// against the horizontal velocity change (`spin_at_bounce`).
fn checks(doc: &mut MeasureDoc, settings: &MeasureSettings) {
    let mut out: Vec<Check> = doc
        .spin
        .iter()
        .filter_map(|p| Some(slip_check(p.slip?, p.slip_sigma?)))
        .collect();
    let m = &doc.measurement;
    let mut radii: Vec<f64> = doc.path.iter().map(|p| p.r_px).collect();
    radii.sort_by(f64::total_cmp);
    let radius_m = settings.ball_diameter_m.map_or_else(
        || radii.get(radii.len() / 2).copied().unwrap_or(f64::NAN) / m.scale_px_per_m.value,
        |d| d / 2.0,
    );
    for (i, b) in m.bounces.iter().enumerate() {
        let Some(phase) = m
            .phases
            .iter()
            .find(|p| p.kind == PhaseKind::Bounce && p.t_start_s <= b.t_s && b.t_s <= p.t_end_s)
        else {
            continue;
        };
        let before = doc.spin.iter().find(|s| s.last_n == phase.first_n);
        let after = doc.spin.iter().find(|s| s.first_n == phase.last_n);
        let (Some(before), Some(after)) = (before, after) else {
            continue;
        };
        let vx_in = b.impact_velocity_mps[0];
        let change = b
            .tangential_ratio_sigma
            .map(|sr| (b.rebound_velocity_mps[0] - vx_in, sr * vx_in.abs()));
        let mut entry = SpinBounce {
            bounce: i + 1,
            spin_before_hz: before.spin_hz,
            spin_before_hz_sigma: before.spin_hz_sigma,
            spin_after_hz: after.spin_hz,
            spin_after_hz_sigma: after.spin_hz_sigma,
            tangential_change_mps: change.map(|c| c.0),
            tangential_change_sigma_mps: change.map(|c| c.1),
            inertia_factor: None,
            inertia_factor_sigma: None,
        };
        if let Some(change) = change.filter(|_| radius_m.is_finite()) {
            let spin = BounceSpin {
                before_hz: (before.spin_hz, before.spin_hz_sigma),
                after_hz: (after.spin_hz, after.spin_hz_sigma),
                tangential_change_mps: change,
                radius_m,
            };
            let k = spin.inertia_factor();
            (entry.inertia_factor, entry.inertia_factor_sigma) = (k.map(|k| k.0), k.map(|k| k.1));
            out.push(bounce_check(i + 1, &spin));
        }
        doc.spin_bounces.push(entry);
    }
    doc.measurement.checks.extend(out);
}

/// Turn k is from image k to image k + 1 (degrees) when their flash numbers are consecutive,
/// the turn read is within a quarter turn ([`MAX_TURN_DEG`]) and the centre moved at most
/// [`MAX_ROLL_RAD`] radii: a turn read as t may be t - 360 or t + 360 (a reading cannot tell), and
/// a ball spinning as it would roll turns by the distance moved over its radius, so beyond these
/// the reading could be another turn than the ball's.
fn consecutive(sigs: &[Result<Signature, NoReading>], path: &[PathEntry]) -> Vec<Option<f64>> {
    steps(sigs)
        .into_iter()
        .enumerate()
        .map(|(k, t)| {
            let (a, b) = (&path[k], &path[k + 1]);
            let rolled = (b.x_px - a.x_px).hypot(b.y_px - a.y_px) / (0.5 * (a.r_px + b.r_px));
            t.filter(|t| b.n == a.n + 1 && t.abs() <= MAX_TURN_DEG && rolled <= MAX_ROLL_RAD)
        })
        .collect()
}

/// The turns that join images, in order: (from image, to image, turn in degrees, its variance
/// in units of one turn's). Each turn read joins consecutive images; one the guards left out
/// is read again against the turn the phases' mean spins predict (below). A run of turns not
/// read is
/// bridged when the images on either side were read, at most [`MAX_BRIDGE`] flashes apart: the
/// turn between them is read directly (it is known only up to whole turns) and the whole turns
/// are those of the turn the phases' mean spins predict (at a bounce, the mean of the two
/// phases'), taken only when the reading is within [`BRIDGE_TOLERANCE_DEG`] of the prediction.
fn links(
    sigs: &[Result<Signature, NoReading>],
    turns: &[Option<f64>],
    doc: &MeasureDoc,
) -> Vec<(usize, usize, f64, f64)> {
    let path = &doc.path;
    let per_flash = |i: usize| -> Option<f64> {
        let mean_of = |n: usize| {
            doc.spin
                .iter()
                .find(|p| p.first_n <= n && n < p.last_n)
                .map(|p| p.spin_hz * 360.0 * doc.measurement.flash_interval_s.value)
        };
        mean_of(i).or_else(|| Some(0.5 * (mean_of(i.checked_sub(1)?)? + mean_of(i + 1)?)))
    };
    // A turn left out by the guards against a whole-turn error is read against the prediction.
    let mut turns = turns.to_vec();
    for k in 0..turns.len() {
        if turns[k].is_some() || path[k + 1].n != path[k].n + 1 {
            continue;
        }
        if let (Ok(a), Ok(b), Some(p)) = (&sigs[k], &sigs[k + 1], per_flash(path[k].n)) {
            turns[k] = turn_deg(a, b).and_then(|r| against(r, p));
        }
    }
    let mut out = Vec::new();
    let mut k = 0;
    while k < turns.len() {
        if let Some(t) = turns[k] {
            out.push((k, k + 1, t, 1.0));
            k += 1;
            continue;
        }
        let end = (k..turns.len())
            .find(|&e| turns[e].is_some())
            .unwrap_or(turns.len());
        let (j, l) = (k, end);
        k = end;
        let (Ok(a), Ok(b)) = (&sigs[j], &sigs[l]) else {
            continue;
        };
        if path[l].n - path[j].n > MAX_BRIDGE {
            continue;
        }
        let predicted: Option<f64> = (path[j].n..path[l].n).map(per_flash).sum();
        if let Some(total) = predicted
            .zip(turn_deg(a, b))
            .and_then(|(p, r)| against(r, p))
        {
            out.push((j, l, total, 2.0));
        }
    }
    out
}

/// A turn read as `read` (known up to whole turns) with the whole turns of `predicted`, when
/// it lies within [`BRIDGE_TOLERANCE_DEG`] of it.
fn against(read: f64, predicted: f64) -> Option<f64> {
    let total = read + 360.0 * ((predicted - read) / 360.0).round();
    ((total - predicted).abs() <= BRIDGE_TOLERANCE_DEG).then_some(total)
}

/// On an incline, a turn the guards left out is read against rolling without slipping (the
/// ball turns by the distance its centre moved over its radius, clockwise when it moves right):
/// the whole turns come from rolling, the rest from the reading, so a slip shows as the
/// difference (within [`BRIDGE_TOLERANCE_DEG`] of rolling).
fn rolled(
    mut turns: Vec<Option<f64>>,
    sigs: &[Result<Signature, NoReading>],
    doc: &MeasureDoc,
) -> Vec<Option<f64>> {
    let path = &doc.path;
    let on_incline = |n: usize| {
        doc.measurement
            .phases
            .iter()
            .any(|p| p.kind == crate::physics::PhaseKind::Incline && p.first_n <= n && n < p.last_n)
    };
    for k in 0..turns.len() {
        let (a, b) = (&path[k], &path[k + 1]);
        if turns[k].is_some() || b.n != a.n + 1 || !on_incline(a.n) {
            continue;
        }
        if let (Ok(sa), Ok(sb)) = (&sigs[k], &sigs[k + 1]) {
            let moved = (b.x_px - a.x_px).hypot(b.y_px - a.y_px) / (0.5 * (a.r_px + b.r_px));
            let rolling = -(b.x_px - a.x_px).signum() * moved.to_degrees();
            turns[k] = turn_deg(sa, sb).and_then(|r| against(r, rolling));
        }
    }
    turns
}

/// The sigma of one turn (degrees): the robust scatter of the differences of consecutive turns
/// within each phase, pooled; NaN with fewer than three differences.
fn step_sigma_deg(turns: &[Option<f64>], n: &[usize], doc: &MeasureDoc) -> f64 {
    let mut diffs = Vec::new();
    for p in &doc.measurement.phases {
        let inside: Vec<f64> = (0..turns.len())
            .filter(|&k| n[k] >= p.first_n && n[k + 1] <= p.last_n)
            .filter_map(|k| turns[k])
            .collect();
        diffs.extend(inside.windows(2).map(|w| w[1] - w[0]));
    }
    if diffs.len() < 3 {
        return f64::NAN;
    }
    let median = |v: &mut Vec<f64>| {
        v.sort_by(f64::total_cmp);
        v[v.len() / 2]
    };
    let mid = median(&mut diffs.clone());
    let mut dev: Vec<f64> = diffs.iter().map(|d| (d - mid).abs()).collect();
    (1.4826 * median(&mut dev) / 2f64.sqrt()).max(MIN_STEP_SIGMA_DEG)
}

/// The mean spin of each phase with two or more turns read, and the slip on an incline.
fn phases(doc: &MeasureDoc, turns: &[Option<f64>], sigma_deg: f64) -> Vec<SpinPhase> {
    let dt = doc.measurement.flash_interval_s.value;
    let path = &doc.path;
    let mut out = Vec::new();
    for p in &doc.measurement.phases {
        let kind = format!("{:?}", p.kind).to_lowercase();
        if kind == "bounce" {
            continue;
        }
        let read: Vec<(usize, f64)> = (0..turns.len())
            .filter(|&k| path[k].n >= p.first_n && path[k + 1].n <= p.last_n)
            .filter_map(|k| turns[k].map(|t| (k, t)))
            .collect();
        if read.len() < 2 || !(dt > 0.0 && sigma_deg.is_finite()) {
            continue;
        }
        let m = read.len() as f64;
        let mean = read.iter().map(|(_, t)| t).sum::<f64>() / m;
        let (mut slip, mut slip_sigma) = (None, None);
        if kind == "incline" {
            let (mut arc, mut moved) = (0.0, 0.0);
            for &(k, t) in &read {
                let r = 0.5 * (path[k].r_px + path[k + 1].r_px);
                arc += t.to_radians().abs() * r;
                moved += (path[k + 1].x_px - path[k].x_px).hypot(path[k + 1].y_px - path[k].y_px);
            }
            if moved > 0.0 {
                let r = path.iter().map(|q| q.r_px).sum::<f64>() / path.len() as f64;
                slip = Some(1.0 - arc / moved);
                slip_sigma =
                    Some((m.sqrt() * sigma_deg.to_radians() * r / moved).hypot(SPIN_SYSTEMATIC));
            }
        }
        out.push(SpinPhase {
            kind,
            first_n: p.first_n,
            last_n: p.last_n,
            steps_read: read.len(),
            spin_hz: mean / 360.0 / dt,
            spin_hz_sigma: (sigma_deg / m.sqrt() / 360.0 / dt)
                .hypot(SPIN_SYSTEMATIC * mean / 360.0 / dt),
            slip,
            slip_sigma,
        });
    }
    out
}

/// Why images give no reading or no angle, in words (in one line when no image has one and most
/// show no marking, or markings alike under half a turn); None when every image has an angle.
fn note(sigs: &[Result<Signature, NoReading>], no_angle: usize) -> Option<String> {
    let count = |r: NoReading| sigs.iter().filter(|s| s.as_ref().err() == Some(&r)).count();
    if no_angle == 0 {
        return None;
    }
    let sampled = sigs.len() - count(NoReading::Covered);
    if no_angle == sigs.len() && 2 * count(NoReading::Plain) > sampled {
        return Some(
            "no spin read: the ball shows no marking to read it by (no marking varies its light \
             by 10 % or more)"
                .into(),
        );
    }
    if no_angle == sigs.len() && 2 * count(NoReading::Symmetric) > sampled {
        return Some(
            "no spin read: the ball's markings look the same turned half a turn, so a turn \
             cannot be told from half a turn more"
                .into(),
        );
    }
    let mut parts = Vec::new();
    let plain = count(NoReading::Plain);
    if plain > 0 {
        parts.push(format!(
            "{plain} {} no marking strong enough to read (varying the ball's light by under \
             10 %)",
            verb(plain, "shows", "show")
        ));
    }
    let symmetric = count(NoReading::Symmetric);
    if symmetric > 0 {
        parts.push(format!(
            "{symmetric} {} markings that look the same turned half a turn",
            verb(symmetric, "shows", "show")
        ));
    }
    let covered = count(NoReading::Covered);
    if covered > 0 {
        parts.push(format!(
            "{covered} {} covered by other images or cut by the frame",
            verb(covered, "is", "are")
        ));
    }
    let others = no_angle.saturating_sub(plain + symmetric + covered);
    if others > 0 {
        parts.push(format!(
            "{others} more {} not joined to the others by a turn read (a second match nearly \
             as good, a missing flash, or a turn that could be a whole turn more or less: over \
             a quarter turn, or the ball moved over 4 radii, between flashes, with no spin read \
             nearby to tell; a faster flash rate reads those)",
            verb(others, "is", "are")
        ));
    }
    Some(format!(
        "{no_angle} of {} images {} no spin angle: {}",
        sigs.len(),
        verb(no_angle, "has", "have"),
        parts.join("; ")
    ))
}

/// The verb that agrees with a count: `one` for 1, `many` otherwise ("1 shows", "2 show").
fn verb(n: usize, one: &'static str, many: &'static str) -> &'static str {
    if n == 1 { one } else { many }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_spin_note_agrees_its_verbs_with_the_counts() {
        let sigs = [
            Err(NoReading::Plain),
            Err(NoReading::Covered),
            Err(NoReading::Symmetric),
            Err(NoReading::Covered),
            Err(NoReading::Plain),
            Err(NoReading::Plain),
        ];
        let one = note(&sigs[..3], 4).unwrap();
        for words in [
            "1 shows no marking",
            "1 shows markings",
            "1 is covered",
            "1 more is not",
        ] {
            assert!(one.contains(words), "{one}");
        }
        let many = note(&sigs, 7).unwrap();
        for words in ["3 show no marking", "2 are covered", "7 of 6 images have"] {
            assert!(many.contains(words), "{many}");
        }
    }
}
