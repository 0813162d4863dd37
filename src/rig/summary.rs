//! The summary CSV of a run, one row per photo.

use super::*;
use crate::error::{Error, Result};
use crate::physics::bands::Outcome;
use crate::physics::checks::CheckOutcome;
use serde::Serialize;

/// One row of the summary CSV.
#[derive(Debug, Clone, Serialize)]
pub struct SummaryRow {
    /// The photo.
    pub file: String,
    /// ok, out_of_band, doubtful or error.
    pub status: &'static str,
    /// Restitution of the first bounce.
    pub restitution: Option<f64>,
    /// Restitution of every bounce, separated by `;`.
    pub restitution_each: String,
    /// Launch speed off the incline, m/s.
    pub launch_speed_mps: Option<f64>,
    /// Gravity, m/s^2, when it is not the quantity estimated.
    pub gravity_mps2: Option<f64>,
    /// Flash interval, seconds.
    pub flash_interval_s: Option<f64>,
    /// Acceptance verdict: pass, fail, not_measured, or empty without bands.
    pub verdict: &'static str,
    /// The self-checks that did not pass, `name:warn` or `name:fail`, separated by `;`.
    pub checks: String,
    /// The error message (status error).
    pub error: String,
}

impl SummaryRow {
    /// The summary row of a result.
    pub fn of(r: &PhotoResult) -> SummaryRow {
        let finite = |v: f64| v.is_finite().then_some(v);
        let m = r.doc.as_ref().map(|d| &d.measurement);
        let verdict = m.map_or("", |m| {
            if m.verdicts.is_empty() {
                ""
            } else if m.verdicts.iter().any(|v| v.outcome == Outcome::Fail) {
                "fail"
            } else if m.verdicts.iter().any(|v| v.outcome == Outcome::NotMeasured) {
                "not_measured"
            } else {
                "pass"
            }
        });
        SummaryRow {
            file: r.file.clone(),
            status: r.status.name(),
            restitution: m.and_then(|m| m.bounces.first()).map(|b| b.restitution),
            restitution_each: m.map_or(String::new(), |m| {
                m.bounces
                    .iter()
                    .map(|b| format!("{:.6}", b.restitution))
                    .collect::<Vec<_>>()
                    .join(";")
            }),
            launch_speed_mps: m.and_then(|m| m.launch.as_ref()).map(|l| l.speed_mps),
            gravity_mps2: m.and_then(|m| finite(m.gravity_mps2.value)),
            flash_interval_s: m.and_then(|m| finite(m.flash_interval_s.value)),
            verdict,
            checks: m.map_or(String::new(), |m| {
                m.checks
                    .iter()
                    .filter(|c| c.outcome != CheckOutcome::Pass)
                    .map(|c| format!("{}:{}", c.check, c.outcome.name()))
                    .collect::<Vec<_>>()
                    .join(";")
            }),
            error: r.error.clone().unwrap_or_default(),
        }
    }
}

/// The summary CSV of a run, one row per photo.
pub fn summary_csv(results: &[PhotoResult]) -> Result<String> {
    let mut w = csv::Writer::from_writer(Vec::new());
    let err = |e: csv::Error| Error::setting("summary", e.to_string());
    for r in results {
        w.serialize(SummaryRow::of(r)).map_err(err)?;
    }
    if results.is_empty() {
        w.write_record([
            "file",
            "status",
            "restitution",
            "restitution_each",
            "launch_speed_mps",
            "gravity_mps2",
            "flash_interval_s",
            "verdict",
            "checks",
            "error",
        ])
        .map_err(err)?;
    }
    let bytes = w
        .into_inner()
        .map_err(|e| Error::setting("summary", e.to_string()))?;
    Ok(String::from_utf8_lossy(&bytes).into_owned())
}
