//! Physics of the timed path: from the ball's centres at known flash times to launch speed,
//! gravity (or flash interval, or scale), restitution of every bounce, rolling loss on the
//! incline, camera roll and optional air drag, each with a 1-sigma uncertainty, and acceptance
//! verdicts.
//!
//! Goes in: [`TimedPoint`]s in the world frame (metres, x right, y up; t_s = n * interval, so
//! missing flashes leave gaps), the ball radius and [`MeasureOptions`]. Comes out: a
//! [`Measurement`] (serialisable).
//!
//! Steps (see [`measure`]): split the path into phases ([`phases`]); unless the camera is
//! declared level, estimate the direction of "down" from the common acceleration vector of the
//! flight arcs (joint fit of x and y parabolas with shared quadratic coefficients) and rotate the
//! frame to correct the roll; fit the flight arcs jointly with one common quadratic coefficient
//! c, whose value -2c = g_apparent ties gravity, flash interval and scale (a length scale s and
//! time scale dt enter as g dt^2 s / 2 in pixels per flash^2), so given any two the third is
//! estimated and the path rescaled (module `calibration`); then fit each arc ([`flight`]), the
//! optional drag model ([`drag`], [`dynamics`]), the floor and the bounces ([`bounce`]), the
//! incline and the launch ([`incline`]), and check acceptance [`bands`]. When drag is fitted, the
//! drag model gives what drag biases in the vacuum fits: the phase boundaries, the floor, each
//! bounce's restitution, the estimated gravity and the launch velocity.

pub mod bands;
pub mod bounce;
mod calibration;
pub mod checks;
pub mod depth;
pub mod drag;
mod drag_checks;
pub mod dynamics;
pub mod fit;
pub mod flight;
mod floor;
pub mod frame;
pub mod incline;
pub mod phases;
pub mod recount;
pub mod spin;
pub mod systematic;

use crate::core::SCHEMA_VERSION;
use crate::core::ball::{Build, inertia_factor};
use crate::core::units::STANDARD_GRAVITY_MPS2;
use crate::error::{Error, PhysicsError, Result};
use bands::{Band, Verdict};
use bounce::Bounce;
use calibration::Calibration;
use drag::{DragFit, DragModel};
use fit::{CovarianceScaling, FitOptions, polynomial_fit};
use flight::ArcFit;
use floor::{Contacts, floor_line};
use incline::{InclineResult, Launch};
use phases::Segmentation;
use serde::{Deserialize, Serialize};
use std::ops::Range;
use std::path::{Path, PathBuf};

/// One centre of the ball on the timed path.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct TimedPoint {
    /// Flash index (0 = first flash).
    pub n: usize,
    /// Time, seconds: n * flash interval.
    pub t_s: f64,
    /// Centre x, metres (world, x right).
    pub x_m: f64,
    /// Centre y, metres (world, y up).
    pub y_m: f64,
    /// 1-sigma of each coordinate, metres.
    pub sigma_m: f64,
}

/// A calibration quantity with its 1-sigma and where it came from.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Quantity {
    /// Value (NaN, written as null, when unknown).
    pub value: f64,
    /// 1-sigma (0 when exact).
    pub sigma: f64,
    /// Where the value came from, e.g. "given" or "estimated from 3 flight arcs".
    pub source: String,
}

impl Quantity {
    /// A quantity with its sigma and source.
    pub fn new(value: f64, sigma: f64, source: impl Into<String>) -> Self {
        Quantity {
            value,
            sigma,
            source: source.into(),
        }
    }

    fn relative_sigma(&self) -> f64 {
        let r = self.sigma / self.value;
        if r.is_finite() { r.abs() } else { 0.0 }
    }
}

/// Which calibration quantity is estimated from the flight arcs (the other two are given).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Unknown {
    /// Gravity, from the given scale and interval.
    #[default]
    Gravity,
    /// Flash interval, from the given gravity and scale.
    Interval,
    /// Scale, from the given gravity and interval.
    Scale,
}

impl Unknown {
    /// The quantity's name, as in the documents.
    pub fn name(self) -> &'static str {
        match self {
            Unknown::Gravity => "gravity",
            Unknown::Interval => "interval",
            Unknown::Scale => "scale",
        }
    }
}

/// Options of [`measure`].
#[derive(Debug, Clone)]
pub struct MeasureOptions {
    /// The quantity to estimate.
    pub unknown: Unknown,
    /// Gravity, m/s^2 (used unless estimated; also sets the phase thresholds).
    pub gravity: Quantity,
    /// Flash interval the path times were computed with, seconds (None: t_s / n of the points).
    pub interval: Option<Quantity>,
    /// Scale the path metres were computed with, pixels per metre (None: not known).
    pub scale: Option<Quantity>,
    /// Ball build, for the inertia factor of the rolling model.
    pub build: Build,
    /// Inner / outer diameter of a thick shell.
    pub inner_ratio: Option<f64>,
    /// The camera is level: do not estimate and correct its roll.
    pub camera_level: bool,
    /// Floor height in the (corrected) world frame, metres (None: estimated from the bounces).
    pub floor_y_m: Option<f64>,
    /// Fit a quadratic drag coefficient (otherwise drag is neglected, residuals reported).
    pub fit_drag: bool,
    /// Acceptance bands.
    pub bands: Vec<Band>,
    /// Covariance scaling of every fit.
    pub covariance: CovarianceScaling,
    /// Names the data in errors (the photo).
    pub source: PathBuf,
}

impl Default for MeasureOptions {
    fn default() -> Self {
        MeasureOptions {
            unknown: Unknown::Gravity,
            gravity: Quantity::new(STANDARD_GRAVITY_MPS2, 0.0, "standard gravity (ISO 80000-3)"),
            interval: None,
            scale: None,
            build: Build::Solid,
            inner_ratio: None,
            camera_level: false,
            floor_y_m: None,
            fit_drag: false,
            bands: Vec::new(),
            covariance: CovarianceScaling::Conservative,
            source: PathBuf::from("<timed path>"),
        }
    }
}

/// Kind of a phase of the path.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum PhaseKind {
    /// Rolling down the incline.
    Incline,
    /// A flight arc.
    Flight,
    /// A bounce (between two arcs).
    Bounce,
    /// Rolling or resting on the floor (no vertical acceleration).
    Floor,
    /// Too few points (under 3) to fit.
    Unfitted,
}

/// A phase of the path.
#[derive(Debug, Clone, Serialize)]
pub struct PhaseSpan {
    /// Kind.
    pub kind: PhaseKind,
    /// First flash index (for a bounce: the last flash before it).
    pub first_n: usize,
    /// Last flash index (for a bounce: the first flash after it).
    pub last_n: usize,
    /// Start time, seconds.
    pub t_start_s: f64,
    /// End time, seconds.
    pub t_end_s: f64,
}

/// A fitted arc.
#[derive(Debug, Clone, Serialize)]
pub struct ArcResult {
    /// Flight or floor.
    pub kind: PhaseKind,
    /// First flash index.
    pub first_n: usize,
    /// Last flash index.
    pub last_n: usize,
    /// Horizontal velocity, m/s.
    pub vx_mps: f64,
    /// Vertical acceleration 2 c2, m/s^2.
    pub accel_y_mps2: f64,
    /// Its 1-sigma.
    pub accel_y_sigma_mps2: f64,
    /// Root-mean-square residual of the vacuum model, metres (drag shows here).
    pub rms_residual_m: f64,
    /// Chi-square per degree of freedom of the vacuum model.
    pub reduced_chi_square: f64,
    /// Points in the arc.
    pub points: usize,
    /// Degrees of freedom of the vacuum model (x linear and y quadratic in t: 2 points - 5).
    pub dof: usize,
    /// When drag is fitted and the arc is in the fit: the drag model's chi-square per degree of
    /// freedom over this arc (the arc's fit is judged on it). Absent otherwise.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub drag_reduced_chi_square: Option<f64>,
    /// Its degrees of freedom (2 points - 5: the arc's state and its share of the common
    /// parameters).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub drag_dof: Option<usize>,
}

/// Camera roll estimated from the direction of gravity.
#[derive(Debug, Clone, Serialize)]
pub struct Level {
    /// Roll, degrees (positive: picture turned clockwise), None without flight arcs.
    pub roll_deg: Option<f64>,
    /// Its 1-sigma, degrees.
    pub roll_sigma_deg: Option<f64>,
    /// The frame was rotated by the roll.
    pub corrected: bool,
}

/// The floor line (horizontal in the corrected frame).
#[derive(Debug, Clone, Serialize)]
pub struct FloorLine {
    /// Floor height, metres.
    pub y_m: f64,
    /// Its 1-sigma, metres.
    pub sigma_m: f64,
    /// "given" or "contact heights of N bounces".
    pub source: String,
    /// Bounce contacts the height was estimated from (0 when given or not found).
    pub contacts: usize,
    /// Scatter of the contact heights: chi-square per degree of freedom (None under 2 contacts).
    pub contacts_reduced_chi_square: Option<f64>,
}

/// A linear trend of restitution against normal impact speed, e = intercept + slope v.
#[derive(Debug, Clone, Serialize)]
pub struct RestitutionTrend {
    /// Slope, s/m.
    pub slope_s_per_m: f64,
    /// Its 1-sigma (from the restitution sigmas; no degree of freedom with 2 bounces).
    pub slope_sigma_s_per_m: f64,
    /// Restitution extrapolated to zero impact speed.
    pub intercept: f64,
    /// Its 1-sigma.
    pub intercept_sigma: f64,
    /// Bounces in the fit.
    pub bounces: usize,
}

/// Everything measured from one timed path.
#[derive(Debug, Clone, Serialize)]
pub struct Measurement {
    /// Layout version ([`SCHEMA_VERSION`]).
    pub schema_version: u32,
    /// Phases in time order.
    pub phases: Vec<PhaseSpan>,
    /// Camera roll.
    pub level: Level,
    /// Gravity, m/s^2.
    pub gravity_mps2: Quantity,
    /// Flash interval, seconds.
    pub flash_interval_s: Quantity,
    /// Scale, pixels per metre.
    pub scale_px_per_m: Quantity,
    /// Floor line.
    pub floor: FloorLine,
    /// Launch off the incline (None without an incline).
    pub launch: Option<Launch>,
    /// The incline against ideal rolling (None without an incline).
    pub incline: Option<InclineResult>,
    /// Every arc after the incline.
    pub arcs: Vec<ArcResult>,
    /// Every measurable bounce (both neighbouring arcs fitted).
    pub bounces: Vec<Bounce>,
    /// Restitution against impact speed (two or more bounces).
    pub restitution_trend: Option<RestitutionTrend>,
    /// Drag fit when asked.
    pub drag: Option<DragFit>,
    /// Acceptance verdicts.
    pub verdicts: Vec<Verdict>,
    /// Self-checks of the measurement (see [`checks`]).
    pub checks: Vec<checks::Check>,
}

impl Measurement {
    /// An acceptance band failed, or its quantity was not measured.
    pub fn out_of_band(&self) -> bool {
        self.verdicts
            .iter()
            .any(|v| v.outcome != bands::Outcome::Pass)
    }

    /// How many self-checks came out `outcome`.
    pub fn checks_with(&self, outcome: checks::CheckOutcome) -> usize {
        self.checks.iter().filter(|c| c.outcome == outcome).count()
    }

    /// A self-check failed: the numbers are printed but not to be trusted.
    pub fn doubtful(&self) -> bool {
        checks::worst(&self.checks) == checks::CheckOutcome::Fail
    }
}

/// `e`, from the stage `what` of the measurement, as a physics error of the photo.
fn fail(options: &MeasureOptions, what: &'static str, e: Error) -> Error {
    let source = match e {
        Error::Physics { source, .. } => source,
        other => PhysicsError::Fit(other.to_string()),
    };
    Error::physics(
        &options.source,
        PhysicsError::Stage {
            stage: what,
            source: Box::new(source),
        },
    )
}

/// Check the input: at least 6 points, finite, positive sigmas, increasing times, a positive
/// radius and gravity, and a nominal scale when the scale is estimated.
fn validate(points: &[TimedPoint], radius_m: f64, options: &MeasureOptions) -> Result<()> {
    let src: &Path = &options.source;
    if points.len() < 6 {
        return Err(Error::physics(
            src,
            PhysicsError::TooFewPoints(points.len()),
        ));
    }
    for (i, p) in points.iter().enumerate() {
        if !(p.t_s.is_finite() && p.x_m.is_finite() && p.y_m.is_finite()) {
            return Err(Error::physics(
                src,
                PhysicsError::BadPoint {
                    index: i,
                    problem: "not a finite number",
                },
            ));
        }
        if !(p.sigma_m.is_finite() && p.sigma_m > 0.0) {
            return Err(Error::physics(
                src,
                PhysicsError::BadPoint {
                    index: i,
                    problem: "sigma must be positive",
                },
            ));
        }
        if i > 0 && p.t_s <= points[i - 1].t_s {
            return Err(Error::physics(
                src,
                PhysicsError::BadPoint {
                    index: i,
                    problem: "times must increase",
                },
            ));
        }
    }
    if !(radius_m.is_finite() && radius_m > 0.0) {
        return Err(Error::setting(
            "ball radius",
            "must be a positive number of metres",
        ));
    }
    let g = &options.gravity;
    if !(g.value.is_finite() && g.value > 0.0) {
        return Err(Error::setting(
            "gravity",
            "must be a positive number of m/s^2",
        ));
    }
    if options.unknown == Unknown::Scale && options.scale.is_none() {
        return Err(Error::setting(
            "scale",
            "estimating the scale needs the scale the path was computed with",
        ));
    }
    Ok(())
}

/// Measure the physics of a timed path for a ball of radius `radius_m`.
///
/// The steps, in order: check the input; segment the path as given and estimate the roll from
/// its flight arcs; level the path (unless the camera is declared level or drag is fitted) and
/// segment it again; estimate the calibration unknown from the levelled flight arcs and rescale
/// the path; segment the calibrated path with the calibrated gravity for the final phases and
/// arcs; then the optional drag fit (its gravity the headline one when gravity is estimated),
/// the floor and the bounces, the restitution trend, the incline and the launch and the
/// self-checks; then the relative systematic joins the sigmas ([`systematic`]); last, the
/// acceptance verdicts (values against bands, shown with those sigmas).
pub fn measure(
    points: &[TimedPoint],
    radius_m: f64,
    options: &MeasureOptions,
) -> Result<Measurement> {
    validate(points, radius_m, options)?;
    let mut pts = points.to_vec();
    let (level, flights) = level_path(&mut pts, options)?;
    let calibration = calibration::calibrate(&mut pts, points, &flights, options)?;
    let g = calibration.gravity.value;
    let units = UnitSigmas::of(&calibration);

    let drag_gravity = options.fit_drag.then_some(options.gravity.value);
    let seg = Segmentation::new(&pts, g, drag_gravity, options.covariance);
    let incline_fit = match &seg.segments.incline {
        Some(r) => Some(
            incline::fit_incline(&pts, r.clone(), options.covariance)
                .map_err(|e| fail(options, "incline", e))?,
        ),
        None => None,
    };
    let model = if options.fit_drag {
        Some(fit_drag_model(&pts, &seg, g, options)?)
    } else {
        None
    };
    let mut calibration = calibration;
    if let (Some(d), Unknown::Gravity) = (&model, options.unknown) {
        // The vacuum arcs' common curvature is biased by drag: the model's gravity is the one.
        calibration.gravity = d.gravity(&units);
    }
    let (mut phases_out, arcs_out) = arc_phases(&pts, &seg, model.as_ref());
    let pairs = bounce_pairs(&seg);
    let roll_sigma_rad = match (level.corrected, level.roll_sigma_deg) {
        (true, Some(s)) => s.to_radians(),
        _ => 0.0,
    };
    let contacts = Contacts {
        pairs: &pairs,
        model: model.as_ref(),
        roll_sigma_rad,
    };
    let floor = floor_line(&pts, &contacts, radius_m, options.floor_y_m);
    let (bounces, bounce_phases) = measure_bounces(&pts, &seg, &contacts, &floor, radius_m, &units);
    phases_out.extend(bounce_phases);
    phases_out.sort_by(|a, b| a.t_start_s.total_cmp(&b.t_start_s));
    let restitution_trend = restitution_trend(&bounces);
    let (launch, incline_out) = launch_and_incline(
        &pts,
        &seg,
        incline_fit.as_ref(),
        (&calibration, &units),
        model.as_ref(),
        options,
    );
    let drag: Option<DragFit> = model.map(|d| d.summary);

    let Calibration {
        gravity,
        interval,
        scale,
    } = calibration;
    let mut m = Measurement {
        schema_version: SCHEMA_VERSION,
        phases: phases_out,
        level,
        gravity_mps2: gravity,
        flash_interval_s: interval,
        scale_px_per_m: scale,
        floor,
        launch,
        incline: incline_out,
        arcs: arcs_out,
        bounces,
        restitution_trend,
        drag,
        verdicts: Vec::new(),
        checks: Vec::new(),
    };
    m.checks = checks::physics_checks(&m, options.unknown, options.fit_drag);
    m.checks
        .extend(checks::above_floor(&pts, &m.floor, radius_m));
    systematic::add_systematic(&mut m, options.unknown);
    // The bands test values only; judged last, their readings carry the sigmas reported.
    m.verdicts = options.bands.iter().map(|b| b.judge(&m)).collect();
    Ok(m)
}

/// The drag model of the flight arcs of `seg` (gravity held at `g` unless it is estimated):
/// over the flight arcs of 4 points or more (those the calibration used) and, when it leaves the
/// common drag and gravity where they were (within 3 sigma), also over the fitted flight arcs of
/// 3 points, so that a short arc's bounce is measured with drag too (its 4 state parameters from
/// its 6 coordinates). A short arc that pulls the common parameters is not the ball's free
/// flight (a point of another phase), and is left to the vacuum fits.
fn fit_drag_model(
    pts: &[TimedPoint],
    seg: &Segmentation,
    g: f64,
    options: &MeasureOptions,
) -> Result<DragModel> {
    let held = (options.unknown != Unknown::Gravity).then_some(g);
    let long: Vec<ArcFit> = seg.flight_fits().cloned().collect();
    let model = drag::fit_drag(pts, &long, held, g, options.covariance)
        .map_err(|e| fail(options, "drag fit", e))?;
    let every: Vec<ArcFit> = seg
        .fits
        .iter()
        .filter_map(|(f, flying)| f.as_ref().filter(|_| *flying))
        .cloned()
        .collect();
    if every.len() == long.len() {
        return Ok(model);
    }
    let agrees = |m: &DragModel| {
        let (a, b) = (&model.summary, &m.summary);
        (a.drag_per_m - b.drag_per_m).abs() <= 3.0 * a.drag_sigma_per_m
            && (a.gravity_mps2 - b.gravity_mps2).abs() <= 3.0 * a.gravity_sigma_mps2
    };
    Ok(drag::fit_drag(pts, &every, held, g, options.covariance)
        .ok()
        .filter(agrees)
        .unwrap_or(model))
}

/// Level the path: segment `pts` as given with the nominal gravity, estimate the camera roll
/// from its flight arcs and, unless the camera is declared level or drag is fitted, rotate `pts`
/// into the level frame and segment it again there.
///
/// Comes out: the [`Level`] report and the flight arcs of the (levelled) path. When the path
/// was not rotated its first segmentation is the one of the levelled path and is reused. An
/// error when there is no flight arc of 4 or more points before or after the correction.
fn level_path(
    pts: &mut [TimedPoint],
    options: &MeasureOptions,
) -> Result<(Level, Vec<Range<usize>>)> {
    let g_hint = options.gravity.value;
    let drag_gravity = options.fit_drag.then_some(g_hint);
    let flights = Segmentation::new(pts, g_hint, drag_gravity, options.covariance).flight_ranges();
    if flights.is_empty() {
        return Err(Error::physics(&options.source, PhysicsError::NoFlightArc));
    }
    let roll = calibration::estimate_roll(pts, &flights, options.covariance);
    // With a drag fit the acceleration also has a horizontal part (drag), so its direction is
    // not "down": the roll is reported but not corrected from it.
    let correct_roll = !options.camera_level && !options.fit_drag;
    let flights = match (correct_roll, roll) {
        (true, Some((rho, _))) => {
            calibration::level(pts, rho);
            let levelled =
                Segmentation::new(pts, g_hint, drag_gravity, options.covariance).flight_ranges();
            if levelled.is_empty() {
                return Err(Error::physics(
                    &options.source,
                    PhysicsError::NoFlightArcLevelled,
                ));
            }
            levelled
        }
        _ => flights,
    };
    let level = Level {
        roll_deg: roll.map(|r| r.0.to_degrees()),
        roll_sigma_deg: roll.map(|r| r.1.to_degrees()),
        corrected: correct_roll && roll.is_some(),
    };
    Ok((level, flights))
}

/// Relative 1-sigma of the length unit (scale) and the time unit (interval), added in
/// quadrature to the sigmas of speeds and accelerations.
pub(crate) struct UnitSigmas {
    rel_len: f64,
    rel_time: f64,
}

impl UnitSigmas {
    fn of(calibration: &Calibration) -> UnitSigmas {
        let (rel_len, rel_time) = calibration.unit_sigmas();
        UnitSigmas { rel_len, rel_time }
    }

    /// The 1-sigma `s` of a value `v` whose unit is length / time^`time_power`, widened by the
    /// units' own uncertainties.
    pub(crate) fn widen(&self, v: f64, s: f64, time_power: f64) -> f64 {
        (s * s + (v * self.rel_len).powi(2) + (v * time_power * self.rel_time).powi(2)).sqrt()
    }
}

/// The phase span of `pts[r]`.
fn span(pts: &[TimedPoint], kind: PhaseKind, r: &Range<usize>) -> PhaseSpan {
    PhaseSpan {
        kind,
        first_n: pts[r.start].n,
        last_n: pts[r.end - 1].n,
        t_start_s: pts[r.start].t_s,
        t_end_s: pts[r.end - 1].t_s,
    }
}

/// The phases of the final segmentation `seg` of `pts` (the incline when found, then every arc
/// as flight or floor) and the result of every fitted arc, both in time order.
fn arc_phases(
    pts: &[TimedPoint],
    seg: &Segmentation,
    model: Option<&DragModel>,
) -> (Vec<PhaseSpan>, Vec<ArcResult>) {
    let mut phases_out = Vec::new();
    if let Some(r) = &seg.segments.incline {
        phases_out.push(span(pts, PhaseKind::Incline, r));
    }
    let mut arcs_out = Vec::new();
    for (r, (fit, flying)) in seg.segments.arcs.iter().zip(&seg.fits) {
        let kind = if *flying {
            PhaseKind::Flight
        } else {
            PhaseKind::Floor
        };
        phases_out.push(span(pts, kind, r));
        if let Some(f) = fit {
            let in_model = model.and_then(|d| d.arc_of(r).map(|k| d.arc_chi_square[k]));
            arcs_out.push(ArcResult {
                kind,
                first_n: pts[r.start].n,
                last_n: pts[r.end - 1].n,
                vx_mps: f.x.coefficients[1],
                accel_y_mps2: 2.0 * f.y.coefficients[2],
                accel_y_sigma_mps2: 2.0 * f.y.sigma(2),
                rms_residual_m: (0.5 * (f.x.rms_residual.powi(2) + f.y.rms_residual.powi(2)))
                    .sqrt(),
                reduced_chi_square: f.chi_square() / (f.x.dof + f.y.dof).max(1) as f64,
                points: r.len(),
                dof: f.x.dof + f.y.dof,
                drag_reduced_chi_square: in_model.map(|(c, dof)| c / dof.max(1) as f64),
                drag_dof: in_model.map(|(_, dof)| dof),
            });
        }
    }
    (phases_out, arcs_out)
}

/// Consecutive fitted flight arcs of `seg`: (index of the first arc, its fit, the next arc's
/// fit). A bounce lies between each pair.
fn bounce_pairs(seg: &Segmentation) -> Vec<(usize, &ArcFit, &ArcFit)> {
    seg.fits
        .windows(2)
        .enumerate()
        .filter_map(|(k, w)| match (&w[0], &w[1]) {
            ((Some(a), true), (Some(b), true)) => Some((k, a, b)),
            _ => None,
        })
        .collect()
}

/// Every bounce between the arc pairs of `contacts` against the `floor` (none when the floor is
/// unknown), from the drag model when both arcs are in it, the impact speed's sigma widened by
/// the units', with a bounce phase for each.
fn measure_bounces(
    pts: &[TimedPoint],
    seg: &Segmentation,
    contacts: &Contacts,
    floor: &FloorLine,
    radius_m: f64,
    units: &UnitSigmas,
) -> (Vec<Bounce>, Vec<PhaseSpan>) {
    let mut bounces = Vec::new();
    let mut phases_out = Vec::new();
    if !floor.y_m.is_finite() {
        return (bounces, phases_out);
    }
    let level = floor.y_m + radius_m;
    for (k, a, b) in contacts.pairs {
        let mut bo = bounce::measure_bounce(a, b, level, floor.sigma_m);
        if let Some((d, j)) = contacts.in_model(a, b)
            && let Some(m) = d.bounce(j, level, floor.sigma_m, &bo)
        {
            bo = m;
        }
        if bo.drag_model.is_none() {
            widen_for_flash_count(&mut bo, pts, a, b);
        }
        bo.impact_normal_speed_sigma_mps = units.widen(
            bo.impact_normal_speed_mps,
            bo.impact_normal_speed_sigma_mps,
            1.0,
        );
        let before = &seg.segments.arcs[*k];
        let after = &seg.segments.arcs[k + 1];
        phases_out.push(PhaseSpan {
            kind: PhaseKind::Bounce,
            first_n: pts[before.end - 1].n,
            last_n: pts[after.start].n,
            t_start_s: bo.t_s,
            t_end_s: bo.t_s,
        });
        bounces.push(bo);
    }
    (bounces, phases_out)
}

/// Widen a bounce's restitution sigma to cover the restitution of the other flash counts across
/// it that the images allow as well ([`bounce::shifted_restitution`], one flash either way): a
/// ball bouncing straight up shows no sideways motion to pin its contact time, and a missed
/// image at the bottom leaves the count open. The sigma becomes at least the largest difference.
fn widen_for_flash_count(bo: &mut Bounce, pts: &[TimedPoint], a: &ArcFit, b: &ArcFit) {
    let (pre, post) = (&pts[a.range.clone()], &pts[b.range.clone()]);
    let (Some(first), Some(last)) = (pre.first(), post.last()) else {
        return;
    };
    if last.n <= first.n {
        return;
    }
    let interval_s = (last.t_s - first.t_s) / (last.n - first.n) as f64;
    let spread = [-interval_s, interval_s]
        .into_iter()
        .filter_map(|shift| bounce::shifted_restitution(a, b, shift, pre, post))
        .map(|e| (e - bo.restitution).abs())
        .fold(0.0, f64::max);
    if spread > bo.restitution_sigma {
        bo.restitution_sigma = spread;
    }
}

/// Restitution against normal impact speed: a weighted straight line through the bounces
/// (their restitution sigmas as weights); None under two bounces or when the fit fails.
fn restitution_trend(bounces: &[Bounce]) -> Option<RestitutionTrend> {
    if bounces.len() < 2 {
        return None;
    }
    let v: Vec<f64> = bounces.iter().map(|b| b.impact_normal_speed_mps).collect();
    let e: Vec<f64> = bounces.iter().map(|b| b.restitution).collect();
    let s: Vec<f64> = bounces
        .iter()
        .map(|b| b.restitution_sigma.max(1e-12))
        .collect();
    polynomial_fit(
        &v,
        &e,
        Some(&s),
        1,
        &FitOptions {
            covariance: CovarianceScaling::Sigmas,
        },
    )
    .ok()
    .map(|f| RestitutionTrend {
        slope_s_per_m: f.coefficients[1],
        slope_sigma_s_per_m: f.sigma(1),
        intercept: f.coefficients[0],
        intercept_sigma: f.sigma(0),
        bounces: bounces.len(),
    })
}

/// The launch off the incline and the incline against ideal rolling, when the path has an
/// incline followed by a fitted flight arc; speeds' and the acceleration's sigmas widened by the
/// units'. With drag fitted over the first arc, the launch velocity is the drag model's at the
/// launch time.
fn launch_and_incline(
    pts: &[TimedPoint],
    seg: &Segmentation,
    incline_fit: Option<&incline::InclineFit>,
    (calibration, units): (&Calibration, &UnitSigmas),
    model: Option<&DragModel>,
    options: &MeasureOptions,
) -> (Option<Launch>, Option<InclineResult>) {
    let k = inertia_factor(options.build, options.inner_ratio);
    let gravity = &calibration.gravity;
    match (incline_fit, seg.fits.first()) {
        (Some(inc), Some((Some(arc), true))) => {
            let mut l = incline::launch(pts, inc, arc);
            if let Some(d) = model
                && let Some(j) = d.arc_of(&arc.range)
            {
                let bounds = (pts[inc.range.end - 1].t_s, pts[arc.range.start].t_s);
                l = d.launch(j, inc.position_fits(), bounds, &l);
            }
            l.speed_sigma_mps = units.widen(l.speed_mps, l.speed_sigma_mps, 1.0);
            let mut r = incline::incline_result(pts, inc, l.t_s, gravity.value, gravity.sigma, k);
            r.accel_sigma_mps2 = units.widen(r.accel_mps2, r.accel_sigma_mps2, 2.0);
            r.end_speed_sigma_mps = units.widen(r.end_speed_mps, r.end_speed_sigma_mps, 1.0);
            (Some(l), Some(r))
        }
        _ => (None, None),
    }
}
