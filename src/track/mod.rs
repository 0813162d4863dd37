//! Path ordering: the ball's images in time order, each with its flash index.
//!
//! Goes in: the [`Spot`]s found in one photo (pixels, x right, y down) and [`PathOptions`].
//! Comes out: a [`PathResult`]: the ball's [`Path`]s, longest first, and the [`Stray`] spots
//! that lie on no path, each with a [`StrayReason`]. A path lists its images in time order
//! with the flash index `n`; `n` counts flashes from the first image found on the path
//! (`n = 0`), so a flash whose image was not found keeps its place in time: its index is
//! listed in [`Path::missing`] and later images keep their true `n`.
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
//!    The windows' candidates are compared by walking on, as in step 4.
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
//! use beadline::detect::Spot;
//! // A ball falling from rest: y = 5 + 2 n^2 pixels, drifting right 30 px per flash.
//! let spots: Vec<Spot> = [3usize, 0, 4, 1, 2, 5]
//!     .iter()
//!     .map(|&n| Spot {
//!         x_px: 100.0 + 30.0 * n as f64,
//!         y_px: 5.0 + 2.0 * (n * n) as f64,
//!         r_px: 10.0,
//!         sigma_px: 0.05,
//!         score: 1.0,
//!     })
//!     .collect();
//! let result = order_path(&spots, &PathOptions::default());
//! let order: Vec<usize> = result.paths[0].points.iter().map(|p| p.n).collect();
//! assert_eq!(order, vec![0, 1, 2, 3, 4, 5]);
//! assert_eq!(result.paths[0].points[0].spot_index, 1);
//! ```

use crate::core::stats::finite_median;
use crate::detect::Spot;
use kiddo::{ImmutableKdTree, SquaredEuclidean};
use serde::{Deserialize, Serialize};
use std::num::NonZero;

/// Most seeds walked per path.
pub const SEEDS_TRIED: usize = 50;

/// Steps walked ahead to compare candidates.
const LOOKAHEAD_STEPS: usize = 3;
/// Candidates compared per step.
const BRANCH: usize = 3;
/// Spots looked at per bounce window.
const WINDOW_QUERY: usize = 64;
/// Neighbours looked at around a seed's middle spot.
const SEED_NEIGHBOURS: usize = 6;
/// Cost of one missed flash when candidates are compared (in squared gates).
const MISS_COST: f64 = 0.3;
/// Residual, as a fraction of the gate, under which a candidate is taken without comparing.
const CLEAR_FRACTION: f64 = 0.25;
/// Cosine of the largest angle between the measured acceleration and image down for a bounce.
const MIN_DOWN_COS: f64 = 0.85;
/// Most consecutive missed flashes the walk bridges, whatever the options say.
const MAX_MISSES_LIMIT: usize = 4;

/// See [`Finder::chain_score`]: a spot this near (in radii) to a step's midpoint was passed over.
/// Under constant acceleration a the image between two flashes lies |a| / 2 (pixels per flash
/// squared) from their midpoint: a few tenths of a radius at most where steps are long.
const SKIPPED_MID_R: f64 = 0.3;

/// See [`Finder::chain_score`]: only steps longer than this many radii are checked (shorter
/// ones cannot hold a separate image between their ends).
const SKIPPED_STEP_R: f64 = 1.2;
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
pub struct Path {
    /// Images in time order (increasing `n`).
    pub points: Vec<PathPoint>,
    /// Flash indices between the first and last point that have no image, increasing.
    pub missing: Vec<usize>,
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
    pub paths: Vec<Path>,
    /// Spots on no path, by increasing spot index.
    pub strays: Vec<Stray>,
}

/// A neighbour found by a [`SpotTree`] query.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Neighbour {
    /// Index of the spot in the slice the tree was built from.
    pub index: usize,
    /// Distance from the query point, pixels.
    pub distance_px: f64,
}

/// A kd-tree over spot centres: the neighbour queries the walk uses.
#[derive(Debug)]
pub struct SpotTree {
    tree: Option<ImmutableKdTree<f64, 2>>,
    /// Spot index of each tree item (spots with a non-finite centre are left out).
    slots: Vec<usize>,
}

impl SpotTree {
    /// Build the tree over the centres of `spots`; spots with a non-finite centre are left out.
    pub fn new(spots: &[Spot]) -> SpotTree {
        let mut points = Vec::with_capacity(spots.len());
        let mut slots = Vec::with_capacity(spots.len());
        for (i, s) in spots.iter().enumerate() {
            if s.x_px.is_finite() && s.y_px.is_finite() {
                points.push([s.x_px, s.y_px]);
                slots.push(i);
            }
        }
        let tree = if points.is_empty() {
            None
        } else {
            ImmutableKdTree::new_from_slice(&points).ok()
        };
        SpotTree { tree, slots }
    }

    /// The at most `max_count` spots nearest to (`x_px`, `y_px`) within `radius_px` (inclusive),
    /// nearest first (equal distances by index). Empty for a non-finite query.
    pub fn within(&self, x_px: f64, y_px: f64, radius_px: f64, max_count: usize) -> Vec<Neighbour> {
        let radius_sq = radius_px * radius_px;
        let (Some(tree), Some(count)) = (&self.tree, NonZero::new(max_count)) else {
            return Vec::new();
        };
        if !(x_px.is_finite() && y_px.is_finite() && radius_sq.is_finite() && radius_px >= 0.0) {
            return Vec::new();
        }
        let found = tree
            .query(&[x_px, y_px])
            .nearest_n::<SquaredEuclidean<f64>>(count)
            .within(radius_sq)
            .execute();
        self.neighbours(found.iter().map(|f| (f.item, f.distance)))
    }

    /// The `count` spots nearest to (`x_px`, `y_px`), nearest first. Empty for a non-finite
    /// query.
    pub fn nearest(&self, x_px: f64, y_px: f64, count: usize) -> Vec<Neighbour> {
        let (Some(tree), Some(count)) = (&self.tree, NonZero::new(count)) else {
            return Vec::new();
        };
        if !(x_px.is_finite() && y_px.is_finite()) {
            return Vec::new();
        }
        let found = tree
            .query(&[x_px, y_px])
            .nearest_n::<SquaredEuclidean<f64>>(count)
            .execute();
        self.neighbours(found.iter().map(|f| (f.item, f.distance)))
    }

    fn neighbours(&self, found: impl Iterator<Item = (u32, f64)>) -> Vec<Neighbour> {
        let mut out: Vec<Neighbour> = found
            .map(|(item, distance_sq)| Neighbour {
                index: self.slots[item as usize],
                distance_px: distance_sq.sqrt(),
            })
            .collect();
        out.sort_by(|a, b| {
            a.distance_px
                .total_cmp(&b.distance_px)
                .then(a.index.cmp(&b.index))
        });
        out
    }
}

/// Order `spots` into the ball's path (or paths) in time order; see the module documentation.
pub fn order_path(spots: &[Spot], options: &PathOptions) -> PathResult {
    let limits = Limits::new(options);
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

    let mut chains = Vec::new();
    let mut short_chain = Vec::new();
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

    let r_stray_px = chains
        .first()
        .map(|c| c.r_ref_px)
        .or_else(|| finite_median(items.iter().map(|s| s.r_px).collect()))
        .unwrap_or(1.0);
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
    strays.sort_by_key(|s| s.spot_index);

    let paths = chains
        .iter()
        .map(|chain| finish(chain, &items, &spot_index, start_item))
        .collect();
    PathResult { paths, strays }
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
        }
    }
}

/// One image on a walk: the spot (index into the valid spots) and its flash index along the
/// walk.
#[derive(Debug, Clone, Copy)]
struct Node {
    item: usize,
    n: i64,
    /// A bounce lies between the previous node and this one.
    bounce_before: bool,
    /// Walk state before this node was added, restored when it is removed.
    saved: Saved,
}

/// The part of a walk's state that a bounce changes.
#[derive(Debug, Clone, Copy)]
struct Saved {
    arc_start: usize,
    carried_accel: Option<[f64; 2]>,
    bounce_velocity: [f64; 2],
}

/// A walk in one direction of time.
#[derive(Debug, Clone)]
struct Walk {
    nodes: Vec<Node>,
    /// First node of the current arc (since the last bounce).
    arc_start: usize,
    /// Acceleration measured before the last bounce, pixels per flash^2.
    carried_accel: Option<[f64; 2]>,
    /// Velocity just before the last bounce, pixels per flash.
    bounce_velocity: [f64; 2],
}

/// A possible next step of a walk.
#[derive(Debug, Clone, Copy)]
struct Move {
    item: usize,
    /// Flashes ahead (1 = the next flash).
    k: i64,
    bounce: bool,
    /// Squared residual in gates plus the cost of missed flashes.
    cost: f64,
}

/// A chain of images in flash order (increasing `n`).
#[derive(Debug, Clone)]
struct Chain {
    nodes: Vec<ChainNode>,
    r_ref_px: f64,
}

#[derive(Debug, Clone, Copy)]
struct ChainNode {
    item: usize,
    n: i64,
    /// A bounce lies between this node and the next.
    bounce_after: bool,
}

impl Chain {
    /// Points found less flashes missed, then fewer missed.
    fn score(&self) -> (i64, i64) {
        (self.nodes.len() as i64 - self.misses(), -self.misses())
    }

    fn misses(&self) -> i64 {
        match (self.nodes.first(), self.nodes.last()) {
            (Some(a), Some(b)) => b.n - a.n + 1 - self.nodes.len() as i64,
            _ => 0,
        }
    }
}

struct Finder<'a> {
    items: &'a [Spot],
    tree: &'a SpotTree,
    /// Spots on an accepted path or on the walk being built.
    taken: Vec<bool>,
    limits: Limits,
    /// Radius of the ball on the path being built, pixels.
    r_ref_px: f64,
    /// Typical centre sigma, pixels.
    sigma_px: f64,
}

impl Finder<'_> {
    fn pos(&self, item: usize) -> [f64; 2] {
        [self.items[item].x_px, self.items[item].y_px]
    }

    fn radius_fits(&self, item: usize, r_px: f64) -> bool {
        (self.items[item].r_px - r_px).abs() <= self.limits.radius_tolerance * r_px
    }

    fn usable(&self, item: usize) -> bool {
        !self.taken[item] && self.radius_fits(item, self.r_ref_px)
    }

    /// The longest chain from the best seeds, or none when there is no seed.
    fn best_chain(&mut self) -> Option<Chain> {
        let seeds = self.seeds();
        let mut best: Option<(Chain, (i64, i64))> = None;
        let mut in_best = vec![false; self.items.len()];
        let available = self.taken.iter().filter(|t| !**t).count();
        let mut tried = 0;
        for seed in seeds {
            if tried == SEEDS_TRIED {
                break;
            }
            if seed.iter().all(|&i| in_best[i]) {
                continue;
            }
            tried += 1;
            let chain = self.walk_from(seed);
            // The plain score bounds the checked one from above: most chains lose on it alone.
            if best.as_ref().is_some_and(|(_, b)| chain.score() <= *b) {
                continue;
            }
            let score = self.chain_score(&chain);
            if best.as_ref().is_none_or(|(_, b)| score > *b) {
                in_best.iter_mut().for_each(|v| *v = false);
                for node in &chain.nodes {
                    in_best[node.item] = true;
                }
                let complete = chain.nodes.len() == available;
                best = Some((chain, score));
                if complete {
                    break;
                }
            }
        }
        best.map(|(chain, _)| chain)
    }

    /// A chain's score ([`Chain::score`]) less one for each of its one-flash steps that passes
    /// over another image: a spot within [`SKIPPED_MID_R`] radii of the step's midpoint, on a
    /// step longer than [`SKIPPED_STEP_R`] radii. Such a step is two flashes, and a chain made
    /// of them runs at half the flash rate: where a fall and the rise after a bounce lie side
    /// by side, every other image of both makes a chain as smooth as the true one (the third
    /// difference vanishes for any fixed step), and a longer one where the true chain stops
    /// at an apex whose images are too close to be found.
    fn chain_score(&self, chain: &Chain) -> (i64, i64) {
        let r = chain.r_ref_px;
        let skipped = chain
            .nodes
            .windows(2)
            .filter(|w| w[1].n == w[0].n + 1)
            .filter(|w| {
                let (a, b) = (self.pos(w[0].item), self.pos(w[1].item));
                if norm(sub(b, a)) <= SKIPPED_STEP_R * r {
                    return false;
                }
                let mid = scale(add(a, b), 0.5);
                self.tree
                    .within(mid[0], mid[1], SKIPPED_MID_R * r, 4)
                    .iter()
                    .any(|nb| nb.index != w[0].item && nb.index != w[1].item)
            })
            .count() as i64;
        let (points, misses) = chain.score();
        (points - skipped, misses)
    }

    /// Seed triples (first, middle, last), best first.
    fn seeds(&self) -> Vec<[usize; 3]> {
        let mut seeds: Vec<(f64, [usize; 3])> = Vec::new();
        for j in 0..self.items.len() {
            if self.taken[j] {
                continue;
            }
            let pj = self.pos(j);
            let r_px = self.items[j].r_px;
            let near: Vec<usize> = self
                .tree
                .nearest(pj[0], pj[1], SEED_NEIGHBOURS + 1)
                .into_iter()
                .map(|nb| nb.index)
                .filter(|&i| i != j && !self.taken[i] && self.radius_fits(i, r_px))
                .collect();
            for (ai, &a) in near.iter().enumerate() {
                for &b in &near[ai + 1..] {
                    let (pa, pb) = (self.pos(a), self.pos(b));
                    let d1 = sub(pj, pa);
                    let d2 = sub(pb, pj);
                    let (l1, l2) = (norm(d1), norm(d2));
                    if l1 <= 0.0 || l2 <= 0.0 {
                        continue;
                    }
                    let turn_cos = dot(d1, d2) / (l1 * l2);
                    let ratio = l2 / l1;
                    if turn_cos < 0.5 || !(0.5..=2.0).contains(&ratio) {
                        continue;
                    }
                    let cost = l1 + l2 + 2.0 * norm(sub(d2, d1));
                    seeds.push((cost, [a, j, b]));
                }
            }
        }
        seeds.sort_by(|x, y| x.0.total_cmp(&y.0).then(x.1.cmp(&y.1)));
        seeds.into_iter().map(|(_, seed)| seed).collect()
    }

    /// Walk forward and backward from a seed; the spots it takes are released afterwards.
    fn walk_from(&mut self, seed: [usize; 3]) -> Chain {
        let mut radii: Vec<f64> = seed.iter().map(|&i| self.items[i].r_px).collect();
        radii.sort_by(f64::total_cmp);
        self.r_ref_px = radii[1];
        let forward = self.walk(seed);
        let backward = self.walk([seed[2], seed[1], seed[0]]);
        for node in forward.nodes.iter().chain(&backward.nodes) {
            self.taken[node.item] = false;
        }
        // Backward nodes: n along the chain = 2 - n along the backward walk.
        let mut bounce_ends = Vec::new();
        let mut nodes = Vec::new();
        for (i, node) in backward.nodes.iter().enumerate().skip(3) {
            nodes.push((node.item, 2 - node.n));
            if node.bounce_before {
                bounce_ends.push(2 - backward.nodes[i - 1].n);
            }
        }
        for node in &forward.nodes {
            nodes.push((node.item, node.n));
            if node.bounce_before {
                bounce_ends.push(node.n);
            }
        }
        nodes.sort_by_key(|&(_, n)| n);
        let chain_nodes = (0..nodes.len())
            .map(|i| ChainNode {
                item: nodes[i].0,
                n: nodes[i].1,
                bounce_after: nodes
                    .get(i + 1)
                    .is_some_and(|next| bounce_ends.contains(&next.1)),
            })
            .collect();
        Chain {
            nodes: chain_nodes,
            r_ref_px: self.r_ref_px,
        }
    }

    /// Walk from three points in one direction of time until nothing fits; the spots stay taken.
    fn walk(&mut self, first: [usize; 3]) -> Walk {
        let saved = Saved {
            arc_start: 0,
            carried_accel: None,
            bounce_velocity: [0.0, 0.0],
        };
        let mut walk = Walk {
            nodes: Vec::new(),
            arc_start: 0,
            carried_accel: None,
            bounce_velocity: [0.0, 0.0],
        };
        for (n, &item) in first.iter().enumerate() {
            self.taken[item] = true;
            walk.nodes.push(Node {
                item,
                n: n as i64,
                bounce_before: false,
                saved,
            });
        }
        while let Some(step) = self.choose(&mut walk) {
            self.apply(&mut walk, step);
        }
        walk
    }

    fn apply(&mut self, walk: &mut Walk, step: Move) {
        let saved = Saved {
            arc_start: walk.arc_start,
            carried_accel: walk.carried_accel,
            bounce_velocity: walk.bounce_velocity,
        };
        if step.bounce && walk.nodes.len() - walk.arc_start >= 2 {
            walk.carried_accel = self.accel(walk);
            walk.bounce_velocity = self.velocity(walk).unwrap_or([0.0, 0.0]);
        }
        let n = walk.nodes.last().map_or(0, |node| node.n) + step.k;
        walk.nodes.push(Node {
            item: step.item,
            n,
            bounce_before: step.bounce,
            saved,
        });
        if step.bounce {
            walk.arc_start = walk.nodes.len() - 1;
        }
        self.taken[step.item] = true;
    }

    fn undo(&mut self, walk: &mut Walk) {
        if let Some(node) = walk.nodes.pop() {
            self.taken[node.item] = false;
            walk.arc_start = node.saved.arc_start;
            walk.carried_accel = node.saved.carried_accel;
            walk.bounce_velocity = node.saved.bounce_velocity;
        }
    }

    /// The next step: the clear candidate, or the one that leads furthest.
    fn choose(&mut self, walk: &mut Walk) -> Option<Move> {
        let moves = self.moves(walk);
        if let Some(step) = clear_move(&moves) {
            return Some(step);
        }
        let mut best: Option<((usize, f64), Move)> = None;
        for step in moves {
            self.apply(walk, step);
            let (count, cost) = self.explore(walk, LOOKAHEAD_STEPS);
            self.undo(walk);
            let score = (count + 1, step.cost + cost);
            if best.is_none_or(|(b, _)| better(score, b)) {
                best = Some((score, step));
            }
        }
        best.map(|(_, step)| step)
    }

    /// Points found and their cost along the best continuation of at most `depth` steps.
    fn explore(&mut self, walk: &mut Walk, depth: usize) -> (usize, f64) {
        if depth == 0 {
            return (0, 0.0);
        }
        let moves = self.moves(walk);
        let candidates = match clear_move(&moves) {
            Some(step) => vec![step],
            None => moves,
        };
        let mut best = (0, 0.0);
        for step in candidates {
            self.apply(walk, step);
            let (count, cost) = self.explore(walk, depth - 1);
            self.undo(walk);
            let score = (count + 1, step.cost + cost);
            if better(score, best) {
                best = score;
            }
        }
        best
    }

    /// Acceleration of the current arc, pixels per flash^2 (second divided difference, leaving
    /// out the last point when the arc is long enough), or the one carried over a bounce.
    fn accel(&self, walk: &Walk) -> Option<[f64; 2]> {
        let arc = &walk.nodes[walk.arc_start..];
        let three = match arc.len() {
            0..=2 => return walk.carried_accel,
            3 => &arc[0..3],
            len => &arc[len - 4..len - 1],
        };
        let (t, p) = self.samples(three);
        let d1 = scale(sub(p[1], p[0]), 1.0 / (t[1] - t[0]));
        let d2 = scale(sub(p[2], p[1]), 1.0 / (t[2] - t[1]));
        Some(scale(sub(d2, d1), 2.0 / (t[2] - t[0])))
    }

    /// Velocity at the last point, pixels per flash.
    fn velocity(&self, walk: &Walk) -> Option<[f64; 2]> {
        let arc = &walk.nodes[walk.arc_start..];
        let len = arc.len();
        if len >= 3 {
            let (t, p) = self.samples(&arc[len - 3..]);
            let d1 = scale(sub(p[1], p[0]), 1.0 / (t[1] - t[0]));
            let d2 = scale(sub(p[2], p[1]), 1.0 / (t[2] - t[1]));
            let c2 = scale(sub(d2, d1), 1.0 / (t[2] - t[0]));
            // Newton form p = p0 + d1 (t - t0) + c2 (t - t0)(t - t1), derivative at t2.
            Some(add(d1, scale(c2, 2.0 * t[2] - t[0] - t[1])))
        } else if len == 2 {
            let a = walk.carried_accel.unwrap_or([0.0, 0.0]);
            let (t, p) = self.samples(arc);
            let d = t[1] - t[0];
            Some(add(scale(sub(p[1], p[0]), 1.0 / d), scale(a, d / 2.0)))
        } else {
            None
        }
    }

    fn samples(&self, nodes: &[Node]) -> ([f64; 3], [[f64; 2]; 3]) {
        let mut t = [0.0; 3];
        let mut p = [[0.0; 2]; 3];
        for (i, node) in nodes.iter().take(3).enumerate() {
            t[i] = node.n as f64;
            p[i] = self.pos(node.item);
        }
        (t, p)
    }

    /// Constant-acceleration prediction `k` flashes past the last point and its gate radius,
    /// pixels.
    fn predict(&self, walk: &Walk, k: i64) -> Option<([f64; 2], f64)> {
        let arc = &walk.nodes[walk.arc_start..];
        let len = arc.len();
        let base_px = self.limits.gate_radii * self.r_ref_px * k as f64;
        let (position, weights_sq, spread) = if len >= 3 {
            let (t, p) = self.samples(&arc[len - 3..]);
            let at = t[2] + k as f64;
            let w = [
                (at - t[1]) * (at - t[2]) / ((t[0] - t[1]) * (t[0] - t[2])),
                (at - t[0]) * (at - t[2]) / ((t[1] - t[0]) * (t[1] - t[2])),
                (at - t[0]) * (at - t[1]) / ((t[2] - t[0]) * (t[2] - t[1])),
            ];
            let position = add(add(scale(p[0], w[0]), scale(p[1], w[1])), scale(p[2], w[2]));
            (position, w.iter().map(|v| v * v).sum::<f64>(), 1.0)
        } else if len == 2 {
            let (t, p) = self.samples(arc);
            let d = t[1] - t[0];
            let kf = k as f64;
            let a = walk.carried_accel.unwrap_or([0.0, 0.0]);
            let w1 = 1.0 + kf / d;
            let w0 = kf / d;
            let position = add(
                sub(scale(p[1], w1), scale(p[0], w0)),
                scale(a, kf * d / 2.0 + kf * kf / 2.0),
            );
            (position, w1 * w1 + w0 * w0, 2.0)
        } else {
            return None;
        };
        let gate_px = base_px * spread + 3.0 * self.sigma_px * (1.0 + weights_sq).sqrt();
        (position[0].is_finite() && position[1].is_finite() && gate_px.is_finite())
            .then_some((position, gate_px))
    }

    /// Candidate next steps, cheapest first: constant-acceleration steps, or bounce steps
    /// when none fits.
    fn moves(&self, walk: &Walk) -> Vec<Move> {
        let mut moves = Vec::new();
        let arc_len = walk.nodes.len() - walk.arc_start;
        for k in 1..=1 + self.limits.max_misses as i64 {
            let Some((p, gate_px)) = self.predict(walk, k) else {
                break;
            };
            let miss_cost = MISS_COST * (k - 1) as f64;
            for nb in self.tree.within(p[0], p[1], gate_px, BRANCH + 8) {
                if !self.usable(nb.index) {
                    continue;
                }
                let r = nb.distance_px / gate_px;
                moves.push(Move {
                    item: nb.index,
                    k,
                    bounce: false,
                    cost: r * r + miss_cost,
                });
                if moves.iter().filter(|m| m.k == k).count() == BRANCH {
                    break;
                }
            }
        }
        if moves.is_empty() {
            if arc_len == 1 {
                self.after_bounce_moves(walk, &mut moves);
            } else {
                self.bounce_moves(walk, &mut moves);
            }
        }
        moves.sort_by(|a, b| a.cost.total_cmp(&b.cost));
        moves.truncate(BRANCH);
        moves
    }

    /// Steps across a bounce from the last point (the reflected prediction).
    fn bounce_moves(&self, walk: &Walk, moves: &mut Vec<Move>) {
        let (Some(last), Some(v)) = (walk.nodes.last(), self.velocity(walk)) else {
            return;
        };
        let down = gravity_direction(self.accel(walk));
        let arc_len = walk.nodes.len() - walk.arc_start;
        if arc_len < 3 || down[1] < MIN_DOWN_COS || dot(v, down) <= 0.0 {
            return;
        }
        let origin = self.pos(last.item);
        let e = self.limits.min_restitution;
        for k in 1..=1 + self.limits.max_misses as i64 {
            let Some((q, gate_px)) = self.predict(walk, k) else {
                break;
            };
            let d = sub(q, origin);
            let (q_u, q_w) = (dot(d, across(down)), dot(d, down));
            if q_w <= 0.0 {
                continue;
            }
            let window = Window {
                origin,
                down,
                u: span(e * q_u, q_u / e, gate_px),
                w: [-q_w / e - gate_px, q_w + gate_px],
            };
            for (item, du) in self.in_window(&window) {
                let off = (du - q_u) / ((window.u[1] - window.u[0]) / 2.0).max(1e-9);
                moves.push(Move {
                    item,
                    k,
                    bounce: true,
                    cost: 1.0 + off * off + MISS_COST * (k - 1) as f64,
                });
            }
        }
    }

    /// Steps from the first point after a bounce, set by the velocity before it.
    fn after_bounce_moves(&self, walk: &Walk, moves: &mut Vec<Move>) {
        let Some(last) = walk.nodes.last() else {
            return;
        };
        let a = walk.carried_accel.unwrap_or([0.0, 0.0]);
        let down = gravity_direction(walk.carried_accel);
        let v = walk.bounce_velocity;
        let (v_u, v_w) = (dot(v, across(down)), dot(v, down).abs());
        let origin = self.pos(last.item);
        let e = self.limits.min_restitution;
        let a_px = norm(a);
        for k in 1..=1 + self.limits.max_misses as i64 {
            let kf = k as f64;
            let gate_px = self.limits.gate_radii * self.r_ref_px * kf * 2.0 + 3.0 * self.sigma_px;
            let window = Window {
                origin,
                down,
                u: span(e * v_u * kf, v_u * kf / e, gate_px),
                w: [-(v_w + a_px) * kf / e - gate_px, a_px * kf * kf + gate_px],
            };
            let scale_px = self.limits.gate_radii * self.r_ref_px + 3.0 * self.sigma_px;
            for (item, _) in self.in_window(&window) {
                let miss = self.meeting_miss_px(walk, item, k) / scale_px;
                if miss > 1.0 {
                    continue;
                }
                moves.push(Move {
                    item,
                    k,
                    bounce: false,
                    cost: 1.0 + miss * miss + MISS_COST * (k - 1) as f64,
                });
            }
        }
    }

    /// Usable spots inside a bounce window and their advance along the floor, pixels.
    fn in_window(&self, window: &Window) -> Vec<(usize, f64)> {
        let side = across(window.down);
        let (u, w) = (window.u, window.w);
        let (u_mid, w_mid) = ((u[0] + u[1]) / 2.0, (w[0] + w[1]) / 2.0);
        let centre = add(
            window.origin,
            add(scale(side, u_mid), scale(window.down, w_mid)),
        );
        let reach_px = ((u[1] - u[0]) / 2.0).hypot((w[1] - w[0]) / 2.0);
        let mut found = Vec::new();
        for nb in self
            .tree
            .within(centre[0], centre[1], reach_px, WINDOW_QUERY)
        {
            let d = sub(self.pos(nb.index), window.origin);
            let (du, dw) = (dot(d, side), dot(d, window.down));
            if self.usable(nb.index) && du >= u[0] && du <= u[1] && dw >= w[0] && dw <= w[1] {
                found.push((nb.index, du));
            }
        }
        found
    }

    /// How far apart, pixels, the arc before the last bounce and the arc through the last point
    /// and `item` (`k` flashes later) come where they meet best between the flashes around
    /// the bounce. Both arcs share the acceleration, so their difference is linear in time; at
    /// a true bounce it vanishes at the bounce instant. Infinite when the speed along gravity
    /// (reversed) or along the floor changes at the meeting by a ratio outside
    /// `min_restitution..1 / min_restitution`.
    fn meeting_miss_px(&self, walk: &Walk, item: usize, k: i64) -> f64 {
        let (Some(pre), Some(first)) = (
            walk.arc_start.checked_sub(1).map(|i| walk.nodes[i]),
            walk.nodes.last(),
        ) else {
            return 0.0;
        };
        let a = walk.carried_accel.unwrap_or([0.0, 0.0]);
        let (t0, p0, v0) = (pre.n as f64, self.pos(pre.item), walk.bounce_velocity);
        let (t1, p1) = (first.n as f64, self.pos(first.item));
        let d = k as f64;
        let v1 = sub(scale(sub(self.pos(item), p1), 1.0 / d), scale(a, d / 2.0));
        let arc =
            |p: [f64; 2], v: [f64; 2], dt: f64| add(add(p, scale(v, dt)), scale(a, dt * dt / 2.0));
        let gap_at_t0 = sub(p0, arc(p1, v1, t0 - t1));
        let gap_at_t1 = sub(arc(p0, v0, t1 - t0), p1);
        let slope = sub(gap_at_t1, gap_at_t0);
        let s = if dot(slope, slope) > 0.0 {
            (-dot(gap_at_t0, slope) / dot(slope, slope)).clamp(0.0, 1.0)
        } else {
            0.0
        };
        // Speeds along gravity at the meeting: the rebound must be e to 1/e times the impact.
        let t_meet = t0 + s * (t1 - t0);
        let down = gravity_direction(walk.carried_accel);
        let before = add(v0, scale(a, t_meet - t0));
        let after = add(v1, scale(a, t_meet - t1));
        let e = self.limits.min_restitution;
        let ratio_ok = |from: f64, to: f64| from > 0.0 && to >= e * from && to <= from / e;
        let side = across(down);
        let (along_before, along_after) = (dot(before, side), dot(after, side));
        let sideways_ok = if along_before.abs() > self.sigma_px + 1e-9 {
            ratio_ok(along_before.abs(), along_after * along_before.signum())
        } else {
            along_after.abs() <= self.limits.gate_radii * self.r_ref_px
        };
        if !ratio_ok(dot(before, down), -dot(after, down)) || !sideways_ok {
            return f64::INFINITY;
        }
        norm(add(gap_at_t0, scale(slope, s)))
    }
}

/// A box after a bounce, pixels from `origin`: `u` along the floor, `w` along gravity.
#[derive(Debug, Clone, Copy)]
struct Window {
    origin: [f64; 2],
    down: [f64; 2],
    u: [f64; 2],
    w: [f64; 2],
}

/// The cheapest move when it is clearly right: a one-flash step inside a quarter of the gate
/// with no other one-flash step inside half the gate.
fn clear_move(moves: &[Move]) -> Option<Move> {
    let first = moves.first()?;
    let clear = CLEAR_FRACTION * CLEAR_FRACTION;
    let rival = 4.0 * clear;
    let ok = !first.bounce
        && first.k == 1
        && first.cost <= clear
        && !moves[1..].iter().any(|m| m.k == 1 && m.cost <= rival);
    ok.then_some(*first)
}

/// More points found, then lower cost.
fn better(a: (usize, f64), b: (usize, f64)) -> bool {
    a.0 > b.0 || (a.0 == b.0 && a.1 < b.1)
}

/// Unit vector along the measured acceleration; image down when it is unknown or zero.
fn gravity_direction(accel: Option<[f64; 2]>) -> [f64; 2] {
    match accel {
        Some(a) if norm(a) > 1e-9 => scale(a, 1.0 / norm(a)),
        _ => [0.0, 1.0],
    }
}

/// Unit vector along the floor for a gravity direction.
fn across(down: [f64; 2]) -> [f64; 2] {
    [down[1], -down[0]]
}

/// The interval between `a` and `b`, widened by `margin` on both sides.
fn span(a: f64, b: f64, margin: f64) -> [f64; 2] {
    [a.min(b) - margin, a.max(b) + margin]
}

/// Orient a chain, number its flashes from its first image and list the missing ones.
fn finish(chain: &Chain, items: &[Spot], spot_index: &[usize], start: Option<usize>) -> Path {
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
    Path { points, missing }
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

fn add(a: [f64; 2], b: [f64; 2]) -> [f64; 2] {
    [a[0] + b[0], a[1] + b[1]]
}

fn sub(a: [f64; 2], b: [f64; 2]) -> [f64; 2] {
    [a[0] - b[0], a[1] - b[1]]
}

fn scale(a: [f64; 2], s: f64) -> [f64; 2] {
    [a[0] * s, a[1] * s]
}

fn dot(a: [f64; 2], b: [f64; 2]) -> f64 {
    a[0] * b[0] + a[1] * b[1]
}

fn norm(a: [f64; 2]) -> f64 {
    a[0].hypot(a[1])
}
