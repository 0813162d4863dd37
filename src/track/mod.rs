//! Path ordering: the ball's images in time order, each with its flash index.
//!
//! Goes in: the [`Spot`]s found in one photo (pixels, x right, y down) and [`PathOptions`].
//! Comes out: a [`PathResult`]: the ball's [`BallPath`]s, longest first, and the [`Stray`] spots
//! that lie on no path, each with a [`StrayReason`]. A path lists its images in time order
//! with the flash index `n`; `n` counts flashes from the first image found on the path
//! (`n = 0`), so a flash whose image was not found keeps its place in time: its index is
//! listed in [`BallPath::missing`] and later images keep their true `n`.
//!
//! # Method
//!
//! The flash fires at equal intervals, so between bounces the third difference of the
//! positions is near zero (constant acceleration). The path is built by a walk over a kd-tree
//! of the spots ([`SpotTree`]):
//!
//! 1. Spots with a non-finite coordinate, radius or sigma, or a radius that is not positive,
//!    are strays ([`StrayReason::Invalid`]).
//! 2. Seeds: triples of near neighbours (each spot and its six nearest) that continue each
//!    other (turn under 60 degrees, step ratio 0.5..2, radii within the tolerance), smallest
//!    second difference first. Slow parts of the path (the start from rest, the tops of the
//!    arcs) give the best seeds; up to [`SEEDS_TRIED`] seeds are walked and the longest chain
//!    wins, less one point for each step that passes over another image (a chain at half the
//!    flash rate, see `Finder::chain_score`).
//! 3. From a seed the walk runs forward and backward in time. The next position `k` flashes
//!    ahead is the quadratic through the last three points of the current arc (for `k = 1`:
//!    `p = 3 p_n - 3 p_(n-1) + p_(n-2)`); with only two points after a bounce it is
//!    `2 p_n - p_(n-1) + a`, `a` being the acceleration measured before the bounce.
//! 4. Gate: a candidate must lie within `gate_radii * r * k` of the prediction (doubled with
//!    only two points), plus three times the centre sigma propagated through the prediction
//!    (`sigma * sqrt(1 + sum of squared prediction weights)`). Steps of `k = 1` up to
//!    `1 + max_misses` flashes are looked for; a step of `k > 1` records `k - 1` missed
//!    flashes. When one candidate is clearly best (inside a quarter of the gate, no other
//!    one-flash candidate inside half the gate) it is taken; otherwise the few best candidates
//!    are compared by walking three more steps from each: most points found wins, then the
//!    smallest sum of squared residuals (in gates) plus 0.3 per missed flash.
//! 5. Bounce: when nothing fits and the ball moves down (along the measured acceleration), the
//!    reflected prediction is tried: a window that reaches, along the floor, from
//!    `min_restitution` to `1 / min_restitution` times the predicted advance and, across it,
//!    from the constant-acceleration prediction to its mirror image scaled by
//!    `1 / min_restitution` (the walk runs both ways in time, so a bounce scales the speed by
//!    `e` or `1 / e`). The next point is looked for in a window set by the speed before the
//!    bounce, and from then on the prediction uses the acceleration from before the bounce.
//!    The windows' candidates are compared by walking on, as in step 4. The step that gives
//!    the new arc its third image must give it the acceleration of the arc before the bounce
//!    (measured on four images or more) within 60 %: one gravity, changed by air drag; a
//!    count of two flashes per step would change it fourfold.
//! 6. Start: the end of the path nearest (along the path) to [`PathOptions::start`] when given.
//!    Otherwise bounces decide: a bounce loses energy, so the top of the arc after a bounce
//!    (the vertex of the parabola through its first three points) is lower than the top of
//!    the arc before it (through its last three points); every bounce votes. Without bounce
//!    votes the end whose spacing per flash is smaller is the start (release from rest, as
//!    at the top of an incline or in a drop).
//! 7. Two balls: after the longest path its spots are removed and the next path is built from
//!    the rest, up to [`PathOptions::max_paths`], as long as it has at least
//!    [`PathOptions::min_points`] points.
//! 8. Spots left over are strays: [`StrayReason::RadiusDiffers`] when their radius is off the
//!    path's by more than the tolerance, [`StrayReason::TooFewPoints`] when they form a chain
//!    too short for a path (or there are too few spots), [`StrayReason::OffPath`] otherwise.
//!
//! # Examples
//! ```
//! use beadline::track::{PathOptions, order_path};
//! use beadline::detect::{Spot, SpotSource};
//! // A ball falling from rest: y = 5 + 2 n^2 pixels, drifting right 30 px per flash.
//! let spots: Vec<Spot> = [3usize, 0, 4, 1, 2, 5]
//!     .iter()
//!     .map(|&n| Spot {
//!         x_px: 100.0 + 30.0 * n as f64,
//!         y_px: 5.0 + 2.0 * (n * n) as f64,
//!         r_px: 10.0,
//!         sigma_px: 0.05,
//!         score: 1.0,
//!         source: SpotSource::Detected,
//!     })
//!     .collect();
//! let result = order_path(&spots, &PathOptions::default());
//! let order: Vec<usize> = result.paths[0].points.iter().map(|p| p.n).collect();
//! assert_eq!(order, vec![0, 1, 2, 3, 4, 5]);
//! assert_eq!(result.paths[0].points[0].spot_index, 1);
//! ```

pub mod confirm;
mod inline;
mod moves;
mod predict;
mod seeds;
mod tree;
mod walk;

pub use tree::{Neighbour, SpotTree};

use crate::core::stats::finite_median;
use crate::detect::Spot;
use serde::{Deserialize, Serialize};
use walk::{Chain, ChainNode, Finder};

/// Most seeds walked per path.
pub const SEEDS_TRIED: usize = 50;
/// Most consecutive missed flashes the walk bridges, whatever the options say.
const MAX_MISSES_LIMIT: usize = 4;
/// Most paths built, whatever the options say.
const MAX_PATHS_LIMIT: usize = 8;

/// A point in the photo.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct PixelPoint {
    /// x, pixels (x right, pixel centres at integer coordinates).
    pub x_px: f64,
    /// y, pixels (y down).
    pub y_px: f64,
}

/// Options of [`order_path`].
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct PathOptions {
    /// Half-width of the search gate around a one-flash prediction, in ball radii; it grows
    /// with the number of flashes predicted ahead and with the centre uncertainty.
    pub gate_radii: f64,
    /// Most consecutive flashes without an image that the walk bridges (at most 4).
    pub max_misses: usize,
    /// Fewest points a path needs (at least 3).
    pub min_points: usize,
    /// Largest relative difference of a spot's radius from the path's radius (fraction).
    pub radius_tolerance: f64,
    /// Smallest ratio of speeds across a bounce (restitution), 0..1.
    pub min_restitution: f64,
    /// Most paths (balls) to build (at most 8).
    pub max_paths: usize,
    /// Where the ball starts, pixels: the spot nearest to it begins its path.
    pub start: Option<PixelPoint>,
    /// How far the ball falls from rest in one flash, pixels (half of g dt^2 times the scale),
    /// when known: the curvature every arc of an in-line path must have.
    pub fall_px_per_flash2: Option<f64>,
}

impl Default for PathOptions {
    fn default() -> PathOptions {
        PathOptions {
            gate_radii: 1.0,
            max_misses: 1,
            min_points: 5,
            radius_tolerance: 0.25,
            min_restitution: 0.3,
            max_paths: 2,
            start: None,
            fall_px_per_flash2: None,
        }
    }
}

/// One image of the ball on a path.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct PathPoint {
    /// Flash index, counted from the first image found on the path (0).
    pub n: usize,
    /// Index of the spot in the input slice.
    pub spot_index: usize,
    /// Centre x, pixels (x right).
    pub x_px: f64,
    /// Centre y, pixels (y down).
    pub y_px: f64,
    /// Radius, pixels.
    pub r_px: f64,
    /// 1-sigma uncertainty of the centre along each axis, pixels.
    pub sigma_px: f64,
}

/// The images of one ball in time order.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct BallPath {
    /// Images in time order (increasing `n`).
    pub points: Vec<PathPoint>,
    /// Flash indices between the first and last point that have no image, increasing.
    pub missing: Vec<usize>,
}

impl BallPath {
    /// The same images read backwards in time: the last image becomes flash 0.
    pub fn reversed(&self) -> BallPath {
        let last_n = self.points.last().map_or(0, |p| p.n);
        let points = self
            .points
            .iter()
            .rev()
            .map(|p| PathPoint {
                n: last_n - p.n,
                ..*p
            })
            .collect();
        let missing = self.missing.iter().rev().map(|&n| last_n - n).collect();
        BallPath { points, missing }
    }
}

/// Why a spot is on no path.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum StrayReason {
    /// A coordinate, the radius or sigma is not finite, or the radius is not positive.
    Invalid,
    /// Its radius differs from the path's by more than the tolerance.
    RadiusDiffers,
    /// It lies on a chain too short to be a path, or there are too few spots for a path.
    TooFewPoints,
    /// No path passes through it.
    OffPath,
}

/// A spot that is on no path.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Stray {
    /// Index of the spot in the input slice.
    pub spot_index: usize,
    /// Centre x, pixels.
    pub x_px: f64,
    /// Centre y, pixels.
    pub y_px: f64,
    /// Why it is on no path.
    pub reason: StrayReason,
}

/// What [`order_path`] found.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PathResult {
    /// Paths, the longest first.
    pub paths: Vec<BallPath>,
    /// Spots on no path, by increasing spot index.
    pub strays: Vec<Stray>,
}

/// Order `spots` into the ball's path (or paths) in time order; see the module documentation.
pub fn order_path(spots: &[Spot], options: &PathOptions) -> PathResult {
    let limits = Limits::new(options);
    let (items, spot_index, mut strays) = valid_spots(spots);
    let tree = SpotTree::new(&items);
    let sigma_px = finite_median(items.iter().map(|s| s.sigma_px).collect()).unwrap_or(0.0);
    let mut finder = Finder {
        items: &items,
        tree: &tree,
        taken: vec![false; items.len()],
        limits,
        r_ref_px: 1.0,
        sigma_px,
    };
    let start_item = options.start.and_then(|p| {
        tree.nearest(p.x_px, p.y_px, 1)
            .first()
            .map(|neighbour| neighbour.index)
    });
    let (chains, short_chain) = build_chains(&mut finder);
    strays.extend(left_over(&finder, &chains, &short_chain, &spot_index));
    strays.sort_by_key(|s| s.spot_index);
    let paths = chains
        .iter()
        .map(|chain| finish(chain, &items, &spot_index, start_item))
        .collect();
    PathResult { paths, strays }
}

/// Split `spots` into the valid ones (finite centre, radius and sigma, positive radius,
/// non-negative sigma) with their indices in `spots`, and the others as
/// [`StrayReason::Invalid`] strays.
fn valid_spots(spots: &[Spot]) -> (Vec<Spot>, Vec<usize>, Vec<Stray>) {
    let mut strays = Vec::new();
    let mut items = Vec::new();
    let mut spot_index = Vec::new();
    for (i, s) in spots.iter().enumerate() {
        let finite = [s.x_px, s.y_px, s.r_px, s.sigma_px]
            .iter()
            .all(|v| v.is_finite());
        if finite && s.r_px > 0.0 && s.sigma_px >= 0.0 {
            items.push(*s);
            spot_index.push(i);
        } else {
            strays.push(Stray {
                spot_index: i,
                x_px: s.x_px,
                y_px: s.y_px,
                reason: StrayReason::Invalid,
            });
        }
    }
    (items, spot_index, strays)
}

/// The paths' chains, longest first, their spots taken; and the spots of the chain that was
/// too short to be a path (empty when none was).
fn build_chains(finder: &mut Finder<'_>) -> (Vec<Chain>, Vec<usize>) {
    let mut chains = Vec::new();
    let mut short_chain = Vec::new();
    let fall = finder.limits.fall_px_per_flash2;
    if let Some(chain) =
        inline::in_line_chain(finder.items, &finder.taken, finder.limits.min_points, fall)
    {
        for node in &chain.nodes {
            finder.taken[node.item] = true;
        }
        chains.push(chain);
    }
    while chains.len() < finder.limits.max_paths {
        let Some(chain) = finder.best_chain() else {
            break;
        };
        if chain.nodes.len() >= finder.limits.min_points {
            for node in &chain.nodes {
                finder.taken[node.item] = true;
            }
            chains.push(chain);
        } else {
            short_chain = chain.nodes.iter().map(|node| node.item).collect();
            break;
        }
    }
    chains.sort_by_key(|c| std::cmp::Reverse(c.nodes.len()));
    (chains, short_chain)
}

/// The valid spots on no chain as strays, each with its reason (step 8 of the module
/// documentation), in the order of the valid spots.
fn left_over(
    finder: &Finder<'_>,
    chains: &[Chain],
    short_chain: &[usize],
    spot_index: &[usize],
) -> Vec<Stray> {
    let items = finder.items;
    let r_stray_px = chains
        .first()
        .map(|c| c.r_ref_px)
        .or_else(|| finite_median(items.iter().map(|s| s.r_px).collect()))
        .unwrap_or(1.0);
    let mut strays = Vec::new();
    for (item, s) in items.iter().enumerate() {
        if finder.taken[item] {
            continue;
        }
        let reason = if (s.r_px - r_stray_px).abs() > finder.limits.radius_tolerance * r_stray_px {
            StrayReason::RadiusDiffers
        } else if chains.is_empty() || short_chain.contains(&item) {
            StrayReason::TooFewPoints
        } else {
            StrayReason::OffPath
        };
        strays.push(Stray {
            spot_index: spot_index[item],
            x_px: s.x_px,
            y_px: s.y_px,
            reason,
        });
    }
    strays
}

/// Options checked and clamped so that any value is safe.
#[derive(Debug, Clone, Copy)]
struct Limits {
    gate_radii: f64,
    max_misses: usize,
    min_points: usize,
    radius_tolerance: f64,
    min_restitution: f64,
    max_paths: usize,
    fall_px_per_flash2: Option<f64>,
}

impl Limits {
    fn new(options: &PathOptions) -> Limits {
        let default = PathOptions::default();
        let positive = |v: f64, fallback: f64| {
            if v.is_finite() && v > 0.0 {
                v
            } else {
                fallback
            }
        };
        let restitution = if options.min_restitution.is_finite() {
            options.min_restitution.clamp(0.05, 1.0)
        } else {
            default.min_restitution
        };
        let tolerance = if options.radius_tolerance.is_finite() && options.radius_tolerance >= 0.0 {
            options.radius_tolerance
        } else {
            default.radius_tolerance
        };
        Limits {
            gate_radii: positive(options.gate_radii, default.gate_radii),
            max_misses: options.max_misses.min(MAX_MISSES_LIMIT),
            min_points: options.min_points.max(3),
            radius_tolerance: tolerance,
            min_restitution: restitution,
            max_paths: options.max_paths.min(MAX_PATHS_LIMIT),
            fall_px_per_flash2: options
                .fall_px_per_flash2
                .filter(|c| c.is_finite() && *c > 0.0),
        }
    }
}

/// Orient a chain, number its flashes from its first image and list the missing ones.
fn finish(chain: &Chain, items: &[Spot], spot_index: &[usize], start: Option<usize>) -> BallPath {
    let nodes = &chain.nodes;
    let forward = match start.and_then(|s| nodes.iter().position(|node| node.item == s)) {
        Some(at) => 2 * at < nodes.len(),
        None => {
            let votes = bounce_votes(nodes, items);
            if votes != 0 {
                votes > 0
            } else {
                end_speed(nodes.iter(), items) <= end_speed(nodes.iter().rev(), items)
            }
        }
    };
    let (first_n, last_n) = match (nodes.first(), nodes.last()) {
        (Some(a), Some(b)) => (a.n, b.n),
        _ => (0, 0),
    };
    let mut points: Vec<PathPoint> = nodes
        .iter()
        .map(|node| {
            let s = &items[node.item];
            PathPoint {
                n: if forward {
                    node.n - first_n
                } else {
                    last_n - node.n
                } as usize,
                spot_index: spot_index[node.item],
                x_px: s.x_px,
                y_px: s.y_px,
                r_px: s.r_px,
                sigma_px: s.sigma_px,
            }
        })
        .collect();
    points.sort_by_key(|p| p.n);
    let mut missing = Vec::new();
    for pair in points.windows(2) {
        missing.extend(pair[0].n + 1..pair[1].n);
    }
    BallPath { points, missing }
}

/// Bounce votes for the chain's order being forward in time: +1 for each bounce after which
/// the arc tops out lower (pixel y larger), -1 for each after which it tops out higher.
fn bounce_votes(nodes: &[ChainNode], items: &[Spot]) -> i64 {
    let vertex = |three: &[ChainNode]| -> Option<f64> {
        let t: Vec<f64> = three.iter().map(|node| node.n as f64).collect();
        let y: Vec<f64> = three.iter().map(|node| items[node.item].y_px).collect();
        let d1 = (y[1] - y[0]) / (t[1] - t[0]);
        let d2 = (y[2] - y[1]) / (t[2] - t[1]);
        let c2 = (d2 - d1) / (t[2] - t[0]);
        if c2 <= 0.0 {
            return None;
        }
        // y = y0 + d1 (t - t0) + c2 (t - t0)(t - t1) is smallest at t*.
        let top = (t[0] + t[1]) / 2.0 - d1 / (2.0 * c2);
        Some(y[0] + d1 * (top - t[0]) + c2 * (top - t[0]) * (top - t[1]))
    };
    let mut votes = 0;
    for i in 2..nodes.len().saturating_sub(3) {
        let quiet =
            |range: std::ops::Range<usize>| range.into_iter().all(|j| !nodes[j].bounce_after);
        if !nodes[i].bounce_after || !quiet(i - 2..i) || !quiet(i + 1..i + 3) {
            continue;
        }
        if let (Some(before), Some(after)) =
            (vertex(&nodes[i - 2..=i]), vertex(&nodes[i + 1..=i + 3]))
        {
            votes += if after > before { 1 } else { -1 };
        }
    }
    votes
}

/// Mean spacing per flash over the first three steps of `nodes`, pixels per flash.
fn end_speed<'a>(nodes: impl Iterator<Item = &'a ChainNode>, items: &[Spot]) -> f64 {
    let ends: Vec<&ChainNode> = nodes.take(4).collect();
    let speeds: Vec<f64> = ends
        .windows(2)
        .map(|pair| {
            let (a, b) = (&items[pair[0].item], &items[pair[1].item]);
            let flashes = (pair[1].n - pair[0].n).abs().max(1) as f64;
            (b.x_px - a.x_px).hypot(b.y_px - a.y_px) / flashes
        })
        .collect();
    if speeds.is_empty() {
        0.0
    } else {
        speeds.iter().sum::<f64>() / speeds.len() as f64
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn point(n: usize, x_px: f64) -> PathPoint {
        PathPoint {
            n,
            spot_index: n,
            x_px,
            y_px: 0.0,
            r_px: 5.0,
            sigma_px: 0.1,
        }
    }

    #[test]
    fn a_path_read_backwards_starts_at_its_last_image() {
        // Images at flashes 0, 1, 3 and 6 (2, 4 and 5 missing): backwards, the image of flash 6
        // is flash 0 and the gaps keep their lengths (flashes 1, 2 and 4 missing).
        let path = BallPath {
            points: vec![point(0, 0.0), point(1, 1.0), point(3, 3.0), point(6, 6.0)],
            missing: vec![2, 4, 5],
        };
        let back = path.reversed();
        let ns: Vec<usize> = back.points.iter().map(|p| p.n).collect();
        let xs: Vec<f64> = back.points.iter().map(|p| p.x_px).collect();
        assert_eq!(ns, vec![0, 3, 5, 6]);
        assert_eq!(xs, vec![6.0, 3.0, 1.0, 0.0]);
        assert_eq!(back.missing, vec![1, 2, 4]);
        assert_eq!(back.reversed(), path);
    }
}
