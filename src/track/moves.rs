//! Candidate steps of the walk: constant-acceleration steps and steps across a bounce.
//!
//! Goes in: a [`Walk`]. Comes out: at most [`BRANCH`] [`Move`]s, cheapest first. Method (ours,
//! steps 4 and 5 of the module documentation of [`crate::track`]): spots inside the gate around
//! each prediction `k = 1..=1 + max_misses` flashes ahead; when none fits, spots inside a window
//! past a reflection on the floor (restitution between `min_restitution` and its inverse), and
//! after a bounce the spots whose arc meets the arc before the bounce.

use super::walk::{Finder, Move, Walk};
use crate::core::vec2::{add, dot, norm, scale, sub};

/// Candidates compared per step.
pub(super) const BRANCH: usize = 3;
/// Candidates compared per step across a bounce or a change of acceleration.
const BOUNCE_BRANCH: usize = 12;
/// Spots looked at per bounce window.
const WINDOW_QUERY: usize = 64;
/// Cost of one missed flash when candidates are compared (in squared gates).
const MISS_COST: f64 = 0.3;
/// Acceleration of a ball rolling down an incline, as a fraction of gravity, assumed for the
/// first step after the end of an incline is found (mid-range: 0.1 at 10 degrees, 0.6 at 60).
const ROLLING_FRACTION: f64 = 0.3;
/// Largest relative difference between the acceleration of the arcs on the two sides of a
/// bounce, as the walk sees it. Air drag adds to gravity on the way up and takes from it on the
/// way down (by half of it for a drag force of a quarter of the weight); a flash miscounted on
/// every step changes it by a factor of four (0.75 or 3 relative).
const GRAVITY_TOLERANCE: f64 = 0.6;
/// Cosine of the largest angle between the measured acceleration and image down for a bounce.
const MIN_DOWN_COS: f64 = 0.85;

impl Finder<'_> {
    /// Candidate next steps, cheapest first: constant-acceleration steps, or, when none fits,
    /// steps across a bounce and steps where the acceleration changes (the end of an incline).
    /// Steps across a bounce are compared by walking on, so more of them are kept: on a
    /// straight-down drop every image above the bounce lies in the window, and only the images
    /// after it tell which is the rebound.
    pub(super) fn moves(&self, walk: &Walk) -> Vec<Move> {
        let mut moves = Vec::new();
        let arc_len = walk.nodes.len() - walk.arc_start;
        let r_px = self.local_radius(walk);
        for k in 1..=1 + self.limits.max_misses as i64 {
            let Some((p, gate_px)) = self.predict(walk, k) else {
                break;
            };
            let miss_cost = MISS_COST * (k - 1) as f64;
            for nb in self.tree.within(p[0], p[1], gate_px, BRANCH + 8) {
                if !self.usable(nb.index, r_px) || !self.same_gravity(walk, nb.index, k) {
                    continue;
                }
                let r = nb.distance_px / gate_px;
                moves.push(Move {
                    item: nb.index,
                    k,
                    bounce: false,
                    kink: None,
                    cost: r * r + miss_cost,
                });
                if moves.iter().filter(|m| m.k == k).count() == BRANCH {
                    break;
                }
            }
        }
        let mut keep = BRANCH;
        if moves.is_empty() {
            if arc_len == 1 {
                self.after_bounce_moves(walk, &mut moves);
            } else {
                self.bounce_moves(walk, &mut moves);
                self.kink_moves(walk, &mut moves);
            }
            keep = BOUNCE_BRANCH;
        }
        moves.sort_by(|a, b| a.cost.total_cmp(&b.cost));
        moves.truncate(keep);
        moves
    }

    /// A step that gives the arc after a bounce its third image must give it the acceleration of
    /// the arc before the bounce (one gravity, when that arc had four images or more), within
    /// [`GRAVITY_TOLERANCE`] and three sigmas of the centres. Two images after a bounce leave their
    /// flash count open; the big gate of a two-point prediction then lets a chain at every other
    /// flash (a quarter of the acceleration per step squared) or at twice the rate through, which
    /// stays consistent with itself ever after. True for any other step.
    fn same_gravity(&self, walk: &Walk, item: usize, k: i64) -> bool {
        let arc = &walk.nodes[walk.arc_start..];
        // The arc before the bounce measured its acceleration from four images or more (not
        // carried over from further back, not guessed at the end of an incline).
        let before = arc
            .first()
            .map_or(0, |a| walk.arc_start - a.saved.arc_start);
        let (Some(carried), true) = (
            walk.carried_accel,
            arc.len() == 2 && arc[0].bounce_before && before >= 4,
        ) else {
            return true;
        };
        let (t0, t1) = (arc[0].n as f64, arc[1].n as f64);
        let t2 = t1 + k as f64;
        let (p0, p1, p2) = (self.pos(arc[0].item), self.pos(arc[1].item), self.pos(item));
        let d1 = scale(sub(p1, p0), 1.0 / (t1 - t0));
        let d2 = scale(sub(p2, p1), 1.0 / (t2 - t1));
        let implied = scale(sub(d2, d1), 2.0 / (t2 - t0));
        // The second divided difference of three unit-spaced centres has sigma sqrt(6) sigma.
        let noise_px = 3.0 * 6f64.sqrt() * self.sigma_px;
        norm(sub(implied, carried)) <= GRAVITY_TOLERANCE * norm(carried) + noise_px
    }

    /// Steps from the last point of a flight arc where the acceleration changes: the ball leaves an
    /// incline for free flight, seen backward in time. Position and velocity are continuous there,
    /// so the next image lies where some acceleration (a mean of the two) would put it; the one the
    /// step implies must be no larger than the measured one (gravity is the largest acceleration on
    /// a path). Its direction is left free: the last point may already lie past the change (its
    /// image mixes the two accelerations into the velocity).
    fn kink_moves(&self, walk: &Walk, moves: &mut Vec<Move>) {
        let arc_len = walk.nodes.len() - walk.arc_start;
        let (Some(last), Some(v), Some(a)) =
            (walk.nodes.last(), self.velocity(walk), self.accel(walk))
        else {
            return;
        };
        // Only from a flight arc (its acceleration, gravity, points down the picture): the
        // largest acceleration on a path, which bounds the change.
        if arc_len < 3 || norm(v) <= 0.0 || gravity_direction(Some(a))[1] < MIN_DOWN_COS {
            return;
        }
        let origin = self.pos(last.item);
        let r_px = self.local_radius(walk);
        for k in 1..=1 + self.limits.max_misses as i64 {
            let kf = k as f64;
            // The implied acceleration may exceed the measured one by the centres' noise.
            let slack = 2.0 * 3.0 * self.sigma_px * 20f64.sqrt() / (kf * kf);
            if norm(a) < 2.0 * slack {
                // The acceleration is not known well enough to bound the change (the slow
                // start of an incline, where images overlap): no step of this kind.
                break;
            }
            // Constant velocity; the acceleration moves the image by accel k^2 / 2.
            let coast = add(origin, scale(v, kf));
            let reach_px = (norm(a) + slack) * kf * kf / 2.0;
            for nb in self.tree.within(coast[0], coast[1], reach_px, WINDOW_QUERY) {
                if !self.usable(nb.index, r_px) {
                    continue;
                }
                let implied = scale(sub(self.pos(nb.index), coast), 2.0 / (kf * kf));
                if norm(implied) > norm(a) + slack {
                    continue;
                }
                // The implied acceleration carries the last point's own error (its velocity
                // mixes the two accelerations). A ball rolling down a line accelerates along
                // it, by g sin(angle) / (1 + k): 0.1 to 0.6 g for inclines of 10 to 60 degrees;
                // ROLLING_FRACTION of the measured acceleration (gravity) along the step, until
                // the new arc has three points.
                let step = sub(origin, self.pos(nb.index));
                let length = norm(step);
                if length <= 0.0 {
                    continue;
                }
                let carried = scale(step, ROLLING_FRACTION * norm(a) / length);
                moves.push(Move {
                    item: nb.index,
                    k,
                    bounce: false,
                    kink: Some(carried),
                    cost: 1.0 + MISS_COST * (k - 1) as f64,
                });
            }
        }
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
                r_px: self.local_radius(walk),
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
                    kink: None,
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
                r_px: self.local_radius(walk),
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
                    kink: None,
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
            if self.usable(nb.index, window.r_px)
                && du >= u[0]
                && du <= u[1]
                && dw >= w[0]
                && dw <= w[1]
            {
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
        // The contact is the lowest point of the ball's centre: the images around it lie no
        // lower (along gravity) than where the arcs meet. On a straight-down drop this is what
        // tells the rebound from the same rise a flash later, which meets the fall higher up.
        let contact = arc(p0, v0, t_meet - t0);
        let tolerance_px = self.limits.gate_radii * self.r_ref_px + 3.0 * self.sigma_px;
        let lowest = [p0, p1, self.pos(item)]
            .iter()
            .map(|p| dot(sub(*p, contact), down))
            .fold(f64::NEG_INFINITY, f64::max);
        if lowest > tolerance_px {
            return f64::INFINITY;
        }
        norm(add(gap_at_t0, scale(slope, s)))
    }
}

/// A box after a bounce, pixels from `origin`: `u` along the floor, `w` along gravity.
#[derive(Debug, Clone, Copy)]
struct Window {
    origin: [f64; 2],
    /// The ball's radius where the walk is, pixels.
    r_px: f64,
    down: [f64; 2],
    u: [f64; 2],
    w: [f64; 2],
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
