//! Self-checks of a measurement: does the model fit the pixels and the physics?
//!
//! Goes in: a [`super::Measurement`] (and, from the pipeline, the counts of the images found, on
//! the path and stray). Comes out: a list of [`Check`]s, each `pass`, `warn` or `fail` with the
//! value tested, what was expected and a sentence for a test engineer saying what to do. A
//! measurement with a failed check is printed but not to be trusted (exit status 4 of
//! `beadline measure`, rig status `doubtful`).

use serde::Serialize;

/// Outcome of one check.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum CheckOutcome {
    /// The measurement passed.
    Pass,
    /// Suspicious: the numbers are printed, read them with care.
    Warn,
    /// The model does not fit: the numbers it touches are not to be trusted.
    Fail,
}

/// One self-check.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Check {
    /// Name of the check, e.g. `arc_fit` .
    pub check: &'static str,
    /// Pass, warn or fail.
    pub outcome: CheckOutcome,
    /// The value tested (None when there is none to give).
    pub value: Option<f64>,
    /// What a passing value is, in words and numbers.
    pub expected: String,
    /// What was found and what to do about it.
    pub detail: String,
}

/// The worst outcome of `checks` (pass when there is none).
pub fn worst(checks: &[Check]) -> CheckOutcome {
    checks
        .iter()
        .map(|c| c.outcome)
        .max()
        .unwrap_or(CheckOutcome::Pass)
}
