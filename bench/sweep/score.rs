//! Measure one drawn shot as a user would and score every value against the render's truth.
//!
//! Goes in: a [`Shot`] and a folder for its files. Comes out: a [`Scored`] photo: per value
//! (restitution of each bounce, launch speed, gravity, incline acceleration) the truth, the
//! measured value and its 1-sigma and a [`Class`]: right when |measured - truth| <= max(3 sigma,
//! 1 % of truth); otherwise flagged when a self-check of the photo warned or failed, else silently
//! wrong; refused when `measure` returned an error; missed when the photo shows the value (see
//! below) but the measurement did not report it. A measured bounce with no truth bounce near its
//! time is wrong (truth NaN).
//!
//! In scope: a truth bounce with at least 3 resolvable flight images on each side (the fewest a
//! parabola fit takes), a launch and an incline acceleration with at least 3 resolvable images on
//! the incline (and 3 in the first arc for the launch), gravity with 4 in some arc. Resolvable:
//! in the frame and at least the planner's spacing (half a diameter) from every other image of
//! the exposure. A value out of scope that `measure` reports is scored all the same; one it does
//! not report is [`Class::Unseen`] and left out of the totals. Times: the path's t = 0
//! is its first image; the path is laid on the truth flashes by the index offset that puts its
//! pixel centres nearest the truth's, and that offset maps bounce times to truth times.

use crate::shots::Shot;
use beadline::physics::checks::{self, CheckOutcome};
use beadline::pipeline::{Measured, measure_photo};
use beadline::synth::sim::Phase;
use beadline::synth::{Truth, render, render_plate};
use std::path::Path;
use std::time::Instant;

/// A scored quantity.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Quantity {
    /// Normal restitution of one bounce.
    Restitution,
    /// Launch speed off the incline, m/s.
    LaunchSpeed,
    /// Gravity estimated from the arcs, m/s^2.
    Gravity,
    /// Acceleration along the incline, m/s^2.
    InclineAccel,
}

impl Quantity {
    /// Every quantity, in report order.
    pub const ALL: [Quantity; 4] = [
        Quantity::Restitution,
        Quantity::LaunchSpeed,
        Quantity::Gravity,
        Quantity::InclineAccel,
    ];

    /// Name in the report.
    pub fn name(self) -> &'static str {
        match self {
            Quantity::Restitution => "restitution e",
            Quantity::LaunchSpeed => "launch speed (m/s)",
            Quantity::Gravity => "gravity (m/s^2)",
            Quantity::InclineAccel => "incline accel (m/s^2)",
        }
    }
}

/// The class of one value.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Class {
    /// Within max(3 sigma, 1 %) of the truth.
    Right,
    /// Wrong, but a check warned or failed.
    Flagged,
    /// Wrong and every check passed.
    Silent,
    /// `measure` returned an error.
    Refused,
    /// In the photo but not reported.
    Missed,
    /// Not reported, and the photo does not show it (its images merge: under the planner's
    /// resolvable spacing); not counted.
    Unseen,
}

/// One scored value.
#[derive(Debug, Clone)]
pub struct Value {
    /// What it is.
    pub quantity: Quantity,
    /// Which one (e.g. "bounce 2").
    pub label: String,
    /// Truth (NaN: nothing there in truth).
    pub truth: f64,
    /// Measured (NaN: not measured).
    pub measured: f64,
    /// Measured 1-sigma.
    pub sigma: f64,
    /// Class.
    pub class: Class,
}

impl Value {
    /// Truth inside measured +- 2 sigma (None when not measured).
    pub fn covered(&self) -> Option<bool> {
        matches!(self.class, Class::Right | Class::Flagged | Class::Silent)
            .then(|| (self.measured - self.truth).abs() <= 2.0 * self.sigma)
    }

    /// Right by the rule.
    fn is_right(measured: f64, truth: f64, sigma: f64) -> bool {
        let tol = (3.0 * sigma).max(0.01 * truth.abs());
        (measured - truth).abs() <= tol
    }
}

/// A scored photo.
#[derive(Debug, Clone)]
pub struct Scored {
    /// The shot's seed.
    pub seed: u64,
    /// Short description.
    pub description: String,
    /// Every scored value.
    pub values: Vec<Value>,
    /// Worst check outcome (pass when measure refused).
    pub worst: CheckOutcome,
    /// The checks that did not pass, "name: outcome".
    pub warnings: Vec<String>,
    /// The refusal, when measure returned an error.
    pub error: Option<String>,
    /// Flashes in the exposure.
    pub flashes: usize,
    /// Flashes whose image is not wholly in the frame.
    pub out_of_frame: usize,
    /// Truth bounces in the exposure that the photo cannot show (under 3 images on a side).
    pub bounces_out_of_scope: usize,
    /// Render + measure time, seconds.
    pub seconds: f64,
    /// Path images found by the second pass from the physics (`predicted_and_confirmed`).
    pub confirmed: usize,
    /// Of those, the ones within half a radius of their own truth flash (the path laid on
    /// the truth).
    pub confirmed_true: usize,
    /// Every path image within half a radius of the truth flash its `n` names, with one
    /// constant offset between `n` and the truth's flash number (None: refused).
    pub index_consistent: Option<bool>,
}

impl Scored {
    /// Every value right (and none missed), yet a check warned or failed: crying wolf.
    pub fn false_warning(&self) -> bool {
        self.error.is_none()
            && self.worst != CheckOutcome::Pass
            && self.values.iter().all(|v| v.class == Class::Right)
    }
}

/// Render the shot into `dir`, measure it as a user would and score it; `keep` also writes the
/// scene, the truth and the measurement there.
pub fn run(shot: &Shot, dir: &Path, keep: bool) -> Result<Scored, String> {
    let t0 = Instant::now();
    let ext = shot.format.extension();
    let photo_path = dir.join(format!("photo.{ext}"));
    let rendered = render(&shot.scene);
    rendered.save(&photo_path).map_err(|e| e.to_string())?;
    let plate = if shot.needs_plate() {
        let p = dir.join(format!("plate.{ext}"));
        render_plate(&shot.scene)
            .save(&p)
            .map_err(|e| e.to_string())?;
        Some(p)
    } else {
        None
    };
    let plane = if shot.plane_points.is_empty() {
        None
    } else {
        let p = dir.join("plane.toml");
        std::fs::write(&p, shot.plane_toml()).map_err(|e| e.to_string())?;
        Some(p)
    };
    let settings = shot.settings(plate, plane);
    let result = measure_photo(&photo_path, &settings);
    if keep {
        let scene = toml::to_string(&shot.scene).map_err(|e| e.to_string())?;
        std::fs::write(dir.join("scene.toml"), scene).map_err(|e| e.to_string())?;
        let truth = serde_json::to_string_pretty(&rendered.truth).map_err(|e| e.to_string())?;
        std::fs::write(dir.join("truth.json"), truth).map_err(|e| e.to_string())?;
        if let Ok(m) = &result {
            let doc = serde_json::to_string_pretty(&m.doc).map_err(|e| e.to_string())?;
            std::fs::write(dir.join("measure.json"), doc).map_err(|e| e.to_string())?;
        }
    }
    let mut scored = score(shot, &rendered.truth, result.map_err(|e| e.to_string()));
    scored.seconds = t0.elapsed().as_secs_f64();
    Ok(scored)
}

/// The planner's spacing rule (`synth::plan::RESOLVABLE`): an image whose centre is nearer than
/// this many diameters to another image's centre merges with it.
const MIN_SPACING_DIAMETERS: f64 = beadline::synth::plan::RESOLVABLE.min_spacing_diameters;

/// Per flash: the image is wholly in the frame and no other image of the exposure (any phase)
/// lies within the planner's resolvable spacing of it.
fn resolvable(truth: &Truth) -> Vec<bool> {
    let f = &truth.flashes;
    f.iter()
        .enumerate()
        .map(|(i, a)| {
            let min_d = 2.0 * MIN_SPACING_DIAMETERS * a.r_px;
            a.in_frame
                && f.iter()
                    .enumerate()
                    .all(|(j, b)| j == i || (a.x_px - b.x_px).hypot(a.y_px - b.y_px) >= min_d)
        })
        .collect()
}

/// Resolvable images of one phase (flight arc `arc`, or the incline).
fn count(truth: &Truth, ok: &[bool], phase: Phase, arc: usize) -> usize {
    truth
        .flashes
        .iter()
        .zip(ok)
        .filter(|(f, ok)| **ok && f.phase == phase && (phase != Phase::Flight || f.arc == arc))
        .count()
}

/// Offset k such that path flash n is truth flash n + k: the one with the smallest median pixel
/// distance over the path images it lays on a truth flash (at least 80 % of them: a path that
/// runs past the exposure's last flash onto something else is still laid where it fits).
fn flash_offset(truth: &Truth, m: &Measured) -> Option<usize> {
    let path = &m.doc.path;
    let total = truth.flashes.len();
    (0..total)
        .filter_map(|k| {
            let mut d: Vec<f64> = path
                .iter()
                .filter(|p| p.n + k < total)
                .map(|p| {
                    let f = &truth.flashes[p.n + k];
                    (f.x_px - p.x_px).hypot(f.y_px - p.y_px)
                })
                .collect();
            if d.is_empty() || 5 * d.len() < 4 * path.len() {
                return None;
            }
            d.sort_by(f64::total_cmp);
            Some((k, d[d.len() / 2]))
        })
        .min_by(|a, b| a.1.total_cmp(&b.1))
        .map(|(k, _)| k)
}

/// The path images of the second pass, and how many lie within half a radius of their own
/// truth flash (with the path laid on the truth by [`flash_offset`]).
fn confirmed(truth: &Truth, m: &Measured) -> (usize, usize) {
    let offset = flash_offset(truth, m);
    let added: Vec<_> = m
        .doc
        .path
        .iter()
        .filter(|p| p.source == beadline::detect::SpotSource::PredictedAndConfirmed)
        .collect();
    let on_truth = added
        .iter()
        .filter(|p| {
            offset
                .and_then(|k| truth.flashes.get(p.n + k))
                .is_some_and(|f| (f.x_px - p.x_px).hypot(f.y_px - p.y_px) < 0.5 * f.r_px)
        })
        .count();
    (added.len(), on_truth)
}

/// Every path image lies within half a radius of the truth flash `n + offset` (the offset of
/// [`flash_offset`]): the flash index is right across every gap and crowded stretch.
fn index_consistent(truth: &Truth, m: &Measured) -> bool {
    flash_offset(truth, m).is_some_and(|k| {
        m.doc.path.iter().all(|p| {
            truth
                .flashes
                .get(p.n + k)
                .is_some_and(|f| (f.x_px - p.x_px).hypot(f.y_px - p.y_px) < 0.5 * f.r_px)
        })
    })
}

/// A truth value and whether the photo shows it: (quantity, label, truth, shown).
type Scope = (Quantity, String, f64, bool);

/// The truth values and whether the photo shows them: (quantity, label, truth, in scope), the
/// truth bounces in scope and the count of truth bounces out of scope.
fn in_scope(truth: &Truth) -> (Vec<Scope>, Vec<usize>, usize) {
    let ok = resolvable(truth);
    let arc = |j: usize| count(truth, &ok, Phase::Flight, j);
    let t_first = truth.flashes.first().map_or(0.0, |f| f.t_s);
    let t_last = truth.flashes.last().map_or(0.0, |f| f.t_s);
    let arcs = truth.bounces.len() + 1;
    let gravity_shown = (0..arcs).any(|j| arc(j) >= 4);
    let mut out = vec![(
        Quantity::Gravity,
        "g".to_string(),
        truth.gravity_mps2,
        gravity_shown,
    )];
    let mut bounces = Vec::new();
    let mut out_of_scope = 0;
    for (j, b) in truth.bounces.iter().enumerate() {
        if b.t_s <= t_first || b.t_s >= t_last {
            continue;
        }
        if arc(j) >= 3 && arc(j + 1) >= 3 {
            bounces.push(j);
        } else {
            out_of_scope += 1;
        }
    }
    if let Some(a) = truth.incline_accel_mps2 {
        let shown = count(truth, &ok, Phase::Incline, 0) >= 3;
        out.push((Quantity::InclineAccel, "incline".into(), a, shown));
        let speed = truth.launch.speed_mps;
        out.push((
            Quantity::LaunchSpeed,
            "launch".into(),
            speed,
            shown && arc(0) >= 3,
        ));
    }
    (out, bounces, out_of_scope)
}

/// Score a measurement (or a refusal) of `shot` against its `truth`.
pub fn score(shot: &Shot, truth: &Truth, result: Result<Measured, String>) -> Scored {
    let (scope, bounces, out_of_scope) = in_scope(truth);
    let t_first = truth.flashes.first().map_or(0.0, |f| f.t_s);
    let t_last = truth.flashes.last().map_or(0.0, |f| f.t_s);
    let mut scored = Scored {
        seed: shot.seed,
        description: shot.describe(),
        values: Vec::new(),
        worst: CheckOutcome::Pass,
        warnings: Vec::new(),
        error: None,
        flashes: truth.flashes.len(),
        out_of_frame: truth.flashes.iter().filter(|f| !f.in_frame).count(),
        bounces_out_of_scope: out_of_scope,
        seconds: 0.0,
        confirmed: 0,
        confirmed_true: 0,
        index_consistent: None,
    };
    let m = match result {
        Ok(m) => m,
        Err(e) => {
            scored.error = Some(e);
            for (q, label, t, shown) in scope {
                let class = if shown { Class::Refused } else { Class::Unseen };
                scored.values.push(unmeasured(q, label, t, class));
            }
            for j in bounces {
                let label = format!("bounce {}", j + 1);
                let t = truth.bounces[j].restitution;
                scored
                    .values
                    .push(unmeasured(Quantity::Restitution, label, t, Class::Refused));
            }
            return scored;
        }
    };
    (scored.confirmed, scored.confirmed_true) = confirmed(truth, &m);
    scored.index_consistent = Some(index_consistent(truth, &m));
    let ms = &m.doc.measurement;
    scored.worst = checks::worst(&ms.checks);
    scored.warnings = ms
        .checks
        .iter()
        .filter(|c| c.outcome != CheckOutcome::Pass)
        .map(|c| format!("{}: {:?}", c.check, c.outcome).to_lowercase())
        .collect();
    let flagged = scored.worst != CheckOutcome::Pass;
    let classify = |measured: f64, truth: f64, sigma: f64| {
        if Value::is_right(measured, truth, sigma) {
            Class::Right
        } else if flagged {
            Class::Flagged
        } else {
            Class::Silent
        }
    };
    let mut push =
        |q: Quantity, label: String, truth: f64, measured: Option<(f64, f64)>, shown: bool| {
            let v = match measured {
                Some((mv, s)) => Value {
                    quantity: q,
                    label,
                    truth,
                    measured: mv,
                    sigma: s,
                    class: classify(mv, truth, s),
                },
                None if !shown => unmeasured(q, label, truth, Class::Unseen),
                None => unmeasured(q, label, truth, Class::Missed),
            };
            scored.values.push(v);
        };
    for (q, label, t, shown) in scope {
        let measured = match q {
            Quantity::Gravity => Some((ms.gravity_mps2.value, ms.gravity_mps2.sigma)),
            Quantity::InclineAccel => ms
                .incline
                .as_ref()
                .map(|i| (i.accel_mps2, i.accel_sigma_mps2)),
            Quantity::LaunchSpeed => ms.launch.as_ref().map(|l| (l.speed_mps, l.speed_sigma_mps)),
            Quantity::Restitution => None,
        };
        push(q, label, t, measured, shown);
    }
    // An incline or a launch where the scene has none is wrong.
    if truth.incline_accel_mps2.is_none() {
        if let Some(i) = &ms.incline {
            let v = (i.accel_mps2, i.accel_sigma_mps2);
            push(
                Quantity::InclineAccel,
                "no incline".into(),
                f64::NAN,
                Some(v),
                true,
            );
        }
        if let Some(l) = &ms.launch {
            let v = (l.speed_mps, l.speed_sigma_mps);
            push(
                Quantity::LaunchSpeed,
                "no incline".into(),
                f64::NAN,
                Some(v),
                true,
            );
        }
    }
    // Bounces, matched by time.
    let offset_s = flash_offset(truth, &m).map(|k| {
        let p0 = &m.doc.path[0];
        truth.flashes[p0.n + k].t_s - p0.t_s
    });
    let mut matched = vec![false; truth.bounces.len()];
    for b in &ms.bounces {
        let found = offset_s.and_then(|o| match_bounce(truth, b.t_s + o));
        let v = Some((b.restitution, b.restitution_sigma));
        match found {
            Some(j) => {
                matched[j] = true;
                push(
                    Quantity::Restitution,
                    format!("bounce {}", j + 1),
                    truth.bounces[j].restitution,
                    v,
                    true,
                );
            }
            None => push(
                Quantity::Restitution,
                format!("bounce at {:.3} s (none in truth)", b.t_s),
                f64::NAN,
                v,
                true,
            ),
        }
    }
    for (j, b) in truth.bounces.iter().enumerate() {
        let inside = b.t_s > t_first && b.t_s < t_last;
        if inside && !matched[j] {
            let shown = bounces.contains(&j);
            let label = format!("bounce {}", j + 1);
            push(Quantity::Restitution, label, b.restitution, None, shown);
        }
    }
    scored
}

fn unmeasured(quantity: Quantity, label: String, truth: f64, class: Class) -> Value {
    Value {
        quantity,
        label,
        truth,
        measured: f64::NAN,
        sigma: f64::NAN,
        class,
    }
}

/// The truth bounce nearest `t_s` (truth time), when within two flash intervals and nearer to
/// it than half the gap to its neighbours.
fn match_bounce(truth: &Truth, t_s: f64) -> Option<usize> {
    let b = &truth.bounces;
    let (j, dt) = b
        .iter()
        .enumerate()
        .map(|(j, x)| (j, (x.t_s - t_s).abs()))
        .min_by(|a, c| a.1.total_cmp(&c.1))?;
    let gap_before = if j > 0 {
        b[j].t_s - b[j - 1].t_s
    } else {
        f64::INFINITY
    };
    let gap_after = b.get(j + 1).map_or(f64::INFINITY, |n| n.t_s - b[j].t_s);
    (dt <= 2.0 * truth.interval_s && dt < 0.5 * gap_before.min(gap_after)).then_some(j)
}
