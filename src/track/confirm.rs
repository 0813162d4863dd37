//! Second pass from the physics: the path's missing flashes looked for among the spots the walk
//! stepped over and the candidates the detector fitted but rejected.
//!
//! Goes in: the best [`BallPath`], the flash ranges of its fitted phases (incline, flight
//! arcs, floor runs: constant acceleration within each), the walk's [`Stray`]s or the
//! detector's [`Rejected`] candidates, the path's radius and the radius tolerance. Comes out:
//! per missing flash found, its index `n` and the index of the stray ([`adopt_strays`]) or of
//! the candidate ([`confirm_missing`]).
//!
//! Method (ours): within a phase the ball moves with constant acceleration and the flash fires
//! at equal intervals, so x and y are quadratics in n. A missing flash inside a phase is
//! predicted by the least-squares quadratics through the phase's nearest path images (at most
//! [`NEIGHBOURS`], at least one on each side: interpolation, never extrapolation). A candidate
//! rejected as faint or as a weak rim (what an image inside its neighbours' light looks like
//! after the tone curve) is kept as that flash's image when its centre lies within
//! [`GATE_RADII`] radius of the prediction and its radius within the tolerance; a candidate of
//! another size or kind, or one off the prediction, is never taken, and no image is made where
//! the detector fitted none. A spot the walk left off the path (merged images at an apex give
//! it two near choices, and a tenth of a pixel can turn it to the other) is taken alike.

use crate::detect::reject::{Reason, Rejected};
use crate::track::{BallPath, Stray, StrayReason};
use nalgebra::{DMatrix, DVector};

/// Path images used to predict a missing flash (the nearest in n, within its phase).
pub const NEIGHBOURS: usize = 6;

/// Largest distance of a confirmed candidate from the prediction, in radii (the detector keeps
/// one fit per 0.3 radius, so 0.2 names one image; ours).
pub const GATE_RADII: f64 = 0.2;

/// See the module documentation: `(n, index into rejected)` per confirmed missing flash.
pub fn confirm_missing(
    path: &BallPath,
    phases: &[(usize, usize)],
    rejected: &[Rejected],
    r_px: f64,
    radius_tolerance: f64,
) -> Vec<(usize, usize)> {
    let usable: Vec<Option<[f64; 2]>> = rejected
        .iter()
        .map(|c| {
            (matches!(c.reason, Reason::Faint | Reason::WeakRim)
                && (c.r_px - r_px).abs() <= radius_tolerance * r_px)
                .then_some([c.x_px, c.y_px])
        })
        .collect();
    nearest_per_flash(path, phases, &usable, r_px)
}

/// The path's missing flashes looked for among the spots the walk left off every path
/// ([`StrayReason::OffPath`]: a ball image by the detector's rules that the walk stepped over,
/// as where merged images crowd an apex): per missing flash inside a phase, the nearest such
/// spot within [`GATE_RADII`] radius of its prediction (see [`predicted_position`]). Comes
/// out: `(n, index into strays)` per flash.
pub fn adopt_strays(
    path: &BallPath,
    phases: &[(usize, usize)],
    strays: &[Stray],
    r_px: f64,
) -> Vec<(usize, usize)> {
    let usable: Vec<Option<[f64; 2]>> = strays
        .iter()
        .map(|s| (s.reason == StrayReason::OffPath).then_some([s.x_px, s.y_px]))
        .collect();
    nearest_per_flash(path, phases, &usable, r_px)
}

/// Per missing flash of `path` inside one of `phases`, the nearest of the `usable` candidates
/// (None: not usable) within [`GATE_RADII`] radius of its prediction and not taken by an
/// earlier flash: `(n, index into usable)`.
fn nearest_per_flash(
    path: &BallPath,
    phases: &[(usize, usize)],
    usable: &[Option<[f64; 2]>],
    r_px: f64,
) -> Vec<(usize, usize)> {
    let mut found: Vec<(usize, usize)> = Vec::new();
    for &n in &path.missing {
        let Some([x, y]) = predicted_position(path, phases, n) else {
            continue;
        };
        let best = usable
            .iter()
            .enumerate()
            .filter(|(i, _)| !found.iter().any(|f| f.1 == *i))
            .filter_map(|(i, c)| c.map(|[cx, cy]| (i, (cx - x).hypot(cy - y))))
            .filter(|(_, d)| *d <= GATE_RADII * r_px)
            .min_by(|p, q| p.1.total_cmp(&q.1));
        if let Some((i, _)) = best {
            found.push((n, i));
        }
    }
    found
}

/// Where missing flash `n` of `path` was, in pixels: from the quadratics in n through the
/// nearest images of the phase (one of `phases`, flash ranges with constant acceleration) that
/// holds `n` strictly inside; None when no phase holds it or the phase has too few images.
pub fn predicted_position(
    path: &BallPath,
    phases: &[(usize, usize)],
    n: usize,
) -> Option<[f64; 2]> {
    let &(a, b) = phases.iter().find(|(a, b)| *a < n && n < *b)?;
    predict(path, (a, b), n)
}

/// The pixel position of flash `n` from the quadratics in n through the path's nearest images
/// in the phase `a..=b`; None without 3 of them or without one on each side.
fn predict(path: &BallPath, (a, b): (usize, usize), n: usize) -> Option<[f64; 2]> {
    let mut near: Vec<_> = path
        .points
        .iter()
        .filter(|p| p.n >= a && p.n <= b)
        .collect();
    near.sort_by_key(|p| p.n.abs_diff(n));
    near.truncate(NEIGHBOURS);
    if near.len() < 3 || !near.iter().any(|p| p.n < n) || !near.iter().any(|p| p.n > n) {
        return None;
    }
    let rows = near.len();
    let design = DMatrix::from_fn(rows, 3, |i, j| (near[i].n as f64 - n as f64).powi(j as i32));
    let solve = |values: DVector<f64>| -> Option<f64> {
        let qr = design.clone().qr();
        let c = qr
            .r()
            .solve_upper_triangular(&(qr.q().transpose() * values))?;
        c[0].is_finite().then_some(c[0])
    };
    let x = solve(DVector::from_iterator(rows, near.iter().map(|p| p.x_px)))?;
    let y = solve(DVector::from_iterator(rows, near.iter().map(|p| p.y_px)))?;
    Some([x, y])
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::track::PathPoint;

    fn point(n: usize) -> PathPoint {
        // A ball thrown at 30 px per flash to the right, falling 2 px per flash squared.
        let t = n as f64;
        PathPoint {
            n,
            spot_index: n,
            x_px: 100.0 + 30.0 * t,
            y_px: 50.0 - 10.0 * t + t * t,
            r_px: 20.0,
            sigma_px: 0.05,
        }
    }

    fn candidate(x_px: f64, y_px: f64, r_px: f64, reason: Reason) -> Rejected {
        Rejected {
            x_px,
            y_px,
            r_px,
            score: 0.8,
            sigma_px: 0.05,
            reason,
        }
    }

    #[test]
    fn a_faint_candidate_on_the_prediction_fills_its_flash_and_nothing_else_does() {
        // Exact quadratic motion (our own numbers): flash 3 at (190, 29) is missing.
        let path = BallPath {
            points: [0, 1, 2, 4, 5, 6].into_iter().map(point).collect(),
            missing: vec![3],
        };
        let rejected = [
            candidate(150.0, 29.0, 20.0, Reason::Faint), // 40 px off: another place
            candidate(190.0, 29.0, 30.0, Reason::Faint), // another size
            candidate(190.5, 29.5, 20.0, Reason::Radius), // another kind
            candidate(191.0, 28.0, 20.5, Reason::Faint), // 1.4 px off: this flash
        ];
        assert_eq!(
            confirm_missing(&path, &[(0, 6)], &rejected, 20.0, 0.12),
            vec![(3, 3)]
        );
        // Outside every phase (a bounce between two arcs), or with no candidate: nothing.
        assert!(confirm_missing(&path, &[(0, 2), (4, 6)], &rejected, 20.0, 0.12).is_empty());
        assert!(confirm_missing(&path, &[(0, 6)], &rejected[..3], 20.0, 0.12).is_empty());
    }

    #[test]
    fn a_spot_the_walk_stepped_over_fills_its_flash_when_it_lies_on_the_prediction() {
        // The same motion; flash 3 at (190, 29) is missing and spots are left over.
        let path = BallPath {
            points: [0, 1, 2, 4, 5, 6].into_iter().map(point).collect(),
            missing: vec![3],
        };
        let stray = |x_px: f64, y_px: f64, reason: StrayReason| Stray {
            spot_index: 99,
            x_px,
            y_px,
            reason,
        };
        let strays = [
            stray(196.0, 29.0, StrayReason::OffPath), // 6 px off: past 0.2 radius
            stray(190.5, 29.5, StrayReason::RadiusDiffers), // another size
            stray(191.0, 28.0, StrayReason::OffPath), // 1.4 px off: this flash
        ];
        assert_eq!(adopt_strays(&path, &[(0, 6)], &strays, 20.0), vec![(3, 2)]);
        assert!(adopt_strays(&path, &[(0, 2), (4, 6)], &strays, 20.0).is_empty());
        assert!(adopt_strays(&path, &[(0, 6)], &strays[..2], 20.0).is_empty());
    }
}
