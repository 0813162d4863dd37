//! Phases: split the timed path into the incline (if any) and the flight arcs between bounces.
//!
//! Goes in: the timed path and the nominal gravity (for the thresholds). Comes out: the incline
//! range and the arc ranges (`Segments`), and with every arc's vacuum fit a `Segmentation`.
//!
//! Method (ours): a bounce reverses the vertical velocity between two flashes, so the second
//! divided difference of y (an acceleration estimate from three neighbouring points) jumps to a
//! large positive value there, where free flight gives -g and rolling gives about zero or a small
//! negative value. Runs of points whose estimate exceeds max(0.3 g, 5 sigma of the estimate) mark
//! bounces. A run of one point leaves the contact on either side of it, and the side is the split
//! with the smallest total chi-square of the two neighbouring flight fits; a run of two points puts
//! the contact between them, whatever the chi-square says (on a real photo a 3-image arc across the
//! bounce fits exactly and would win); a longer run leaves every split to the chi-square. An arc
//! too short to fit beside a bounce is in flight. Before the first bounce, the incline is found by
//! trying every split between a constant-acceleration straight-line segment (x and y quadratic in
//! t) and a flight arc, keeping the best; the incline is accepted only when it lowers the
//! chi-square by more than 25 against one flight arc for the whole segment and its acceleration is
//! below 0.8 g. An image a small part of a flash interval from the launch fits both phases; when
//! the cheapest end puts the launch (where the phases' velocities agree) outside the gap between
//! their images and the neighbouring end, nearly as cheap, puts it inside, the neighbour wins. With
//! drag fitted, a flight's chi-square is the smaller of the parabola's and a one-arc drag fit's
//! (gravity held, its own drag coefficient): drag's residuals on a parabola would otherwise move
//! the boundaries to shed them.

use super::TimedPoint;
use super::fit::{CovarianceScaling, FitOptions, polynomial_fit};
use super::flight::{ArcFit, fit_arc, flight_chi_square};
use std::ops::Range;

/// Chi-square improvement an incline must bring over pure flight to be accepted.
const INCLINE_DELTA_CHI2: f64 = 25.0;

/// Chi-square an incline end one image off may cost over the cheapest and still be preferred for
/// putting the launch between its phases' images, in units of the cheapest's reduced chi-square
/// (ours: the neighbouring ends of the sweep's incline shots cost 0.2 to 8 more).
const LAUNCH_SIDE_DELTA_CHI2: f64 = 9.0;

/// Above this reduced chi-square the phases do not fit their points (a miscounted flash, another
/// ball's image) and where their velocities meet says nothing about the launch's side.
const LAUNCH_SIDE_MAX_REDUCED: f64 = 4.0;

/// The path split into an optional incline and consecutive arcs (bounce k lies between arcs k and
/// k + 1).
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Segments {
    pub incline: Option<Range<usize>>,
    pub arcs: Vec<Range<usize>>,
}

/// A segmentation with the vacuum fit of every arc: what [`segment`] finds, fitted.
///
/// `measure` segments three times, each time on different inputs: the path as given (to
/// estimate the roll), the levelled path (only when the roll was corrected; otherwise the first
/// segmentation is reused) and the calibrated path with the calibrated gravity (the final
/// phases). Every one is made by [`Segmentation::new`].
#[derive(Debug, Clone)]
pub(crate) struct Segmentation {
    /// The split.
    pub segments: Segments,
    /// Per arc of `segments.arcs`: its fit (None under 3 points or when the fit fails) and
    /// whether it is a flight arc (its vertical acceleration is below -g / 2).
    pub fits: Vec<(Option<ArcFit>, bool)>,
}

impl Segmentation {
    /// Split `points` with the nominal gravity `gravity_mps2` (for the thresholds and the flight
    /// test) and fit every arc with the given covariance scaling.
    pub fn new(
        points: &[TimedPoint],
        gravity_mps2: f64,
        drag_gravity: Option<f64>,
        covariance: CovarianceScaling,
    ) -> Segmentation {
        let segments = segment(points, gravity_mps2, drag_gravity);
        // An arc too short to fit lies beside a bounce when there are others: in flight.
        let split = segments.arcs.len() > 1;
        let fits = segments
            .arcs
            .iter()
            .map(|r| {
                let fit = if r.len() >= 3 {
                    fit_arc(points, r.clone(), covariance).ok()
                } else {
                    None
                };
                let flying = fit
                    .as_ref()
                    .map_or(split, |f| 2.0 * f.y.coefficients[2] < -0.5 * gravity_mps2);
                (fit, flying)
            })
            .collect();
        Segmentation { segments, fits }
    }

    /// The fitted flight arcs of 4 or more points, in time order.
    pub fn flight_fits(&self) -> impl Iterator<Item = &ArcFit> {
        self.fits
            .iter()
            .filter(|(f, flying)| *flying && f.as_ref().is_some_and(|f| f.range.len() >= 4))
            .filter_map(|(f, _)| f.as_ref())
    }

    /// The ranges of [`Segmentation::flight_fits`].
    pub fn flight_ranges(&self) -> Vec<Range<usize>> {
        self.flight_fits().map(|f| f.range.clone()).collect()
    }
}

/// The splits a bounce run of points `a..=b` allows (the first point after the contact), from
/// `start` on. Each point i of the run has its acceleration estimate from i - 1, i and i + 1
/// jump, so the contact lies between i - 1 and i + 1 for every i in the run: one point leaves
/// it on either side of that point, two points put it between them (their neighbours would
/// otherwise have jumped too). A longer run (blurred or merged images near the floor) leaves
/// every split of the run to the chi-square.
fn contact_splits(a: usize, b: usize, start: usize) -> std::ops::RangeInclusive<usize> {
    let (first, last) = if b == a + 1 { (b, b) } else { (a, b + 1) };
    first.max(start)..=last.max(start)
}

/// Acceleration estimate at interior point i from points i - 1, i, i + 1, and its 1-sigma.
fn second_difference(p: &[TimedPoint], i: usize) -> (f64, f64) {
    let (a, b, c) = (&p[i - 1], &p[i], &p[i + 1]);
    let (h1, h2) = (b.t_s - a.t_s, c.t_s - b.t_s);
    let acc = 2.0 * ((c.y_m - b.y_m) / h2 - (b.y_m - a.y_m) / h1) / (h1 + h2);
    let sigma = 2.0
        * ((a.sigma_m / h1).powi(2)
            + (b.sigma_m * (1.0 / h1 + 1.0 / h2)).powi(2)
            + (c.sigma_m / h2).powi(2))
        .sqrt()
        / (h1 + h2);
    (acc, sigma)
}

/// The chi-square of a flight over `points[range]`: the vacuum parabola's, or with drag fitted
/// (`drag_gravity`, the gravity to hold) the smaller of it and a drag arc's, so that a boundary
/// is not moved to shed the residuals that drag leaves on a parabola.
fn flight_cost(points: &[TimedPoint], range: Range<usize>, drag_gravity: Option<f64>) -> f64 {
    let vacuum = flight_chi_square(points, range.clone());
    match drag_gravity {
        Some(g) if range.len() >= 3 && vacuum > 0.0 => {
            vacuum.min(super::drag::arc_chi_square(points, range, g))
        }
        _ => vacuum,
    }
}

/// Split the path; `gravity_mps2` is the nominal gravity in the path's units (for thresholds),
/// `drag_gravity` the gravity of the drag model when drag is fitted.
pub(crate) fn segment(
    points: &[TimedPoint],
    gravity_mps2: f64,
    drag_gravity: Option<f64>,
) -> Segments {
    let flight_chi_square = |p: &[TimedPoint], r: Range<usize>| flight_cost(p, r, drag_gravity);
    let n = points.len();
    let mut runs: Vec<(usize, usize)> = Vec::new();
    for i in 1..n.saturating_sub(1) {
        let (acc, sigma) = second_difference(points, i);
        if acc > (0.3 * gravity_mps2).max(5.0 * sigma) {
            match runs.last_mut() {
                Some(r) if r.1 + 1 == i => r.1 = i,
                _ => runs.push((i, i)),
            }
        }
    }
    let (incline, mut start) = match runs.first() {
        None => {
            let (incline, start, _) = find_incline(points, 0..n, gravity_mps2, drag_gravity);
            (incline, start)
        }
        // The incline and the first bounce together: at a low flash rate the first arc has
        // only a few points, and which side of the bounce the ambiguous ones lie on decides
        // whether the incline's end can be found.
        Some(&(a, b)) => {
            let next_core_end = runs.get(1).map_or(n, |r| r.0);
            let mut best: Option<(f64, Option<Range<usize>>, usize)> = None;
            for split in a..=b + 1 {
                let (incline, start, cost) =
                    find_incline(points, 0..split, gravity_mps2, drag_gravity);
                let cost = cost + flight_chi_square(points, split..next_core_end);
                if best.as_ref().is_none_or(|b| cost < b.0) {
                    best = Some((cost, incline, start));
                }
            }
            best.map_or((None, 0), |(_, incline, start)| (incline, start))
        }
    };
    let mut arcs = Vec::new();
    for (k, &(a, b)) in runs.iter().enumerate() {
        let next_core_end = runs.get(k + 1).map_or(n, |r| r.0);
        let mut best = (f64::INFINITY, a.max(start));
        for split in contact_splits(a, b, start) {
            let cost = flight_chi_square(points, start..split)
                + flight_chi_square(points, split..next_core_end);
            if cost < best.0 {
                best = (cost, split);
            }
        }
        arcs.push(start..best.1);
        start = best.1;
    }
    arcs.push(start..n);
    arcs.retain(|r| !r.is_empty());
    Segments { incline, arcs }
}

/// The incline at the start of `range`, where the first arc begins, and the chi-square of the
/// split (incline and the arc after it, or one flight arc over the whole range).
///
/// Every end `m` of the incline is tried: the points before it on a straight line with constant
/// acceleration along it ([`line_model`]), the points after it on a flight arc; the end with the
/// smallest total chi-square wins. The line ends where it stops fitting: a flight point on it
/// is off the line (the arc curves), an incline point on the flight arc is off the parabola
/// (its acceleration is not gravity). The flight part may have 2 points (at a low flash rate
/// the first arc before a bounce is short).
fn find_incline(
    points: &[TimedPoint],
    range: Range<usize>,
    gravity_mps2: f64,
    drag_gravity: Option<f64>,
) -> (Option<Range<usize>>, usize, f64) {
    let flight_chi_square = |p: &[TimedPoint], r: Range<usize>| flight_cost(p, r, drag_gravity);
    let (s, e) = (range.start, range.end);
    let all_flight = flight_chi_square(points, s..e);
    let mut costs: Vec<(f64, usize)> = Vec::new();
    for m in s + 3..=e.saturating_sub(2) {
        let Some(line) = line_model(&points[s..m]) else {
            continue;
        };
        if line.accel_mps2 < 0.8 * gravity_mps2 {
            costs.push((line.chi_square + flight_chi_square(points, m..e), m));
        }
    }
    match launch_side(points, (s, e), &costs) {
        Some((cost, m)) if cost + INCLINE_DELTA_CHI2 < all_flight => (Some(s..m), m, cost),
        _ => (None, s, all_flight),
    }
}

/// The incline's end among the candidate `(cost, end)` splits of `points[s..e]`: the cheapest,
/// unless its launch (where the two phases' velocities agree) lies outside the gap between its
/// phases' images while a neighbouring end, within [`LAUNCH_SIDE_DELTA_CHI2`] times the reduced
/// chi-square of the cheapest (itself at most [`LAUNCH_SIDE_MAX_REDUCED`]), puts it inside: an
/// image a small part of a flash interval from the launch fits either phase, and the chi-square
/// alone picks its side by noise.
fn launch_side(
    points: &[TimedPoint],
    (s, e): (usize, usize),
    costs: &[(f64, usize)],
) -> Option<(f64, usize)> {
    let best = *costs.iter().min_by(|a, b| a.0.total_cmp(&b.0))?;
    if super::incline::launch_in_span(points, s, best.1, e) != Some(false) {
        return Some(best);
    }
    // Both coordinates of every point; the line (2), its parabola (3) and the arc (5) fitted.
    let reduced = best.0 / (2 * (e - s)).saturating_sub(10).max(1) as f64;
    if reduced > LAUNCH_SIDE_MAX_REDUCED {
        return Some(best);
    }
    let delta = LAUNCH_SIDE_DELTA_CHI2 * reduced.max(1.0);
    costs
        .iter()
        .filter(|c| c.1.abs_diff(best.1) == 1 && c.0 <= best.0 + delta)
        .find(|c| super::incline::launch_in_span(points, s, c.1, e) == Some(true))
        .copied()
        .or(Some(best))
}

/// A straight line with constant acceleration along it, fitted to points.
struct LineModel {
    /// Chi-square of the distances from the line and of the positions along it (parabola in t).
    chi_square: f64,
    /// Magnitude of the acceleration along the line.
    accel_mps2: f64,
}

/// The points on a straight line (its direction the principal axis of the points), the position
/// along it a parabola in time; None under 3 points or when the fit fails.
fn line_model(points: &[TimedPoint]) -> Option<LineModel> {
    let n = points.len() as f64;
    if points.len() < 3 {
        return None;
    }
    let cx = points.iter().map(|p| p.x_m).sum::<f64>() / n;
    let cy = points.iter().map(|p| p.y_m).sum::<f64>() / n;
    let (mut sxx, mut syy, mut sxy) = (0.0, 0.0, 0.0);
    for p in points {
        sxx += (p.x_m - cx).powi(2);
        syy += (p.y_m - cy).powi(2);
        sxy += (p.x_m - cx) * (p.y_m - cy);
    }
    let phi = 0.5 * (2.0 * sxy).atan2(sxx - syy);
    let u = [phi.cos(), phi.sin()];
    let t: Vec<f64> = points.iter().map(|p| p.t_s).collect();
    let sigma: Vec<f64> = points.iter().map(|p| p.sigma_m).collect();
    let along: Vec<f64> = points
        .iter()
        .map(|p| (p.x_m - cx) * u[0] + (p.y_m - cy) * u[1])
        .collect();
    let across: f64 = points
        .iter()
        .map(|p| ((-(p.x_m - cx) * u[1] + (p.y_m - cy) * u[0]) / p.sigma_m).powi(2))
        .sum();
    let fit = polynomial_fit(&t, &along, Some(&sigma), 2, &FitOptions::default()).ok()?;
    Some(LineModel {
        chi_square: across + fit.chi_square,
        accel_mps2: 2.0 * fit.coefficients[2].abs(),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A ball falling onto the floor at 3 m/s with its contact midway between flashes 1 and 2,
    /// rebounding with e = 0.8 (exact kinematics, g = 9.81 m/s^2, flashes 40 ms apart), flash
    /// 2's image `offset_sigmas` sigmas high.
    fn bounce_midway(offset_sigmas: f64) -> Vec<TimedPoint> {
        let (dt, t_c, g, sigma_m) = (0.04, 0.06, 9.81, 1e-4);
        (0..13)
            .map(|n| {
                let t = n as f64 * dt;
                let v = if t < t_c { -3.0 } else { 0.8 * 3.0 };
                let y = 0.02 + v * (t - t_c) - 0.5 * g * (t - t_c).powi(2);
                let lift = if n == 2 { offset_sigmas * sigma_m } else { 0.0 };
                TimedPoint {
                    n,
                    t_s: t,
                    x_m: 0.5 * t,
                    y_m: y + lift,
                    sigma_m,
                }
            })
            .collect()
    }

    #[test]
    fn a_contact_between_two_jumps_splits_between_them_whatever_the_noise() {
        // Both flashes 1 and 2 see the jump, so the contact lies between them: flash 2 starts
        // the rebound even when its image is off by 4 sigma (a 3-image arc 0..2 would fit it
        // exactly and cost nothing).
        let seg = Segmentation::new(&bounce_midway(4.0), 9.81, None, CovarianceScaling::Sigmas);
        assert_eq!(seg.segments.arcs, vec![0..2, 2..13]);
        // The 2-image arc before the bounce is too short to fit; it is in flight, not rolling.
        assert!(seg.fits[0].0.is_none() && seg.fits[0].1);
        assert!(seg.fits[1].1);
    }
}
