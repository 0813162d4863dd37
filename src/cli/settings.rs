//! Typed text -> validated library settings. This layer parses what only the command line has
//! (ranges, lists, enum names); every rule on the values themselves is the library's own
//! (`SpotOptions::validate`, `MeasureSettings::validate`), whose refusals name a setting key that
//! is shown here as the flag the user typed.

use super::args::{DetectArgs, EstimateArg, MeasureArgs, PolarityArg, ToneArg};
use super::profile::flag_for_key;
use anyhow::{Context, Result, bail};
use beadline::core::ball::Build;
use beadline::core::light::{Polarity, Tone};
use beadline::core::units::STANDARD_GRAVITY_MPS2;
use beadline::detect::SpotOptions;
use beadline::physics::{Quantity, Unknown};
use beadline::pipeline::{MeasureSettings, ScaleSource};
use std::path::PathBuf;

/// A library error shown with the command line's words: a refused setting names its flag.
pub(crate) fn flagged(e: beadline::Error) -> anyhow::Error {
    match e {
        beadline::Error::Setting { name, message } => {
            anyhow::anyhow!("{}: {message}", flag_for_key(&name).unwrap_or(&name))
        }
        other => other.into(),
    }
}

pub(crate) fn parse_numbers(text: &str, count: usize, name: &str) -> Result<Vec<f64>> {
    let v: Vec<f64> = text
        .split(',')
        .map(|p| p.trim().parse::<f64>())
        .collect::<std::result::Result<_, _>>()
        .with_context(|| format!("{name}: '{text}' is not a list of numbers"))?;
    if v.len() != count || v.iter().any(|x| !x.is_finite()) {
        bail!("{name}: expected {count} finite numbers separated by commas, got '{text}'");
    }
    Ok(v)
}

/// `--start X,Y` as a pixel point.
pub(crate) fn parse_start(text: Option<&str>) -> Result<Option<beadline::track::PixelPoint>> {
    text.map(|t| {
        let v = parse_numbers(t, 2, "--start")?;
        Ok(beadline::track::PixelPoint {
            x_px: v[0],
            y_px: v[1],
        })
    })
    .transpose()
}

fn parse_range(text: &str, name: &str) -> Result<(f64, f64)> {
    let Some((a, b)) = text.split_once("..") else {
        bail!("{name}: expected MIN..MAX, got '{text}'");
    };
    let (a, b): (f64, f64) = (
        a.trim()
            .parse()
            .with_context(|| format!("{name}: '{a}' is not a number"))?,
        b.trim()
            .parse()
            .with_context(|| format!("{name}: '{b}' is not a number"))?,
    );
    if !(a.is_finite() && b.is_finite()) || a > b {
        bail!("{name}: '{text}' is not a range MIN..MAX with MIN <= MAX");
    }
    Ok((a, b))
}

/// Validated detection settings.
pub(crate) struct Detect {
    pub(crate) plate: Option<PathBuf>,
    pub(crate) options: SpotOptions,
    pub(crate) debug_dir: Option<PathBuf>,
}

impl DetectArgs {
    /// The spot options these flags stand for, validated by the library.
    pub(crate) fn validate(&self) -> Result<Detect> {
        let mut o = SpotOptions::default();
        o.background.polarity = match self.polarity {
            PolarityArg::Auto => None,
            PolarityArg::Bright => Some(Polarity::Bright),
            PolarityArg::Dark => Some(Polarity::Dark),
        };
        o.tone = match self.tone {
            ToneArg::Srgb => Tone::Srgb,
            ToneArg::Linear => Tone::Linear,
        };
        if let Some(r) = &self.radius {
            o.radius_px = Some(parse_range(r, "--radius")?);
        }
        o.threshold.k_sigma = self.threshold_sigma;
        o.threshold.level = self.threshold_level;
        o.background.cell_px = self.background_cell;
        o.hough.smooth_px = self.smooth;
        o.hough.fine_snr = self.fine_snr;
        o.hough.edge_k_sigma = self.edge_sigma;
        o.min_score = self.min_score;
        o.radius_tolerance = self.radius_tolerance;
        o.max_rms_px = self.max_rms;
        o.systematic_px_r = self.edge_systematic;
        o.shaded_max_r_px = self.shaded_max_r;
        o.coarse_r_px = self.coarse_r;
        o.one_radius = !self.sizes_differ;
        o.faint_fraction = self.faint;
        o.max_candidates = self.max_candidates;
        o.validate().map_err(flagged)?;
        Ok(Detect {
            plate: self.plate.clone(),
            options: o,
            debug_dir: self.debug_dir.clone(),
        })
    }
}

impl MeasureArgs {
    /// The measurement settings these flags stand for, validated by the library.
    pub(crate) fn validate(&self, detect: &Detect) -> Result<MeasureSettings> {
        let mut s = MeasureSettings {
            spots: detect.options,
            plate: detect.plate.clone(),
            rate_hz: self.rate,
            ball_diameter_m: self.ball_diameter,
            focal_px: self.focal_px,
            ..MeasureSettings::default()
        };
        s.scale = self.scale_source()?;
        if s.scale.is_none() && s.ball_diameter_m.is_some() {
            s.scale = Some(ScaleSource::BallDiameter);
        }
        let g = self.gravity;
        let label = if g == STANDARD_GRAVITY_MPS2 {
            "standard gravity (ISO 80000-3)"
        } else {
            "given"
        };
        s.physics.gravity = Quantity::new(g, 0.0, label);
        s.estimate = self.estimate.map(|e| match e {
            EstimateArg::Gravity => Unknown::Gravity,
            EstimateArg::Interval => Unknown::Interval,
            EstimateArg::Scale => Unknown::Scale,
        });
        (s.physics.build, s.physics.inner_ratio) = self.build(s.ball_diameter_m)?;
        s.physics.camera_level = self.level;
        s.physics.fit_drag = self.fit_drag;
        s.physics.bands = self
            .accept
            .iter()
            .map(|a| {
                beadline::physics::bands::Band::parse(a).with_context(|| format!("--accept {a}"))
            })
            .collect::<Result<_>>()?;
        s.path.start = parse_start(self.start.as_deref())?;
        s.validate().map_err(flagged)?;
        Ok(s)
    }

    /// `--scale`, `--ruler` or `--plane`: at most one.
    fn scale_source(&self) -> Result<Option<ScaleSource>> {
        let given = [
            self.scale.is_some(),
            self.ruler.is_some(),
            self.plane.is_some(),
        ];
        if given.iter().filter(|g| **g).count() > 1 {
            bail!("--scale, --ruler and --plane: give only one");
        }
        Ok(if let Some(v) = self.scale {
            Some(ScaleSource::PxPerM(v))
        } else if let Some(r) = &self.ruler {
            let v = parse_numbers(r, 5, "--ruler")?;
            Some(ScaleSource::Ruler {
                a_px: [v[0], v[1]],
                b_px: [v[2], v[3]],
                distance_m: v[4],
            })
        } else {
            self.plane.clone().map(ScaleSource::Plane)
        })
    }

    /// `--ball`: the build and, for a thick shell, inner / outer diameter.
    fn build(&self, outer_m: Option<f64>) -> Result<(Build, Option<f64>)> {
        Ok(match self.ball.as_str() {
            "solid" => (Build::Solid, None),
            "shell" => (Build::Shell, None),
            other => {
                let Some(d) = other.strip_prefix("thick:") else {
                    bail!("--ball: expected solid, shell or thick:INNER_DIAMETER_M, got '{other}'");
                };
                let inner: f64 = d
                    .parse()
                    .with_context(|| format!("--ball: '{d}' is not a number"))?;
                let outer = outer_m.ok_or_else(|| {
                    anyhow::anyhow!("--ball thick: needs --ball-diameter for the outer diameter")
                })?;
                (Build::Thick, Some(inner / outer))
            }
        })
    }
}
