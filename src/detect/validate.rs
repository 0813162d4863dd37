//! The rules a [`SpotOptions`] must meet, checked by the library so that options built in code,
//! typed on the command line or read from a rig profile all pass the same gate.
//!
//! Goes in: options. Comes out: `Ok(())` or an [`Error::Setting`] naming the setting by its
//! snake_case key with its unit (the rig profile's key), never a command-line flag.

use super::SpotOptions;
use crate::error::{Error, Result, positive};

/// `v` must lie in 0..=1.
fn fraction(v: f64, name: &str) -> Result<()> {
    if v.is_finite() && (0.0..=1.0).contains(&v) {
        Ok(())
    } else {
        Err(Error::setting(
            name,
            format!("must be between 0 and 1, got {v}"),
        ))
    }
}

/// `ok` or the setting `name` refused with `message`.
fn check(ok: bool, name: &str, message: impl FnOnce() -> String) -> Result<()> {
    if ok {
        Ok(())
    } else {
        Err(Error::setting(name, message()))
    }
}

impl SpotOptions {
    /// Refuse absurd values (NaN, negative sizes, fractions outside 0..1, an inverted radius
    /// range), naming the setting.
    pub fn validate(&self) -> Result<()> {
        if let Some((a, b)) = self.radius_px {
            check(
                a.is_finite() && b.is_finite() && a <= b,
                "radius_px",
                || format!("{a}..{b} is not a range MIN..MAX with MIN <= MAX"),
            )?;
            check(a >= 2.0 && b <= 2000.0, "radius_px", || {
                format!("ball images must be 2..2000 px in radius, got {a}..{b}")
            })?;
        }
        positive(self.threshold.k_sigma as f64, "threshold_sigma")?;
        if let Some(l) = self.threshold.level {
            check(
                l.is_finite() && l > 0.0 && l < 1.0,
                "threshold_level",
                || format!("must be between 0 and 1, got {l}"),
            )?;
        }
        let cell = self.background.cell_px;
        check(
            cell == 0 || (4..=4096).contains(&cell),
            "background_cell_px",
            || "must be 0 (automatic) or 4..4096 px".to_string(),
        )?;
        let smooth = self.hough.smooth_px;
        check(
            smooth.is_finite() && (0.0..=10.0).contains(&smooth),
            "smooth_px",
            || format!("must be 0..10 px, got {smooth}"),
        )?;
        let snr = self.hough.fine_snr;
        check(snr.is_finite() && snr >= 0.0, "fine_snr", || {
            format!("must be 0 or more, got {snr}")
        })?;
        positive(self.hough.edge_k_sigma as f64, "edge_sigma")?;
        fraction(self.min_score, "min_score")?;
        fraction(self.radius_tolerance, "radius_tolerance")?;
        fraction(self.faint_fraction, "faint")?;
        positive(self.max_rms_px, "max_rms_px")?;
        let sys = self.systematic_px_r;
        check(sys.is_finite() && sys >= 0.0, "edge_systematic", || {
            format!("must be >= 0, got {sys}")
        })?;
        let shaded = self.shaded_max_r_px;
        check(
            shaded.is_finite() && shaded >= 0.0,
            "shaded_max_r_px",
            || format!("must be 0 or more pixels, got {shaded}"),
        )?;
        let coarse = self.coarse_r_px;
        check(
            coarse.is_finite() && (coarse == 0.0 || coarse >= 4.0),
            "coarse_r_px",
            || format!("must be 0 (off) or at least 4 pixels, got {coarse}"),
        )?;
        check(self.max_candidates >= 1, "max_candidates", || {
            "must be at least 1".to_string()
        })
    }
}
