//! Motion in depth: the ball leaving the plane the camera is set up for, seen in its image's
//! radius, and the path's images brought back into one plane.
//!
//! Goes in: the detected images' flash numbers and radii (in metres at the calibration's local
//! scale, so a tilted plane's perspective is not taken for depth). Comes out: a [`DepthModel`]
//! when the radius changes along the path by more than the radius check's tolerance (3 %), and
//! with it each image's factor into the reference plane and a [`Check`] of the model's fit.
//!
//! Method: a pinhole camera images a ball of radius R at distance D - z with radius f R /
//! (D - z), so 1 / r is linear in the distance; for a ball whose distance changes at a constant
//! speed, 1 / r is linear in time. That line is fitted by least squares (twice, the images
//! beyond 3 robust sigmas of the first fit left out: blur and merging inflate or shrink a few
//! radii). A point of the image at `p` is brought into the plane of the reference radius r_ref
//! (the median fitted radius: the plane a ball-diameter scale describes) by scaling `p - c` by
//! r_ref / r(n) about the principal point `c` (taken at the image centre): exact for a camera
//! square to the plane with its axis through the image centre (Hartley & Zisserman, Multiple
//! View Geometry, 2nd ed., section 6.1, the finite projective camera).

use super::checks::{Check, CheckOutcome};
use super::fit::{CovarianceScaling, FitOptions, polynomial_fit};
use crate::core::stats::MAD_TO_SIGMA;

/// Size change along the path (relative, first to last image) over which the images are
/// brought into one plane; the radius check's warning threshold.
pub const DEPTH_CHANGE: f64 = 0.03;
/// Significance (in sigmas of the slope) a size change needs to be taken as motion in depth.
const DEPTH_Z: f64 = 5.0;
/// Relative scatter of the radii about the depth line over which the line does not describe
/// them (common practice, no source: an edge fit's radius scatters by about 1 % of it).
const DEPTH_SCATTER: f64 = 0.02;
/// A correction of more than this (relative size change) rests heavily on the camera model.
const DEPTH_CHANGE_LARGE: f64 = 0.10;

/// The fitted line 1 / r = a + b n and what it gives.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct DepthModel {
    /// Intercept of 1 / r, 1 / metres.
    pub a: f64,
    /// Slope of 1 / r per flash.
    pub b: f64,
    /// Radius of the reference plane, metres (the median fitted radius).
    pub r_ref_m: f64,
    /// Size change from the first to the last image, relative (negative: it shrinks).
    pub change: f64,
    /// The distance's rate of change over the reference distance, per flash (positive: away).
    pub distance_rate_per_flash: f64,
    /// Its 1-sigma (from the line's slope, its covariance scaled by the reduced chi-square).
    pub distance_rate_sigma_per_flash: f64,
    /// Relative RMS scatter of the radii about the line.
    pub scatter: f64,
    /// Images used in the fit (not left out).
    pub used: usize,
}

impl DepthModel {
    /// The factor r_ref / r(n) that brings an image point of flash `n` into the reference
    /// plane (multiplying its offset from the principal point).
    pub fn factor(&self, n: f64) -> f64 {
        (self.a + self.b * n) * self.r_ref_m
    }
}

/// Fit the depth line to the images' flash numbers `n` and radii `r_m`; None when there are
/// fewer than six images or the size changes by less than [`DEPTH_CHANGE`] (or not
/// significantly).
pub fn fit(n: &[f64], r_m: &[f64]) -> Option<DepthModel> {
    if n.len() < 6 || n.len() != r_m.len() || r_m.iter().any(|r| r.is_nan() || *r <= 0.0) {
        return None;
    }
    let inv: Vec<f64> = r_m.iter().map(|r| 1.0 / r).collect();
    let options = FitOptions {
        covariance: CovarianceScaling::ReducedChiSquare,
    };
    let mut keep: Vec<usize> = (0..n.len()).collect();
    let mut line = None;
    for _ in 0..2 {
        let xs: Vec<f64> = keep.iter().map(|&i| n[i]).collect();
        let ys: Vec<f64> = keep.iter().map(|&i| inv[i]).collect();
        let l = polynomial_fit(&xs, &ys, None, 1, &options).ok()?;
        let res: Vec<f64> = (0..n.len())
            .map(|i| inv[i] - l.coefficients[0] - l.coefficients[1] * n[i])
            .collect();
        let mut abs: Vec<f64> = keep.iter().map(|&i| res[i].abs()).collect();
        abs.sort_by(f64::total_cmp);
        let cut = 3.0 * MAD_TO_SIGMA * abs[abs.len() / 2];
        line = Some(l);
        let next: Vec<usize> = (0..n.len()).filter(|&i| res[i].abs() <= cut).collect();
        if next.len() < 6 || next == keep {
            break;
        }
        keep = next;
    }
    let l = line?;
    let (a, b) = (l.coefficients[0], l.coefficients[1]);
    let z = b / l.sigma(1);
    let (first, last) = (n[0], n[n.len() - 1]);
    let r_at = |x: f64| 1.0 / (a + b * x);
    let change = r_at(last) / r_at(first) - 1.0;
    if !(change.abs() > DEPTH_CHANGE && z.abs() > DEPTH_Z) {
        return None;
    }
    let mut fitted: Vec<f64> = keep.iter().map(|&i| r_at(n[i])).collect();
    fitted.sort_by(f64::total_cmp);
    let r_ref_m = fitted[fitted.len() / 2];
    let scatter = (keep
        .iter()
        .map(|&i| (r_m[i] / r_at(n[i]) - 1.0).powi(2))
        .sum::<f64>()
        / keep.len() as f64)
        .sqrt();
    Some(DepthModel {
        a,
        b,
        r_ref_m,
        change,
        distance_rate_per_flash: b * r_ref_m,
        distance_rate_sigma_per_flash: l.sigma(1) * r_ref_m,
        scatter,
        used: keep.len(),
    })
}

/// The radius check when the images were brought into one plane: pass when the depth line
/// describes the radii and the correction is moderate, warn when the correction is large (it
/// rests on the camera model), fail when the line does not describe the radii.
pub fn check(m: &DepthModel, images: usize) -> Check {
    let outcome = if m.scatter > DEPTH_SCATTER {
        CheckOutcome::Fail
    } else if m.change.abs() > DEPTH_CHANGE_LARGE {
        CheckOutcome::Warn
    } else {
        CheckOutcome::Pass
    };
    let what = match outcome {
        CheckOutcome::Fail => {
            "; the radii do not follow a ball moving in depth at a steady speed (blurred or \
             merged images, a tilted camera, or a change of speed in depth at a bounce), so \
             the correction is not to be trusted: aim the shot square to the motion; check the \
             overlay"
        }
        CheckOutcome::Warn => {
            "; a correction this large rests on the camera's axis passing through the image \
             centre square to the plane: aim the shot square to the motion"
        }
        CheckOutcome::Pass => "",
    };
    super::checks::check(
        "radius_trend",
        outcome,
        m.change,
        format!(
            "radii within {:.0} % of a ball moving in depth at a steady speed ({} of {} images \
             used), correction within {:.0} %",
            DEPTH_SCATTER * 100.0,
            m.used,
            images,
            DEPTH_CHANGE_LARGE * 100.0
        ),
        format!(
            "the ball's image {} by {:.1} % from first to last image: it moves {} the camera; \
             every image was brought into the plane of the median image (radii {:.1} % RMS \
             off the fitted motion){what}",
            if m.change >= 0.0 { "grows" } else { "shrinks" },
            m.change.abs() * 100.0,
            if m.change >= 0.0 {
                "towards"
            } else {
                "away from"
            },
            m.scatter * 100.0
        ),
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_depth_line_is_found_through_a_few_swollen_radii() {
        // Radii of a ball receding at a steady speed (1 / r linear in n), two of them swollen
        // by 8 % (blur near a bounce): the line is the exact one, and the factor brings each
        // image to the median image's size.
        let n: Vec<f64> = (0..20).map(f64::from).collect();
        let (a, b) = (1.0 / 0.030, 0.4);
        let mut r: Vec<f64> = n.iter().map(|x| 1.0 / (a + b * x)).collect();
        r[5] *= 1.08;
        r[12] *= 1.08;
        let m = fit(&n, &r).expect("a depth line");
        assert!(
            (m.a - a).abs() < 1e-9 * a && (m.b - b).abs() < 1e-9,
            "{m:?}"
        );
        assert_eq!(m.used, 18);
        let want = (1.0 / (a + b * 19.0)) / (1.0 / a) - 1.0;
        assert!((m.change - want).abs() < 1e-12);
        for (i, &x) in n.iter().enumerate().filter(|(i, _)| *i != 5 && *i != 12) {
            assert!((r[i] * m.factor(x) - m.r_ref_m).abs() < 1e-12);
        }
    }

    #[test]
    fn a_steady_size_gives_no_depth_line() {
        let n: Vec<f64> = (0..20).map(f64::from).collect();
        let r: Vec<f64> = n
            .iter()
            .map(|x| 0.02 * (1.0 + 0.001 * (x * 1.7).sin()))
            .collect();
        assert!(fit(&n, &r).is_none());
    }
}
