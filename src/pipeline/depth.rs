//! The path's images brought into one plane when the ball moves in depth.
//!
//! Goes in: the spot report, the final path and its calibration. Comes out: an [`InPlane`]
//! holding the fitted depth line ([`crate::physics::depth`]) when the ball's image changes size
//! along the path, which moves each image point into the plane of the path's median image, and
//! the physics measured again on the moved points. With a plane file the camera model is the
//! file's (a homography of a tilted plane), which this scaling about the image centre would
//! contradict: nothing is moved there, and the radius check says what the size change means.

use crate::calibrate::Calibration;
use crate::detect::{SpotReport, SpotSource};
use crate::error::Result;
use crate::physics::depth::{self, DepthModel};
use crate::physics::{self, Quantity, TimedPoint};
use crate::report::measure::DepthDoc;
use crate::track::{BallPath, PathPoint};

/// The depth line of a path, if any, and the principal point it scales about.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(super) struct InPlane {
    /// The fitted depth line (None: the images are in one plane, or a plane file is given).
    pub model: Option<DepthModel>,
    /// The principal point, pixels (the image centre).
    centre: [f64; 2],
}

impl InPlane {
    /// The depth line of the detected images of `best` (their radii at the calibration's local
    /// scale); none with a plane file (`plane`).
    pub fn of(
        report: &SpotReport,
        best: &BallPath,
        calibration: &Calibration,
        plane: bool,
    ) -> Self {
        let centre = [
            (report.width_px as f64 - 1.0) / 2.0,
            (report.height_px as f64 - 1.0) / 2.0,
        ];
        let measured: Vec<&PathPoint> = best
            .points
            .iter()
            .filter(|p| report.spots[p.spot_index].source == SpotSource::Detected)
            .collect();
        let n: Vec<f64> = measured.iter().map(|p| p.n as f64).collect();
        let r_m: Vec<f64> = measured
            .iter()
            .map(|p| p.r_px / calibration.scale_px_per_m(p.x_px, p.y_px))
            .collect();
        InPlane {
            model: if plane { None } else { depth::fit(&n, &r_m) },
            centre,
        }
    }

    /// An image point of the path, moved into the reference plane (unchanged without a model).
    pub fn point(&self, p: &PathPoint) -> PathPoint {
        let Some(m) = &self.model else {
            return *p;
        };
        let k = m.factor(p.n as f64);
        let [cx, cy] = self.centre;
        PathPoint {
            x_px: cx + (p.x_px - cx) * k,
            y_px: cy + (p.y_px - cy) * k,
            sigma_px: p.sigma_px * k,
            ..*p
        }
    }

    /// The path's timed points in the reference plane and the physics measured on them; None
    /// without a model, or when the physics cannot be measured on them.
    pub fn measured(
        &self,
        best: &BallPath,
        (timed, measure): (
            impl Fn(&PathPoint) -> TimedPoint,
            impl Fn(&[TimedPoint]) -> Result<physics::Measurement>,
        ),
    ) -> Option<(Vec<TimedPoint>, physics::Measurement)> {
        self.model?;
        let moved: Vec<TimedPoint> = best.points.iter().map(|p| timed(&self.point(p))).collect();
        let m = measure(&moved).ok()?;
        Some((moved, m))
    }

    /// What the document says of the motion in depth, at flash interval `dt_s`; with the
    /// camera's focal length in pixels, the distance is that over the scale in the reference
    /// plane (pinhole camera: a metre there spans focal / distance pixels) and the speed toward
    /// the camera is the distance's rate of change times it, with the sigmas of the rate and of
    /// the scale.
    pub fn doc(&self, dt_s: f64, focal_px: Option<f64>, scale: &Quantity) -> Option<DepthDoc> {
        self.model.map(|m| {
            let rate_per_s = m.distance_rate_per_flash / dt_s;
            let distance_m = focal_px
                .map(|f| f / scale.value)
                .filter(|d| d.is_finite() && *d > 0.0);
            let toward = distance_m.map(|d| -rate_per_s * d);
            let sigma = distance_m.map(|d| {
                let rate_sigma = m.distance_rate_sigma_per_flash / dt_s;
                (rate_sigma * d).hypot(rate_per_s * d * scale.sigma / scale.value)
            });
            DepthDoc {
                size_change: m.change,
                distance_change_per_s: rate_per_s,
                distance_m,
                toward_camera_mps: toward,
                toward_camera_sigma_mps: sigma,
                radius_scatter: m.scatter,
                images_used: m.used,
            }
        })
    }
}
