//! The search: where the ball images may be, as regions of edge points with Hough candidates.
//!
//! Goes in: the photo, its background and the [`SpotOptions`]. Comes out: the decimation the
//! search worked at, its blobs, the radius range searched, and one full-resolution
//! [`Region`] per blob with the [`Candidate`] circles in it.
//!
//! Method: a large ball (smallest searched radius at least 2 x [`SpotOptions::coarse_r_px`]) is
//! searched for on the photo averaged over d x d blocks: threshold, vote (Kimme, Ballard &
//! Sklansky's gradient-directed Hough transform, [`crate::detect::hough`]) and first circle fits
//! run there; each circle's edge points are then extracted at full resolution in a band around it
//! ([`hough::prepare_band`]). The pixel work of a 24 MP photo of a 75 px ball falls to about a
//! fifth.

use crate::detect::hough::{self, Candidate, Region};
use crate::detect::radius::auto_radius;
use crate::detect::{DebugImages, SpotOptions, joint};
use crate::error::{DetectError, Error, Result};
use crate::image::background::Background;
use crate::image::load::Photo;
use crate::image::threshold::{self, Blobs};
use rayon::prelude::*;

/// Half-width of the band around a circle found on the decimated photo in which its
/// full-resolution edge points are looked for: this plus [`BAND_FRACTION`] x the radius, pixels.
pub const BAND_PX: f64 = 3.0;

/// See [`BAND_PX`].
pub const BAND_FRACTION: f64 = 0.1;

/// With the radius left to estimate, the blobs that estimate it come from the photo decimated to
/// about this many megapixels (a 24 MP photo by 4, a 12 MP one by 2). The detection stays there
/// when the radius found allows it (see [`SpotOptions::coarse_r_px`]: the smallest radius is at
/// least that many decimated pixels and less than twice as many), else it starts again at the
/// decimation the radius asks for.
pub const SURVEY_MEGAPIXELS: f64 = 1.5;

/// The decimated photo keeps at least this many pixels on its short side.
const MIN_DECIMATED_SIDE_PX: usize = 32;

/// The decimation for smallest radius `r_min_px` on `photo` (1: none).
pub fn coarse_factor(r_min_px: f64, coarse_r_px: f64, photo: &Photo) -> usize {
    let most = photo.width.min(photo.height) / MIN_DECIMATED_SIDE_PX;
    if coarse_r_px > 0.0 {
        ((r_min_px / coarse_r_px).floor() as usize).min(most).max(1)
    } else {
        1
    }
}

/// The photo the search works on: decimated by `d`, with its background and blobs.
pub struct Work {
    /// Decimation: the photo averaged over d x d blocks (1: full resolution).
    pub d: usize,
    /// The decimated photo (None: the photo itself, d = 1).
    pub photo: Option<Photo>,
    /// Its background (None: the photo's own).
    pub bg: Option<Background>,
    /// The blobs above the threshold, in the work photo's pixels.
    pub blobs: Blobs,
}

impl Work {
    /// Threshold `photo` decimated by `d`; `bg` is the photo's own background (from its plate or
    /// estimated) at full resolution. Fails when there are more blobs than
    /// [`SpotOptions::max_candidates`].
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
            d,
            photo: small,
            bg: small_bg,
            blobs,
        })
    }
}

/// The decimation of the survey that estimates the radius: the photo brought to about
/// [`SURVEY_MEGAPIXELS`] (1 when `coarse_r_px` is 0: full resolution throughout).
fn survey_factor(photo: &Photo, coarse_r_px: f64) -> usize {
    if coarse_r_px > 0.0 {
        let by_area = ((photo.width * photo.height) as f64 / (SURVEY_MEGAPIXELS * 1e6)).sqrt();
        (by_area as usize)
            .min(photo.width.min(photo.height) / MIN_DECIMATED_SIDE_PX)
            .max(1)
    } else {
        1
    }
}

/// Choose the decimation and threshold the photo there.
///
/// Goes in: the photo, its full-resolution background and the options. Comes out: the [`Work`]
/// at the chosen decimation and the radius range to search, full-resolution pixels (None:
/// nothing round enough to estimate it from).
///
/// A given radius range sets the decimation ([`coarse_factor`]): one threshold pass. A radius
/// left to estimate needs blobs first: they come from a survey at about [`SURVEY_MEGAPIXELS`].
/// This is the one place the threshold may run a second time, at another decimation: when the
/// radius the survey found asks for a decimation below the survey's or at least twice it, or when
/// the survey found nothing round enough (small balls need the full resolution, where the radius
/// is estimated again).
pub fn settle(
    photo: &Photo,
    bg: &Background,
    options: &SpotOptions,
) -> Result<(Work, Option<(f64, f64)>)> {
    let d = match options.radius_px {
        Some((r_min, _)) => coarse_factor(r_min, options.coarse_r_px, photo),
        None => survey_factor(photo, options.coarse_r_px),
    };
    let work = Work::new(photo, bg, options, d)?;
    if options.radius_px.is_some() {
        return Ok((work, options.radius_px));
    }
    match auto_radius(&work.blobs) {
        Some((lo, hi)) => {
            let radius = (lo * d as f64, hi * d as f64);
            let wanted = coarse_factor(radius.0, options.coarse_r_px, photo);
            if wanted < d || wanted >= 2 * d {
                return Ok((Work::new(photo, bg, options, wanted)?, Some(radius)));
            }
            Ok((work, Some(radius)))
        }
        None if d > 1 => {
            let work = Work::new(photo, bg, options, 1)?;
            let radius = auto_radius(&work.blobs);
            Ok((work, radius))
        }
        None => Ok((work, None)),
    }
}

/// The Hough stage over every blob of `work`.
///
/// Goes in: the photo, its full-resolution background, the work, the radius range
/// (full-resolution pixels) and the debug images, if kept. Comes out: one full-resolution
/// [`Region`] per blob and the [`Candidate`]s in it, full-resolution coordinates. At d > 1 the
/// vote runs on the decimated photo and `full_resolution_regions` carries its circles over;
/// the debug votes are the accumulators spread over their blocks.
pub fn find_regions(
    photo: &Photo,
    bg: &Background,
    work: &Work,
    (r_min, r_max): (f64, f64),
    options: &SpotOptions,
    debug: Option<&mut DebugImages>,
) -> (Vec<Region>, Vec<Vec<Candidate>>) {
    let d = work.d;
    let work_photo = work.photo.as_ref().unwrap_or(photo);
    let work_bg = work.bg.as_ref().unwrap_or(bg);
    let df = d as f64;
    let (rw_min, rw_max) = (r_min / df, r_max / df);
    let margin = (0.5 * rw_max + 4.0).ceil() as usize;
    let prepare = |hough_options: &hough::HoughOptions| -> Vec<Region> {
        work.blobs
            .blobs
            .par_iter()
            .map(|b| hough::prepare_region(work_photo, work_bg, b, margin, hough_options))
            .collect()
    };
    let mut work_regions = prepare(&options.hough);
    let faint = faint_options(&work.blobs, &work_regions, rw_min, &options.hough);
    let options = &SpotOptions {
        hough: faint.unwrap_or(options.hough),
        ..*options
    };
    if faint.is_some() {
        work_regions = prepare(&options.hough);
    }
    hough::settle_marks(&mut work_regions);
    let voted: Vec<(Vec<Candidate>, Vec<f32>)> = work_regions
        .par_iter()
        .map(|r| hough::vote(r, rw_min, rw_max, &options.hough, debug.is_some()))
        .collect();
    if let Some(dbg) = debug {
        spread_votes(dbg, photo, &work_regions, &voted, d);
    }
    if d == 1 {
        (work_regions, voted.into_iter().map(|v| v.0).collect())
    } else {
        full_resolution_regions(photo, bg, &work_regions, &voted, d, (r_min, r_max), options)
    }
}

/// The Hough options of a faint photo, None for any other: when most ball-sized blobs (area at
/// least half a disc of the smallest searched radius `rw_min`, in work pixels) show no rim above
/// the noise at the default smoothing ([`hough::FAINT_SNR`]), every crop is smoothed by
/// [`hough::FAINT_SMOOTH_R`] of that radius, at least [`hough::FAINT_SMOOTH_MIN_PX`] while that is
/// under [`hough::FAINT_SMOOTH_SMALL_R`] of it, at most [`hough::FAINT_SMOOTH_MAX_PX`]. A dark ball
/// on a bright backdrop dims it by one flash's light: its rims can sit below the pixels' noise
/// while their length holds plenty of signal. The decision is the photo's, so that a normal photo's
/// specks and faint corners keep the default.
fn faint_options(
    blobs: &Blobs,
    regions: &[Region],
    rw_min: f64,
    hough_options: &hough::HoughOptions,
) -> Option<hough::HoughOptions> {
    let disc = 0.5 * std::f64::consts::PI * rw_min * rw_min;
    let (faint, sized) = blobs
        .blobs
        .iter()
        .zip(regions)
        .filter(|(b, _)| b.area_px >= disc)
        .fold((0usize, 0usize), |(f, n), (_, r)| {
            (f + usize::from(r.rim_snr < hough::FAINT_SNR), n + 1)
        });
    let smooth_px = (hough::FAINT_SMOOTH_R * rw_min)
        .max(hough::FAINT_SMOOTH_MIN_PX)
        .min(hough::FAINT_SMOOTH_SMALL_R * rw_min)
        .min(hough::FAINT_SMOOTH_MAX_PX) as f32;
    (2 * faint > sized && smooth_px > hough_options.smooth_px).then_some(hough::HoughOptions {
        smooth_px,
        ..*hough_options
    })
}

/// Each region's accumulator (decimated by `d`) into the debug votes, full resolution: the
/// largest vote at each pixel.
fn spread_votes(
    dbg: &mut DebugImages,
    photo: &Photo,
    work_regions: &[Region],
    voted: &[(Vec<Candidate>, Vec<f32>)],
    d: usize,
) {
    let w = photo.width;
    for (r, (_, acc)) in work_regions.iter().zip(voted) {
        for y in r.y0 * d..((r.y0 + r.height) * d).min(photo.height) {
            for x in r.x0 * d..((r.x0 + r.width) * d).min(w) {
                let v = &mut dbg.votes[y * w + x];
                *v = v.max(acc[(y / d - r.y0) * r.width + x / d - r.x0]);
            }
        }
    }
}

/// The regions found on the photo decimated by `d`, at full resolution: each region's circles
/// (first fits there, and the vote's peaks they missed) carried to full-resolution
/// coordinates, with the edge points in a band around them.
fn full_resolution_regions(
    photo: &Photo,
    bg: &Background,
    work_regions: &[Region],
    voted: &[(Vec<Candidate>, Vec<f32>)],
    d: usize,
    (r_min_px, r_max_px): (f64, f64),
    options: &SpotOptions,
) -> (Vec<Region>, Vec<Vec<Candidate>>) {
    let df = d as f64;
    let full = |v: f64| v * df + 0.5 * (df - 1.0);
    let band = BAND_PX + BAND_FRACTION * r_min_px;
    let (mut regions, starts): (Vec<Region>, Vec<Vec<Candidate>>) = work_regions
        .par_iter()
        .zip(voted)
        .map(|(r, (c, _))| {
            let fits = joint::refine_region(r, c, None, &options.refine);
            // A fit that left the searched radii (a small object on the coarse photo) starts
            // nothing: the vote's peak there is retried instead.
            let r_range = 0.5 * r_min_px..=2.0 * r_max_px;
            let mut starts: Vec<Candidate> = fits
                .iter()
                .filter(|f| {
                    f.coverage >= 0.5 * options.min_score && r_range.contains(&(f.circle.r_px * df))
                })
                .map(|f| Candidate {
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
                    starts.push(Candidate {
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
        .unzip();
    hough::settle_marks(&mut regions);
    (regions, starts)
}
