//! Rejection: which fitted circles are ball images, and why the others are not.
//!
//! Goes in: the circle fits of the second pass, the photo's [`RadiusModel`] and common radius,
//! the [`SpotOptions`]. Comes out: [`Spot`]s and [`Rejected`] candidates with their [`Reason`].
//!
//! Method (ours): rules in order: centre outside the frame, radius off the model (or the given
//! range), weak rim (low coverage, or RMS residual far above the median of the photo's
//! well-covered images), faint (rim contrast far below the median), inside a better candidate.

use crate::core::stats::upper_median;
use crate::detect::circle::CircleFit;
use crate::detect::radius::RadiusModel;
use crate::detect::{Spot, SpotOptions, SpotReport, well_covered};
use serde::{Deserialize, Serialize};

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
    /// An image too many: beside an image it overlaps, the pixels are explained without it (a
    /// circle straddling a printed ball's image and the incline's bar below it).
    Surplus,
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
    /// 1-sigma of the centre along each axis, pixels (as a spot's).
    #[serde(default)]
    pub sigma_px: f64,
    /// Why it was dropped.
    pub reason: Reason,
}

/// A rim is weak when its RMS residual exceeds `max_rms_px` or this many times the median RMS
/// of the photo's well-covered images (see [`well_covered`]), whichever is
/// larger.
pub const RMS_OVER_MEDIAN: f64 = 2.5;

/// One fit per ball image: regions overlap at their margins, so one image may be fitted twice;
/// of fits whose centres are within 0.3 `common_px` the best covered is kept. Goes in: all fits;
/// comes out: the kept ones, best covered first.
pub fn one_per_image(mut fits: Vec<CircleFit>, common_px: f64) -> Vec<CircleFit> {
    fits.sort_by(|a, b| b.coverage.total_cmp(&a.coverage));
    let mut unique: Vec<CircleFit> = Vec::new();
    for f in fits {
        if unique.iter().all(|u| {
            (u.circle.x_px - f.circle.x_px).hypot(u.circle.y_px - f.circle.y_px) > 0.3 * common_px
        }) {
            unique.push(f);
        }
    }
    unique
}

/// The photo's own yardsticks of a ball image, from the fits of plausible radius and coverage.
struct Limits {
    /// Median rim contrast.
    median_strength: f64,
    /// Largest RMS residual of a rim that is not weak, pixels.
    rms_limit: f64,
}

impl Limits {
    fn of(fits: &[CircleFit], model: &RadiusModel, options: &SpotOptions) -> Limits {
        let plausible: Vec<&CircleFit> = fits
            .iter()
            .filter(|f| {
                let r = model.at(f.circle.x_px, f.circle.y_px);
                f.coverage >= options.min_score
                    && (f.circle.r_px - r).abs() <= options.radius_tolerance * r
            })
            .collect();
        let median_strength = upper_median(plausible.iter().map(|f| f.edge_strength).collect());
        // Faint images (a dark ball against its clean plate, JPEG noise) have noisier rims than
        // the fixed limit allows; a shape that is not round stands out from the photo's own
        // images.
        let well = plausible
            .iter()
            .filter(|f| well_covered(f.coverage, f.circle.r_px));
        let rms_limit = options
            .max_rms_px
            .max(RMS_OVER_MEDIAN * upper_median(well.map(|f| f.rms_px).collect()));
        Limits {
            median_strength,
            rms_limit,
        }
    }
}

/// Sort the fits (one per image, see [`one_per_image`]) of a `width` x `height` photo into the
/// report's spots and rejected candidates.
pub fn classify(
    fits: Vec<CircleFit>,
    (width, height): (usize, usize),
    model: &RadiusModel,
    options: &SpotOptions,
    report: &mut SpotReport,
) {
    let limits = Limits::of(&fits, model, options);
    for f in &fits {
        let c = f.circle;
        match reason(f, &fits, (width, height), model, &limits, options) {
            Some(reason) => report.rejected.push(Rejected {
                x_px: c.x_px,
                y_px: c.y_px,
                r_px: c.r_px,
                score: f.coverage,
                sigma_px: f.sigma_px,
                reason,
            }),
            None => report.spots.push(Spot {
                x_px: c.x_px,
                y_px: c.y_px,
                r_px: c.r_px,
                sigma_px: f.sigma_px,
                score: f.coverage,
                source: super::SpotSource::Detected,
            }),
        }
    }
}

/// Why fit `f` is not a ball image, the first rule that holds (None: it is one); `all` are the
/// photo's fits, of which a better one may hold it inside.
fn reason(
    f: &CircleFit,
    all: &[CircleFit],
    (width, height): (usize, usize),
    model: &RadiusModel,
    limits: &Limits,
    options: &SpotOptions,
) -> Option<Reason> {
    let c = f.circle;
    // Inside a better candidate: wholly, or (objects of different sizes, which do not overlap
    // like the images of one moving ball) with its centre inside.
    let inside = all.iter().any(|o| {
        let d = (o.circle.x_px - c.x_px).hypot(o.circle.y_px - c.y_px);
        o.coverage > f.coverage
            && ((o.circle.r_px > c.r_px && d + c.r_px <= o.circle.r_px + 2.0)
                || (!options.one_radius && d < o.circle.r_px))
    });
    let expected = model.at(c.x_px, c.y_px);
    if c.x_px < -0.5 || c.y_px < -0.5 || c.x_px > width as f64 - 0.5 || c.y_px > height as f64 - 0.5
    {
        Some(Reason::OutsideFrame)
    } else if (options.one_radius
        && (c.r_px - expected).abs() > options.radius_tolerance * expected)
        || options.radius_px.is_some_and(|(lo, hi)| {
            c.r_px < lo * (1.0 - options.radius_tolerance)
                || c.r_px > hi * (1.0 + options.radius_tolerance)
        })
    {
        Some(Reason::Radius)
    } else if f.coverage < options.min_score || f.rms_px > limits.rms_limit {
        Some(Reason::WeakRim)
    } else if f.limb_strength < options.faint_fraction * limits.median_strength {
        // Faint all round, lit limb included: a ball lit from one side has a lit limb as
        // strong as any image's rim and a dark limb that fades into the backdrop (its median
        // contrast would call the whole ball faint), a mirror image is faint everywhere.
        Some(Reason::Faint)
    } else if inside {
        Some(Reason::Inside)
    } else {
        None
    }
}
