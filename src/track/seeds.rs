//! Seeds and the choice between chains.
//!
//! Goes in: the spots not yet on a path. Comes out: seed triples, best first, and the best
//! [`Chain`] walked from them. Method (ours, step 2 of the module documentation of
//! [`crate::track`]): near-neighbour triples that continue each other, smallest second difference
//! first; chains are ranked by points found less flashes missed, less one for each step that
//! passes over another image.

use super::SEEDS_TRIED;
use super::walk::{Chain, Finder};
use crate::core::vec2::{add, dot, norm, scale, sub};

/// Neighbours looked at around a seed's middle spot.
const SEED_NEIGHBOURS: usize = 6;

/// See [`Finder::chain_score`]: a spot this near (in radii) to a step's midpoint was passed over.
/// Under constant acceleration a the image between two flashes lies |a| / 2 (pixels per flash
/// squared) from their midpoint: a few tenths of a radius at most where steps are long.
const SKIPPED_MID_R: f64 = 0.3;

/// See [`Finder::chain_score`]: only steps longer than this many radii are checked (shorter
/// ones cannot hold a separate image between their ends).
const SKIPPED_STEP_R: f64 = 1.2;

impl Finder<'_> {
    /// The longest chain from the best seeds, or none when there is no seed.
    pub(super) fn best_chain(&mut self) -> Option<Chain> {
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
        let mut seeds: Vec<(u8, f64, [usize; 3])> = Vec::new();
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
                    let fit = self.fourth_point_class([a, j, b], r_px);
                    seeds.push((fit, cost, [a, j, b]));
                }
            }
        }
        seeds.sort_by(|x, y| x.0.cmp(&y.0).then(x.1.total_cmp(&y.1)).then(x.2.cmp(&y.2)));
        seeds.into_iter().map(|(_, _, seed)| seed).collect()
    }

    /// How well a seed continues: 0 when a free spot lies within a quarter of a radius-wide
    /// gate of the constant-acceleration prediction one flash before or after it (the third
    /// difference vanishes), 1 within half, 2 within the gate, 3 otherwise. Any three images
    /// in a row fit some constant acceleration; a fourth tells the true triples from the ones
    /// that mix the fall and the rise of a straight-down drop, which lie on the same line.
    fn fourth_point_class(&self, seed: [usize; 3], r_px: f64) -> u8 {
        let [pa, pj, pb] = seed.map(|i| self.pos(i));
        let gate_px = self.limits.gate_radii * r_px + 3.0 * self.sigma_px * 20f64.sqrt();
        let after = add(sub(scale(pb, 3.0), scale(pj, 3.0)), pa);
        let before = add(sub(scale(pa, 3.0), scale(pj, 3.0)), pb);
        let mut best = f64::INFINITY;
        for q in [after, before] {
            for nb in self.tree.nearest(q[0], q[1], 4) {
                if !seed.contains(&nb.index) && !self.taken[nb.index] {
                    best = best.min(nb.distance_px / gate_px);
                }
            }
        }
        match best {
            d if d <= 0.25 => 0,
            d if d <= 0.5 => 1,
            d if d <= 1.0 => 2,
            _ => 3,
        }
    }
}
