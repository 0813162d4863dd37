//! Crowded images found from the pixels along the path's motion ([`crate::detect::chain`]).
//!
//! Goes in: the photo's file and settings, the spots, the paths, the timed points and the first
//! measurement. Comes out: the same with the images the pixels hold added to the best path (and
//! to the spots, found `predicted_and_confirmed`), and the measurement run again on them; or
//! everything as it was when nothing was added or the physics did not keep it.
//!
//! Four stretches are tried: the crowded start of a roll (the flashes before the first image
//! of a path that begins on the incline, backwards to the release and a few flashes at rest
//! before it); what led into a path that begins with a flight (that flight, earlier, or a roll
//! from rest through the strays behind its first image: an incline whose images all merged,
//! none on the path; whichever misfits the pixels less); each run of missing flashes inside
//! a fitted phase (between the phase's images on both sides); and the flash after the path's
//! last image, where the phase that ends there puts it (a faint last image). All fit
//! the photo's own image of the ball along the phase's motion; the result is kept only when no
//! more checks fail or warn and the phases and bounces stay the same
//! ([`super::kept_if_no_worse`]; for the roll led into a flight, an incline phase comes first
//! and the others stay the same). A ball moving in depth is judged in the plane of its path,
//! as the report measures it ([`InPlane`]).

use super::{kept_if_no_worse, renumbered};
use crate::calibrate::Calibration;
use crate::detect::chain::{
    ChainFit, Motion, Pixels, Stretch, Template, ToPixel, fit_chain, misfit,
};
use crate::detect::{Spot, SpotReport, SpotSource};
use crate::error::Result;
use crate::image::load::load_colour_exact;
use crate::physics::checks::CheckOutcome;
use crate::physics::{self, PhaseKind, TimedPoint};
use crate::pipeline::MeasureSettings;
use crate::pipeline::depth::InPlane;
use crate::track::{BallPath, PathPoint, PathResult};
use std::path::Path;

/// Most images a crowded start is searched for.
const START_TRIALS: i64 = 60;

/// Flashes tried before the turn of a crowded start's motion (the ball at rest where it turns).
const AT_REST: f64 = 4.0;

/// Tangent of the widest angle between the line from the first image of a path that begins with
/// a flight back to a stray and the image's velocity, for the stray to be taken for an image of a
/// roll that led into the flight: the flight's first image may come a whole flash after the
/// launch, its velocity turned by gravity (up to about 20 degrees in the sweep's scenes).
const LEAD_IN_CONE: f64 = 0.47;

/// The roll from rest that led into a flight is started from its release time as the strays put
/// it, and as 1.5 and 2 times as long ago: the flight's first image may come most of a flash
/// after the launch, faster than the roll ended, and a roll started too fast fits the pixels with
/// one image every other flash (sweep shot 168).
const LEAD_IN_SLOWER: [f64; 3] = [1.0, 1.5, 2.0];

/// Largest sigma of an image of a roll found before a flight, in radii: a new phase stands on
/// images the pixels place well. Sweep shot 168 (an 18 px ball whose roll's 7 images lie 0.25 to
/// 0.74 radius apart) fitted 3 images one every other flash with sigmas of 0.2-0.35 radius, and
/// the path's flash numbers went 4 off; the bench's 30 px roll, right, had 0.01-0.03.
const LEAD_IN_SIGMA: f64 = 0.1;

/// Most flashes tried before a flight's first image.
const FLIGHT_END_TRIALS: i64 = 8;

/// Found images of the incline that seed the motion of a crowded start.
const START_SEEDS: usize = 6;

/// Found images on each side of a run of missing flashes that seed its motion.
const GAP_SEEDS: usize = 3;

/// Longest run of missing flashes tried.
const GAP_LONGEST: usize = 4;

/// What the pipeline carries: spots, paths, timed points, measurement.
type State = (
    SpotReport,
    PathResult,
    Vec<TimedPoint>,
    physics::Measurement,
);

/// The plane of motion in units of about a pixel: the calibration's world metres times its
/// scale at the photo's centre.
struct Plane<'a> {
    calibration: &'a Calibration,
    px_per_m: f64,
}

impl Plane<'_> {
    fn of_px(&self, p: [f64; 2]) -> [f64; 2] {
        let [x, y] = self.calibration.to_world(p[0], p[1]);
        [x * self.px_per_m, y * self.px_per_m]
    }

    fn to_px(&self, u: [f64; 2]) -> [f64; 2] {
        self.calibration
            .to_pixel(u[0] / self.px_per_m, u[1] / self.px_per_m)
    }

    /// A 1-sigma `sigma` per axis at `u` in the plane, in the photo's pixels.
    fn sigma_px(&self, u: [f64; 2], sigma: f64) -> f64 {
        let at = self.to_px(u);
        let step = |d: [f64; 2]| {
            let q = self.to_px([u[0] + d[0], u[1] + d[1]]);
            (q[0] - at[0]).hypot(q[1] - at[1])
        };
        0.5 * (step([sigma, 0.0]) + step([0.0, sigma]))
    }
}

/// The crowded start, then what led into a path that begins with a flight, then the runs of
/// missing flashes, each kept when the physics keeps it (see the module's doc). `photo` is
/// None when the spots came without a photo; `calibration` maps pixels to the plane of motion;
/// `timed` makes a path point a timed point, `measure` runs the physics, `r_px` is the path's
/// median radius.
pub(super) fn crowded(
    photo: Option<(&Path, &MeasureSettings)>,
    (calibration, plane_file): (&Calibration, bool),
    state: State,
    (timed, measure): (
        impl Fn(&PathPoint) -> TimedPoint,
        impl Fn(&[TimedPoint]) -> Result<physics::Measurement>,
    ),
    r_px: f64,
) -> State {
    let Some((photo_path, settings)) = photo else {
        return state;
    };
    let wanted =
        |s: &State| start_wanted(s) || lead_in_wanted(s) || !gaps(s).is_empty() || end_wanted(s);
    if !wanted(&state) {
        return state;
    }
    let load = |p: &Path| load_colour_exact(p, &settings.load).ok();
    let Some(rgb) = load(photo_path) else {
        return state;
    };
    let plate = match &settings.plate {
        Some(p) => match load(p) {
            Some(plate) => Some(plate),
            None => return state,
        },
        None => None,
    };
    let pixels = Pixels {
        rgb: &rgb,
        plate: plate.as_ref(),
        tone: settings.spots.tone,
    };
    let one = Template::learn(
        &pixels,
        &centres_apart(&state.0, &state.1, 2.2 * r_px),
        r_px,
    )
    .or_else(|| {
        let spots: Vec<[f64; 2]> = state.0.spots.iter().map(|s| [s.x_px, s.y_px]).collect();
        let apart = centres_apart(&state.0, &state.1, r_px);
        Template::learn_apart(&pixels, &apart, &spots, r_px)
    });
    let Some(one) = one else {
        return state;
    };
    let (w, h) = (state.0.width_px as f64, state.0.height_px as f64);
    let plane = Plane {
        calibration,
        px_per_m: calibration.scale_px_per_m(w / 2.0, h / 2.0),
    };
    let to_px = |u: [f64; 2]| plane.to_px(u);
    let try_with = |state: State, found: Vec<(i64, ChainFit)>, led_in: bool| {
        if found.iter().all(|(_, f)| f.added.is_empty()) {
            return state;
        }
        let (report, paths) = with_images(&state.0, &state.1, &found, (&plane, r_px));
        let points: Vec<TimedPoint> = paths.paths[0].points.iter().map(&timed).collect();
        let paths = renumbered(paths, &points);
        let kept = |before: &physics::Measurement, m: &physics::Measurement| match led_in {
            false => kept_if_no_worse(before, m),
            true => led_in_kept(before, m),
        };
        let Ok(m) = measure(&points) else {
            return state;
        };
        // A ball moving in depth is judged in the plane of its path, as it is reported (see
        // [`InPlane`]): without it the arcs misfit by more than the images found move them.
        let in_plane = |report: &SpotReport, paths: &PathResult| {
            InPlane::of(report, &paths.paths[0], calibration, plane_file)
                .measured(&paths.paths[0], (&timed, &measure))
                .map(|(_, m)| m)
        };
        let judged = match (in_plane(&state.0, &state.1), in_plane(&report, &paths)) {
            (Some(before), Some(after)) => kept(&before, &after),
            _ => kept(&state.3, &m),
        };
        if judged {
            (report, paths, points, m)
        } else {
            state
        }
    };
    let started: Vec<(i64, ChainFit)> = start_stretch(&state, &plane, r_px)
        .and_then(|(n0, stretch)| {
            Some((n0, fit_chain(&pixels, &one, &stretch.borrow(&to_px), r_px)?))
        })
        .into_iter()
        .collect();
    let state = try_with(state, started, false);
    let state = match lead_in(&state, (&pixels, &one), &plane, r_px) {
        Some((n0, fit, rolled)) => try_with(state, vec![(n0, fit)], rolled),
        None => state,
    };
    let filled: Vec<(i64, ChainFit)> = gaps(&state)
        .into_iter()
        .filter_map(|run| {
            let (n0, stretch) = gap_stretch(&state, &run, &plane, r_px)?;
            Some((n0, fit_chain(&pixels, &one, &stretch.borrow(&to_px), r_px)?))
        })
        .collect();
    let state = try_with(state, filled, false);
    let ended: Vec<(i64, ChainFit)> = end_stretch(&state, &plane, r_px, (w, h))
        .and_then(|(n0, stretch)| {
            Some((n0, fit_chain(&pixels, &one, &stretch.borrow(&to_px), r_px)?))
        })
        .into_iter()
        .collect();
    try_with(state, ended, false)
}

/// The path's last image ends a fitted phase with enough images to seed the flash after it.
fn end_wanted(state: &State) -> bool {
    let (_, paths, _, m) = state;
    let Some(last) = paths.paths.first().and_then(|b| b.points.last()) else {
        return false;
    };
    m.phases.iter().any(|p| {
        p.kind != PhaseKind::Bounce
            && p.kind != PhaseKind::Unfitted
            && p.last_n == last.n
            && p.last_n >= p.first_n + END_SEEDS - 1
    })
}

/// Images of its phase before the path's last that seed the flash after it.
const END_SEEDS: usize = 4;

/// The flash after the path's last image, when that image ends a fitted phase (a flight, a
/// roll) of at least [`END_SEEDS`] images on the path and the phase's motion puts the flash's
/// image wholly inside the `w` x `h` photo: a faint last image (a flash that fired weaker, the
/// edge of the light) that the detector called a weak rim. One flash only: the phase may end
/// there (a bounce, the floor), and the pixels must then show no ball where it would be.
fn end_stretch(
    state: &State,
    plane: &Plane,
    r_px: f64,
    (w, h): (f64, f64),
) -> Option<(i64, Owned)> {
    let (report, paths, _, m) = state;
    let best = paths.paths.first()?;
    let last = best.points.last()?;
    let phase = m.phases.iter().rfind(|p| {
        matches!(
            p.kind,
            PhaseKind::Incline | PhaseKind::Flight | PhaseKind::Floor
        ) && p.last_n == last.n
    })?;
    let seeds: Vec<&PathPoint> = best
        .points
        .iter()
        .filter(|p| p.n >= phase.first_n)
        .collect();
    let seeds = &seeds[seeds.len().saturating_sub(END_SEEDS)..];
    if seeds.len() < END_SEEDS {
        return None;
    }
    let a = last.n as i64 + 1;
    let found: Vec<(i64, [f64; 2])> = seeds
        .iter()
        .map(|p| (p.n as i64 - a, plane.of_px([p.x_px, p.y_px])))
        .collect();
    let motion = Motion::through(&found)?;
    let [x, y] = plane.to_px(motion.at(0.0));
    if x < r_px || y < r_px || x > w - 1.0 - r_px || y > h - 1.0 - r_px {
        return None;
    }
    let trials = [0i64];
    let others = others_near((report, best), seeds, (plane, &motion, &trials), r_px);
    Some((
        a,
        Owned {
            base: found.iter().map(|f| f.0).collect(),
            found,
            trials: trials.to_vec(),
            others,
            from_rest: false,
            seed: None,
        },
    ))
}

/// A stretch with its own storage (a [`Stretch`] borrows it).
struct Owned {
    found: Vec<(i64, [f64; 2])>,
    base: Vec<i64>,
    trials: Vec<i64>,
    others: Vec<[f64; 2]>,
    from_rest: bool,
    seed: Option<Motion>,
}

impl Owned {
    fn borrow<'a>(&'a self, to_px: ToPixel<'a>) -> Stretch<'a> {
        Stretch {
            found: &self.found,
            base: self.base.clone(),
            trials: &self.trials,
            others: &self.others,
            from_rest: self.from_rest,
            to_px,
            seed: self.seed,
        }
    }
}

/// The path begins on the incline.
fn start_wanted(state: &State) -> bool {
    state
        .3
        .phases
        .first()
        .is_some_and(|p| p.kind == PhaseKind::Incline)
}

/// The first phase of a path and its first images in it.
struct Opening<'a> {
    /// The best path.
    best: &'a BallPath,
    /// The flash index of the path's first image.
    n0: usize,
    /// The path's first images in the phase, [`START_SEEDS`] at most.
    seeds: Vec<&'a PathPoint>,
    /// Their flash offsets from the first and their centres in the plane of motion.
    found: Vec<(i64, [f64; 2])>,
}

/// The opening of the best path of `state` when its first phase is of `kind`.
fn opening<'a>(state: &'a State, kind: PhaseKind, plane: &Plane) -> Option<Opening<'a>> {
    let phase = state.3.phases.first()?;
    let best = state.1.paths.first()?;
    if phase.kind != kind {
        return None;
    }
    let seeds: Vec<&PathPoint> = best
        .points
        .iter()
        .filter(|p| p.n <= phase.last_n)
        .take(START_SEEDS)
        .collect();
    let n0 = seeds.first()?.n;
    let found = seeds
        .iter()
        .map(|p| ((p.n - n0) as i64, plane.of_px([p.x_px, p.y_px])))
        .collect();
    Some(Opening {
        best,
        n0,
        seeds,
        found,
    })
}

/// The crowded start's stretch (flash offsets from the path's first image, whose `n` comes
/// with it): the first images of the incline as seeds, every flash between them on the motion,
/// and the flashes before them to try, backwards while in the frame and short of three flashes
/// past the turn of the seeds' motion.
fn start_stretch(state: &State, plane: &Plane, r_px: f64) -> Option<(i64, Owned)> {
    let report = &state.0;
    let Opening {
        best,
        n0,
        seeds,
        found,
    } = opening(state, PhaseKind::Incline, plane)?;
    let start = Motion::through(&found)?;
    let (w, h) = (report.width_px as f64, report.height_px as f64);
    let trials: Vec<i64> = (1..=START_TRIALS)
        .map(|k| -k)
        .take_while(|&m| {
            let [x, y] = plane.to_px(start.placed(m as f64, true));
            (0.0..w).contains(&x) && (0.0..h).contains(&y) && m as f64 >= start.turn() - AT_REST
        })
        .collect();
    let (lo, hi) = (found.first()?.0, found.last()?.0);
    let others = others_near((report, best), &seeds, (plane, &start, &trials), r_px);
    Some((
        n0 as i64,
        Owned {
            found,
            base: (lo..=hi).collect(),
            trials,
            others,
            from_rest: true,
            seed: None,
        },
    ))
}

/// What led into a path that begins with a flight, from the pixels before its first image: the
/// flight itself, earlier (its own motion backwards: a slow throw's crowded start), or a roll
/// from rest down an incline whose images all merged ([`lead_in_stretch`]). When both add
/// images, the account of the pixels with the lesser misfit on the same samples (the path's
/// images and each account's added images, over every added image) is taken, a roll only when
/// every image it adds has a sigma under [`LEAD_IN_SIGMA`] radius. The fit with the `n` its
/// offsets count from, and whether it is the roll.
fn lead_in(
    state: &State,
    (pixels, one): (&Pixels, &Template),
    plane: &Plane,
    r_px: f64,
) -> Option<(i64, ChainFit, bool)> {
    let to_px = |u: [f64; 2]| plane.to_px(u);
    let flight = flight_start_stretch(state, plane, r_px)
        .and_then(|(n0, stretch)| {
            Some((n0, fit_chain(pixels, one, &stretch.borrow(&to_px), r_px)?))
        })
        .filter(|(_, f)| !f.added.is_empty());
    let rolls = LEAD_IN_SLOWER.iter().filter_map(|&slower| {
        let (n0, stretch, witnesses) = lead_in_stretch(state, plane, r_px, slower)?;
        let fit = fit_chain(pixels, one, &stretch.borrow(&to_px), r_px)?;
        Some((n0, witnessed(fit, &witnesses, r_px)?, true))
    });
    let accounts: Vec<(i64, ChainFit, bool)> = flight
        .map(|(n0, f)| (n0, f, false))
        .into_iter()
        .chain(rolls)
        .filter(|(_, f, _)| !f.added.is_empty())
        .collect();
    // A new phase stands on images the pixels place well.
    let placed = |(n0, f, rolled): (i64, ChainFit, bool)| {
        let fine = !rolled || f.added.iter().all(|a| a.2 <= LEAD_IN_SIGMA * r_px);
        fine.then_some((n0, f, rolled))
    };
    if accounts.len() < 2 {
        return accounts.into_iter().next().and_then(placed);
    }
    let path: Vec<[f64; 2]> = state.1.paths[0]
        .points
        .iter()
        .map(|p| [p.x_px, p.y_px])
        .collect();
    let added = |f: &ChainFit| -> Vec<[f64; 2]> {
        f.added.iter().map(|(_, c, _)| plane.to_px(*c)).collect()
    };
    let around: Vec<[f64; 2]> = accounts.iter().flat_map(|(_, f, _)| added(f)).collect();
    let misfit_of = |f: &ChainFit| {
        let images = [path.clone(), added(f)].concat();
        misfit(pixels, one, (&images, &around), r_px).unwrap_or(f64::INFINITY)
    };
    accounts
        .into_iter()
        .map(|a| (misfit_of(&a.1), a))
        .min_by(|a, b| a.0.total_cmp(&b.0))
        .and_then(|(_, a)| placed(a))
}

/// The flashes before the first image of a path that begins with a flight, on the flight's own
/// motion (flash offsets from that image, whose `n` comes with it): the flight's first images as
/// seeds, every flash between them on the motion, the flashes before them to try, backwards
/// while in the frame and off the path's images ([`FLIGHT_END_TRIALS`] at most). The same
/// after a path's last flight image was tried and left out: on sweep shots 84, 126 and 212
/// (drops whose rise passes over their fall) the image it added put a stray of another flash on
/// the path's track, and `images_accounted` warned on right values.
fn flight_start_stretch(state: &State, plane: &Plane, r_px: f64) -> Option<(i64, Owned)> {
    let report = &state.0;
    let Opening {
        best,
        n0,
        seeds,
        found,
    } = opening(state, PhaseKind::Flight, plane)?;
    let motion = Motion::through(&found)?;
    let (w, h) = (report.width_px as f64, report.height_px as f64);
    // A flash the motion puts on an image of the path cannot be told from it (a drop read
    // backwards retraces its fall; sweep shot 294 had 14 images added on its own).
    let on_path = |[x, y]: [f64; 2]| {
        best.points
            .iter()
            .any(|p| (p.x_px - x).hypot(p.y_px - y) < 0.5 * r_px)
    };
    let trials: Vec<i64> = (1..=FLIGHT_END_TRIALS)
        .map(|k| -k)
        .take_while(|&m| {
            let [x, y] = plane.to_px(motion.at(m as f64));
            (0.0..w).contains(&x) && (0.0..h).contains(&y) && !on_path([x, y])
        })
        .collect();
    if trials.is_empty() {
        return None;
    }
    let (lo, hi) = (found.first()?.0, found.last()?.0);
    let others = others_near((report, best), &seeds, (plane, &motion, &trials), r_px);
    let owned = Owned {
        found,
        base: (lo..=hi).collect(),
        trials,
        others,
        from_rest: false,
        seed: None,
    };
    Some((n0 as i64, owned))
}

/// The path begins with a flight (the ball may have rolled down an incline the path missed).
fn lead_in_wanted(state: &State) -> bool {
    state
        .3
        .phases
        .first()
        .is_some_and(|p| p.kind == PhaseKind::Flight)
}

/// A roll from rest that leads into the flight a path begins with, as a stretch (flash offsets
/// from the path's first image, whose `n` comes with it) and its witnesses: the strays behind
/// the first image near the line of its velocity (within [`LEAD_IN_CONE`] of it and half a
/// radius; the ball leaves a straight incline along it), the farthest taken for where the roll
/// began. The motion starts from the first image at its speed, towards it from that stray,
/// accelerating from rest there (a constant acceleration from rest covers the distance D in
/// 2 D / v), the release `slower` times as long ago; every flash back to the release and
/// [`AT_REST`] more are tried; the first image is held where it was found. None without such a
/// stray.
fn lead_in_stretch(
    state: &State,
    plane: &Plane,
    r_px: f64,
    slower: f64,
) -> Option<(i64, Owned, Vec<[f64; 2]>)> {
    let (report, paths) = (&state.0, &state.1);
    let Opening {
        best, seeds, found, ..
    } = opening(state, PhaseKind::Flight, plane)?;
    let first = *seeds.first()?;
    let v0 = Motion::through(&found)?.velocity(0.0);
    let speed = v0[0].hypot(v0[1]);
    let c0 = plane.of_px([first.x_px, first.y_px]);
    if speed < 1e-6 {
        return None;
    }
    let back = [-v0[0] / speed, -v0[1] / speed];
    let witnesses: Vec<[f64; 2]> = paths
        .strays
        .iter()
        .map(|s| plane.of_px([s.x_px, s.y_px]))
        .filter(|u| {
            let d = [u[0] - c0[0], u[1] - c0[1]];
            let along = d[0] * back[0] + d[1] * back[1];
            let across = (d[0] - along * back[0]).hypot(d[1] - along * back[1]);
            along > 0.5 * r_px && across < along * LEAD_IN_CONE + 0.5 * r_px
        })
        .collect();
    let rest = *witnesses.iter().max_by(|a, b| {
        let d = |u: &&[f64; 2]| (u[0] - c0[0]).hypot(u[1] - c0[1]);
        d(a).total_cmp(&d(b))
    })?;
    let reach = (c0[0] - rest[0]).hypot(c0[1] - rest[1]);
    let turn = 2.0 * reach / speed * slower;
    if turn > START_TRIALS as f64 {
        return None;
    }
    let along = [(c0[0] - rest[0]) / reach, (c0[1] - rest[1]) / reach];
    let seed = Motion {
        c0_px: c0,
        v_px: along.map(|u| u * speed),
        a_px: along.map(|u| u * speed / turn),
    };
    let (w, h) = (report.width_px as f64, report.height_px as f64);
    let trials: Vec<i64> = (1..=START_TRIALS)
        .map(|k| -k)
        .take_while(|&m| {
            let [x, y] = plane.to_px(seed.placed(m as f64, true));
            (0.0..w).contains(&x) && (0.0..h).contains(&y) && m as f64 >= -turn - AT_REST
        })
        .collect();
    let near_witness = |s: &[f64; 2]| {
        witnesses.iter().any(|u| {
            let q = plane.to_px(*u);
            (q[0] - s[0]).hypot(q[1] - s[1]) < 0.5
        })
    };
    let mut others = others_near((report, best), &[first], (plane, &seed, &trials), r_px);
    others.retain(|s| !near_witness(s));
    others.push([first.x_px, first.y_px]);
    let owned = Owned {
        found: Vec::new(),
        base: Vec::new(),
        trials,
        others,
        from_rest: true,
        seed: Some(seed),
    };
    Some((first.n as i64, owned, witnesses))
}

/// `fit` when each of the `witnesses` (found images of the stretch whose flashes were not
/// known) lies within a quarter of a radius of one of its added images, their RMS miss per
/// axis added to the images' sigmas; None otherwise.
fn witnessed(mut fit: ChainFit, witnesses: &[[f64; 2]], r_px: f64) -> Option<ChainFit> {
    let misses: Vec<f64> = witnesses
        .iter()
        .map(|w| {
            fit.added
                .iter()
                .map(|(_, c, _)| (c[0] - w[0]).hypot(c[1] - w[1]))
                .fold(f64::INFINITY, f64::min)
        })
        .collect();
    if fit.added.is_empty() || misses.iter().any(|&d| d > 0.25 * r_px) {
        return None;
    }
    let rms = (misses.iter().map(|d| d * d).sum::<f64>() / (2.0 * misses.len() as f64)).sqrt();
    for (_, _, sigma) in &mut fit.added {
        *sigma = sigma.hypot(rms);
    }
    Some(fit)
}

/// A run of the physics `m` on a path led in by a roll is kept when no more checks fail or
/// warn than in `first`, an incline comes first and the phases after it and the bounces are
/// `first`'s.
fn led_in_kept(first: &physics::Measurement, m: &physics::Measurement) -> bool {
    let no_worse = [CheckOutcome::Fail, CheckOutcome::Warn]
        .iter()
        .all(|&o| m.checks_with(o) <= first.checks_with(o));
    let kinds = |p: &[physics::PhaseSpan]| p.iter().map(|p| p.kind).collect::<Vec<_>>();
    no_worse
        && m.phases
            .first()
            .is_some_and(|p| p.kind == PhaseKind::Incline)
        && kinds(&m.phases[1..]) == kinds(&first.phases)
        && m.bounces.len() == first.bounces.len()
}

/// The runs of missing flashes of the best path inside a fitted phase (incline, flight or
/// floor), each at most [`GAP_LONGEST`] long.
fn gaps(state: &State) -> Vec<Vec<usize>> {
    let (_, paths, _, m) = state;
    let Some(best) = paths.paths.first() else {
        return Vec::new();
    };
    let inside = |n: usize| {
        m.phases.iter().any(|p| {
            matches!(
                p.kind,
                PhaseKind::Incline | PhaseKind::Flight | PhaseKind::Floor
            ) && p.first_n < n
                && n < p.last_n
        })
    };
    let mut runs: Vec<Vec<usize>> = Vec::new();
    for &n in best.missing.iter().filter(|&&n| inside(n)) {
        match runs.last_mut() {
            Some(run) if run.last() == Some(&(n - 1)) => run.push(n),
            _ => runs.push(vec![n]),
        }
    }
    runs.retain(|r| r.len() <= GAP_LONGEST);
    runs
}

/// A run of missing flashes as a stretch (flash offsets from the run's first flash, whose `n`
/// comes with it): up to [`GAP_SEEDS`] images of its phase on each side as seeds, the run's
/// flashes to try from both ends inwards. None without a seed on each side or three in all.
fn gap_stretch(state: &State, run: &[usize], plane: &Plane, r_px: f64) -> Option<(i64, Owned)> {
    let (report, paths, _, m) = state;
    let best = paths.paths.first()?;
    let (a, b) = (*run.first()?, *run.last()?);
    let phase = m
        .phases
        .iter()
        .find(|p| p.kind != PhaseKind::Bounce && p.first_n < a && b < p.last_n)?;
    let in_phase = |p: &&PathPoint| phase.first_n <= p.n && p.n <= phase.last_n;
    let before: Vec<&PathPoint> = best
        .points
        .iter()
        .filter(in_phase)
        .filter(|p| p.n < a)
        .collect();
    let after: Vec<&PathPoint> = best
        .points
        .iter()
        .filter(in_phase)
        .filter(|p| p.n > b)
        .take(GAP_SEEDS)
        .collect();
    let before = &before[before.len().saturating_sub(GAP_SEEDS)..];
    if before.is_empty() || after.is_empty() || before.len() + after.len() < 3 {
        return None;
    }
    let seeds: Vec<&PathPoint> = before.iter().chain(&after).copied().collect();
    let found: Vec<(i64, [f64; 2])> = seeds
        .iter()
        .map(|p| (p.n as i64 - a as i64, plane.of_px([p.x_px, p.y_px])))
        .collect();
    let offsets: Vec<i64> = (0..run.len() as i64).collect();
    // From both ends inwards: the flash beside a seed first.
    let mut trials = Vec::with_capacity(offsets.len());
    let (mut i, mut j) = (0, offsets.len());
    while i < j {
        trials.push(offsets[i]);
        i += 1;
        if i < j {
            j -= 1;
            trials.push(offsets[j]);
        }
    }
    let motion = Motion::through(&found)?;
    let others = others_near((report, best), &seeds, (plane, &motion, &trials), r_px);
    Some((
        a as i64,
        Owned {
            base: found.iter().map(|f| f.0).collect(),
            found,
            trials,
            others,
            from_rest: false,
            seed: None,
        },
    ))
}

/// The spots within two radii and 3 px of the seeds or of the images `motion` predicts at the
/// `trials` offsets, less the seeds themselves and the strays on a predicted image (some of the
/// images tried, merged). An image of the best path is another flash's, held even where a trial
/// falls on it (a drop's rise passes over its fall, and a flight read backwards retraces it).
fn others_near(
    (report, best): (&SpotReport, &BallPath),
    seeds: &[&PathPoint],
    (plane, motion, trials): (&Plane, &Motion, &[i64]),
    r_px: f64,
) -> Vec<[f64; 2]> {
    let predicted: Vec<[f64; 2]> = trials
        .iter()
        .map(|&m| plane.to_px(motion.at(m as f64)))
        .collect();
    let reach = 2.0 * r_px + 3.0;
    let near: Vec<[f64; 2]> = seeds
        .iter()
        .map(|p| [p.x_px, p.y_px])
        .chain(predicted.to_vec())
        .collect();
    let on_path = |i: usize| best.points.iter().any(|p| p.spot_index == i);
    report
        .spots
        .iter()
        .enumerate()
        .filter(|(i, _)| !seeds.iter().any(|p| p.spot_index == *i))
        .filter(|(_, s)| {
            near.iter()
                .any(|c| (s.x_px - c[0]).hypot(s.y_px - c[1]) < reach)
        })
        .filter(|(i, s)| {
            on_path(*i)
                || !predicted
                    .iter()
                    .any(|c| (s.x_px - c[0]).hypot(s.y_px - c[1]) < r_px)
        })
        .map(|(_, s)| [s.x_px, s.y_px])
        .collect()
}

/// The spots and paths with the images of `found` (each fit with the `n` its offsets count
/// from; its centres in `plane`) added to the best path and the spots, found
/// `predicted_and_confirmed`. A flash before
/// the path's first takes the first index and shifts the path's by as many. A stray on an added
/// image is a detection of the merged images it is one of: it becomes that image.
fn with_images(
    report: &SpotReport,
    paths: &PathResult,
    found: &[(i64, ChainFit)],
    (plane, r_px): (&Plane, f64),
) -> (SpotReport, PathResult) {
    let (mut report, mut paths) = (report.clone(), paths.clone());
    let images: Vec<(i64, [f64; 2], f64)> = found
        .iter()
        .flat_map(|(n0, fit)| {
            fit.added
                .iter()
                .map(move |&(m, c, s)| (n0 + m, plane.to_px(c), plane.sigma_px(c, s)))
        })
        .collect();
    let lowest = images.iter().map(|i| i.0).min().unwrap_or(0).min(0);
    let shift = (-lowest) as usize;
    for p in &mut paths.paths[0].points {
        p.n += shift;
    }
    for (n, [x_px, y_px], sigma_px) in images {
        let spot = Spot {
            x_px,
            y_px,
            r_px,
            sigma_px,
            score: 0.0,
            source: SpotSource::PredictedAndConfirmed,
        };
        let merged = paths
            .strays
            .iter()
            .position(|s| (s.x_px - x_px).hypot(s.y_px - y_px) < 0.5 * r_px);
        let spot_index = match merged {
            Some(i) => {
                let index = paths.strays.remove(i).spot_index;
                report.spots[index] = spot;
                index
            }
            None => {
                report.spots.push(spot);
                report.spots.len() - 1
            }
        };
        paths.paths[0].points.push(PathPoint {
            n: (n + shift as i64) as usize,
            spot_index,
            x_px,
            y_px,
            r_px,
            sigma_px,
        });
    }
    let path: &mut BallPath = &mut paths.paths[0];
    path.points.sort_by_key(|p| p.n);
    (report, paths)
}

/// Centres of the images of the best path with no spot of `report` within `apart_px`: its
/// flashes before and after are on it (no unfound image beside it). 2.2 radii: isolated; one
/// radius: apart enough to show some of their disc free of any other.
fn centres_apart(report: &SpotReport, paths: &PathResult, apart_px: f64) -> Vec<[f64; 2]> {
    let Some(best) = paths.paths.first() else {
        return Vec::new();
    };
    let on_path = |n: usize| best.points.iter().any(|p| p.n == n);
    best.points
        .iter()
        .filter(|p| p.n > 0 && on_path(p.n - 1) && on_path(p.n + 1))
        .filter(|p| {
            report.spots.iter().enumerate().all(|(j, o)| {
                j == p.spot_index || (o.x_px - p.x_px).hypot(o.y_px - p.y_px) > apart_px
            })
        })
        .map(|p| [p.x_px, p.y_px])
        .collect()
}
