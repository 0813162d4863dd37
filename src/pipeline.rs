//! Measure: the main job, from one strobe photo to physics numbers.
//!
//! Goes in: a photo file and [`MeasureSettings`]. Comes out: a [`MeasureDoc`] (the timed path in
//! pixels and metres, the phases, bounces, launch, incline, calibration quantities with their
//! 1-sigma and source, and the verdicts of acceptance bands) plus the intermediate results for
//! pictures. This module only chains the stages: [`crate::detect`] -> [`crate::track`] ->
//! [`crate::calibrate`] -> [`crate::physics`].

use crate::calibrate::{self, Calibration, PlaneFile};
use crate::detect::{self, SpotOptions, SpotReport};
use crate::error::{Error, Result, TrackError, positive};
use crate::physics::{self, MeasureOptions, Quantity, TimedPoint, Unknown};
use crate::report::measure::{MeasureDoc, PathEntry};
use crate::track::{self, PathOptions, PathResult};
use std::path::{Path, PathBuf};

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
    measure_validated(photo_path, report, settings)
}

/// Measure from spots already found.
pub fn measure_spots(
    photo_path: &Path,
    report: SpotReport,
    settings: &MeasureSettings,
) -> Result<Measured> {
    settings.validate()?;
    measure_validated(photo_path, report, settings)
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
    settings: &MeasureSettings,
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
    )];
    let (w, h) = (report.width_px as f64, report.height_px as f64);
    // Radii in metres at the final scale: the local scale of the calibration, corrected by the
    // ratio of the final scale to the calibration's own at the image centre.
    let rescale = calibration.scale_px_per_m(w / 2.0, h / 2.0) / m.scale_px_per_m.value;
    let r_m: Vec<f64> = best
        .points
        .iter()
        .map(|p| p.r_px / calibration.scale_px_per_m(p.x_px, p.y_px) * rescale)
        .collect();
    let flash_n: Vec<f64> = best.points.iter().map(|p| p.n as f64).collect();
    out.extend(physics::checks::radius_trend(&flash_n, &r_m));
    if let Some(d) = settings.ball_diameter_m
        && settings.scale != Some(ScaleSource::BallDiameter)
    {
        let median = crate::core::stats::finite_median(r_m).unwrap_or(f64::NAN);
        out.push(physics::checks::ball_size(2.0 * median, d));
    }
    out
}

/// [`measure_spots`] with settings already validated.
fn measure_validated(
    photo_path: &Path,
    report: SpotReport,
    settings: &MeasureSettings,
) -> Result<Measured> {
    let found = report.spots.len();
    if found < 2 {
        return Err(Error::track(photo_path, TrackError::TooFewImages { found }));
    }
    let paths = track::order_path(&report.spots, &settings.path);
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
    let points: Vec<TimedPoint> = best
        .points
        .iter()
        .map(|p| {
            let [x_m, y_m] = calibration.to_world(p.x_px, p.y_px);
            TimedPoint {
                n: p.n,
                t_s: p.n as f64 * dt,
                x_m,
                y_m,
                sigma_m: calibration.sigma_m(p.x_px, p.y_px, p.sigma_px.max(1e-4)),
            }
        })
        .collect();
    let radius_m = settings.ball_diameter_m.map_or(
        r_px / calibration.scale_px_per_m(w as f64 / 2.0, h as f64 / 2.0),
        |d| d / 2.0,
    );
    let mut measurement = physics::measure(&points, radius_m, &physics_options)?;
    measurement.checks.extend(image_checks(
        &report,
        &paths,
        settings,
        &calibration,
        &measurement,
    ));
    let doc = MeasureDoc {
        file: photo_path.display().to_string(),
        width_px: report.width_px,
        height_px: report.height_px,
        spots_found: report.spots.len(),
        path: best
            .points
            .iter()
            .zip(&points)
            .map(|(p, t)| PathEntry {
                n: p.n,
                t_s: t.t_s,
                x_px: p.x_px,
                y_px: p.y_px,
                r_px: p.r_px,
                sigma_px: p.sigma_px,
                x_m: t.x_m,
                y_m: t.y_m,
            })
            .collect(),
        missing: best.missing.clone(),
        strays: paths.strays.clone(),
        measurement,
    };
    Ok(Measured {
        doc,
        spots: report,
        paths,
        calibration,
    })
}
