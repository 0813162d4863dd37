//! Neighbour queries over spot centres for the path walk.
//!
//! Goes in: the [`Spot`]s of one photo (pixels). Comes out: a [`SpotTree`] that answers
//! "the k nearest" and "the k nearest within a radius" with [`Neighbour`]s, nearest first (ties
//! by spot index). Method: a static kd-tree (the `kiddo` crate's `ImmutableKdTree`) under the
//! squared Euclidean metric.

use crate::detect::Spot;
use kiddo::{ImmutableKdTree, SquaredEuclidean};
use serde::{Deserialize, Serialize};
use std::num::NonZero;

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
