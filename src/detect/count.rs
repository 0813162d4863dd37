//! Light counting: how many images of the ball a group of touching spots holds, from the light
//! the group adds to the exposure.
//!
//! Goes in: the photo, its background, the tone curve and the spots found. Comes out:
//! [`LightGroup`]s: the spots whose discs touch or overlap, the light they add over the backdrop
//! (a dark ball: the light it takes from the backdrop), and that light over the light of one
//! isolated image of the ball nearby, which is the number of images in the group.
//!
//! Method (the physics of a long exposure, no published method needed): every flash adds its
//! image's light to the film or sensor, so in linear light (the photo's tone curve inverted)
//! N merged images add N times the light of one. The light is summed over the pixels within
//! `r + margin` of any spot of the group (the margin holds the blur of the rim); one image's
//! light is the median of the five isolated images nearest to the group (the flash's light
//! falls off across the frame). A group with a clipped pixel, or whose light runs on to the
//! frame's edge or past the group, is marked uncertain.

use crate::core::light::{Polarity, Tone};
use crate::detect::Spot;
use crate::image::background::Background;
use crate::image::load::Photo;
use rayon::prelude::*;
use serde::{Deserialize, Serialize};

/// One group of touching spots and the number of images its light holds.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct LightGroup {
    /// The spots of the group (indices into the report's spots), in increasing order.
    pub spots: Vec<usize>,
    /// Centre of the group's light, x, pixels.
    pub x_px: f64,
    /// Centre of the group's light, y, pixels.
    pub y_px: f64,
    /// The light the group adds over the backdrop in units of one isolated image's light
    /// (None when the photo has no isolated image to compare with).
    pub images_by_light: Option<f64>,
    /// `images_by_light` rounded, never fewer than the group's spots.
    pub images: Option<usize>,
    /// The count is not exact: a pixel of the group is clipped (its light is then a lower
    /// bound), or the group's light runs on to the frame's edge or past the group (an image cut
    /// by the frame, or light of something else that touches the ball's images).
    pub uncertain: bool,
}

/// Pixels beyond the fitted radius that still hold the rim's blur: this many pixels plus
/// [`MARGIN_R`] of the radius.
const MARGIN_PX: f64 = 2.0;
/// See [`MARGIN_PX`].
const MARGIN_R: f64 = 0.15;
/// The region of a group grows through light above this fraction of its members' peak.
const FLOOD_FRACTION: f64 = 0.15;
/// A ball of this many grid steps' radius or more is summed on a grid coarser than a pixel.
const STEP_RADII: f64 = 16.0;
/// Isolated images whose median light is one image's light.
const NEAREST_SINGLES: usize = 5;
/// A stored value this near 0 or 1 is clipped.
const CLIP: f32 = 0.002;

/// Light sum of one group.
#[derive(Debug, Clone, Copy)]
struct Sum {
    /// Light over the backdrop, linear units times pixels.
    light: f64,
    /// Light-weighted centre, pixels.
    x: f64,
    y: f64,
    /// Light-weighted spread along the major and minor axes, pixels^2.
    major: f64,
    minor: f64,
    /// A pixel is clipped, or the light runs on to the frame or the box (see
    /// [`LightGroup::uncertain`]).
    uncertain: bool,
}

/// Largest ratio of the light's spread along its major axis to its minor axis for an image
/// taken as one image of the ball: 1 for a round image; two images 0.35 radius apart under one
/// spot give 1.06 (each axis of a uniform disc has variance r^2 / 4, the separation s adds
/// s^2 / 4 along it).
const ROUND: f64 = 1.06;

/// The groups of `spots` (radius `r_px`) and the images their light holds; see the module
/// documentation.
pub fn count_light(
    photo: &Photo,
    bg: &Background,
    tone: Tone,
    spots: &[Spot],
    r_px: f64,
) -> Vec<LightGroup> {
    if spots.is_empty() || !(r_px.is_finite() && r_px > 0.0) {
        return Vec::new();
    }
    let reach = r_px + MARGIN_PX + MARGIN_R * r_px;
    let mut groups = touching(spots, 2.0 * reach);
    let linear = Linear::new(tone);
    let mut sums: Vec<Result<Sum, usize>> = Vec::new();
    // A group whose light reaches another group's spot is one group with it.
    for _ in 0..4 {
        sums = groups
            .par_iter()
            .map(|g| {
                let members: Vec<&Spot> = g.iter().map(|&i| &spots[i]).collect();
                let others: Vec<(usize, &Spot)> = spots
                    .iter()
                    .enumerate()
                    .filter(|(i, _)| !g.contains(i))
                    .collect();
                light_of(photo, bg, &linear, &members, &others, (r_px, reach))
            })
            .collect();
        let joined = join_lit(&groups, &sums);
        if joined.len() == groups.len() {
            break;
        }
        groups = joined;
    }
    // One image's light: a group of one spot whose light is round (not two merged images).
    let singles: Vec<(f64, f64, f64)> = groups
        .iter()
        .zip(&sums)
        .filter_map(|(g, s)| Some((g, s.as_ref().ok()?)))
        .filter(|(g, s)| {
            g.len() == 1
                && !s.uncertain
                && s.light > 0.0
                && s.minor > 0.0
                && (s.major / s.minor).sqrt() <= ROUND
        })
        .map(|(_, s)| (s.x, s.y, s.light))
        .collect();
    groups
        .into_iter()
        .zip(sums)
        .map(|(members, sum)| {
            // Still reaching another group after the joins: its light is not its own.
            let sum = sum.unwrap_or_else(|_| {
                let m: Vec<&Spot> = members.iter().map(|&i| &spots[i]).collect();
                Moments::default().finish(&m, true)
            });
            let unit = one_image_light(&singles, sum.x, sum.y).filter(|_| sum.light > 0.0);
            let images_by_light = unit.map(|u| sum.light / u);
            let images = images_by_light.map(|v| (v.round() as usize).max(members.len()));
            LightGroup {
                spots: members,
                x_px: sum.x,
                y_px: sum.y,
                images_by_light,
                images,
                uncertain: sum.uncertain,
            }
        })
        .collect()
}

/// Groups of spots closer than `distance` to another of the group (single linkage).
fn touching(spots: &[Spot], distance: f64) -> Vec<Vec<usize>> {
    let close = (0..spots.len()).flat_map(|i| {
        (i + 1..spots.len())
            .filter(move |&j| {
                (spots[i].x_px - spots[j].x_px).hypot(spots[i].y_px - spots[j].y_px) < distance
            })
            .map(move |j| (i, j))
    });
    components(spots.len(), close)
}

/// The connected components of `0..n` under the `links`, each in increasing order, in the order
/// of their smallest member (union-find).
fn components(n: usize, links: impl Iterator<Item = (usize, usize)>) -> Vec<Vec<usize>> {
    fn root(parent: &mut [usize], mut i: usize) -> usize {
        while parent[i] != i {
            parent[i] = parent[parent[i]];
            i = parent[i];
        }
        i
    }
    let mut parent: Vec<usize> = (0..n).collect();
    for (a, b) in links {
        let (ra, rb) = (root(&mut parent, a), root(&mut parent, b));
        parent[ra] = rb;
    }
    let mut out: Vec<Vec<usize>> = Vec::new();
    let mut slot = vec![usize::MAX; n];
    for i in 0..n {
        let r = root(&mut parent, i);
        if slot[r] == usize::MAX {
            slot[r] = out.len();
            out.push(Vec::new());
        }
        out[slot[r]].push(i);
    }
    out
}

/// The light of a group over the backdrop in linear light (ball-positive), with its
/// light-weighted centre and spread and whether it is a lower bound. The pixels summed: those
/// within `reach` of a member, and the region of light above [`FLOOD_FRACTION`] of the
/// members' peak that is connected to a member (an image of the group no spot was fitted to),
/// grown by the rim's margin. `others` are the spots of other groups with their indices: a
/// region that reaches one of them is `Err` with its index (the two groups' light is one).
fn light_of(
    photo: &Photo,
    bg: &Background,
    linear: &Linear,
    members: &[&Spot],
    others: &[(usize, &Spot)],
    (r_px, reach): (f64, f64),
) -> Result<Sum, usize> {
    let (w, h) = (photo.width, photo.height);
    // Room for an image no spot was fitted to beyond the group's last spot.
    let pad = r_px + reach;
    let (mut x0, mut y0, mut x1, mut y1) = (f64::MAX, f64::MAX, f64::MIN, f64::MIN);
    for s in members {
        x0 = x0.min(s.x_px - pad);
        y0 = y0.min(s.y_px - pad);
        x1 = x1.max(s.x_px + pad);
        y1 = y1.max(s.y_px + pad);
    }
    let xa = x0.max(0.0).ceil() as usize;
    let ya = y0.max(0.0).ceil() as usize;
    let xb = (x1.min(w as f64 - 1.0).floor() as usize).max(xa);
    let yb = (y1.min(h as f64 - 1.0).floor() as usize).max(ya);
    // A large ball's light is summed on a grid of every `step`-th pixel, each standing for
    // step^2 pixels (the sum of a smooth image is kept; a disc of 16 or more steps' radius
    // loses under 0.1 % of its area to the grid).
    let step = ((r_px / STEP_RADII).floor() as usize).max(1);
    let (bw, bh) = ((xb - xa) / step + 1, (yb - ya) / step + 1);
    let sign = match bg.polarity {
        Polarity::Bright => 1.0,
        Polarity::Dark => -1.0,
    };
    // Excess light and clipping over the box's grid.
    let mut excess = vec![0f64; bw * bh];
    let mut clipped = vec![false; bw * bh];
    for gy in 0..bh {
        for gx in 0..bw {
            let (x, y) = (xa + gx * step, ya + gy * step);
            let v = photo.at(x, y);
            let i = gy * bw + gx;
            excess[i] = sign * (linear.at(v) - linear.at(bg.at(x, y)));
            clipped[i] = !(CLIP..=1.0 - CLIP).contains(&v);
        }
    }
    let grid = Grid {
        size: (bw, bh),
        origin: (xa, ya),
        step,
    };
    let Some(region) = region_of(&excess, &grid, members, reach) else {
        return Ok(Moments::default().finish(members, true));
    };
    let boxed: Vec<&(usize, &Spot)> = others
        .iter()
        .filter(|(_, o)| {
            o.x_px > xa as f64 - r_px
                && o.x_px < xb as f64 + r_px
                && o.y_px > ya as f64 - r_px
                && o.y_px < yb as f64 + r_px
        })
        .collect();
    let near_other = |x: f64, y: f64| {
        boxed
            .iter()
            .find(|(_, o)| (o.x_px - x).hypot(o.y_px - y) < 0.5 * r_px)
            .map(|(i, _)| *i)
    };
    let mut sum = Moments::default();
    let mut uncertain = false;
    let area = (step * step) as f64;
    for (i, _) in region.iter().enumerate().filter(|(_, inside)| **inside) {
        let (bx, by) = (i % bw, i / bw);
        let (x, y) = ((xa + bx * step) as f64, (ya + by * step) as f64);
        if let Some(other) = near_other(x, y) {
            return Err(other);
        }
        let at_edge = bx == 0 || by == 0 || bx + 1 == bw || by + 1 == bh;
        uncertain |= clipped[i] || at_edge;
        sum.add(area * excess[i], x, y);
    }
    Ok(sum.finish(members, uncertain))
}

/// The groups with each group whose light reached another group's spot (`Err(spot)` in
/// `sums`) joined to that spot's group.
fn join_lit(groups: &[Vec<usize>], sums: &[Result<Sum, usize>]) -> Vec<Vec<usize>> {
    let links = sums.iter().enumerate().filter_map(|(g, sum)| {
        let spot = sum.as_ref().err()?;
        Some((g, groups.iter().position(|m| m.contains(spot))?))
    });
    components(groups.len(), links)
        .into_iter()
        .map(|joined| {
            let mut members: Vec<usize> = joined.iter().flat_map(|&g| groups[g].clone()).collect();
            members.sort_unstable();
            members
        })
        .collect()
}

/// A box of the photo sampled every `step` pixels: `size` grid points from pixel `origin`.
struct Grid {
    size: (usize, usize),
    origin: (usize, usize),
    step: usize,
}

/// The grid points of a group: within `reach` of a member, or connected to a member through
/// light above [`FLOOD_FRACTION`] of the members' peak, grown by the rim's margin
/// ([`MARGIN_PX`]). None when the box holds no member.
fn region_of(excess: &[f64], grid: &Grid, members: &[&Spot], reach: f64) -> Option<Vec<bool>> {
    let (bw, bh) = grid.size;
    let step = grid.step as f64;
    // A member's centre in grid units.
    let at = |s: &Spot| {
        (
            (s.x_px - grid.origin.0 as f64) / step,
            (s.y_px - grid.origin.1 as f64) / step,
        )
    };
    let cell = |s: &Spot| -> Option<usize> {
        let (x, y) = at(s);
        let (x, y) = (x.round(), y.round());
        (x >= 0.0 && y >= 0.0 && (x as usize) < bw && (y as usize) < bh)
            .then(|| y as usize * bw + x as usize)
    };
    let seeds: Vec<usize> = members.iter().filter_map(|s| cell(s)).collect();
    let peak = crate::core::stats::finite_median(seeds.iter().map(|&i| excess[i]).collect())?;
    let level = FLOOD_FRACTION * peak.max(0.0);
    let flood = flood_fill(excess, (bw, bh), seeds, level);
    let margin = (MARGIN_PX / step).ceil().max(1.0) as usize;
    let mut region = dilate(&flood, (bw, bh), margin);
    // Each member's disc of radius `reach`, painted over its own bounding square.
    let r = reach / step;
    for s in members {
        let (cx, cy) = at(s);
        let x0 = (cx - r).ceil().max(0.0) as usize;
        let y0 = (cy - r).ceil().max(0.0) as usize;
        let x1 = ((cx + r).floor().max(0.0) as usize).min(bw - 1);
        let y1 = ((cy + r).floor().max(0.0) as usize).min(bh - 1);
        for y in y0..=y1 {
            for x in x0..=x1 {
                let (dx, dy) = (x as f64 - cx, y as f64 - cy);
                if dx * dx + dy * dy <= r * r {
                    region[y * bw + x] = true;
                }
            }
        }
    }
    Some(region)
}

/// The cells connected (4-way) to the `seeds` through values above `level`; the seeds always.
fn flood_fill(values: &[f64], (w, h): (usize, usize), seeds: Vec<usize>, level: f64) -> Vec<bool> {
    let mut flood = vec![false; w * h];
    let mut stack = seeds;
    while let Some(i) = stack.pop() {
        if flood[i] {
            continue;
        }
        flood[i] = true;
        let (x, y) = (i % w, i / w);
        let neighbours = [
            (x > 0).then(|| i - 1),
            (x + 1 < w).then(|| i + 1),
            (y > 0).then(|| i - w),
            (y + 1 < h).then(|| i + w),
        ];
        for j in neighbours.into_iter().flatten() {
            if !flood[j] && values[j] > level {
                stack.push(j);
            }
        }
    }
    flood
}

/// `mask` grown by `m` pixels (a square of side 2m + 1; rows, then columns).
fn dilate(mask: &[bool], (w, h): (usize, usize), m: usize) -> Vec<bool> {
    let mut rows = vec![false; mask.len()];
    for y in 0..h {
        for x in 0..w {
            let (a, b) = (x.saturating_sub(m), (x + m).min(w - 1));
            rows[y * w + x] = (a..=b).any(|xx| mask[y * w + xx]);
        }
    }
    let mut out = vec![false; mask.len()];
    for y in 0..h {
        let (a, b) = (y.saturating_sub(m), (y + m).min(h - 1));
        for x in 0..w {
            out[y * w + x] = (a..=b).any(|yy| rows[yy * w + x]);
        }
    }
    out
}

/// The tone curve inverted by table (4096 steps, linear in between: the sRGB curve's error is
/// then under 1e-6 of full scale), as pixels are many and `powf` is slow.
struct Linear {
    table: Vec<f64>,
}

impl Linear {
    const STEPS: usize = 4096;

    fn new(tone: Tone) -> Linear {
        let table = (0..=Self::STEPS)
            .map(|i| tone.to_linear(i as f32 / Self::STEPS as f32))
            .collect();
        Linear { table }
    }

    fn at(&self, v: f32) -> f64 {
        let t = (v.clamp(0.0, 1.0) as f64) * Self::STEPS as f64;
        let i = (t as usize).min(Self::STEPS - 1);
        let f = t - i as f64;
        self.table[i] + f * (self.table[i + 1] - self.table[i])
    }
}

/// Light-weighted sums of a region.
#[derive(Debug, Default)]
struct Moments {
    light: f64,
    sx: f64,
    sy: f64,
    sxx: f64,
    syy: f64,
    sxy: f64,
}

impl Moments {
    fn add(&mut self, l: f64, x: f64, y: f64) {
        self.light += l;
        self.sx += l * x;
        self.sy += l * y;
        self.sxx += l * x * x;
        self.syy += l * y * y;
        self.sxy += l * x * y;
    }

    /// The sum: centre and spread (the members' mean place when the light is not positive).
    fn finish(&self, members: &[&Spot], uncertain: bool) -> Sum {
        let light = self.light;
        if light <= 0.0 {
            let n = members.len().max(1) as f64;
            return Sum {
                light,
                x: members.iter().map(|s| s.x_px).sum::<f64>() / n,
                y: members.iter().map(|s| s.y_px).sum::<f64>() / n,
                major: 0.0,
                minor: 0.0,
                uncertain,
            };
        }
        let (x, y) = (self.sx / light, self.sy / light);
        let vxx = self.sxx / light - x * x;
        let vyy = self.syy / light - y * y;
        let vxy = self.sxy / light - x * y;
        // Eigenvalues of the 2 x 2 covariance.
        let (mean, half) = ((vxx + vyy) / 2.0, ((vxx - vyy) / 2.0).hypot(vxy));
        Sum {
            light,
            x,
            y,
            major: mean + half,
            minor: mean - half,
            uncertain,
        }
    }
}

/// The median light of the [`NEAREST_SINGLES`] isolated images nearest to (x, y): one image's
/// light there. None with fewer than [`MIN_SINGLES`] isolated images in the photo, or when the
/// nearest disagree by more than [`SINGLES_SPREAD`] (one of them may be two or more images at
/// one place, as at a release from rest, and a median of few cannot tell).
fn one_image_light(singles: &[(f64, f64, f64)], x: f64, y: f64) -> Option<f64> {
    if singles.len() < MIN_SINGLES {
        return None;
    }
    let mut near: Vec<(f64, f64)> = singles
        .iter()
        .map(|&(sx, sy, l)| ((sx - x).hypot(sy - y), l))
        .collect();
    near.sort_by(|a, b| a.0.total_cmp(&b.0));
    let lights: Vec<f64> = near.iter().take(NEAREST_SINGLES).map(|n| n.1).collect();
    let (lo, hi) = lights
        .iter()
        .fold((f64::MAX, f64::MIN), |(lo, hi), &l| (lo.min(l), hi.max(l)));
    if hi > SINGLES_SPREAD * lo {
        return None;
    }
    crate::core::stats::finite_median(lights)
}

/// Fewest isolated images a photo needs for one image's light.
const MIN_SINGLES: usize = 3;
/// Largest ratio of the brightest to the faintest of the nearest isolated images (the flash's
/// fall-off and vignetting across a frame stay well below it; two images at one place are 2).
const SINGLES_SPREAD: f64 = 1.5;

#[cfg(test)]
mod tests {
    use super::*;

    fn spot(x_px: f64, y_px: f64) -> Spot {
        Spot {
            x_px,
            y_px,
            r_px: 5.0,
            sigma_px: 0.1,
            score: 1.0,
            source: Default::default(),
        }
    }

    #[test]
    fn touching_spots_form_one_group_by_single_linkage() {
        // A chain 0-1-2 (each 8 px from the next) and a spot 30 px away.
        let spots = [
            spot(0.0, 0.0),
            spot(8.0, 0.0),
            spot(16.0, 0.0),
            spot(46.0, 0.0),
        ];
        assert_eq!(touching(&spots, 10.0), vec![vec![0, 1, 2], vec![3]]);
    }

    #[test]
    fn a_pixel_grows_into_a_square() {
        let mut mask = vec![false; 25];
        mask[12] = true; // the centre of a 5 x 5 grid
        let grown = dilate(&mask, (5, 5), 1);
        let expected: Vec<bool> = (0..25)
            .map(|i| (1..=3).contains(&(i % 5)) && (1..=3).contains(&(i / 5)))
            .collect();
        assert_eq!(grown, expected);
    }
}
