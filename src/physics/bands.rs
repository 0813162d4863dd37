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

    /// Every value this band tests in `m`, with its 1-sigma and the bounce it belongs to.
    fn readings(&self, m: &Measurement) -> Vec<(Option<usize>, f64, Option<f64>)> {
        let one = |v: Option<(f64, f64)>| {
            v.into_iter()
                .filter(|(v, _)| v.is_finite())
                .map(|(v, s)| (None, v, Some(s)))
                .collect()
        };
        let bounces = m.bounces.iter().enumerate();
        let sure = |q: &super::Quantity| Some((q.value, q.sigma));
        match self.quantity.as_str() {
            "restitution" => bounces
                .map(|(i, b)| (Some(i + 1), b.restitution, Some(b.restitution_sigma)))
                .collect(),
            "tangential_ratio" => bounces
                .filter_map(|(i, b)| {
                    Some((Some(i + 1), b.tangential_ratio?, b.tangential_ratio_sigma))
                })
                .collect(),
            "impact_speed_mps" => bounces
                .map(|(i, b)| (Some(i + 1), b.impact_speed_mps, None))
                .collect(),
            "launch_speed_mps" => one(m.launch.as_ref().map(|l| (l.speed_mps, l.speed_sigma_mps))),
            "launch_angle_deg" => one(m.launch.as_ref().map(|l| (l.angle_deg, l.angle_sigma_deg))),
            "gravity_mps2" => one(sure(&m.gravity_mps2)),
            "flash_interval_s" => one(sure(&m.flash_interval_s)),
            "scale_px_per_m" => one(sure(&m.scale_px_per_m)),
            "incline_accel_mps2" => one(m
                .incline
                .as_ref()
                .map(|i| (i.accel_mps2, i.accel_sigma_mps2))),
            "rolling_loss" => one(m
                .incline
                .as_ref()
                .map(|i| (i.rolling_loss, i.rolling_loss_sigma))),
            "roll_deg" => one(m
                .level
                .roll_deg
                .map(|r| (r, m.level.roll_sigma_deg.unwrap_or(f64::NAN)))),
            "drag_per_m" => one(m.drag.as_ref().map(|d| (d.drag_per_m, d.drag_sigma_per_m))),
            _ => Vec::new(),
        }
    }

    /// The verdict of this band on `m`.
    pub fn judge(&self, m: &Measurement) -> Verdict {
        let readings: Vec<Reading> = self
            .readings(m)
            .into_iter()
            .map(|(bounce, value, sigma)| Reading {
                bounce,
                value,
                sigma: sigma.filter(|s| s.is_finite()),
                outcome: if (self.min..=self.max).contains(&value) {
                    Outcome::Pass
                } else {
                    Outcome::Fail
                },
            })
            .collect();
        let per_bounce = matches!(
            self.quantity.as_str(),
            "restitution" | "tangential_ratio" | "impact_speed_mps"
        );
        let outcome = if readings.is_empty() {
            Outcome::NotMeasured
        } else if readings.iter().all(|r| r.outcome == Outcome::Pass) {
            Outcome::Pass
        } else {
            Outcome::Fail
        };
        let note = if per_bounce {
            format!("applies to every bounce ({} measured)", readings.len())
        } else {
            String::new()
        };
        Verdict {
            band: self.clone(),
            values: readings.iter().map(|r| r.value).collect(),
            readings,
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

/// One value a band tested.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Reading {
    /// The bounce the value belongs to, counted from 1 as the text report counts them (its
    /// index in `bounces` + 1); null for a quantity that is not per bounce.
    pub bounce: Option<usize>,
    /// The value.
    pub value: f64,
    /// Its 1-sigma as the rest of the document gives it (null: none is measured).
    pub sigma: Option<f64>,
    /// `pass` when the value is inside the band, else `fail`.
    pub outcome: Outcome,
}

impl Verdict {
    /// One line for a person: the band, its outcome and every value tested against it, e.g.
    /// "restitution band 0.79..0.85: fail — bounce 1 0.812 ± 0.012 pass, bounce 2 0.760 ± 0.011
    /// fail".
    pub fn text(&self) -> String {
        use crate::core::{numbers::measured, words::name};
        let b = &self.band;
        let head = format!(
            "{} band {}..{}: {}",
            b.quantity,
            b.min,
            b.max,
            name(&self.outcome)
        );
        if self.readings.is_empty() {
            return format!("{head} — nothing measured to test");
        }
        let values: Vec<String> = self
            .readings
            .iter()
            .map(|r| {
                let bounce = r.bounce.map(|n| format!("bounce {n} ")).unwrap_or_default();
                let value = measured(r.value, r.sigma.unwrap_or(f64::NAN), "");
                format!("{bounce}{value} {}", name(&r.outcome))
            })
            .collect();
        format!("{head} — {}", values.join(", "))
    }
}

/// A band's verdict.
#[derive(Debug, Clone, Serialize)]
pub struct Verdict {
    /// The band.
    pub band: Band,
    /// The values tested.
    pub values: Vec<f64>,
    /// The values tested, each with its 1-sigma, its bounce and its own outcome.
    pub readings: Vec<Reading>,
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

    #[test]
    fn a_verdict_line_shows_each_value_against_the_band() {
        let reading = |bounce, value, sigma, outcome| Reading {
            bounce,
            value,
            sigma,
            outcome,
        };
        let mut v = Verdict {
            band: Band::parse("restitution=0.79..0.85").unwrap(),
            values: vec![0.812, 0.76],
            readings: vec![
                reading(Some(1), 0.812, Some(0.004), Outcome::Pass),
                reading(Some(2), 0.76, Some(0.0052), Outcome::Fail),
            ],
            outcome: Outcome::Fail,
            note: String::new(),
        };
        assert_eq!(
            v.text(),
            "restitution band 0.79..0.85: fail — bounce 1 0.8120 ± 0.0040 pass, \
             bounce 2 0.7600 ± 0.0052 fail"
        );
        v.band = Band::parse("gravity_mps2=9.7..9.9").unwrap();
        v.readings = vec![reading(None, 9.80665, Some(0.0123), Outcome::Pass)];
        v.outcome = Outcome::Pass;
        assert_eq!(
            v.text(),
            "gravity_mps2 band 9.7..9.9: pass — 9.807 ± 0.012 pass"
        );
        v.readings.clear();
        v.outcome = Outcome::NotMeasured;
        assert_eq!(
            v.text(),
            "gravity_mps2 band 9.7..9.9: not_measured — nothing measured to test"
        );
    }
}
