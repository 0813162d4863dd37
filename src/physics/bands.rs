//! Acceptance bands: `quantity=min..max` and their pass/fail verdicts on a [`Measurement`].
//!
//! Per-bounce quantities (`restitution`, `tangential_ratio`, `impact_speed_mps`) apply to every
//! bounce: the band passes only when every measured bounce lies inside it.

use super::Measurement;
use crate::error::{Error, Result};
use serde::Serialize;

/// Quantity names a band may test.
pub const QUANTITIES: &[&str] = &[
    "restitution",
    "tangential_ratio",
    "impact_speed_mps",
    "launch_speed_mps",
    "launch_angle_deg",
    "gravity_mps2",
    "flash_interval_s",
    "scale_px_per_m",
    "incline_accel_mps2",
    "rolling_loss",
    "roll_deg",
    "drag_per_m",
];

/// An acceptance band: `min <= value <= max`.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Band {
    /// Quantity name (one of [`QUANTITIES`]).
    pub quantity: String,
    /// Lower limit.
    pub min: f64,
    /// Upper limit.
    pub max: f64,
}

impl Band {
    /// Parse `quantity=min..max`, e.g. `restitution=0.73..0.76`. Unknown names are refused with
    /// the name.
    pub fn parse(text: &str) -> Result<Band> {
        let bad = |m: String| Error::setting("band", m);
        let (name, range) = text
            .split_once('=')
            .ok_or_else(|| bad(format!("{text:?}: expected quantity=min..max")))?;
        let name = name.trim();
        if !QUANTITIES.contains(&name) {
            return Err(bad(format!(
                "unknown quantity {name:?} (known: {})",
                QUANTITIES.join(", ")
            )));
        }
        let (lo, hi) = range
            .split_once("..")
            .ok_or_else(|| bad(format!("{text:?}: expected quantity=min..max")))?;
        let num = |s: &str| {
            s.trim()
                .parse::<f64>()
                .ok()
                .filter(|v| v.is_finite())
                .ok_or_else(|| bad(format!("{text:?}: {s:?} is not a finite number")))
        };
        let (min, max) = (num(lo)?, num(hi)?);
        if min > max {
            return Err(bad(format!("{text:?}: min is above max")));
        }
        Ok(Band {
            quantity: name.to_string(),
            min,
            max,
        })
    }

    fn values(&self, m: &Measurement) -> Vec<f64> {
        let one = |v: Option<f64>| v.into_iter().filter(|v| v.is_finite()).collect();
        match self.quantity.as_str() {
            "restitution" => m.bounces.iter().map(|b| b.restitution).collect(),
            "tangential_ratio" => m
                .bounces
                .iter()
                .filter_map(|b| b.tangential_ratio)
                .collect(),
            "impact_speed_mps" => m.bounces.iter().map(|b| b.impact_speed_mps).collect(),
            "launch_speed_mps" => one(m.launch.as_ref().map(|l| l.speed_mps)),
            "launch_angle_deg" => one(m.launch.as_ref().map(|l| l.angle_deg)),
            "gravity_mps2" => one(Some(m.gravity_mps2.value)),
            "flash_interval_s" => one(Some(m.flash_interval_s.value)),
            "scale_px_per_m" => one(Some(m.scale_px_per_m.value)),
            "incline_accel_mps2" => one(m.incline.as_ref().map(|i| i.accel_mps2)),
            "rolling_loss" => one(m.incline.as_ref().map(|i| i.rolling_loss)),
            "roll_deg" => one(m.level.roll_deg),
            "drag_per_m" => one(m.drag.as_ref().map(|d| d.drag_per_m)),
            _ => Vec::new(),
        }
    }

    /// The verdict of this band on `m`.
    pub fn judge(&self, m: &Measurement) -> Verdict {
        let values = self.values(m);
        let per_bounce = matches!(
            self.quantity.as_str(),
            "restitution" | "tangential_ratio" | "impact_speed_mps"
        );
        let outcome = if values.is_empty() {
            Outcome::NotMeasured
        } else if values.iter().all(|v| (self.min..=self.max).contains(v)) {
            Outcome::Pass
        } else {
            Outcome::Fail
        };
        let note = if per_bounce {
            format!("applies to every bounce ({} measured)", values.len())
        } else {
            String::new()
        };
        Verdict {
            band: self.clone(),
            values,
            outcome,
            note,
        }
    }
}

/// Outcome of a band.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Outcome {
    /// Every value inside the band.
    Pass,
    /// A value outside the band.
    Fail,
    /// The quantity was not measured.
    NotMeasured,
}

/// A band's verdict.
#[derive(Debug, Clone, Serialize)]
pub struct Verdict {
    /// The band.
    pub band: Band,
    /// The values tested.
    pub values: Vec<f64>,
    /// Pass, fail or not measured.
    pub outcome: Outcome,
    /// How the band applies.
    pub note: String,
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn parses_and_refuses() {
        let b = Band::parse("restitution=0.73..0.76").unwrap();
        assert_eq!(
            (b.quantity.as_str(), b.min, b.max),
            ("restitution", 0.73, 0.76)
        );
        let err = Band::parse("bounciness=0..1").unwrap_err().to_string();
        assert!(err.contains("bounciness"), "{err}");
        assert!(Band::parse("restitution=0.8..0.7").is_err());
        assert!(Band::parse("restitution=nan..1").is_err());
        assert!(Band::parse("restitution").is_err());
    }
}
