//! The walk: from a seed triple, step from image to image in one direction of time at a time.
//!
//! Goes in: the valid spots, their [`SpotTree`] and the checked [`Limits`]. Comes out: a
//! [`Chain`] of spots in flash order with bounces marked. Method (ours, see the module
//! documentation of [`crate::track`], steps 3 to 5): the candidates for the next step come from
//! [`Finder::moves`] (module `moves`); a clear candidate is taken, otherwise a short look-ahead
//! (a depth-first search of [`LOOKAHEAD_STEPS`] steps, with undo) picks the one that leads
//! furthest. Seeds and the choice between chains are in module `seeds`, predictions in module
//! `predict`.

use super::Limits;
use super::tree::SpotTree;
use crate::detect::Spot;

/// Steps walked ahead to compare candidates.
const LOOKAHEAD_STEPS: usize = 3;
/// Residual, as a fraction of the gate, under which a candidate is taken without comparing.
const CLEAR_FRACTION: f64 = 0.25;

/// One image on a walk: the spot (index into the valid spots) and its flash index along the
/// walk.
#[derive(Debug, Clone, Copy)]
pub(super) struct Node {
    pub(super) item: usize,
    pub(super) n: i64,
    /// A bounce lies between the previous node and this one.
    pub(super) bounce_before: bool,
    /// Walk state before this node was added, restored when it is removed.
    pub(super) saved: Saved,
}

/// The part of a walk's state that a bounce changes.
#[derive(Debug, Clone, Copy)]
pub(super) struct Saved {
    pub(super) arc_start: usize,
    pub(super) carried_accel: Option<[f64; 2]>,
    pub(super) bounce_velocity: [f64; 2],
}

/// A walk in one direction of time.
#[derive(Debug, Clone)]
pub(super) struct Walk {
    pub(super) nodes: Vec<Node>,
    /// First node of the current arc (since the last bounce).
    pub(super) arc_start: usize,
    /// Acceleration measured before the last bounce, pixels per flash^2.
    pub(super) carried_accel: Option<[f64; 2]>,
    /// Velocity just before the last bounce, pixels per flash.
    pub(super) bounce_velocity: [f64; 2],
}

/// A possible next step of a walk.
#[derive(Debug, Clone, Copy)]
pub(super) struct Move {
    pub(super) item: usize,
    /// Flashes ahead (1 = the next flash).
    pub(super) k: i64,
    pub(super) bounce: bool,
    /// A change of acceleration (the end of an incline) between the last point and this one:
    /// the acceleration the step implies, pixels per flash^2.
    pub(super) kink: Option<[f64; 2]>,
    /// Squared residual in gates plus the cost of missed flashes.
    pub(super) cost: f64,
}

/// A chain of images in flash order (increasing `n`).
#[derive(Debug, Clone)]
pub(super) struct Chain {
    pub(super) nodes: Vec<ChainNode>,
    /// Radius of the ball the chain was walked with, pixels.
    pub(super) r_ref_px: f64,
}

/// One image on a chain: the spot (index into the valid spots) and its flash index.
#[derive(Debug, Clone, Copy)]
pub(super) struct ChainNode {
    pub(super) item: usize,
    pub(super) n: i64,
    /// A bounce lies between this node and the next.
    pub(super) bounce_after: bool,
}

impl Chain {
    /// Points found less flashes missed, then fewer missed.
    pub(super) fn score(&self) -> (i64, i64) {
        (self.nodes.len() as i64 - self.misses(), -self.misses())
    }

    fn misses(&self) -> i64 {
        match (self.nodes.first(), self.nodes.last()) {
            (Some(a), Some(b)) => b.n - a.n + 1 - self.nodes.len() as i64,
            _ => 0,
        }
    }
}

/// The state of the path search over one photo's valid spots.
pub(super) struct Finder<'a> {
    /// The valid spots (finite, positive radius).
    pub(super) items: &'a [Spot],
    /// Kd-tree over `items`.
    pub(super) tree: &'a SpotTree,
    /// Spots on an accepted path or on the walk being built.
    pub(super) taken: Vec<bool>,
    /// The options, checked.
    pub(super) limits: Limits,
    /// Radius of the ball on the path being built, pixels.
    pub(super) r_ref_px: f64,
    /// Typical centre sigma, pixels.
    pub(super) sigma_px: f64,
}

impl Finder<'_> {
    /// Centre of spot `item`, pixels.
    pub(super) fn pos(&self, item: usize) -> [f64; 2] {
        [self.items[item].x_px, self.items[item].y_px]
    }

    /// Spot `item`'s radius is within the tolerance of `r_px`.
    pub(super) fn radius_fits(&self, item: usize, r_px: f64) -> bool {
        (self.items[item].r_px - r_px).abs() <= self.limits.radius_tolerance * r_px
    }

    /// Spot `item` is free and has the radius `r_px` of the path where the walk is.
    pub(super) fn usable(&self, item: usize, r_px: f64) -> bool {
        !self.taken[item] && self.radius_fits(item, r_px)
    }

    /// The ball's radius where the walk is: the median of its last three images' radii. Under
    /// a tilted camera the images grow along the path (a third from one end to the other at
    /// 30 degrees), so each step is compared with its neighbours, not with the seed.
    pub(super) fn local_radius(&self, walk: &Walk) -> f64 {
        let from = walk.nodes.len().saturating_sub(3);
        let mut radii: Vec<f64> = walk.nodes[from..]
            .iter()
            .map(|node| self.items[node.item].r_px)
            .collect();
        radii.sort_by(f64::total_cmp);
        radii.get(radii.len() / 2).copied().unwrap_or(self.r_ref_px)
    }

    /// Walk forward and backward from a seed; the spots it takes are released afterwards.
    pub(super) fn walk_from(&mut self, seed: [usize; 3]) -> Chain {
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

    /// Add a step to the walk (taking its spot); a bounce step starts a new arc.
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
        } else if let Some(accel) = step.kink {
            // Position and velocity carry over the change: the new arc starts at the last point
            // before it, with the acceleration the step implies until it has three points.
            walk.arc_start = walk.nodes.len() - 2;
            walk.carried_accel = Some(accel);
        }
        self.taken[step.item] = true;
    }

    /// Remove the last step of the walk, releasing its spot and restoring the state before it.
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
}

/// The cheapest move when it is clearly right: a one-flash step inside a quarter of the gate
/// with no other one-flash step inside half the gate.
fn clear_move(moves: &[Move]) -> Option<Move> {
    let first = moves.first()?;
    let clear = CLEAR_FRACTION * CLEAR_FRACTION;
    let rival = 4.0 * clear;
    let ok = !first.bounce
        && first.kink.is_none()
        && first.k == 1
        && first.cost <= clear
        && !moves[1..].iter().any(|m| m.k == 1 && m.cost <= rival);
    ok.then_some(*first)
}

/// More points found, then lower cost.
fn better(a: (usize, f64), b: (usize, f64)) -> bool {
    a.0 > b.0 || (a.0 == b.0 && a.1 < b.1)
}
