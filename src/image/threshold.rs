//! Threshold: where the photo differs from its background by more than the noise allows.
//!
//! Goes in: the photo and its [`Background`]. Comes out: [`Blobs`], the connected regions (8-way
//! connectivity, imageproc's labelling) of blocks whose mean ball-positive difference exceeds
//! `k_sigma` robust sigmas of the block means, or a fixed level. Working on b x b block means
//! averages the noise down by about b before the decision and keeps a 24-megapixel photo cheap.

use crate::core::stats::robust_sigma;
use crate::image::background::Background;
use crate::image::load::Photo;
use image::{GrayImage, Luma};
use imageproc::region_labelling::{Connectivity, connected_components};
use rayon::prelude::*;

/// Settings of the threshold stage.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ThresholdOptions {
    /// Threshold in robust sigmas of the block-mean difference.
    pub k_sigma: f32,
    /// Fixed threshold on the ball-positive difference, luma units 0..1 (overrides `k_sigma`).
    pub level: Option<f32>,
    /// Block side, pixels (0 = automatic: 2 px up to about 3 megapixels, then growing with the
    /// image side: 3 px at 12, 4 px at 24 megapixels, at most 8).
    pub block_px: usize,
}

impl Default for ThresholdOptions {
    fn default() -> Self {
        ThresholdOptions {
            k_sigma: 4.5,
            level: None,
            block_px: 0,
        }
    }
}

/// A connected region above the threshold, in full-resolution pixels.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Blob {
    /// Left column, pixels (inclusive).
    pub x0: usize,
    /// Top row, pixels (inclusive).
    pub y0: usize,
    /// Right column, pixels (inclusive).
    pub x1: usize,
    /// Bottom row, pixels (inclusive).
    pub y1: usize,
    /// Area above the threshold, pixels.
    pub area_px: f64,
    /// Number of blocks above the threshold.
    pub blocks: usize,
}

impl Blob {
    /// Width of the bounding box, pixels.
    pub fn width_px(&self) -> f64 {
        (self.x1 - self.x0 + 1) as f64
    }
    /// Height of the bounding box, pixels.
    pub fn height_px(&self) -> f64 {
        (self.y1 - self.y0 + 1) as f64
    }
    /// Round and alone: a single ball image (fill ratio near pi/4, aspect near 1).
    pub fn is_compact(&self) -> bool {
        let (w, h) = (self.width_px(), self.height_px());
        let fill = self.area_px / (w * h);
        let aspect = w / h;
        self.blocks >= 9 && (0.6..=0.95).contains(&fill) && (0.75..=1.33).contains(&aspect)
    }
}

/// The regions above the threshold.
#[derive(Debug, Clone)]
pub struct Blobs {
    /// Every region of at least two blocks (or one very strong block).
    pub blobs: Vec<Blob>,
    /// Block side used, pixels.
    pub block_px: usize,
    /// Threshold used on the block means, luma units.
    pub level: f32,
    /// The block mask (255 = above), for debugging.
    pub mask: GrayImage,
}

/// Find the regions of `photo` that differ from `background` on the ball's side.
pub fn find_blobs(photo: &Photo, background: &Background, options: &ThresholdOptions) -> Blobs {
    let (w, h) = (photo.width, photo.height);
    let b = if options.block_px == 0 {
        (((w * h) as f64 / 1.5e6).sqrt().round() as usize).clamp(2, 8)
    } else {
        options.block_px
    };
    let (bw, bh) = (w.div_ceil(b), h.div_ceil(b));
    if bw < 2 || bh < 2 {
        // Too small to hold a ball (and to label).
        return Blobs {
            blobs: Vec::new(),
            block_px: b,
            level: options.level.unwrap_or(0.0),
            mask: GrayImage::new(bw as u32, bh as u32),
        };
    }
    let sign = background.polarity.sign();
    // Block sums of the photo alone (one cheap pass over the pixels), then the background's mean
    // over each block subtracted: the mean of a difference is the difference of the means.
    let mut means = vec![0f32; bw * bh];
    means.par_chunks_mut(bw).enumerate().for_each(|(by, row)| {
        let y0 = by * b;
        let y1 = (y0 + b).min(h);
        let mut luma = vec![0f32; w];
        for y in y0..y1 {
            photo.row(y, 0, &mut luma);
            for (cell, chunk) in row.iter_mut().zip(luma.chunks(b)) {
                *cell += chunk.iter().sum::<f32>();
            }
        }
        let mut bg = vec![0f32; row.len()];
        background.block_means(y0, y1, b, w, &mut bg);
        for (bx, (v, g)) in row.iter_mut().zip(&bg).enumerate() {
            let n = (((bx * b + b).min(w) - bx * b) * (y1 - y0)) as f32;
            *v = sign * (*v / n - g);
        }
    });
    let level_of = |v: &[f32]| {
        options.level.unwrap_or_else(|| {
            // About 100 000 samples are plenty for a robust sigma.
            let step = (v.len() / 100_000).max(3);
            let mut sample: Vec<f32> = v.iter().step_by(step).copied().collect();
            options.k_sigma * robust_sigma(&mut sample).max(1e-6)
        })
    };
    let level = level_of(&means);
    // A second, coarser look (3 x 3 blocks) finds faint images, e.g. a dark ball on a bright
    // backdrop, which dims it by only 1/N for N flashes.
    let coarse = box3(&means, bw, bh);
    let coarse_level = level_of(&coarse);
    let mut mask = GrayImage::new(bw as u32, bh as u32);
    for (i, (&m, &c)) in means.iter().zip(&coarse).enumerate() {
        if m > level || c > coarse_level {
            mask.put_pixel((i % bw) as u32, (i / bw) as u32, Luma([255]));
        }
    }
    let labels = connected_components(&mask, Connectivity::Eight, Luma([0u8]));
    // Per label: x0, y0, x1, y1 (blocks), block count, strongest block mean.
    type Extent = (usize, usize, usize, usize, usize, f32);
    let mut boxes: Vec<Option<Extent>> = Vec::new();
    for (x, y, l) in labels.enumerate_pixels() {
        let l = l.0[0] as usize;
        if l == 0 {
            continue;
        }
        if boxes.len() < l {
            boxes.resize(l, None);
        }
        let (x, y) = (x as usize, y as usize);
        let m = means[y * bw + x];
        let e = boxes[l - 1].get_or_insert((x, y, x, y, 0, 0.0));
        e.0 = e.0.min(x);
        e.1 = e.1.min(y);
        e.2 = e.2.max(x);
        e.3 = e.3.max(y);
        e.4 += 1;
        e.5 = e.5.max(m);
    }
    let blobs = boxes
        .into_iter()
        .flatten()
        .filter(|e| e.4 >= 2 || e.5 > 2.0 * level)
        .map(|(x0, y0, x1, y1, n, _)| Blob {
            x0: x0 * b,
            y0: y0 * b,
            x1: ((x1 + 1) * b - 1).min(w - 1),
            y1: ((y1 + 1) * b - 1).min(h - 1),
            area_px: (n * b * b) as f64,
            blocks: n,
        })
        .collect();
    Blobs {
        blobs,
        block_px: b,
        level,
        mask,
    }
}

/// 3 x 3 box mean over a grid (edges use the cells inside), rows in parallel.
fn box3(v: &[f32], w: usize, h: usize) -> Vec<f32> {
    let mut out = vec![0f32; v.len()];
    out.par_chunks_mut(w).enumerate().for_each(|(y, row)| {
        for (x, o) in row.iter_mut().enumerate() {
            let (mut s, mut n) = (0f32, 0f32);
            for yy in y.saturating_sub(1)..=(y + 1).min(h - 1) {
                for xx in x.saturating_sub(1)..=(x + 1).min(w - 1) {
                    s += v[yy * w + xx];
                    n += 1.0;
                }
            }
            *o = s / n;
        }
    });
    out
}
