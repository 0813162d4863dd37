//! In-line paths: a ball that falls and rises along one line (a drop straight down, a throw
//! straight up) passes over its own earlier images, so a walk from image to nearest image mixes
//! the fall with the rise.
//!
//! Goes in: the valid spots and which are taken. Comes out: a [`Chain`] in flash order when
//! the spots lie on one steep line and bouncing arcs explain them, else `None` (the walk
//! decides).
//!
//! Method (ours, a RANSAC-style search after Fischler and Bolles 1981, "Random sample
//! consensus", over exhaustive samples): the centres are projected on their total-least-squares
//! line, `s` pixels along it, positive downwards. In one flight arc `s` is a parabola in the
//! flash index with positive curvature. Every three spots with flash gaps of 1 or 2 define such
//! a parabola; its support is the number of spots that lie on its flashes (within
//! `TOL_R * r + 3 sigma`) less those of its flashes inside its supported span that have no spot
//! within `EMPTY_R * r` (the ball would show there). The best-supported arc is kept, refitted to
//! its spots by least squares, and the search is repeated for arcs of the same curvature
//! (within `CURVATURE_SPREAD`; of the curvature the flash rate and the scale give, when known,
//! from the first arc on) with at least `MIN_NEW` spots not yet explained. Arcs are put in
//! time order by their tops (each bounce loses height) and joined at the floor: the time offset
//! between two arcs is the whole number of flashes that makes them cross lowest while still
//! below every image of both (the ball meets the floor after its lowest images). The first arc
//! in time is turned so that its better-seen side falls, and keeps of its rising side only the
//! hits that run unbroken up to its top and are not also hits of the falling side (a ball
//! released near a whole or half flash before its first image puts the parabola's mirror
//! half on the fall's own images). A spot that
//! two predicted images share (nearer than `SHARED_R * r` to each other) is left off the path:
//! its centre is a blend of both.

use super::walk::{Chain, ChainNode};
use crate::detect::Spot;

/// Match tolerance, in ball radii (plus three centre sigmas).
const TOL_R: f64 = 0.2;
/// A predicted image with no spot within this many radii is empty.
const EMPTY_R: f64 = 0.6;
/// Two predicted images nearer than this many radii share a spot.
const SHARED_R: f64 = 0.5;
/// Largest spread of the centres across the line, in radii.
const ACROSS_R: f64 = 0.5;
/// Smallest length of the line of centres, in radii.
const MIN_LENGTH_R: f64 = 8.0;
/// Steepest angle of the line from the image vertical, degrees.
const MAX_TILT_DEG: f64 = 30.0;
/// Largest relative difference of a later arc's curvature from the first arc's.
const CURVATURE_SPREAD: f64 = 0.25;
/// Largest relative difference of an arc's curvature from the one rate and scale give (camera
/// roll, drag and the ball's scale move it by a few per cent).
const KNOWN_CURVATURE_SPREAD: f64 = 0.1;
/// Fewest spots a later arc must explain that no earlier arc explains.
const MIN_NEW: usize = 3;
/// Fewest spots of the first arc.
const MIN_FIRST: usize = 4;
/// Most spots searched (the search is cubic in them).
const MAX_SPOTS: usize = 80;

/// One arc: s = a + b n + c n^2 in its own flash count.
#[derive(Debug, Clone, Copy)]
struct Arc {
    a: f64,
    b: f64,
    c: f64,
}

impl Arc {
    fn at(&self, n: f64) -> f64 {
        self.a + self.b * n + self.c * n * n
    }
    fn top_n(&self) -> f64 {
        -self.b / (2.0 * self.c)
    }
    fn top_s(&self) -> f64 {
        self.at(self.top_n())
    }
    /// Flash counts (fractional) where the arc is at level `s`: (rising side, falling side).
    fn crossings(&self, s: f64) -> Option<(f64, f64)> {
        let h = s - self.top_s();
        (h >= 0.0).then(|| {
            let w = (h / self.c).sqrt();
            (self.top_n() - w, self.top_n() + w)
        })
    }
}

/// The spots projected on their line.
struct Line {
    /// Valid spot index of each projected spot.
    items: Vec<usize>,
    /// Position along the line, pixels, positive downwards.
    s: Vec<f64>,
    r_px: f64,
    tol_px: f64,
    bottom_s: f64,
}

/// The in-line chain of the spots not `taken`, when they lie on one steep line and arcs explain
/// at least `min_points` of them.
pub(super) fn in_line_chain(
    items: &[Spot],
    taken: &[bool],
    min_points: usize,
    fall_px_per_flash2: Option<f64>,
) -> Option<Chain> {
    let line = project(items, taken)?;
    let arcs = find_arcs(&line, fall_px_per_flash2);
    let ordered = join(&line, arcs)?;
    let chain = assign(&line, &ordered);
    (chain.nodes.len() >= min_points.max(MIN_FIRST + MIN_NEW)).then_some(chain)
}

/// Project the free spots on their total-least-squares line; None unless the line is long,
/// steep and thin.
fn project(items: &[Spot], taken: &[bool]) -> Option<Line> {
    let free: Vec<usize> = (0..items.len()).filter(|&i| !taken[i]).collect();
    if free.len() < MIN_FIRST + MIN_NEW || free.len() > MAX_SPOTS {
        return None;
    }
    let nf = free.len() as f64;
    let mx = free.iter().map(|&i| items[i].x_px).sum::<f64>() / nf;
    let my = free.iter().map(|&i| items[i].y_px).sum::<f64>() / nf;
    let (mut sxx, mut sxy, mut syy) = (0.0, 0.0, 0.0);
    for &i in &free {
        let (dx, dy) = (items[i].x_px - mx, items[i].y_px - my);
        sxx += dx * dx;
        sxy += dx * dy;
        syy += dy * dy;
    }
    // Direction of the largest spread (principal axis), pointing down the image.
    let angle = 0.5 * (2.0 * sxy).atan2(sxx - syy);
    let (mut ux, mut uy) = (angle.cos(), angle.sin());
    if uy < 0.0 {
        (ux, uy) = (-ux, -uy);
    }
    if uy < MAX_TILT_DEG.to_radians().cos() {
        return None;
    }
    let mut radii: Vec<f64> = free.iter().map(|&i| items[i].r_px).collect();
    radii.sort_by(f64::total_cmp);
    let r_px = radii[radii.len() / 2];
    let mut sigmas: Vec<f64> = free.iter().map(|&i| items[i].sigma_px).collect();
    sigmas.sort_by(f64::total_cmp);
    let sigma_px = sigmas[sigmas.len() / 2];
    let across = |i: usize| ((items[i].x_px - mx) * uy - (items[i].y_px - my) * ux).abs();
    if free.iter().any(|&i| across(i) > ACROSS_R * r_px) {
        return None;
    }
    let s: Vec<f64> = free
        .iter()
        .map(|&i| (items[i].x_px - mx) * ux + (items[i].y_px - my) * uy)
        .collect();
    let (lo, hi) = s
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &v| {
            (a.min(v), b.max(v))
        });
    if hi - lo < MIN_LENGTH_R * r_px {
        return None;
    }
    Some(Line {
        items: free,
        s,
        r_px,
        tol_px: TOL_R * r_px + 3.0 * sigma_px,
        bottom_s: hi,
    })
}

/// The spots an arc explains: (local flash count, projected spot) pairs, nearest spot per
/// flash, and the count of empty flashes inside the supported span.
fn support(line: &Line, arc: &Arc) -> (Vec<(i64, usize)>, usize) {
    let level = line.bottom_s + line.tol_px;
    let Some((n0, n1)) = arc.crossings(level) else {
        return (Vec::new(), 0);
    };
    if n1 - n0 > 400.0 {
        return (Vec::new(), 0);
    }
    let mut hits = Vec::new();
    let mut empty_at = Vec::new();
    for n in n0.ceil() as i64..=n1.floor() as i64 {
        let p = arc.at(n as f64);
        let (j, d) = nearest(&line.s, p);
        if d <= line.tol_px {
            hits.push((n, j));
        } else if d > EMPTY_R * line.r_px {
            empty_at.push(n);
        }
    }
    let (first, last) = match (hits.first(), hits.last()) {
        (Some(a), Some(b)) => (a.0, b.0),
        _ => return (hits, 0),
    };
    let empty = empty_at.iter().filter(|&&n| n > first && n < last).count();
    (hits, empty)
}

/// Index and distance of the projected spot nearest `p`.
fn nearest(s: &[f64], p: f64) -> (usize, f64) {
    s.iter()
        .enumerate()
        .map(|(j, &v)| (j, (v - p).abs()))
        .min_by(|a, b| a.1.total_cmp(&b.1))
        .unwrap_or((0, f64::INFINITY))
}

/// Distinct spots among the hits that no earlier arc explains (a spot two flashes of one arc
/// share counts once).
fn distinct_new(hits: &[(i64, usize)], explained: &[bool]) -> usize {
    let mut js: Vec<usize> = hits
        .iter()
        .map(|h| h.1)
        .filter(|&j| !explained[j])
        .collect();
    js.sort_unstable();
    js.dedup();
    js.len()
}

/// The parabola through (0, s0), (d1, s1), (d1 + d2, s2).
fn through(s0: f64, s1: f64, s2: f64, d1: f64, d2: f64) -> Arc {
    let f01 = (s1 - s0) / d1;
    let f12 = (s2 - s1) / d2;
    let c = (f12 - f01) / (d1 + d2);
    Arc {
        a: s0,
        b: f01 - c * d1,
        c,
    }
}

/// Least-squares parabola through the hits (local flash count, spot).
fn refit(line: &Line, hits: &[(i64, usize)]) -> Option<Arc> {
    let mut m = nalgebra::Matrix3::<f64>::zeros();
    let mut v = nalgebra::Vector3::<f64>::zeros();
    for &(n, j) in hits {
        let row = nalgebra::Vector3::new(1.0, n as f64, (n * n) as f64);
        m += row * row.transpose();
        v += row * line.s[j];
    }
    let x = m.lu().solve(&v)?;
    (x[2] > 0.0).then_some(Arc {
        a: x[0],
        b: x[1],
        c: x[2],
    })
}

/// Arcs found one after another, each with its hits.
fn find_arcs(line: &Line, fall_px_per_flash2: Option<f64>) -> Vec<(Arc, Hits)> {
    let mut explained = vec![false; line.s.len()];
    let mut arcs: Vec<(Arc, Hits)> = Vec::new();
    loop {
        let c_ref = match fall_px_per_flash2 {
            Some(c) => Some((c, KNOWN_CURVATURE_SPREAD)),
            None => arcs.first().map(|a| (a.0.c, CURVATURE_SPREAD)),
        };
        let needed = if arcs.is_empty() { MIN_FIRST } else { MIN_NEW };
        let Some((arc, hits)) = best_arc(line, &explained, c_ref, needed) else {
            break;
        };
        let new = distinct_new(&hits, &explained);
        if new < needed {
            break;
        }
        for h in &hits {
            explained[h.1] = true;
        }
        arcs.push((arc, hits));
    }
    arcs
}

/// The best-supported arc over every sample of three spots (gaps 1 or 2), refitted; with
/// `c_ref` only arcs of that curvature (within its relative spread). `needed`: the new spots
/// an arc must explain to be kept.
fn best_arc(
    line: &Line,
    explained: &[bool],
    c_ref: Option<(f64, f64)>,
    needed: usize,
) -> Option<(Arc, Hits)> {
    let n = line.s.len();
    let curvature_ok =
        |c: f64| c > 0.0 && c_ref.is_none_or(|(r, spread)| (c - r).abs() <= spread * r);
    // Of arcs as well supported, one with the `needed` new spots to be kept wins: one without
    // them would end the search while another as good is there.
    let mut best: Option<((i64, bool), Arc)> = None;
    for i in 0..n {
        for j in 0..n {
            for k in 0..n {
                if i == j || j == k || i == k || explained[i] && explained[j] && explained[k] {
                    continue;
                }
                for (d1, d2) in [(1.0, 1.0), (1.0, 2.0), (2.0, 1.0), (2.0, 2.0)] {
                    let arc = through(line.s[i], line.s[j], line.s[k], d1, d2);
                    if !curvature_ok(arc.c) {
                        continue;
                    }
                    let (hits, empty) = support(line, &arc);
                    let new = distinct_new(&hits, explained);
                    let score = new as i64 - 2 * empty as i64;
                    let rank = (score, new >= needed);
                    if best.as_ref().is_none_or(|b| rank > b.0) {
                        best = Some((rank, arc));
                    }
                }
            }
        }
    }
    let (_, arc) = best?;
    let (hits, _) = support(line, &arc);
    let arc = refit(line, &hits).filter(|a| curvature_ok(a.c))?;
    let (hits, _) = support(line, &arc);
    Some((arc, hits))
}

/// Hits of one arc: (local flash count, projected spot).
type Hits = Vec<(i64, usize)>;

/// The arc and its hits with time reversed (a vertical arc looks the same both ways).
fn flipped(arc: &Arc, hits: &Hits) -> (Arc, Hits) {
    let arc = Arc {
        a: arc.a,
        b: -arc.b,
        c: arc.c,
    };
    let mut hits: Hits = hits.iter().map(|&(n, j)| (-n, j)).collect();
    hits.reverse();
    (arc, hits)
}

/// Distinct spots among `hits` on the falling side of `arc` (flash count past its top), and
/// on its rising side.
fn sides(arc: &Arc, hits: &Hits) -> (Vec<usize>, Vec<usize>) {
    let top = arc.top_n();
    let distinct = |falling: bool| {
        let mut js: Vec<usize> = hits
            .iter()
            .filter(|h| (h.0 as f64 >= top) == falling)
            .map(|h| h.1)
            .collect();
        js.sort_unstable();
        js.dedup();
        js
    };
    (distinct(true), distinct(false))
}

/// The first arc turned so that its better-seen side falls (a drop falls from its release; a
/// throw upwards falls further than it rose), with the hits the ball can have made: all of the
/// falling side, and of the rising side only the run of hit flashes that reaches up to the top
/// without a break, less the spots the falling side also hits. A ball released near a flash
/// (or half a flash) before its first image puts the mirror image of every falling flash on a
/// spot, and the arc's far rising side reaches images of a later arc: neither is the ball.
fn first_arc(arc: &Arc, hits: &Hits) -> (Arc, Hits) {
    let (falling, rising) = sides(arc, hits);
    let (arc, hits) = if rising.len() > falling.len() {
        flipped(arc, hits)
    } else {
        (*arc, hits.clone())
    };
    (arc, falling_side(&arc, hits))
}

/// The hits of a first arc already turned (see [`first_arc`]).
fn falling_side(arc: &Arc, hits: Hits) -> Hits {
    let top = arc.top_n();
    let (falling, _) = sides(arc, &hits);
    let hit_at = |n: i64| hits.iter().any(|h| h.0 == n);
    let mut run_start = top.ceil() as i64;
    while hit_at(run_start - 1) && (run_start - 1) as f64 <= top {
        run_start -= 1;
    }
    hits.iter()
        .copied()
        .filter(|h| h.0 as f64 >= top || (h.0 >= run_start && !falling.contains(&h.1)))
        .collect()
}

/// Arcs in time order, each turned the way time runs, with the flash offset of each (global
/// n = local n + offset); None when two arcs cannot be joined at the floor.
fn join(line: &Line, mut arcs: Vec<(Arc, Hits)>) -> Option<Vec<(Arc, i64)>> {
    // Highest top first: every bounce loses height.
    arcs.sort_by(|a, b| a.0.top_s().total_cmp(&b.0.top_s()));
    let (first, first_hits) = arcs.first()?;
    // The first arc ends falling towards the floor.
    let (first, first_hits) = first_arc(first, first_hits);
    let mut out = vec![(first, first_hits, 0_i64)];
    for (arc, hits) in &arcs[1..] {
        let (before, hits_before, offset_before) = out.last()?.clone();
        let mut chosen: Option<((usize, f64), Arc, Hits, i64)> = None;
        for (after, hits_after) in [(*arc, hits.clone()), flipped(arc, hits)] {
            let Some((rank, offset)) = offset_at_floor(
                line,
                (&before, &hits_before, offset_before),
                (&after, &hits_after),
            ) else {
                continue;
            };
            if chosen.as_ref().is_none_or(|c| rank < c.0) {
                chosen = Some((rank, after, hits_after, offset));
            }
        }
        let (_, after, hits_after, offset) = chosen?;
        out.push((after, hits_after, offset));
    }
    Some(out.into_iter().map(|(a, _, o)| (a, o)).collect())
}

/// The flash offset that joins arc `after` to arc `before` (already placed at its offset) at
/// the floor, with its rank (flashes with no image between the two arcs, then the crossing
/// level): the crossing lies below every image of both and between the last image before and
/// the first after.
fn offset_at_floor(
    line: &Line,
    (before, hits_before, offset_before): (&Arc, &Hits, i64),
    (after, hits_after): (&Arc, &Hits),
) -> Option<((usize, f64), i64)> {
    let last_before = hits_before.iter().map(|h| h.0).max()? + offset_before;
    let first_after = hits_after.iter().map(|h| h.0).min()?;
    let lowest = hits_before
        .iter()
        .chain(hits_after)
        .map(|h| line.s[h.1])
        .fold(f64::NEG_INFINITY, f64::max);
    let mut chosen: Option<((usize, f64), i64)> = None;
    for k in 1..=6 {
        let offset = last_before + k - first_after;
        let Some((t_cross, level)) = crossing(before, offset_before, after, offset) else {
            continue;
        };
        let ordered = t_cross > last_before as f64 && t_cross < (first_after + offset) as f64;
        if level < lowest - line.tol_px || !ordered {
            continue;
        }
        let empty = (last_before + 1..first_after + offset)
            .filter(|&n| {
                let p = if (n as f64) < t_cross {
                    before.at((n - offset_before) as f64)
                } else {
                    after.at((n - offset) as f64)
                };
                nearest(&line.s, p).1 > EMPTY_R * line.r_px
            })
            .count();
        let rank = (empty, level);
        if chosen.is_none_or(|c| rank < c.0) {
            chosen = Some((rank, offset));
        }
    }
    chosen
}

/// Global flash count and level where the falling side of `before` (global n = local + ob) meets
/// the rising side of `after` (global n = local + oa), when they meet between the two tops.
fn crossing(before: &Arc, ob: i64, after: &Arc, oa: i64) -> Option<(f64, f64)> {
    let (tb, ta) = (before.top_n() + ob as f64, after.top_n() + oa as f64);
    if ta <= tb {
        return None;
    }
    // Bisection on f(n) = s_before(n) - s_after(n) between the tops: before falls, after rises.
    let f = |n: f64| before.at(n - ob as f64) - after.at(n - oa as f64);
    let (mut lo, mut hi) = (tb, ta);
    if f(lo) >= 0.0 || f(hi) <= 0.0 {
        return None;
    }
    for _ in 0..60 {
        let mid = 0.5 * (lo + hi);
        if f(mid) < 0.0 {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    let n = 0.5 * (lo + hi);
    Some((n, before.at(n - ob as f64)))
}

/// The chain: each arc's hits at their global flash, a spot kept only where no other predicted
/// image lies within `SHARED_R` radii of its own, and only once.
fn assign(line: &Line, arcs: &[(Arc, i64)]) -> Chain {
    let mut predicted: Vec<(i64, f64)> = Vec::new();
    let mut per_arc = Vec::new();
    for (w, (arc, offset)) in arcs.iter().enumerate() {
        let (hits, _) = support(line, arc);
        let hits = if w == 0 {
            falling_side(arc, hits)
        } else {
            hits
        };
        let hits: Vec<(i64, usize)> = hits.iter().map(|&(n, j)| (n + offset, j)).collect();
        for &(n, _) in &hits {
            predicted.push((n, arc.at((n - offset) as f64)));
        }
        per_arc.push(hits);
    }
    let shared = |n: i64, p: f64| {
        predicted
            .iter()
            .any(|&(m, q)| m != n && (q - p).abs() < SHARED_R * line.r_px)
    };
    let mut used = vec![0usize; line.s.len()];
    for hits in &per_arc {
        for &(_, j) in hits {
            used[j] += 1;
        }
    }
    let mut nodes: Vec<ChainNode> = Vec::new();
    for (w, hits) in per_arc.iter().enumerate() {
        let (arc, offset) = &arcs[w];
        let mut arc_nodes: Vec<ChainNode> = hits
            .iter()
            .filter(|&&(n, j)| used[j] == 1 && !shared(n, arc.at((n - offset) as f64)))
            .map(|&(n, j)| ChainNode {
                item: line.items[j],
                n,
                bounce_after: false,
            })
            .collect();
        if let Some(last) = arc_nodes.last_mut() {
            last.bounce_after = w + 1 < per_arc.len();
        }
        nodes.extend(arc_nodes);
    }
    nodes.sort_by_key(|node| node.n);
    nodes.dedup_by_key(|node| node.n);
    Chain {
        nodes,
        r_ref_px: line.r_px,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn an_arc_that_can_be_kept_wins_a_tie_of_support() {
        // The state of the arc search on sweep shot 5 (tests/data/drop_first_step_miscounted.toml,
        // JPEG 70) after its first three arcs, logged from a detector whose centres differed by
        // 0.01-0.02 px from today's (enough to turn which tied arc came first): 15 spots
        // along the line (pixels), the 11 that the three arcs explain, the fall per flash squared
        // that the rate and scale give. The drop's first arc (its three images at -749.6, -529.0
        // and -118.5 px, one flash between the last two empty) scores 3 - 2 = 1; an arc through
        // explained spots and one new one scores 1 too and came first in the spots' order, so the
        // search ended without the first arc and the path began at the floor.
        let s = vec![
            -118.48644720006614,
            265.5356915501419,
            -219.796974908884,
            343.4842871607144,
            328.3917630833311,
            -40.69080726863946,
            -8.21495765285847,
            -209.0287453487612,
            382.511974533529,
            -528.9925728947494,
            -749.6105363213919,
            51.79316358003636,
            209.64048999804555,
            130.0857974822174,
            163.37787420733594,
        ];
        let explained: Vec<bool> = [0, 1, 1, 1, 1, 1, 1, 1, 1, 0, 0, 1, 1, 1, 1]
            .iter()
            .map(|&e| e == 1)
            .collect();
        let line = Line {
            items: (0..s.len()).collect(),
            s,
            r_px: 7.6720979473713395,
            tol_px: 1.6295623429654817,
            bottom_s: 382.511974533529,
        };
        let c_ref = Some((95.9471220452874, KNOWN_CURVATURE_SPREAD));
        let (_, hits) = best_arc(&line, &explained, c_ref, MIN_NEW).expect("an arc");
        let mut found: Vec<usize> = hits.iter().map(|h| h.1).collect();
        found.sort_unstable();
        assert_eq!(found, vec![0, 9, 10], "the drop's first arc");
        assert!(distinct_new(&hits, &explained) >= MIN_NEW);
    }
}
