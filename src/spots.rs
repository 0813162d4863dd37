//! Spots: every image of the ball found in one strobe photo.
//!
//! Goes in: a photo. Comes out: [`Spot`]s with sub-pixel centres, radius, a 1-sigma centre
//! uncertainty and a score, plus the candidates that were rejected and why.

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
