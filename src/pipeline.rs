//! Measure: the main job, from one strobe photo to physics numbers.
//!
//! Goes in: a photo file and [`MeasureSettings`]. Comes out: a [`MeasureDoc`] (the timed path in
//! pixels and metres, the phases, bounces, launch, incline, calibration quantities with their
//! 1-sigma and source, and the verdicts of acceptance bands) plus the intermediate results for
//! pictures. This module only chains the stages: [`crate::detect`] -> [`crate::track`] ->
//! [`crate::calibrate`] -> [`crate::physics`].

use crate::calibrate::{self, Calibration, PlaneFile};
use crate::detect::{self, Spot, SpotOptions, SpotReport, SpotSource};
use crate::error::{Error, Result, TrackError, positive};
use crate::physics::checks::CheckOutcome;
use crate::physics::frame::ResultFrame;
use crate::physics::{self, MeasureOptions, PhaseKind, Quantity, TimedPoint, Unknown};
use crate::report::measure::{MeasureDoc, PathEntry, WorldOrigin};
use crate::track::{self, PathOptions, PathPoint, PathResult, StrayReason};
use std::path::{Path, PathBuf};

mod crowded;
mod depth;
mod spin;

/// Where the pixel-to-metre scale comes from.
#[derive(Debug, Clone, PartialEq)]
pub enum ScaleSource {
    /// Pixels per metre in the plane of motion.
    PxPerM(f64),
    /// Two image points a known distance apart in the plane of motion.
    Ruler {
        /// First point, pixels.
        a_px: [f64; 2],
        /// Second point, pixels.
        b_px: [f64; 2],
        /// Distance, metres.
        distance_m: f64,
    },
    /// The ball's diameter: the detected radius is a ruler always in frame.
    BallDiameter,
    /// A plane file: four or more image points with world coordinates (homography).
    Plane(PathBuf),
}

/// Everything the measurement needs besides the photo.
#[derive(Debug, Clone, Default)]
pub struct MeasureSettings {
    /// Spot finding.
    pub spots: SpotOptions,
    /// Optional clean plate.
    pub plate: Option<PathBuf>,
    /// Path ordering.
    pub path: PathOptions,
    /// Scale source (None: the scale is estimated from the flight arcs).
    pub scale: Option<ScaleSource>,
    /// Ball diameter, metres (needed for `BallDiameter` and for the floor contact).
    pub ball_diameter_m: Option<f64>,
    /// Flash rate, hertz (None: the flash interval is estimated from the flight arcs).
    pub rate_hz: Option<f64>,
    /// The camera's focal length in pixels (the lens's focal length over the sensor's pixel
    /// pitch), for the motion in depth in metres per second (None: as a relative rate only).
    pub focal_px: Option<f64>,
    /// The quantity to estimate from the flight arcs (None: gravity when the rate and a scale
    /// are given, otherwise the one missing); see [`MeasureSettings::unknown`].
    pub estimate: Option<Unknown>,
    /// Physics options (gravity, ball build, level, floor, drag, bands...).
    pub physics: MeasureOptions,
    /// Decoding limits.
    pub load: crate::image::load::LoadOptions,
}

/// Systematic 1-sigma of a ball image's radius common to all images of a photo, pixels: the
/// edge's place on a blurred, lit, compressed limb does not average out over the images (common
/// practice, no source; the sweep bench checks that the scale's interval then covers the truth).
const RADIUS_SYSTEMATIC_PX: f64 = 0.05;

/// 1-sigma added in quadrature to every centre's own, pixels: what a centre's noise-based sigma
/// leaves out and does not average out over one image (JPEG blocks, the sensor's pixel
/// response, the lit limb's model). Common practice, no source; the sweep bench
/// (bench/SWEEP_RESULTS.md) counts how often the truth then falls inside 2 sigma.
const CENTRE_FLOOR_PX: f64 = 0.03;

/// Why the ball-diameter scale cannot be used.
const NEEDED_FOR_BALL_SCALE: &str = "needed to use the ball as the ruler";

impl MeasureSettings {
    /// The one place that decides which of scale, flash interval and gravity the flight arcs
    /// estimate: the one not given (a missing flash rate makes it the interval, a missing scale
    /// the scale), else the one asked for, else gravity. Two of the three must be known, and a
    /// quantity asked for must be the one missing when one is.
    pub fn unknown(&self) -> Result<Unknown> {
        let refuse = |asked: Unknown, missing: &str, unknown: &str| {
            Error::setting(
                "estimate",
                format!(
                    "{} cannot be estimated without {missing}: then the {unknown} is the quantity \
                     the flight arcs estimate",
                    asked.name()
                ),
            )
        };
        match (self.rate_hz.is_some(), self.scale.is_some(), self.estimate) {
            (false, false, _) => Err(Error::setting(
                "rate_hz",
                "give the flash rate or a scale: two of scale, flash interval and gravity \
                 must be known",
            )),
            (false, true, None | Some(Unknown::Interval)) => Ok(Unknown::Interval),
            (false, true, Some(e)) => Err(refuse(e, "the flash rate", "flash interval")),
            (true, false, None | Some(Unknown::Scale)) => Ok(Unknown::Scale),
            (true, false, Some(e)) => Err(refuse(e, "a scale", "scale")),
            (true, true, asked) => Ok(asked.unwrap_or(Unknown::Gravity)),
        }
    }

    /// Refuse absurd values and settings that do not go together, naming the setting by its
    /// snake_case key (never a command-line flag). The spot options are checked where they are
    /// used, by [`detect::find_spots`].
    pub fn validate(&self) -> Result<()> {
        if let Some(r) = self.rate_hz
            && !(r.is_finite() && r > 0.0 && r <= 1e5)
        {
            return Err(Error::setting(
                "rate_hz",
                format!("must be between 0 and 100000 Hz, got {r}"),
            ));
        }
        if let Some(d) = self.ball_diameter_m {
            positive(d, "ball_diameter_m")?;
        }
        if let Some(f) = self.focal_px {
            positive(f, "focal_px")?;
        }
        match &self.scale {
            Some(ScaleSource::PxPerM(s)) => positive(*s, "scale_px_per_m")?,
            Some(ScaleSource::Ruler { distance_m, .. }) => positive(*distance_m, "ruler")?,
            Some(ScaleSource::BallDiameter) if self.ball_diameter_m.is_none() => {
                return Err(Error::setting("ball_diameter_m", NEEDED_FOR_BALL_SCALE));
            }
            _ => {}
        }
        positive(self.physics.gravity.value, "gravity_mps2")?;
        if let Some(q) = self.physics.inner_ratio
            && !(q.is_finite() && (0.0..1.0).contains(&q))
        {
            return Err(Error::setting(
                "ball",
                "the inner diameter must be 0 <= inner < the ball's diameter",
            ));
        }
        self.unknown().map(|_| ())
    }
}

/// The measurement and what it was made from, for pictures.
#[derive(Debug, Clone)]
pub struct Measured {
    /// The document.
    pub doc: MeasureDoc,
    /// Spot finding's report.
    pub spots: SpotReport,
    /// Path ordering's result.
    pub paths: PathResult,
    /// The calibration used.
    pub calibration: Calibration,
}

/// Measure one photo.
pub fn measure_photo(photo_path: &Path, settings: &MeasureSettings) -> Result<Measured> {
    settings.validate()?;
    let photo = crate::image::load::load(photo_path, &settings.load)?;
    let plate = settings
        .plate
        .as_deref()
        .map(|p| crate::image::load::load(p, &settings.load))
        .transpose()?;
    let report = detect::find_spots(&photo, plate.as_ref(), &settings.spots, None)?;
    // The grey photo is done with: the pixels along the motion are read in colour.
    drop((photo, plate));
    measure_validated(photo_path, report, settings, true)
}

/// Measure from spots already found.
pub fn measure_spots(
    photo_path: &Path,
    report: SpotReport,
    settings: &MeasureSettings,
) -> Result<Measured> {
    settings.validate()?;
    measure_validated(photo_path, report, settings, false)
}

/// The calibration and the scale it gives, from the settings' scale source; `radii_px` are the
/// path's image radii in increasing order (the ball as the ruler), `(w, h)` the photo's size.
fn scale_of(
    settings: &MeasureSettings,
    radii: &[f64],
    (w, h): (u32, u32),
) -> Result<(Calibration, Option<Quantity>)> {
    let r_px = radii[radii.len() / 2];
    let nominal = |px_per_m: f64| Calibration::uniform(px_per_m, 0.0, h as f64 - 1.0, 0.0);
    Ok(match &settings.scale {
        Some(ScaleSource::PxPerM(s)) => (nominal(*s)?, Some(Quantity::new(*s, 0.0, "given"))),
        Some(ScaleSource::Ruler {
            a_px,
            b_px,
            distance_m,
        }) => {
            let s = calibrate::ruler_scale(*a_px, *b_px, *distance_m, 0.5)?;
            (
                nominal(s.px_per_m)?,
                Some(Quantity::new(s.px_per_m, s.sigma_px_per_m, "ruler")),
            )
        }
        Some(ScaleSource::BallDiameter) => {
            let d = settings
                .ball_diameter_m
                .ok_or_else(|| Error::setting("ball_diameter_m", NEEDED_FOR_BALL_SCALE))?;
            let spread = radii[radii.len() * 3 / 4] - radii[radii.len() / 4];
            let statistical = (spread / 1.349) / (radii.len() as f64).sqrt();
            let sigma = statistical.hypot(RADIUS_SYSTEMATIC_PX);
            let s = calibrate::ball_scale(r_px, sigma, d)?;
            (
                nominal(s.px_per_m)?,
                Some(Quantity::new(
                    s.px_per_m,
                    s.sigma_px_per_m,
                    format!("ball diameter, {} images", radii.len()),
                )),
            )
        }
        Some(ScaleSource::Plane(p)) => {
            let plane = PlaneFile::load(p)?;
            let cal = plane.calibration(w, h)?;
            let (cx, cy) = (w as f64 / 2.0, h as f64 / 2.0);
            let s = cal.scale_px_per_m(cx, cy);
            (
                cal,
                Some(Quantity::new(
                    s,
                    0.0,
                    "plane homography, at the image centre",
                )),
            )
        }
        None => {
            // A nominal scale the flight arcs correct.
            let s = settings
                .ball_diameter_m
                .map_or(1000.0, |d| r_px / (d / 2.0));
            (nominal(s)?, Some(Quantity::new(s, f64::NAN, "nominal")))
        }
    })
}

/// Checks of the images against the measurement: counts that add up, the ball's size along the
/// path (motion in depth) and against the diameter given.
fn image_checks(
    report: &SpotReport,
    paths: &PathResult,
    (settings, in_plane): (&MeasureSettings, &depth::InPlane),
    calibration: &Calibration,
    m: &physics::Measurement,
) -> Vec<physics::checks::Check> {
    let best = &paths.paths[0];
    let on_others = paths.paths[1..].iter().map(|p| p.points.len()).sum();
    let mut out = vec![physics::checks::images_accounted(
        report.spots.len(),
        best.points.len(),
        paths.strays.len(),
        on_others,
        strays_on_track(report, paths),
    )];
    let (w, h) = (report.width_px as f64, report.height_px as f64);
    // Radii in metres at the final scale: the local scale of the calibration, corrected by the
    // ratio of the final scale to the calibration's own at the image centre.
    let rescale = calibration.scale_px_per_m(w / 2.0, h / 2.0) / m.scale_px_per_m.value;
    // Only a detected image measured its radius: one found from the pixels along the motion
    // (detect::chain) was given the path's.
    let measured: Vec<&PathPoint> = best
        .points
        .iter()
        .filter(|p| report.spots[p.spot_index].source == SpotSource::Detected)
        .collect();
    let r_m: Vec<f64> = measured
        .iter()
        .map(|p| p.r_px / calibration.scale_px_per_m(p.x_px, p.y_px) * rescale)
        .collect();
    let flash_n: Vec<f64> = measured.iter().map(|p| p.n as f64).collect();
    match &in_plane.model {
        Some(model) => out.push(physics::depth::check(model, measured.len())),
        None => out.extend(physics::checks::radius_trend(&flash_n, &r_m)),
    }
    if let Some(d) = settings.ball_diameter_m
        && settings.scale != Some(ScaleSource::BallDiameter)
    {
        let median = crate::core::stats::finite_median(r_m).unwrap_or(f64::NAN);
        out.push(physics::checks::ball_size(2.0 * median, d));
    }
    out
}

/// Strays of the ball's size (not refused for their radius) whose centre lies within one radius
/// of the best path's track: the segments between its consecutive images.
fn strays_on_track(report: &SpotReport, paths: &PathResult) -> usize {
    let points = &paths.paths[0].points;
    let Some(r_px) = crate::core::stats::finite_median(points.iter().map(|p| p.r_px).collect())
    else {
        return 0;
    };
    let near_segment = |x: f64, y: f64| {
        points.windows(2).any(|pair| {
            let (a, b) = (&pair[0], &pair[1]);
            let (dx, dy) = (b.x_px - a.x_px, b.y_px - a.y_px);
            let len2 = dx * dx + dy * dy;
            let t = if len2 > 0.0 {
                (((x - a.x_px) * dx + (y - a.y_px) * dy) / len2).clamp(0.0, 1.0)
            } else {
                0.0
            };
            (x - a.x_px - t * dx).hypot(y - a.y_px - t * dy) < r_px
        })
    };
    paths
        .strays
        .iter()
        .filter(|s| matches!(s.reason, StrayReason::OffPath | StrayReason::TooFewPoints))
        .filter(|s| {
            report
                .spots
                .get(s.spot_index)
                .is_some_and(|spot| (spot.r_px - r_px).abs() <= 0.25 * r_px)
        })
        .filter(|s| near_segment(s.x_px, s.y_px))
        .count()
}

/// How far the ball falls from rest in one flash, pixels (half of g dt^2 s with the nominal
/// gravity), when the flash rate and a uniform scale are known before the path is ordered: a
/// given scale, or the ball's diameter over the spots' median radius. The path's in-line
/// search takes it as the curvature of every arc (a plane file's scale varies: None).
fn fall_hint(report: &SpotReport, settings: &MeasureSettings) -> Option<f64> {
    let dt = 1.0 / settings.rate_hz?;
    let from_ball = || {
        let d = settings.ball_diameter_m?;
        let r = crate::core::stats::finite_median(report.spots.iter().map(|s| s.r_px).collect())?;
        Some(r / (d / 2.0))
    };
    let px_per_m = match &settings.scale {
        Some(ScaleSource::PxPerM(s)) => Some(*s),
        Some(ScaleSource::BallDiameter) | None => from_ball(),
        _ => None,
    }?;
    let c = 0.5 * crate::core::units::STANDARD_GRAVITY_MPS2 * dt * dt * px_per_m;
    (c.is_finite() && c > 0.0).then_some(c)
}

/// [`measure_spots`] with settings already validated.
///
/// The physics runs twice: once on the path in the calibration's world frame, which gives the
/// floor, the launch and the bounces, and once on the same path shifted so that the origin of
/// [`origin_of`] is (0, 0). A shift changes no speed, acceleration or restitution, only where
/// the positions lie; the second run puts every position of the results (floor, launch,
/// bounces, checks) in the reported frame, and the path entries are mapped into the same frame.
fn measure_validated(
    photo_path: &Path,
    report: SpotReport,
    settings: &MeasureSettings,
    pixels: bool,
) -> Result<Measured> {
    let found = report.spots.len();
    if found < 2 {
        return Err(Error::track(photo_path, TrackError::TooFewImages { found }));
    }
    let mut path_options = settings.path.clone();
    path_options.fall_px_per_flash2 = fall_hint(&report, settings);
    let paths = track::order_path(&report.spots, &path_options);
    let Some(best) = paths.paths.first() else {
        return Err(Error::track(photo_path, TrackError::NoPath { found }));
    };
    let mut radii: Vec<f64> = best.points.iter().map(|p| p.r_px).collect();
    radii.sort_by(f64::total_cmp);
    let r_px = radii[radii.len() / 2];
    let (w, h) = (report.width_px as u32, report.height_px as u32);
    let mut physics_options = settings.physics.clone();
    physics_options.source = photo_path.to_path_buf();
    physics_options.unknown = settings.unknown()?;
    let (calibration, scale) = scale_of(settings, &radii, (w, h))?;
    // Time.
    let interval = match settings.rate_hz {
        Some(rate) => Quantity::new(1.0 / rate, 0.0, "given flash rate"),
        None => Quantity::new(0.04, f64::NAN, "nominal"),
    };
    let dt = interval.value;
    physics_options.interval = Some(interval);
    physics_options.scale = scale;
    let timed = |p: &PathPoint| {
        let [x_m, y_m] = calibration.to_world(p.x_px, p.y_px);
        TimedPoint {
            n: p.n,
            t_s: p.n as f64 * dt,
            x_m,
            y_m,
            sigma_m: calibration.sigma_m(p.x_px, p.y_px, p.sigma_px.hypot(CENTRE_FLOOR_PX)),
        }
    };
    let points: Vec<TimedPoint> = best.points.iter().map(timed).collect();
    let radius_m = settings.ball_diameter_m.map_or(
        r_px / calibration.scale_px_per_m(w as f64 / 2.0, h as f64 / 2.0),
        |d| d / 2.0,
    );
    let first = physics::measure(&points, radius_m, &physics_options)?;
    let (points, first, paths) = match time_reversed(
        &paths,
        &first,
        (timed, |p: &[TimedPoint]| {
            physics::measure(p, radius_m, &physics_options)
        }),
    ) {
        Some(reversed) => reversed,
        None => (points, first, paths),
    };
    let (points, first, paths) = match physics::recount::recount_incline(&points, &first, |p| {
        physics::measure(p, radius_m, &physics_options)
    }) {
        Some((recounted, m)) => {
            let paths = renumbered(paths, &recounted);
            (recounted, m, paths)
        }
        None => (points, first, paths),
    };
    let (points, first, paths) =
        match physics::recount::recount_steps(&points, &first, radius_m, |p| {
            physics::measure(p, radius_m, &physics_options)
        }) {
            Some((recounted, m)) => {
                let paths = renumbered(paths, &recounted);
                (recounted, m, paths)
            }
            None => (points, first, paths),
        };
    let (paths, points, first) = match adopted_strays(
        &report,
        &paths,
        &first,
        (timed, |p: &[TimedPoint]| {
            physics::measure(p, radius_m, &physics_options)
        }),
        r_px,
    ) {
        Some(adopted) => adopted,
        None => (paths, points, first),
    };
    let (report, paths, points, first) = match second_pass(
        &report,
        &paths,
        &first,
        (timed, |p: &[TimedPoint]| {
            physics::measure(p, radius_m, &physics_options)
        }),
        (r_px, settings.spots.radius_tolerance),
    ) {
        Some(confirmed) => confirmed,
        None => (report, paths, points, first),
    };
    let plane = matches!(settings.scale, Some(ScaleSource::Plane(_)));
    let (report, paths, points, first) = crowded::crowded(
        pixels.then_some((photo_path, settings)),
        (&calibration, plane),
        (report, paths, points, first),
        (timed, |p: &[TimedPoint]| {
            physics::measure(p, radius_m, &physics_options)
        }),
        r_px,
    );
    let in_plane = depth::InPlane::of(&report, &paths.paths[0], &calibration, plane);
    let (points, first) = match in_plane.measured(
        &paths.paths[0],
        (timed, |p: &[TimedPoint]| {
            physics::measure(p, radius_m, &physics_options)
        }),
    ) {
        Some(moved) => moved,
        None => (points, first),
    };
    let best = &paths.paths[0];
    let frame = ResultFrame::of(&first, &physics_options);
    // The ball's radius in the result frame: a given diameter is true metres already.
    let radius_result_m = match settings.ball_diameter_m {
        Some(_) => radius_m,
        None => radius_m * frame.length_factor,
    };
    let origin = origin_of(&first, &points, &frame, radius_result_m, plane);
    let calibration = calibration.reframed(frame.roll_rad, frame.length_factor, origin.at_m)?;
    let measurement = if origin.at_m == [0.0, 0.0] {
        first
    } else {
        let shift = frame.to_input(origin.at_m);
        let shifted: Vec<TimedPoint> = points
            .iter()
            .map(|p| TimedPoint {
                x_m: p.x_m - shift[0],
                y_m: p.y_m - shift[1],
                ..*p
            })
            .collect();
        physics_options.floor_y_m = physics_options.floor_y_m.map(|y| y - origin.at_m[1]);
        physics::measure(&shifted, radius_m, &physics_options)?
    };
    let mut measurement = measurement;
    measurement.checks.extend(image_checks(
        &report,
        &paths,
        (settings, &in_plane),
        &calibration,
        &measurement,
    ));
    physics::checks::name_depth_cause(&mut measurement.checks);
    let dt_s = measurement.flash_interval_s.value;
    let mut doc = document(
        photo_path,
        &report,
        best,
        &paths,
        measurement,
        (&calibration, &in_plane),
        origin,
    );
    doc.depth = in_plane.doc(dt_s, settings.focal_px, &doc.measurement.scale_px_per_m);
    if pixels {
        spin::read(photo_path, settings, &mut doc);
    }
    Ok(Measured {
        doc,
        spots: report,
        paths,
        calibration,
    })
}

/// The best path read backwards in time when its bounces gain energy: a photo holds no arrow
/// of time, and a ballistic arc looks the same both ways, so the walk orders a path by its
/// bounces' apex heights, which a few images near each bounce can misjudge. Every fitted
/// bounce restitution above 1 (a passive bounce never returns more speed than it takes) is the
/// path seen backwards; read the other way, the measurement is kept when every restitution is
/// below 1, the bounces are the same in number and no more checks fail. A path with an
/// incline keeps its direction (the incline is where the ball starts). None when not reversed.
fn time_reversed(
    paths: &PathResult,
    first: &physics::Measurement,
    (timed, measure): (
        impl Fn(&PathPoint) -> TimedPoint,
        impl Fn(&[TimedPoint]) -> Result<physics::Measurement>,
    ),
) -> Option<(Vec<TimedPoint>, physics::Measurement, PathResult)> {
    let gains = |m: &physics::Measurement, above: bool| {
        !m.bounces.is_empty()
            && m.bounces
                .iter()
                .all(|b| b.restitution.is_finite() && (b.restitution > 1.0) == above)
    };
    if first.incline.is_some() || first.launch.is_some() || !gains(first, true) {
        return None;
    }
    let fails = |m: &physics::Measurement| m.checks_with(CheckOutcome::Fail);
    let mut paths = paths.clone();
    paths.paths[0] = paths.paths.first()?.reversed();
    let points: Vec<TimedPoint> = paths.paths[0].points.iter().map(timed).collect();
    let m = measure(&points).ok()?;
    let kept =
        gains(&m, false) && m.bounces.len() == first.bounces.len() && fails(&m) <= fails(first);
    kept.then_some((points, m, paths))
}

/// The second pass from the physics ([`track::confirm`]): the best path's missing flashes that a
/// rejected candidate fills become spots found `predicted_and_confirmed` and path points, and
/// the physics (`measure`, on points made by `timed`) runs again; `r_px` is the path's median
/// radius, `radius_tolerance` the detector's. Tried only when no check of
/// the path as found fails, kept only when no more checks fail or warn and the phases and
/// bounces stay the same; None when nothing was confirmed or it was not kept.
fn second_pass(
    report: &SpotReport,
    paths: &PathResult,
    first: &physics::Measurement,
    (timed, measure): (
        impl Fn(&PathPoint) -> TimedPoint,
        impl Fn(&[TimedPoint]) -> Result<physics::Measurement>,
    ),
    (r_px, radius_tolerance): (f64, f64),
) -> Option<(
    SpotReport,
    PathResult,
    Vec<TimedPoint>,
    physics::Measurement,
)> {
    let count = |m: &physics::Measurement, o: CheckOutcome| m.checks_with(o);
    // Only a path the physics trusts predicts where its missing images are.
    let best = paths.paths.first()?;
    if count(first, CheckOutcome::Fail) > 0 {
        return None;
    }
    let confirmed = track::confirm::confirm_missing(
        best,
        &fitted_phases(first),
        &report.rejected,
        r_px,
        radius_tolerance,
    );
    if confirmed.is_empty() {
        return None;
    }
    let (mut report, mut paths) = (report.clone(), paths.clone());
    let path = &mut paths.paths[0];
    for &(n, i) in &confirmed {
        let c = report.rejected[i];
        path.points.push(PathPoint {
            n,
            spot_index: report.spots.len(),
            x_px: c.x_px,
            y_px: c.y_px,
            r_px: c.r_px,
            sigma_px: c.sigma_px,
        });
        report.spots.push(Spot {
            x_px: c.x_px,
            y_px: c.y_px,
            r_px: c.r_px,
            sigma_px: c.sigma_px,
            score: c.score,
            source: SpotSource::PredictedAndConfirmed,
        });
    }
    remove_all(
        &mut report.rejected,
        confirmed.iter().map(|c| c.1).collect(),
    );
    // The images fill gaps inside phases: the phases and bounces stay what they were.
    let (points, m) = filled_and_kept(&mut paths, &confirmed, first, (timed, measure))?;
    Some((report, paths, points, m))
}

/// The spots the walk stepped over put on the path where it misses a flash inside a fitted
/// phase and the phase's neighbouring images place that flash on them
/// ([`track::confirm::adopt_strays`]); kept when the physics on the longer path is no worse
/// ([`kept_if_no_worse`]). None when no spot is adopted or the physics is worse.
fn adopted_strays(
    report: &SpotReport,
    paths: &PathResult,
    first: &physics::Measurement,
    (timed, measure): (
        impl Fn(&PathPoint) -> TimedPoint,
        impl Fn(&[TimedPoint]) -> Result<physics::Measurement>,
    ),
    r_px: f64,
) -> Option<(PathResult, Vec<TimedPoint>, physics::Measurement)> {
    let best = paths.paths.first()?;
    let adopted = track::confirm::adopt_strays(best, &fitted_phases(first), &paths.strays, r_px);
    if adopted.is_empty() {
        return None;
    }
    let mut paths = paths.clone();
    for &(n, i) in &adopted {
        let index = paths.strays[i].spot_index;
        let s = &report.spots[index];
        paths.paths[0].points.push(PathPoint {
            n,
            spot_index: index,
            x_px: s.x_px,
            y_px: s.y_px,
            r_px: s.r_px,
            sigma_px: s.sigma_px,
        });
    }
    remove_all(&mut paths.strays, adopted.iter().map(|a| a.1).collect());
    let (points, m) = filled_and_kept(&mut paths, &adopted, first, (timed, measure))?;
    Some((paths, points, m))
}

/// The elements of `v` at `indices` removed.
fn remove_all<T>(v: &mut Vec<T>, mut indices: Vec<usize>) {
    indices.sort_unstable_by(|a, b| b.cmp(a));
    for i in indices {
        v.remove(i);
    }
}

/// The best path of `paths`, its new points pushed for the flashes of `filled` (`(n, _)`): its
/// points put in flash order, those flashes no longer missing, and the physics (`measure`, on
/// points made by `timed`) run on them; the points and the measurement when it is no worse
/// than `first` ([`kept_if_no_worse`]).
fn filled_and_kept(
    paths: &mut PathResult,
    filled: &[(usize, usize)],
    first: &physics::Measurement,
    (timed, measure): (
        impl Fn(&PathPoint) -> TimedPoint,
        impl Fn(&[TimedPoint]) -> Result<physics::Measurement>,
    ),
) -> Option<(Vec<TimedPoint>, physics::Measurement)> {
    let path = &mut paths.paths[0];
    path.points.sort_by_key(|p| p.n);
    path.missing.retain(|n| !filled.iter().any(|f| f.0 == *n));
    let points: Vec<TimedPoint> = path.points.iter().map(&timed).collect();
    let m = measure(&points).ok()?;
    kept_if_no_worse(first, &m).then_some((points, m))
}

/// The flash ranges of `m`'s fitted phases (no bounce, nothing unfitted): constant acceleration
/// within each.
fn fitted_phases(m: &physics::Measurement) -> Vec<(usize, usize)> {
    m.phases
        .iter()
        .filter(|p| !matches!(p.kind, PhaseKind::Bounce | PhaseKind::Unfitted))
        .map(|p| (p.first_n, p.last_n))
        .collect()
}

/// A second run of the physics `m` on more images is kept when no more checks fail or warn
/// than in `first` and the phases and bounces stay what they were.
pub(crate) fn kept_if_no_worse(first: &physics::Measurement, m: &physics::Measurement) -> bool {
    let no_worse = [CheckOutcome::Fail, CheckOutcome::Warn]
        .iter()
        .all(|&o| m.checks_with(o) <= first.checks_with(o));
    let kinds = |m: &physics::Measurement| m.phases.iter().map(|p| p.kind).collect::<Vec<_>>();
    no_worse && kinds(m) == kinds(first) && m.bounces.len() == first.bounces.len()
}

/// `paths` with its best path's flash indices taken from `recounted` (its points in the same
/// order) and its missing flashes listed again.
pub(crate) fn renumbered(mut paths: PathResult, recounted: &[TimedPoint]) -> PathResult {
    let best = &mut paths.paths[0];
    for (p, t) in best.points.iter_mut().zip(recounted) {
        p.n = t.n;
    }
    best.missing = best
        .points
        .windows(2)
        .flat_map(|pair| pair[0].n + 1..pair[1].n)
        .collect();
    paths
}

/// The height origin when no floor was found.
const LOWEST_IMAGE: &str = "lowest_image";

/// The origin of the reported world frame, as a position of the first run's result frame.
struct Origin {
    /// Where it lies in the first run's results, metres.
    at_m: [f64; 2],
    /// What it is, for the document.
    doc: WorldOrigin,
}

/// The origin of the reported frame from the first run `m` of the physics on `points` (input
/// frame), whose results lie in `frame` (`radius_m` is the ball's radius in that frame): with a
/// plane file, the plane's own origin; otherwise y = 0 at the floor line when the floor was
/// found (else at the underside of the ball at its lowest image), and x = 0 at the ball's
/// centre at the launch off the incline, else at its centre at the first bounce contact, else
/// at its first image.
fn origin_of(
    m: &physics::Measurement,
    points: &[TimedPoint],
    frame: &ResultFrame,
    radius_m: f64,
    plane: bool,
) -> Origin {
    if plane {
        return Origin {
            at_m: [0.0, 0.0],
            doc: WorldOrigin {
                x: "plane".into(),
                y: "plane".into(),
            },
        };
    }
    let result: Vec<[f64; 2]> = points
        .iter()
        .map(|p| frame.from_input([p.x_m, p.y_m]))
        .collect();
    let launch_x = m.launch.as_ref().map(|l| l.x_m).filter(|x| x.is_finite());
    let bounce_x = m.bounces.first().map(|b| b.x_m).filter(|x| x.is_finite());
    let (x, x_doc) = match (launch_x, bounce_x) {
        (Some(x), _) => (x, "launch"),
        (None, Some(x)) => (x, "first_bounce"),
        (None, None) => (result[0][0], "first_image"),
    };
    let (y, y_doc) = if m.floor.y_m.is_finite() {
        (m.floor.y_m, "floor")
    } else {
        let lowest = result.iter().map(|p| p[1]).fold(f64::INFINITY, f64::min);
        (lowest - radius_m, LOWEST_IMAGE)
    };
    Origin {
        at_m: [x, y],
        doc: WorldOrigin {
            x: x_doc.into(),
            y: y_doc.into(),
        },
    }
}

/// The document of the measurement `m` of the path `best`, whose positions are in the frame of
/// `calibration` (the path entries are mapped into it, their times counted in the measured
/// flash interval).
fn document(
    photo_path: &Path,
    report: &SpotReport,
    best: &track::BallPath,
    paths: &PathResult,
    mut m: physics::Measurement,
    (calibration, in_plane): (&Calibration, &depth::InPlane),
    origin: Origin,
) -> MeasureDoc {
    if origin.doc.y == LOWEST_IMAGE {
        m.floor.source = format!(
            "{}; heights count from the underside of the ball at its lowest image, not from \
             the floor",
            m.floor.source
        );
    }
    let dt = m.flash_interval_s.value;
    MeasureDoc {
        file: photo_path.display().to_string(),
        width_px: report.width_px,
        height_px: report.height_px,
        spots_found: report.spots.len(),
        origin: origin.doc,
        path: best
            .points
            .iter()
            .map(|p| {
                let q = in_plane.point(p);
                let [x_m, y_m] = calibration.to_world(q.x_px, q.y_px);
                PathEntry {
                    n: p.n,
                    t_s: p.n as f64 * dt,
                    x_px: p.x_px,
                    y_px: p.y_px,
                    r_px: p.r_px,
                    sigma_px: p.sigma_px,
                    x_m,
                    y_m,
                    source: report
                        .spots
                        .get(p.spot_index)
                        .map_or(SpotSource::Detected, |s| s.source),
                    spin_angle_deg: None,
                    spin_angle_sigma_deg: None,
                }
            })
            .collect(),
        missing: best.missing.clone(),
        strays: paths.strays.clone(),
        depth: None,
        spin: Vec::new(),
        spin_bounces: Vec::new(),
        spin_note: None,
        measurement: m,
    }
}
