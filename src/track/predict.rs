//! Predictions of the walk: acceleration, velocity and the next position with its gate.
//!
//! Goes in: a [`Walk`] (its current arc and what was carried over the last bounce). Comes out:
//! the arc's acceleration and velocity (divided differences, pixels per flash) and the position
//! `k` flashes ahead with the radius of its search gate. Method: Lagrange (Newton) interpolation
//! through the last three points of the arc (constant acceleration), or two points plus the
//! acceleration carried over a bounce; the gate adds the centre sigma propagated through the
//! interpolation weights.

use super::walk::{Finder, Node, Walk};
use crate::core::vec2::{add, norm, scale, sub};

impl Finder<'_> {
    /// Acceleration of the current arc, pixels per flash^2 (second divided difference, leaving
    /// out the last point when the arc is long enough), or the one carried over a bounce.
    pub(super) fn accel(&self, walk: &Walk) -> Option<[f64; 2]> {
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
    pub(super) fn velocity(&self, walk: &Walk) -> Option<[f64; 2]> {
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
    /// pixels. The gate is at most half the distance to the predictions one flash earlier and
    /// one flash later (through three points), so that a candidate inside it is `k` flashes
    /// ahead and no other number: where the images are close (a slow start), the physics, not
    /// the gate, counts the flashes missing across a gap.
    pub(super) fn predict(&self, walk: &Walk, k: i64) -> Option<([f64; 2], f64)> {
        let (position, weights_sq, spread) = self.position_ahead(walk, k as f64)?;
        let base_px = self.limits.gate_radii * self.r_ref_px * k as f64 * spread;
        let earlier = match k {
            1 => walk.nodes.last().map(|node| self.pos(node.item))?,
            _ => self.position_ahead(walk, (k - 1) as f64)?.0,
        };
        let later = self.position_ahead(walk, (k + 1) as f64)?.0;
        // Through two points and a carried acceleration the prediction is rough: no tightening.
        let half_step_px = if spread > 1.0 {
            f64::INFINITY
        } else {
            0.5 * norm(sub(position, earlier)).min(norm(sub(later, position)))
        };
        let gate_px = base_px.min(half_step_px) + 3.0 * self.sigma_px * (1.0 + weights_sq).sqrt();
        (position[0].is_finite() && position[1].is_finite() && gate_px.is_finite())
            .then_some((position, gate_px))
    }

    /// Position `k` flashes past the last point of the walk's arc, the sum of the squared
    /// interpolation weights and the gate's spread (1 through three points, 2 through two and
    /// the acceleration carried over a bounce).
    fn position_ahead(&self, walk: &Walk, kf: f64) -> Option<([f64; 2], f64, f64)> {
        let arc = &walk.nodes[walk.arc_start..];
        let len = arc.len();
        if len >= 3 {
            let (t, p) = self.samples(&arc[len - 3..]);
            let at = t[2] + kf;
            let w = [
                (at - t[1]) * (at - t[2]) / ((t[0] - t[1]) * (t[0] - t[2])),
                (at - t[0]) * (at - t[2]) / ((t[1] - t[0]) * (t[1] - t[2])),
                (at - t[0]) * (at - t[1]) / ((t[2] - t[0]) * (t[2] - t[1])),
            ];
            let position = add(add(scale(p[0], w[0]), scale(p[1], w[1])), scale(p[2], w[2]));
            Some((position, w.iter().map(|v| v * v).sum::<f64>(), 1.0))
        } else if len == 2 {
            let (t, p) = self.samples(arc);
            let d = t[1] - t[0];
            let a = walk.carried_accel.unwrap_or([0.0, 0.0]);
            let w1 = 1.0 + kf / d;
            let w0 = kf / d;
            let position = add(
                sub(scale(p[1], w1), scale(p[0], w0)),
                scale(a, kf * d / 2.0 + kf * kf / 2.0),
            );
            Some((position, w1 * w1 + w0 * w0, 2.0))
        } else {
            None
        }
    }
}
