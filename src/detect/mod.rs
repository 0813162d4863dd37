//! Spots: every image of the ball found in one strobe photo.
//!
//! Goes in: a photo. Comes out: [`Spot`]s with sub-pixel centres, radius, a 1-sigma centre
//! uncertainty and a score, plus the candidates that were rejected and why. Isolated images are
//! refined by a shaded-sphere fit of their pixels in linear light (the stored values decoded by
//! the photo's [`Tone`], sRGB by default); the others by their edges, corrected by the lit-limb
//! pull those fits measure.
//!
//! A large ball (smallest searched radius at least 2 x [`SpotOptions::coarse_r_px`]) is found on
//! the photo averaged over d x d blocks: background, threshold, vote and first circle fits run
//! there; then each circle's edge points are extracted at full resolution in a band around it
//! ([`hough::prepare_band`]) and every fit is made again on them. The pixel work of a 24 MP photo
//! of a 75 px ball falls to about a fifth.

pub mod hough;
pub mod refine;
mod validate;

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
}

use crate::core::light::{Polarity, Tone};
use crate::core::stats::{MAD_TO_SIGMA, upper_median};
use crate::error::{DetectError, Error, Result};
use crate::image::background::{self, Background, BackgroundOptions};
use crate::image::load::Photo;
use crate::image::threshold::{self, Blobs, ThresholdOptions};
use hough::HoughOptions;
use rayon::prelude::*;
use refine::{CircleFit, RefineOptions};
use std::path::Path;

/// Why a candidate was not kept as a ball image.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Reason {
    /// Its radius differs from the common radius of the ball images.
    Radius,
    /// Too little of its rim is supported by edge points, or they do not lie on a circle
    /// (texture, a straight edge).
    WeakRim,
    /// Much fainter than the ball images (a reflection, a shadow).
    Faint,
    /// Its centre lies outside the photo.
    OutsideFrame,
    /// It lies inside a better ball image (an inner ring, a highlight's edge).
    Inside,
    /// Its shading shows a light from another side than the photo's other images do (a mirror
    /// image of the ball in a glossy floor).
    OtherLight,
}

/// A candidate that was not kept, with the reason.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Rejected {
    /// Centre x, pixels.
    pub x_px: f64,
    /// Centre y, pixels.
    pub y_px: f64,
    /// Radius, pixels.
    pub r_px: f64,
    /// Rim coverage 0..1.
    pub score: f64,
    /// Why it was dropped.
    pub reason: Reason,
}

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
    /// narrower than the edge filter and the pull grows as 1 / r^2 (measured on the rendered bench
    /// suite, flash 27 degrees off the lens axis, per axis: 0.10 px at r = 8, 0.09 px at r = 10,
    /// 0.03 px at r = 14, 0.01 px at r = 18-24; other lights differ, hence a sigma, not a
    /// correction).
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

/// A rim is weak when its RMS residual exceeds `max_rms_px` or this many times the median RMS
/// of the photo's well-covered images (rim coverage at least [`WELL_COVERED`]), whichever is
/// larger.
pub const RMS_OVER_MEDIAN: f64 = 2.5;

/// Rim coverage of an image whose fit speaks for the photo: it sets the common radius and the
/// rim RMS that noise gives (partial arcs on texture or on straight edges stay below it).
pub const WELL_COVERED: f64 = 0.7;

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
    pub radius_model: Option<refine::RadiusModel>,
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

/// Estimate the radius range from the compact, isolated blobs.
fn auto_radius(blobs: &Blobs) -> Option<(f64, f64)> {
    let mut radii: Vec<f64> = blobs
        .blobs
        .iter()
        .filter(|b| b.is_compact())
        .map(|b| 0.25 * (b.width_px() + b.height_px()))
        .collect();
    // A chain's largest inscribed disc also takes in the halo of the threshold and whatever
    // the chain rests on (an incline's edge): its radius is an upper bound more than a measure.
    let mut low = 0.8;
    if radii.is_empty() {
        radii = inscribed_radii(blobs);
        low = 0.5;
    }
    if radii.is_empty() {
        return None;
    }
    radii.sort_by(f64::total_cmp);
    let r0 = radii[radii.len() / 2];
    let slack = blobs.block_px as f64;
    Some(((low * r0 - slack).max(3.0), 1.25 * r0 + slack + 1.0))
}

/// With no round blob alone (every image touches a neighbour: a chain rolling down an incline),
/// the radius of each blob of four blocks or more is that of the largest disc inside it: its
/// largest Euclidean distance to a block outside (Felzenszwalb & Huttenlocher, "Distance
/// transforms of sampled functions", via imageproc). A chain of overlapping images of radius r
/// is 2 r wide, so that disc has radius r; a bounding box would give the chain's extent.
fn inscribed_radii(blobs: &Blobs) -> Vec<f64> {
    use image::{GrayImage, Luma};
    let (w, h) = blobs.mask.dimensions();
    // Outside the photo counts as outside the blob: a one-block frame around the mask.
    let mut outside = GrayImage::from_pixel(w + 2, h + 2, Luma([255u8]));
    for (x, y, p) in blobs.mask.enumerate_pixels() {
        if p[0] > 0 {
            outside.put_pixel(x + 1, y + 1, Luma([0]));
        }
    }
    let d2 = imageproc::distance_transform::euclidean_squared_distance_transform(&outside);
    let b = blobs.block_px;
    blobs
        .blobs
        .iter()
        .filter(|blob| blob.blocks >= 4)
        .filter_map(|blob| {
            let (bx0, by0) = (blob.x0 / b, blob.y0 / b);
            let (bx1, by1) = (
                (blob.x1 / b).min(w as usize - 1),
                (blob.y1 / b).min(h as usize - 1),
            );
            let mut best: f64 = 0.0;
            for by in by0..=by1 {
                for bx in bx0..=bx1 {
                    best = best.max(d2.get_pixel(bx as u32 + 1, by as u32 + 1)[0]);
                }
            }
            (best > 0.0).then(|| best.sqrt() * b as f64)
        })
        .collect()
}

/// Default of [`SpotOptions::coarse_r_px`], pixels (a 24 MP photo of a 75 px ball is decimated
/// by 5; balls under 24 px stay at full resolution).
pub const COARSE_R_PX: f64 = 12.0;

/// Half-width of the band around a circle found on the decimated photo in which its
/// full-resolution edge points are looked for: this plus [`BAND_FRACTION`] x the radius, pixels.
pub const BAND_PX: f64 = 3.0;

/// See [`BAND_PX`].
pub const BAND_FRACTION: f64 = 0.1;

/// With the radius left to estimate, the blobs that estimate it come from the photo decimated
/// to about this many megapixels (a 24 MP photo by 4, a 12 MP one by 2). The detection stays
/// there when the radius found allows it (see [`SpotOptions::coarse_r_px`]: the smallest radius is at least
/// that many decimated pixels and less than twice as many), else it starts again at the
/// decimation the radius asks for.
pub const SURVEY_MEGAPIXELS: f64 = 1.5;

/// The decimated photo keeps at least this many pixels on its short side.
const MIN_DECIMATED_SIDE_PX: usize = 32;

/// The decimation for smallest radius `r_min_px` on `photo` (1: none).
fn coarse_factor(r_min_px: f64, coarse_r_px: f64, photo: &Photo) -> usize {
    let most = photo.width.min(photo.height) / MIN_DECIMATED_SIDE_PX;
    if coarse_r_px > 0.0 {
        ((r_min_px / coarse_r_px).floor() as usize).min(most).max(1)
    } else {
        1
    }
}

/// The photo the detection works on (decimated by d, or the photo itself when `photo` is
/// None), its background (None: the photo's own) and blobs.
struct Work {
    photo: Option<Photo>,
    bg: Option<Background>,
    blobs: Blobs,
}

impl Work {
    /// `bg` is the photo's own background (from its plate or estimated) at full resolution.
    fn new(photo: &Photo, bg: &Background, options: &SpotOptions, d: usize) -> Result<Work> {
        let small = (d > 1).then(|| photo.decimated(d));
        let small_bg = small.as_ref().map(|s| bg.decimated(d, s));
        let p = small.as_ref().unwrap_or(photo);
        let blobs = threshold::find_blobs(p, small_bg.as_ref().unwrap_or(bg), &options.threshold);
        if blobs.blobs.len() > options.max_candidates {
            return Err(Error::detect(
                &photo.path,
                DetectError::TooManyCandidates {
                    count: blobs.blobs.len(),
                    limit: options.max_candidates,
                },
            ));
        }
        Ok(Work {
            photo: small,
            bg: small_bg,
            blobs,
        })
    }
}

/// The regions found on the photo decimated by `d`, at full resolution: each region's circles
/// (first fits there, and the vote's peaks they missed) carried to full-resolution
/// coordinates, with the edge points in a band around them.
fn full_resolution_regions(
    photo: &Photo,
    bg: &Background,
    work_regions: &[hough::Region],
    voted: &[(Vec<hough::Candidate>, Vec<f32>)],
    d: usize,
    (r_min_px, r_max_px): (f64, f64),
    options: &SpotOptions,
) -> (Vec<hough::Region>, Vec<Vec<hough::Candidate>>) {
    let df = d as f64;
    let full = |v: f64| v * df + 0.5 * (df - 1.0);
    let band = BAND_PX + BAND_FRACTION * r_min_px;
    work_regions
        .par_iter()
        .zip(voted)
        .map(|(r, (c, _))| {
            let fits = refine::refine_region(r, c, None, &options.refine);
            // A fit that left the searched radii (a small object on the coarse photo) starts
            // nothing: the vote's peak there is retried instead.
            let r_range = 0.5 * r_min_px..=2.0 * r_max_px;
            let mut starts: Vec<hough::Candidate> = fits
                .iter()
                .filter(|f| {
                    f.coverage >= 0.5 * options.min_score && r_range.contains(&(f.circle.r_px * df))
                })
                .map(|f| hough::Candidate {
                    x_px: full(f.circle.x_px),
                    y_px: full(f.circle.y_px),
                    r_px: f.circle.r_px * df,
                    strength: f.coverage,
                })
                .collect();
            for cand in c {
                let (x, y) = (full(cand.x_px), full(cand.y_px));
                if starts
                    .iter()
                    .all(|s| (s.x_px - x).hypot(s.y_px - y) > 0.3 * cand.r_px * df)
                {
                    starts.push(hough::Candidate {
                        x_px: x,
                        y_px: y,
                        r_px: cand.r_px * df,
                        strength: cand.strength,
                    });
                }
            }
            let circles: Vec<(f64, f64, f64)> =
                starts.iter().map(|s| (s.x_px, s.y_px, s.r_px)).collect();
            let bbox = (
                r.x0 * d,
                r.y0 * d,
                (r.x0 + r.width) * d - 1,
                (r.y0 + r.height) * d - 1,
            );
            let region = hough::prepare_band(photo, bg, bbox, &circles, band, &options.hough);
            (region, starts)
        })
        .unzip()
}

/// Find every ball image in `photo`; `plate` is an optional clean plate of the same size.
pub fn find_spots(
    photo: &Photo,
    plate: Option<&Photo>,
    options: &SpotOptions,
    mut debug: Option<&mut DebugImages>,
) -> Result<SpotReport> {
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
    // Large balls are found on the photo averaged over d x d blocks and refined at full
    // resolution; with the radius left to estimate, it is estimated first on the photo
    // decimated to at most about SURVEY_MEGAPIXELS.
    let survey = if options.coarse_r_px > 0.0 {
        let by_area = ((photo.width * photo.height) as f64 / (SURVEY_MEGAPIXELS * 1e6)).sqrt();
        (by_area as usize)
            .min(photo.width.min(photo.height) / MIN_DECIMATED_SIDE_PX)
            .max(1)
    } else {
        1
    };
    let mut d = options.radius_px.map_or(survey, |(r_min, _)| {
        coarse_factor(r_min, options.coarse_r_px, photo)
    });
    let bg: Background = match plate {
        Some(p) => background::from_plate(photo, p, &options.background),
        None => background::estimate(photo, &options.background),
    };
    let mut work = Work::new(photo, &bg, options, d)?;
    let mut radius = options
        .radius_px
        .or_else(|| auto_radius(&work.blobs).map(|(a, b)| (a * d as f64, b * d as f64)));
    if let Some((r_min, _)) = radius
        && (coarse_factor(r_min, options.coarse_r_px, photo) < d
            || coarse_factor(r_min, options.coarse_r_px, photo) >= 2 * d)
    {
        d = coarse_factor(r_min, options.coarse_r_px, photo);
        work = Work::new(photo, &bg, options, d)?;
    }
    if radius.is_none() && d > 1 {
        // Nothing round enough on the survey: small balls need the full resolution.
        d = 1;
        work = Work::new(photo, &bg, options, d)?;
        radius = auto_radius(&work.blobs);
    }
    let Work {
        photo: work_photo,
        bg: work_bg,
        blobs,
    } = work;
    let work_photo = work_photo.as_ref().unwrap_or(photo);
    let work_bg = work_bg.as_ref().unwrap_or(&bg);
    let mut report = SpotReport {
        width_px: photo.width,
        height_px: photo.height,
        polarity: bg.polarity,
        noise_sigma: bg.noise_sigma,
        threshold_level: blobs.level,
        radius_range_px: radius.unwrap_or((0.0, 0.0)),
        common_radius_px: None,
        radius_model: None,
        systematic_px: 0.0,
        decimation: d,
        spots: Vec::new(),
        rejected: Vec::new(),
    };
    if let Some(dbg) = debug.as_deref_mut() {
        let (w, h) = (photo.width, photo.height);
        dbg.background = (0..w * h).map(|i| bg.at(i % w, i / w)).collect();
        dbg.difference = (0..w * h)
            .map(|i| bg.difference(photo, i % w, i / w))
            .collect();
        dbg.mask = Some(blobs.mask.clone());
        dbg.votes = vec![0.0; w * h];
    }
    let Some((r_min, r_max)) = radius else {
        return Ok(report);
    };
    let df = d as f64;
    let (rw_min, rw_max) = (r_min / df, r_max / df);
    let margin = (0.5 * rw_max + 4.0).ceil() as usize;
    let work_regions: Vec<hough::Region> = blobs
        .blobs
        .par_iter()
        .map(|b| hough::prepare_region(work_photo, work_bg, b, margin, &options.hough))
        .collect();
    let voted: Vec<(Vec<hough::Candidate>, Vec<f32>)> = work_regions
        .par_iter()
        .map(|r| hough::vote(r, rw_min, rw_max, &options.hough, debug.is_some()))
        .collect();
    if let Some(dbg) = debug {
        let w = photo.width;
        for (r, (_, acc)) in work_regions.iter().zip(&voted) {
            for y in r.y0 * d..((r.y0 + r.height) * d).min(photo.height) {
                for x in r.x0 * d..((r.x0 + r.width) * d).min(w) {
                    let v = &mut dbg.votes[y * w + x];
                    *v = v.max(acc[(y / d - r.y0) * r.width + x / d - r.x0]);
                }
            }
        }
    }
    let (regions, candidates): (Vec<hough::Region>, Vec<Vec<hough::Candidate>>) = if d == 1 {
        (work_regions, voted.into_iter().map(|v| v.0).collect())
    } else {
        full_resolution_regions(
            photo,
            &bg,
            &work_regions,
            &voted,
            d,
            (r_min, r_max),
            options,
        )
    };
    // Pass 1: free radii, to learn the common radius.
    let first: Vec<Vec<CircleFit>> = regions
        .par_iter()
        .zip(&candidates)
        .map(|(r, c)| refine::refine_region(r, c, None, &options.refine))
        .collect();
    let mut good: Vec<refine::Circle> = first
        .iter()
        .flatten()
        .filter(|f| f.coverage >= WELL_COVERED && f.circle.r_px >= r_min && f.circle.r_px <= r_max)
        .map(|f| f.circle)
        .collect();
    if good.is_empty() {
        good = first
            .iter()
            .flatten()
            .filter(|f| f.coverage >= options.min_score)
            .map(|f| f.circle)
            .collect();
    }
    let Some(model) = refine::RadiusModel::fit(&good) else {
        return Ok(report);
    };
    let mut at_centre = good
        .iter()
        .map(|c| model.at(c.x_px, c.y_px))
        .collect::<Vec<_>>();
    at_centre.sort_by(f64::total_cmp);
    let common = at_centre[at_centre.len() / 2];
    report.common_radius_px = Some(common);
    let r = common.max(1.0);
    report.systematic_px = options.systematic_px_r * (1.0 / r).max(SMALL_BALL_R_PX / (r * r));
    report.radius_model = Some(model);
    // Pass 2: from the first fits, holding the common radius where the rim is short.
    let fits: Vec<CircleFit> = regions
        .par_iter()
        .zip(&first)
        .zip(&candidates)
        .flat_map_iter(|((r, f), c)| {
            let mut starts: Vec<hough::Candidate> = f
                .iter()
                .map(|f| hough::Candidate {
                    x_px: f.circle.x_px,
                    y_px: f.circle.y_px,
                    r_px: f.circle.r_px,
                    strength: f.coverage,
                })
                .collect();
            // Hough peaks that pass 1 lost (too few points with the wrong radius) get a retry.
            for cand in c {
                if starts
                    .iter()
                    .all(|s| (s.x_px - cand.x_px).hypot(s.y_px - cand.y_px) > 0.3 * common)
                {
                    starts.push(*cand);
                }
            }
            refine::refine_region(
                r,
                &starts,
                options.one_radius.then_some(&model),
                &options.refine,
            )
        })
        .collect();
    // Regions overlap at their margins: one image may be fitted twice.
    let mut fits = fits;
    fits.sort_by(|a, b| b.coverage.total_cmp(&a.coverage));
    let mut unique: Vec<CircleFit> = Vec::new();
    for f in fits {
        if unique.iter().all(|u| {
            (u.circle.x_px - f.circle.x_px).hypot(u.circle.y_px - f.circle.y_px) > 0.3 * common
        }) {
            unique.push(f);
        }
    }
    let plausible: Vec<&CircleFit> = unique
        .iter()
        .filter(|f| {
            let r = model.at(f.circle.x_px, f.circle.y_px);
            f.coverage >= options.min_score
                && (f.circle.r_px - r).abs() <= options.radius_tolerance * r
        })
        .collect();
    let median_strength = upper_median(plausible.iter().map(|f| f.edge_strength).collect());
    // Faint images (a dark ball against its clean plate, JPEG noise) have noisier rims than
    // the fixed limit allows; a shape that is not round stands out from the photo's own images.
    let well_covered = plausible.iter().filter(|f| f.coverage >= WELL_COVERED);
    let rms_limit = options
        .max_rms_px
        .max(RMS_OVER_MEDIAN * upper_median(well_covered.map(|f| f.rms_px).collect()));
    let kept_before: Vec<CircleFit> = unique.clone();
    for f in unique {
        let c = f.circle;
        // Inside a better candidate: wholly, or (objects of different sizes, which do not
        // overlap like the images of one moving ball) with its centre inside.
        let inside = kept_before.iter().any(|o| {
            let d = (o.circle.x_px - c.x_px).hypot(o.circle.y_px - c.y_px);
            o.coverage > f.coverage
                && ((o.circle.r_px > c.r_px && d + c.r_px <= o.circle.r_px + 2.0)
                    || (!options.one_radius && d < o.circle.r_px))
        });
        let reason = if c.x_px < -0.5
            || c.y_px < -0.5
            || c.x_px > photo.width as f64 - 0.5
            || c.y_px > photo.height as f64 - 0.5
        {
            Some(Reason::OutsideFrame)
        } else if (options.one_radius
            && (c.r_px - model.at(c.x_px, c.y_px)).abs()
                > options.radius_tolerance * model.at(c.x_px, c.y_px))
            || options.radius_px.is_some_and(|(lo, hi)| {
                c.r_px < lo * (1.0 - options.radius_tolerance)
                    || c.r_px > hi * (1.0 + options.radius_tolerance)
            })
        {
            Some(Reason::Radius)
        } else if f.coverage < options.min_score || f.rms_px > rms_limit {
            Some(Reason::WeakRim)
        } else if f.edge_strength < options.faint_fraction * median_strength {
            Some(Reason::Faint)
        } else if inside {
            Some(Reason::Inside)
        } else {
            None
        };
        match reason {
            Some(reason) => report.rejected.push(Rejected {
                x_px: c.x_px,
                y_px: c.y_px,
                r_px: c.r_px,
                score: f.coverage,
                reason,
            }),
            None => report.spots.push(Spot {
                x_px: c.x_px,
                y_px: c.y_px,
                r_px: c.r_px,
                sigma_px: f.sigma_px,
                score: f.coverage,
            }),
        }
    }
    if common <= options.shaded_max_r_px {
        let shaded = shade_spots(
            photo,
            &bg,
            options.tone,
            &mut report.spots,
            report.systematic_px,
        );
        let shaded = drop_other_lights(&mut report, shaded);
        correct_edge_fits(&mut report, &shaded);
    }
    report.spots.sort_by(|a, b| a.x_px.total_cmp(&b.x_px));
    report.rejected.sort_by(|a, b| a.x_px.total_cmp(&b.x_px));
    Ok(report)
}

/// The pixels around spot `s` in linear light, from 0.65 radius (or 6 px) inside its rim to
/// 2.5 px outside, without those a neighbouring image may reach; None when a neighbour overlaps
/// it or takes half of the window.
fn shade_window(
    photo: &Photo,
    bg: &Background,
    tone: Tone,
    spots: &[Spot],
    s: &Spot,
) -> Option<Vec<refine::WindowPixel>> {
    let outer = s.r_px + SHADED_OUTSIDE_PX;
    // An overlapping neighbour leaves this image no clean rim; one that is near keeps the
    // pixels it may reach (within 2 px of its rim) out of the window.
    let mut neighbours = Vec::new();
    for o in spots {
        let d = (o.x_px - s.x_px).hypot(o.y_px - s.y_px);
        if d > 0.3 * s.r_px && d < o.r_px + s.r_px {
            return None;
        }
        if d > 0.3 * s.r_px && d < o.r_px + outer + 2.0 {
            neighbours.push(o);
        }
    }
    let inner = (0.65 * s.r_px).max(s.r_px - 6.0);
    let x0 = (s.x_px - outer).floor().max(0.0) as usize;
    let y0 = (s.y_px - outer).floor().max(0.0) as usize;
    let x1 = ((s.x_px + outer).ceil().max(0.0) as usize).min(photo.width - 1);
    let y1 = ((s.y_px + outer).ceil().max(0.0) as usize).min(photo.height - 1);
    let mut window = Vec::new();
    let mut annulus = 0usize;
    for y in y0..=y1 {
        for x in x0..=x1 {
            let (xf, yf) = (x as f64, y as f64);
            let d = (xf - s.x_px).hypot(yf - s.y_px);
            if d < inner || d > outer {
                continue;
            }
            annulus += 1;
            if neighbours
                .iter()
                .any(|o| (xf - o.x_px).hypot(yf - o.y_px) < o.r_px + 2.0)
            {
                continue;
            }
            window.push(refine::WindowPixel {
                x_px: xf,
                y_px: yf,
                value: tone.to_linear(photo.at(x, y)) - tone.to_linear(bg.at(x, y)),
                backdrop: bg.smooth_at(x, y, |v| tone.to_linear(v)),
            });
        }
    }
    if window.is_empty() || 2 * window.len() < annulus {
        return None;
    }
    let mean = window.iter().map(|q| q.backdrop).sum::<f64>() / window.len() as f64;
    for q in &mut window {
        q.backdrop -= mean;
    }
    // On a large image, every few pixels away from the rim say as much about the shading as all
    // of them: keep the rim's band and thin the rest to the pixel budget.
    if window.len() > SHADED_BUDGET {
        let rim = |q: &refine::WindowPixel| {
            ((q.x_px - s.x_px).hypot(q.y_px - s.y_px) - s.r_px).abs() <= 1.5
        };
        let n_rim = window.iter().filter(|q| rim(q)).count();
        let rest = window.len() - n_rim;
        let stride_rim = n_rim.div_ceil(SHADED_BUDGET * 2 / 3).max(1);
        let stride_rest = rest.div_ceil(SHADED_BUDGET / 3).max(1);
        let (mut i_rim, mut i_rest) = (0usize, 0usize);
        window.retain(|q| {
            let (i, stride) = if rim(q) {
                i_rim += 1;
                (i_rim, stride_rim)
            } else {
                i_rest += 1;
                (i_rest, stride_rest)
            };
            i % stride == 0
        });
    }
    Some(window)
}

/// What the shaded fit of one spot found.
#[derive(Debug, Clone, Copy)]
struct Shaded {
    /// Shaded fit minus edge fit: x, y, r, pixels.
    shift: [f64; 3],
    /// Light direction (u, v, 1) and the 1-sigma of u and v.
    light_uv: [f64; 2],
    light_sigma: [f64; 2],
    /// Fitted as a uniform disc: the ball's shading was below the noise.
    flat: bool,
}

/// Fewest shaded fits that give the photo's light for the others.
const LIGHT_MIN_FITS: usize = 5;

/// A spot whose light is this far from the photo's, degrees (and 4 of its sigmas), was lit from
/// elsewhere. The light of one photo's images agrees within about 3 degrees on the bench; a
/// mirror image in the floor, lit by the mirrored light, is 42 degrees off under the default
/// light 27 degrees off the lens axis.
const OTHER_LIGHT_DEG: f64 = 20.0;

/// The photo's images agree on their light when their median angle from it is at most this,
/// degrees.
const LIGHT_AGREE_DEG: f64 = 5.0;

/// Spots whose shading shows another light than the photo's (the median of its shaded fits'
/// light directions, when they agree on it) are rejected as `OtherLight`; the shaded fits of the
/// rest are returned.
fn drop_other_lights(report: &mut SpotReport, shaded: Vec<Option<Shaded>>) -> Vec<Option<Shaded>> {
    let lights: Vec<&Shaded> = shaded.iter().flatten().collect();
    if lights.len() < LIGHT_MIN_FITS {
        return shaded;
    }
    let u = upper_median(lights.iter().map(|f| f.light_uv[0]).collect());
    let v = upper_median(lights.iter().map(|f| f.light_uv[1]).collect());
    let unit = |u: f64, v: f64| {
        let n = (u * u + v * v + 1.0).sqrt();
        [u / n, v / n, 1.0 / n]
    };
    let photo_light = unit(u, v);
    let angle_deg = |f: &Shaded| {
        let l = unit(f.light_uv[0], f.light_uv[1]);
        let cos: f64 = (0..3).map(|i| l[i] * photo_light[i]).sum();
        cos.clamp(-1.0, 1.0).acos().to_degrees()
    };
    // Only a light that the photo's images agree on tells one apart (a faint dark ball against
    // its plate shows too little shading for that).
    if upper_median(lights.iter().map(|f| angle_deg(f)).collect()) > LIGHT_AGREE_DEG {
        return shaded;
    }
    let spots = std::mem::take(&mut report.spots);
    let mut kept = Vec::with_capacity(shaded.len());
    for (s, f) in spots.into_iter().zip(shaded) {
        if let Some(f) = &f {
            let angle_deg = angle_deg(f);
            // The direction turns by about d(u, v) / (1 + u^2 + v^2) radians.
            let [a, b] = f.light_uv;
            let sigma_deg =
                (f.light_sigma[0].hypot(f.light_sigma[1]) / (1.0 + a * a + b * b)).to_degrees();
            if angle_deg > OTHER_LIGHT_DEG && angle_deg > 4.0 * sigma_deg {
                report.rejected.push(Rejected {
                    x_px: s.x_px,
                    y_px: s.y_px,
                    r_px: s.r_px,
                    score: s.score,
                    reason: Reason::OtherLight,
                });
                continue;
            }
        }
        report.spots.push(s);
        kept.push(f);
    }
    kept
}

/// Fewest shaded fits that measure the photo's edge bias for the others.
const EDGE_BIAS_MIN_FITS: usize = 3;

/// The edge fits beside shaded fits. The lit limb pulls every edge fit of a photo alike (one
/// light, one ball), so the shaded fits, which it does not pull, measure that pull: the median of
/// (shaded - edge) over the refined images corrects the others (images overlapping a neighbour),
/// and the scatter of those differences (1.4826 x their median absolute deviation, the larger
/// axis) joins their sigma. Nothing common is left, so the photo's systematic becomes 0. With one
/// or two shaded fits the pull is not measured: the edge fits keep their centres and the
/// systematic joins their sigma (it is now a difference between images, not common to all).
/// When most shaded fits are uniform discs (a dark ball against its plate), there is no lit limb
/// to pull the edge fits: they keep their centres and sigmas, and the systematic is 0 (the
/// differences would be the two fits' noise: on the bench's dark_r32, correcting by them and
/// adding their scatter left the overlapping images at 0.105 px RMS error against 0.083 px
/// without, and the photo's sigmas 1.3 times too large).
fn correct_edge_fits(report: &mut SpotReport, shaded: &[Option<Shaded>]) {
    let fits: Vec<&Shaded> = shaded.iter().flatten().collect();
    if fits.is_empty() {
        return;
    }
    if 2 * fits.iter().filter(|f| f.flat).count() > fits.len() {
        report.systematic_px = 0.0;
        return;
    }
    let measured: Vec<[f64; 3]> = fits.iter().filter(|f| !f.flat).map(|f| f.shift).collect();
    let (bias, scatter_px) = if measured.len() >= EDGE_BIAS_MIN_FITS {
        let bias: [f64; 3] =
            std::array::from_fn(|k| upper_median(measured.iter().map(|m| m[k]).collect()));
        let mad = |k: usize| {
            MAD_TO_SIGMA * upper_median(measured.iter().map(|m| (m[k] - bias[k]).abs()).collect())
        };
        (bias, mad(0).max(mad(1)))
    } else {
        ([0.0; 3], report.systematic_px)
    };
    for (s, shift) in report.spots.iter_mut().zip(shaded) {
        if shift.is_none() {
            s.x_px += bias[0];
            s.y_px += bias[1];
            s.r_px += bias[2];
            s.sigma_px = s.sigma_px.hypot(scatter_px);
        }
    }
    report.systematic_px = 0.0;
}

/// Largest number of pixels in a shaded fit's window.
const SHADED_BUDGET: usize = 1500;

/// How far outside the rim a shaded fit's window reaches, pixels.
const SHADED_OUTSIDE_PX: f64 = 2.5;

/// Replace the edge fits of the isolated spots by shaded-sphere fits of their pixels. A fit
/// replaces the edge fit only when it lands near it (a window holding something else than one
/// ball image does not) and is surer than the edge fit with its lit-limb systematic (a window
/// that lost much of the rim to an incline's edge may not be). Gives, for each spot it refined,
/// the shaded fit minus the edge fit (x, y, r).
fn shade_spots(
    photo: &Photo,
    bg: &Background,
    tone: Tone,
    spots: &mut [Spot],
    systematic_px: f64,
) -> Vec<Option<Shaded>> {
    let fits: Vec<Option<refine::ShadedFit>> = spots
        .par_iter()
        .map(|s| {
            let window = shade_window(photo, bg, tone, spots, s)?;
            let start = refine::Circle {
                x_px: s.x_px,
                y_px: s.y_px,
                r_px: s.r_px,
            };
            refine::shaded_fit(&window, start)
        })
        .collect();
    let mut shaded = vec![None; spots.len()];
    for ((s, fit), done) in spots.iter_mut().zip(fits).zip(shaded.iter_mut()) {
        let Some(fit) = fit else {
            continue;
        };
        let shift = (fit.circle.x_px - s.x_px).hypot(fit.circle.y_px - s.y_px);
        let edge_total = s.sigma_px.hypot(systematic_px);
        if shift <= 0.05 * s.r_px + 3.0 * s.sigma_px + 0.1
            && (fit.circle.r_px - s.r_px).abs() <= 0.05 * s.r_px + 0.3
            && fit.sigma_px < edge_total
        {
            *done = Some(Shaded {
                shift: [
                    fit.circle.x_px - s.x_px,
                    fit.circle.y_px - s.y_px,
                    fit.circle.r_px - s.r_px,
                ],
                light_uv: fit.light_uv,
                light_sigma: fit.light_sigma,
                flat: fit.flat,
            });
            s.x_px = fit.circle.x_px;
            s.y_px = fit.circle.y_px;
            s.r_px = fit.circle.r_px;
            s.sigma_px = fit.sigma_px;
        }
    }
    shaded
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
