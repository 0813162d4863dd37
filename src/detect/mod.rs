//! Spots: every image of the ball found in one strobe photo.
//!
//! Goes in: a photo. Comes out: [`Spot`]s with sub-pixel centres, radius, a 1-sigma centre
//! uncertainty and a score, plus the candidates that were rejected and why. Isolated images are
//! refined by a shaded-sphere fit of their pixels in linear light (the stored values decoded by
//! the photo's [`Tone`], sRGB by default); the others by their edges, corrected by the lit-limb
//! pull those fits measure.
//!
//! The stages, one module each: [`search`] (background, threshold and Hough vote, on the photo
//! averaged over blocks for a large ball, then carried to full resolution), [`joint`] (circle
//! fits of each region's images together, [`circle`] the fits themselves), [`radius`] (the range
//! searched and the photo's radius model), [`reject`] (which fits are ball images),
//! [`shading`] (the shaded-sphere refinement of isolated images, [`shaded`] the fit itself),
//! [`count`] (light counting: how many images each group of touching spots holds). [`chain`]
//! serves the pipeline once a path is known: the merged images of a crowded start, counted and
//! placed along the path's motion.

pub mod chain;
pub mod circle;
pub mod count;
pub mod hough;
pub mod joint;
pub mod radius;
pub mod reject;
pub mod search;
pub mod shaded;
pub mod shading;
pub mod spin;
mod validate;

pub use reject::{Reason, Rejected};

use serde::{Deserialize, Serialize};

/// One image of the ball in the photo.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Spot {
    /// Centre x, pixels (x right, pixel centres at integer coordinates).
    pub x_px: f64,
    /// Centre y, pixels (y down).
    pub y_px: f64,
    /// Radius, pixels.
    pub r_px: f64,
    /// 1-sigma uncertainty of the centre along each axis, pixels.
    pub sigma_px: f64,
    /// Confidence 0..1 (fraction of the rim supported by edge evidence).
    pub score: f64,
    /// How it was found.
    #[serde(default)]
    pub source: SpotSource,
}

/// How a spot was found.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum SpotSource {
    /// By the detector alone.
    #[default]
    Detected,
    /// A candidate the detector fitted but rejected (too faint or too little rim, as an image
    /// inside its neighbours is), kept because the path's physics puts a missing flash there.
    PredictedAndConfirmed,
}

use crate::core::light::{Polarity, Tone};
use crate::error::{DetectError, Error, Result};
use crate::image::background::{self, Background, BackgroundOptions};
use crate::image::load::Photo;
use crate::image::threshold::ThresholdOptions;
use hough::HoughOptions;
use joint::RefineOptions;
use std::path::Path;

/// Every knob of spot finding.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SpotOptions {
    /// Background stage.
    pub background: BackgroundOptions,
    /// Threshold stage.
    pub threshold: ThresholdOptions,
    /// Hough stage.
    pub hough: HoughOptions,
    /// Refinement stage.
    pub refine: RefineOptions,
    /// Radius range to search, pixels (None: estimated from the isolated blobs).
    pub radius_px: Option<(f64, f64)>,
    /// Keep images whose radius is within this fraction of the common radius.
    pub radius_tolerance: f64,
    /// Smallest rim coverage of a ball image, 0..1.
    pub min_score: f64,
    /// Largest RMS distance of the rim's edge points from the fitted circle, pixels (straight
    /// edges, such as the two sides of a floor plate, fit a circle badly).
    pub max_rms_px: f64,
    /// Images whose rim contrast is below this fraction of the median are faint (reflections).
    pub faint_fraction: f64,
    /// Refuse photos with more candidate blobs than this (noise or texture, not a strobe photo).
    pub max_candidates: usize,
    /// Systematic 1-sigma of the centres from edge location on a lit sphere, as pixels x radius:
    /// sigma_sys = this x max(1 / r, SMALL_BALL_R_PX / r^2), reported once per photo beside the
    /// spots' own (random) sigma when no image got the shaded fit (which measures and removes
    /// the pull instead). It is common to all images of one ball under one light, so it
    /// cancels in differences (velocities, accelerations) and is kept out of the path and physics
    /// weights. The limb of a shaded ball is not a clean step: where the rim is dim, the smoothed
    /// gradient of the shading inside merges with the step's and its maximum moves inwards, which
    /// pulls the centre towards the light. Below about 16 px radius the dim rim's flat band is
    /// narrower than the edge filter and the pull grows as 1 / r^2 (about 0.1 px per axis at
    /// r = 8 under a flash 27 degrees off the lens axis; other lights differ, hence a sigma, not
    /// a correction).
    pub systematic_px_r: f64,
    /// Isolated images of a ball whose common radius is at most this are refined by a fit of a
    /// lit sphere's image to their pixels (0: never). Above it the edge fit's lit-limb bias is
    /// below 0.02 px and the fit's cost grows with the radius.
    pub shaded_max_r_px: f64,
    /// How the photo's values encode light (the shaded fit works in linear light).
    pub tone: Tone,
    /// Smallest radius a ball keeps on the decimated photo, pixels: a photo whose smallest
    /// searched radius is r_min is decimated by floor(r_min / this) when that is 2 or more, found
    /// there and refined at full resolution (0: full resolution throughout).
    pub coarse_r_px: f64,
    /// All images show one ball, so they share one radius (or a smooth radius model across the
    /// photo): short rims keep that radius and other radii are rejected. False for photos of
    /// several objects of different sizes.
    pub one_radius: bool,
}

/// Radius below which the lit-sphere edge bias grows as 1 / r^2 instead of 1 / r, pixels (see
/// [`SpotOptions::systematic_px_r`]).
pub const SMALL_BALL_R_PX: f64 = 16.0;

/// Rim coverage of an image whose fit speaks for the photo: it sets the common radius and the
/// rim RMS that noise gives (partial arcs on texture or on straight edges stay below it).
pub const WELL_COVERED: f64 = 0.7;

/// A fit of radius `r_px` with rim coverage `coverage` is well covered: at least
/// [`WELL_COVERED`] of what a whole rim of that size can reach. The coverage counts 64 angular
/// bins holding an edge point, about one point per pixel of rim: a rim of 6 px radius has
/// 38 pixels and reaches about 0.6, so with the fixed 0.7 no image of a small ball was well
/// covered and a larger round object beside it set the photo's common radius. Never below
/// [`WELL_COVERED_FLOOR`]: the noise of a JPEG's blocks makes partial circles of 4 px whose
/// coverage reaches 0.45.
pub fn well_covered(coverage: f64, r_px: f64) -> bool {
    let reachable = (2.0 * std::f64::consts::PI * r_px / circle::RIM_BINS as f64).min(1.0);
    coverage >= (WELL_COVERED * reachable).max(WELL_COVERED_FLOOR)
}

/// Least rim coverage of a well-covered fit, whatever its radius.
pub const WELL_COVERED_FLOOR: f64 = 0.5;

impl Default for SpotOptions {
    fn default() -> Self {
        SpotOptions {
            background: BackgroundOptions::default(),
            threshold: ThresholdOptions::default(),
            hough: HoughOptions::default(),
            refine: RefineOptions::default(),
            radius_px: None,
            radius_tolerance: 0.12,
            min_score: 0.35,
            max_rms_px: 0.5,
            faint_fraction: 0.5,
            max_candidates: 5000,
            one_radius: true,
            systematic_px_r: 0.5,
            shaded_max_r_px: 40.0,
            tone: Tone::Srgb,
            coarse_r_px: COARSE_R_PX,
        }
    }
}

/// What spot finding found.
#[derive(Debug, Clone)]
pub struct SpotReport {
    /// Width, pixels.
    pub width_px: usize,
    /// Height, pixels.
    pub height_px: usize,
    /// Polarity used.
    pub polarity: Polarity,
    /// Noise level around the background, luma units.
    pub noise_sigma: f32,
    /// Threshold used on the block means, luma units.
    pub threshold_level: f32,
    /// Radius range searched, pixels.
    pub radius_range_px: (f64, f64),
    /// Median radius of the ball images, pixels (None when nothing was found).
    pub common_radius_px: Option<f64>,
    /// Radius of the ball images across the photo (it varies under a perspective tilt).
    pub radius_model: Option<radius::RadiusModel>,
    /// Systematic 1-sigma of every centre (common to all images; 0 once shaded fits measured and
    /// removed the lit-limb pull), pixels.
    pub systematic_px: f64,
    /// The blobs and the vote came from the photo averaged over blocks of this many pixels
    /// squared (1: full resolution).
    pub decimation: usize,
    /// Ball images, sorted by x.
    pub spots: Vec<Spot>,
    /// Candidates dropped, with the reason.
    pub rejected: Vec<Rejected>,
    /// The spots in groups of touching images, each with the number of images its light holds
    /// ([`count`]).
    pub light_groups: Vec<count::LightGroup>,
}

/// Intermediate images of the stages, for `--debug-dir`.
#[derive(Debug, Clone, Default)]
pub struct DebugImages {
    /// Background estimate, luma.
    pub background: Vec<f32>,
    /// Ball-positive difference.
    pub difference: Vec<f32>,
    /// Block mask of the threshold.
    pub mask: Option<image::GrayImage>,
    /// Hough accumulator, assembled over the regions.
    pub votes: Vec<f32>,
}

/// Default of [`SpotOptions::coarse_r_px`], pixels (a 24 MP photo of a 75 px ball is decimated
/// by 5; balls under 24 px stay at full resolution).
pub const COARSE_R_PX: f64 = 12.0;

/// Find every ball image in `photo`; `plate` is an optional clean plate of the same size.
///
/// The stages in order: background, threshold at the chosen decimation ([`search::settle`]),
/// Hough regions at full resolution ([`search::find_regions`]), a first joint fit with free
/// radii ([`joint::first_pass`]) that teaches the radius ([`radius::learn`]), a second holding it
/// ([`joint::second_pass`]), the rejection rules ([`reject::classify`]), for a small ball
/// the shaded-sphere refinement ([`shading::refine_spots`]), and light counting
/// ([`count::count_light`]).
pub fn find_spots(
    photo: &Photo,
    plate: Option<&Photo>,
    options: &SpotOptions,
    mut debug: Option<&mut DebugImages>,
) -> Result<SpotReport> {
    options.validate()?;
    check_plate(photo, plate)?;
    let bg: Background = match plate {
        Some(p) => background::from_plate(photo, p, &options.background),
        None => background::estimate(photo, &options.background),
    };
    let (work, radius) = search::settle(photo, &bg, options)?;
    let mut report = empty_report(photo, &bg, &work, radius);
    if let Some(dbg) = debug.as_deref_mut() {
        stage_images(dbg, photo, &bg, &work);
    }
    let Some(radius) = radius else {
        return Ok(report);
    };
    let (regions, candidates) = search::find_regions(photo, &bg, &work, radius, options, debug);
    // The photo's balls carry printed marks: some edges are still marks' edges once the
    // photo-wide decision ([`hough::settle_marks`]) is made.
    let printed = regions
        .iter()
        .any(|r| r.edges.iter().any(|e| e.mark_px.is_finite()));
    // The decimated photo and its blobs are done with.
    drop(work);
    let first = joint::first_pass(&regions, &candidates, &options.refine);
    let Some((model, common)) = radius::learn(&first, radius, options.min_score) else {
        return Ok(report);
    };
    report.common_radius_px = Some(common);
    let r = common.max(1.0);
    report.systematic_px = options.systematic_px_r * (1.0 / r).max(SMALL_BALL_R_PX / (r * r));
    report.radius_model = Some(model);
    let held = options.one_radius.then_some(&model);
    let fits = joint::second_pass(&regions, &first, &candidates, common, held, &options.refine);
    let fits = reject::one_per_image(fits, common);
    reject::classify(
        fits,
        (photo.width, photo.height),
        &model,
        options,
        &mut report,
    );
    if common <= options.shaded_max_r_px {
        shading::refine_spots(photo, &bg, options.tone, &mut report, printed);
    }
    report.spots.sort_by(|a, b| a.x_px.total_cmp(&b.x_px));
    report.rejected.sort_by(|a, b| a.x_px.total_cmp(&b.x_px));
    report.light_groups = count::count_light(photo, &bg, options.tone, &report.spots, common);
    Ok(report)
}

/// Refuse a clean plate whose size differs from the photo's.
fn check_plate(photo: &Photo, plate: Option<&Photo>) -> Result<()> {
    if let Some(p) = plate
        && (p.width != photo.width || p.height != photo.height)
    {
        return Err(Error::detect(
            &p.path,
            DetectError::PlateSize {
                plate_w_px: p.width,
                plate_h_px: p.height,
                w_px: photo.width,
                h_px: photo.height,
            },
        ));
    }
    Ok(())
}

/// The report before any spot is found: the photo's size, the background's polarity and noise,
/// the threshold level and decimation of `work`, the radius range searched.
fn empty_report(
    photo: &Photo,
    bg: &Background,
    work: &search::Work,
    radius: Option<(f64, f64)>,
) -> SpotReport {
    SpotReport {
        width_px: photo.width,
        height_px: photo.height,
        polarity: bg.polarity,
        noise_sigma: bg.noise_sigma,
        threshold_level: work.blobs.level,
        radius_range_px: radius.unwrap_or((0.0, 0.0)),
        common_radius_px: None,
        radius_model: None,
        systematic_px: 0.0,
        decimation: work.d,
        spots: Vec::new(),
        rejected: Vec::new(),
        light_groups: Vec::new(),
    }
}

/// The debug images of the background and threshold stages, full resolution; the votes are
/// zeroed for [`search::find_regions`] to fill.
fn stage_images(dbg: &mut DebugImages, photo: &Photo, bg: &Background, work: &search::Work) {
    let (w, h) = (photo.width, photo.height);
    dbg.background = (0..w * h).map(|i| bg.at(i % w, i / w)).collect();
    dbg.difference = (0..w * h)
        .map(|i| bg.difference(photo, i % w, i / w))
        .collect();
    dbg.mask = Some(work.blobs.mask.clone());
    dbg.votes = vec![0.0; w * h];
}

/// Load a photo (and an optional plate) and find its spots.
pub fn find_spots_in_file(
    path: &Path,
    plate: Option<&Path>,
    load: &crate::image::load::LoadOptions,
    options: &SpotOptions,
) -> Result<SpotReport> {
    let photo = crate::image::load::load(path, load)?;
    let plate = plate
        .map(|p| crate::image::load::load(p, load))
        .transpose()?;
    find_spots(&photo, plate.as_ref(), options, None)
}
