//! The ball as a rigid body: its build and its moment-of-inertia factor.
//!
//! Goes in: a build (solid, shell, thick shell). Comes out: k = I / (m r^2), from the standard
//! rigid-body formulas.

use serde::{Deserialize, Serialize};

/// Build of the ball, which sets its moment-of-inertia factor k = I / (m r^2).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize, Default)]
#[serde(rename_all = "lowercase")]
pub enum Build {
    /// Solid uniform sphere, k = 2/5.
    #[default]
    Solid,
    /// Thin spherical shell, k = 2/3.
    Shell,
    /// Thick shell with an inner diameter, k = 0.4 (1 - q^5) / (1 - q^3), q = inner / outer.
    Thick,
}

/// Moment-of-inertia factor k = I / (m r^2) of a ball build; `inner_ratio` = inner / outer diameter
/// for a thick shell (standard rigid-body formulas: solid sphere 2/5, thin shell 2/3, thick shell
/// 2/5 (1 - q^5) / (1 - q^3)).
pub fn inertia_factor(build: Build, inner_ratio: Option<f64>) -> f64 {
    match build {
        Build::Solid => 0.4,
        Build::Shell => 2.0 / 3.0,
        Build::Thick => {
            let q = inner_ratio.unwrap_or(0.0);
            if q < 1e-9 {
                0.4
            } else if (1.0 - q) < 1e-6 {
                2.0 / 3.0
            } else {
                0.4 * (1.0 - q.powi(5)) / (1.0 - q.powi(3))
            }
        }
    }
}
