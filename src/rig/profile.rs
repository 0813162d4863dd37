//! The rig profile (TOML): a station's detection and measure settings by setting key.

use crate::error::{Error, Result};
use serde::Deserialize;
use std::path::{Path, PathBuf};

/// A rig profile (TOML): every measure and detection setting of a station, keyed by the setting's
/// snake_case name with its unit. Unknown keys are refused. The values are checked where every
/// setting is, by `SpotOptions::validate` and `MeasureSettings::validate`.
#[derive(Debug, Clone, Default, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Profile {
    /// Clean plate photo: the scene without the ball (relative to the profile's folder).
    pub plate: Option<PathBuf>,
    /// Ball against background: auto, bright or dark.
    pub polarity: Option<String>,
    /// How the stored values encode light: srgb or linear.
    pub tone: Option<String>,
    /// [min, max] radius of the ball images, pixels (default: estimated).
    pub radius_px: Option<[f64; 2]>,
    /// Threshold in robust sigmas of the noise.
    pub threshold_sigma: Option<f64>,
    /// Fixed threshold on the difference from the background, 0..1 (overrides threshold_sigma).
    pub threshold_level: Option<f64>,
    /// Background grid cell, pixels (0 = automatic).
    pub background_cell_px: Option<i64>,
    /// Gaussian smoothing before edges, pixels.
    pub smooth_px: Option<f64>,
    /// Rims whose median edge is this many noise sigmas get points from the unsmoothed gradient.
    pub fine_snr: Option<f64>,
    /// Isolated images up to this radius get the shaded-sphere fit, pixels (0: edge fit only).
    pub shaded_max_r_px: Option<f64>,
    /// Smallest radius of a ball on the decimated photo, pixels (0: full resolution throughout).
    pub coarse_r_px: Option<f64>,
    /// Edge points need a gradient above this many noise sigmas.
    pub edge_sigma: Option<f64>,
    /// Smallest fraction of the rim with edge support for a ball image, 0..1.
    pub min_score: Option<f64>,
    /// Ball images' radii may differ from the common radius by this fraction.
    pub radius_tolerance: Option<f64>,
    /// The round objects differ in size (not images of one ball): no common radius.
    pub sizes_differ: Option<bool>,
    /// Largest RMS distance of rim points from the fitted circle, pixels.
    pub max_rms_px: Option<f64>,
    /// Images fainter than this fraction of the median rim contrast are rejected as reflections.
    pub faint: Option<f64>,
    /// Refuse photos with more candidate regions than this.
    pub max_candidates: Option<i64>,
    /// Flash rate, hertz.
    pub rate_hz: Option<f64>,
    /// Scale in the plane of motion, pixels per metre.
    pub scale_px_per_m: Option<f64>,
    /// Two image points a known distance apart: [x1, y1, x2, y2, metres].
    pub ruler: Option<[f64; 5]>,
    /// Ball diameter, metres (also the scale when no other is given).
    pub ball_diameter_m: Option<f64>,
    /// The camera's focal length, pixels (focal length / pixel pitch).
    pub focal_px: Option<f64>,
    /// Plane file (relative to the profile's folder).
    pub plane: Option<PathBuf>,
    /// Gravity, m/s^2, when it is not the quantity estimated.
    pub gravity_mps2: Option<f64>,
    /// The quantity estimated from the flight arcs: gravity, interval or scale.
    pub estimate: Option<String>,
    /// Ball build: solid, shell or thick:INNER_DIAMETER_M.
    pub ball: Option<String>,
    /// The camera is level: do not estimate and correct its roll.
    pub level: Option<bool>,
    /// Fit a quadratic air-drag term to the flight arcs.
    pub fit_drag: Option<bool>,
    /// Acceptance bands, e.g. ["restitution=0.73..0.76"].
    pub accept: Option<Vec<String>>,
    /// Start of the path near pixel [x, y] (default: found automatically).
    pub start_px: Option<[f64; 2]>,
}

impl Profile {
    /// Parse profile text; `path` names the file in errors.
    pub fn parse(text: &str, path: &Path) -> Result<Profile> {
        toml::from_str(text).map_err(|e| Error::toml(path, text, &e))
    }

    /// Read and parse a profile file. Relative `plate` and `plane` paths are taken from the
    /// profile's folder.
    pub fn load(path: &Path) -> Result<Profile> {
        let text = std::fs::read_to_string(path).map_err(|e| Error::io(path, e))?;
        let mut p = Profile::parse(&text, path)?;
        let base = path.parent().unwrap_or(Path::new(""));
        for f in [&mut p.plate, &mut p.plane].into_iter().flatten() {
            if f.is_relative() {
                *f = base.join(&*f);
            }
        }
        Ok(p)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn profile_refuses_unknown_keys() {
        let p = Path::new("rig.toml");
        let err = Profile::parse("rate = 25", p).unwrap_err().to_string();
        assert!(err.contains("rig.toml") && err.contains("rate"), "{err}");
    }
}
