//! Painting the photograph: a long exposure in linear light. Each flash lights the ball (painted
//! with the exact area of the disc inside every pixel, shaded as a lit sphere: Lambertian with a
//! diffuse fill and a Blinn-Phong highlight, J. F. Blinn, "Models of light reflection for
//! computer synthesized pictures", SIGGRAPH 1977; its printed markings turned with the ball) and
//! the backdrop where the ball does not hide it; ambient light over the whole exposure adds the
//! backdrop and a faint streak along the path. Then vignetting, photon and read noise, the tone
//! curve and quantisation.
//!
//! Goes in: a list of [`Stamp`]s (disc images with their weights) and the [`Finish`] of the photo.
//! Comes out: linear RGB pixel rows, then an 8 or 16-bit image. The pixel area covered by a disc is
//! computed in closed form (integral of sqrt(r^2 - x^2), inclusion-exclusion over the pixel's
//! corners), so the painted centroid and area are exact up to rounding.

use super::scene::Markings;
use crate::core::geometry::{disc_coverage, sphere_normal};
use rand::{RngExt, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};
use rayon::prelude::*;

/// How a stamp is clipped (a mirror image shows only inside the floor plate).
#[derive(Debug, Clone, Copy)]
pub struct Clip {
    /// Pixel row of the floor's front edge as a line y = a + b x.
    pub line_a: f64,
    /// Slope of that line.
    pub line_b: f64,
    /// Visible depth of the plate below the line, pixels.
    pub depth_px: f64,
}

/// One disc image painted into the exposure.
#[derive(Debug, Clone, Copy)]
pub struct Stamp {
    /// Centre x, pixels.
    pub x_px: f64,
    /// Centre y, pixels.
    pub y_px: f64,
    /// Radius, pixels.
    pub r_px: f64,
    /// Exposure weight (linear exposure of a white surface).
    pub weight: f64,
    /// Albedo.
    pub albedo: f64,
    /// Colour multipliers.
    pub rgb: [f64; 3],
    /// How a lit sphere is shaded; None paints a flat disc.
    pub light: Option<Lighting>,
    /// What is printed on the ball and how far it has turned; None for a plain ball.
    pub marks: Option<Marks>,
    /// Hides the backdrop (false for a mirror image, which only adds light).
    pub occludes: bool,
    /// Optional clip.
    pub clip: Option<Clip>,
}

/// How a lit sphere is shaded. Directions are in the camera frame (x right, y down, z towards
/// the camera).
#[derive(Debug, Clone, Copy)]
pub struct Lighting {
    /// Direction towards the flash.
    pub dir: [f64; 3],
    /// Fraction of the light that is diffuse fill.
    pub fill: f64,
    /// Strength of the highlight.
    pub gloss: f64,
    /// Blinn-Phong exponent of the highlight.
    pub gloss_power: f64,
    /// Direction towards the source of the highlight (None: the flash).
    pub gloss_dir: Option<[f64; 3]>,
}

impl Lighting {
    /// The same light seen in a mirror floor (the mirrored side lights the mirror world).
    pub fn mirrored(self) -> Lighting {
        let flip = |d: [f64; 3]| [d[0], -d[1], d[2]];
        Lighting {
            dir: flip(self.dir),
            gloss_dir: self.gloss_dir.map(flip),
            ..self
        }
    }
}

fn unit(v: [f64; 3]) -> [f64; 3] {
    let n = (v[0] * v[0] + v[1] * v[1] + v[2] * v[2]).sqrt();
    [v[0] / n, v[1] / n, v[2] / n]
}

/// Shading of a lit sphere with surface normal `n` (a unit vector to the camera is +z).
fn shade(n: [f64; 3], light: &Lighting) -> f64 {
    let l = unit(light.dir);
    let [nx, ny, nz] = n;
    let lambert = (nx * l[0] + ny * l[1] + nz * l[2]).max(0.0);
    let g = light.gloss_dir.map_or(l, unit);
    let hv = [g[0], g[1], g[2] + 1.0];
    let hn = (hv[0] * hv[0] + hv[1] * hv[1] + hv[2] * hv[2]).sqrt();
    let cos_h = ((nx * hv[0] + ny * hv[1] + nz * hv[2]) / hn).max(0.0);
    let p = light.gloss_power;
    let spec = if p == p.round() && p <= 1e4 {
        cos_h.powi(p as i32)
    } else {
        cos_h.powf(p)
    };
    light.fill + (1.0 - light.fill) * lambert + light.gloss * spec
}

/// What is printed on the ball: great-circle lines and a round patch, in the ball's own frame
/// (the camera frame when the ball has not turned).
#[derive(Debug, Clone, Copy)]
pub struct Pattern {
    /// Unit normals of the great circles the lines run along.
    lines: [[f64; 3]; 5],
    /// How many of `lines` are used.
    n_lines: usize,
    /// Centre of the round patch (unit vector) and its angular radius, radians.
    dot: Option<([f64; 3], f64)>,
    /// Half-width of a line on the unit sphere.
    half_width: f64,
    /// Brightness of the markings relative to the surface.
    albedo: f64,
}

impl Pattern {
    /// The pattern of a kind of markings; `width` is a line's width as a fraction of the radius
    /// (a patch's radius is three times it); `seed` draws the panel lines. None for a plain ball.
    pub fn new(kind: Markings, albedo: f64, width: f64, seed: u64) -> Option<Pattern> {
        let mut lines = [[0.0; 3]; 5];
        let (n_lines, dot) = match kind {
            Markings::None => return None,
            Markings::Seams => {
                lines[0] = unit([1.0, 0.15, 0.35]);
                lines[1] = unit([0.2, 1.0, -0.3]);
                lines[2] = unit([0.7, -0.6, 0.45]);
                (3, None)
            }
            Markings::Band => {
                lines[0] = [0.0, 1.0, 0.0];
                (1, None)
            }
            Markings::Dot => (0, Some((unit([0.45, -0.25, 0.86]), 3.0 * width))),
            Markings::Panels => {
                let mut rng = ChaCha8Rng::seed_from_u64(seed ^ 0x7A11_E15E);
                for l in lines.iter_mut() {
                    let a: f64 = rng.random::<f64>() * std::f64::consts::TAU;
                    let z: f64 = rng.random::<f64>() * 1.2 - 0.6;
                    *l = unit([a.cos(), a.sin(), z]);
                }
                (5, None)
            }
        };
        Some(Pattern {
            lines,
            n_lines,
            dot,
            half_width: width / 2.0,
            albedo,
        })
    }

    /// Brightness factor (albedo..1) at camera-frame normal `n` of a ball of `r_px` with the
    /// turn and mirroring of `marks`, with edges about one pixel soft.
    fn factor(&self, n: [f64; 3], r_px: f64, marks: Marks) -> f64 {
        let n = if marks.mirror { [n[0], -n[1], n[2]] } else { n };
        // Undo the turn: as seen in the photo (y down), counter-clockwise by t maps (x, y) to
        // (x cos t + y sin t, -x sin t + y cos t); its inverse gives the ball's own frame.
        let (s, c) = marks.turn_rad.sin_cos();
        let b = [c * n[0] - s * n[1], s * n[0] + c * n[1], n[2]];
        let mut ink: f64 = 0.0;
        for a in &self.lines[..self.n_lines] {
            let d = (b[0] * a[0] + b[1] * a[1] + b[2] * a[2]).abs();
            ink = ink.max(((self.half_width - d) * r_px + 0.5).clamp(0.0, 1.0));
        }
        if let Some((d, rho)) = self.dot {
            let cos_a = (b[0] * d[0] + b[1] * d[1] + b[2] * d[2]).clamp(-1.0, 1.0);
            ink = ink.max(((rho - cos_a.acos()) * r_px + 0.5).clamp(0.0, 1.0));
        }
        1.0 - (1.0 - self.albedo) * ink
    }
}

/// The markings of one image: the pattern and the ball's turn at that moment.
#[derive(Debug, Clone, Copy)]
pub struct Marks {
    /// What is printed.
    pub pattern: Pattern,
    /// The ball's turn, radians, counter-clockwise positive as seen in the photo.
    pub turn_rad: f64,
    /// Seen in a mirror floor: the ball's image flipped top to bottom.
    pub mirror: bool,
}

/// Accumulated light of one image row: ball light (RGB) and backdrop occlusion.
#[derive(Debug, Clone)]
pub struct Exposure {
    /// Width, pixels.
    pub width: usize,
    /// Height, pixels.
    pub height: usize,
    /// Light from stamps, linear RGB per pixel.
    pub light: Vec<[f32; 3]>,
    /// Exposure weight by which the backdrop is hidden, per pixel.
    pub hidden: Vec<f32>,
}

/// Paint all stamps into a fresh exposure, rows in parallel.
pub fn paint(width: usize, height: usize, stamps: &[Stamp]) -> Exposure {
    let mut light = vec![[0f32; 3]; width * height];
    let mut hidden = vec![0f32; width * height];
    // Stamps sorted by top row so each row scans only candidates.
    let mut order: Vec<usize> = (0..stamps.len()).collect();
    order.sort_by(|&a, &b| {
        let ta = stamps[a].y_px - stamps[a].r_px;
        let tb = stamps[b].y_px - stamps[b].r_px;
        ta.total_cmp(&tb)
    });
    let tops: Vec<f64> = order
        .iter()
        .map(|&i| stamps[i].y_px - stamps[i].r_px - 1.0)
        .collect();
    let max_r = stamps.iter().map(|s| s.r_px).fold(0.0, f64::max);
    light
        .par_chunks_mut(width)
        .zip(hidden.par_chunks_mut(width))
        .enumerate()
        .for_each(|(row, (lrow, hrow))| {
            let y = row as f64;
            let end = tops.partition_point(|&t| t <= y);
            let start = tops.partition_point(|&t| t < y - 2.0 * max_r - 3.0);
            for &si in &order[start..end] {
                let s = &stamps[si];
                if (y - s.y_px).abs() > s.r_px + 1.0 {
                    continue;
                }
                let x0 = ((s.x_px - s.r_px - 1.0).floor().max(0.0)) as usize;
                let x1 = ((s.x_px + s.r_px + 1.0).ceil().min(width as f64 - 1.0)).max(-1.0);
                if x1 < 0.0 {
                    continue;
                }
                for (x, (lp, hp)) in lrow
                    .iter_mut()
                    .zip(hrow.iter_mut())
                    .enumerate()
                    .take(x1 as usize + 1)
                    .skip(x0)
                {
                    let xf = x as f64;
                    let (dx, dy) = (xf - s.x_px, y - s.y_px);
                    let d2 = dx * dx + dy * dy;
                    let inner = s.r_px - std::f64::consts::FRAC_1_SQRT_2;
                    let outer = s.r_px + std::f64::consts::FRAC_1_SQRT_2;
                    let disc = if inner > 0.0 && d2 <= inner * inner {
                        1.0
                    } else if d2 >= outer * outer {
                        continue;
                    } else {
                        disc_coverage(xf, y, s.x_px, s.y_px, s.r_px)
                    };
                    let mut coverage = disc;
                    if let Some(c) = s.clip {
                        let below = y - (c.line_a + c.line_b * xf);
                        coverage *= (below + 0.5).clamp(0.0, 1.0)
                            * (c.depth_px - below + 0.5).clamp(0.0, 1.0);
                    }
                    if coverage <= 0.0 {
                        continue;
                    }
                    let normal = || sphere_normal(dx, dy, s.r_px, disc);
                    let sh = s.light.as_ref().map_or(1.0, |l| shade(normal(), l));
                    let ink = s
                        .marks
                        .map_or(1.0, |m| m.pattern.factor(normal(), s.r_px, m));
                    let v = s.weight * coverage * s.albedo * sh * ink;
                    for (l, tint) in lp.iter_mut().zip(s.rgb) {
                        *l += (v * tint) as f32;
                    }
                    if s.occludes {
                        *hp += (s.weight * coverage) as f32;
                    }
                }
            }
        });
    Exposure {
        width,
        height,
        light,
        hidden,
    }
}

/// The finishing of a photo: lens, sensor and storage.
#[derive(Debug, Clone, Copy)]
pub struct Finish {
    /// Relative darkening in the corners.
    pub vignetting: f64,
    /// Add photon and read noise.
    pub noise: bool,
    /// Full-well capacity, electrons.
    pub full_well_e: f64,
    /// Read noise, electrons RMS.
    pub read_noise_e: f64,
    /// Apply the sRGB transfer curve (false: linear).
    pub srgb: bool,
    /// Seed of the noise.
    pub seed: u64,
}

/// sRGB transfer curve (IEC 61966-2-1).
pub fn srgb_encode(v: f64) -> f64 {
    if v <= 0.003_130_8 {
        12.92 * v
    } else {
        1.055 * v.powf(1.0 / 2.4) - 0.055
    }
}

/// Turn the exposure into stored channel values in 0..1: `backdrop(x, y)` gives the linear RGB
/// level an unhidden backdrop pixel reaches over the whole exposure, `total_weight` the exposure
/// weight that level stands for (the stamps hide part of it).
pub fn finish<B>(
    exposure: &Exposure,
    total_weight: f64,
    backdrop: B,
    finish: Finish,
) -> Vec<[f32; 3]>
where
    B: Fn(usize, usize) -> [f64; 3] + Sync,
{
    let (w, h) = (exposure.width, exposure.height);
    let cx = (w as f64 - 1.0) / 2.0;
    let cy = (h as f64 - 1.0) / 2.0;
    let corner2 = cx * cx + cy * cy;
    let mut out = vec![[0f32; 3]; w * h];
    out.par_chunks_mut(w).enumerate().for_each(|(y, row)| {
        let mut rng = ChaCha8Rng::seed_from_u64(
            finish.seed ^ (y as u64 + 1).wrapping_mul(0x9E37_79B9_7F4A_7C15),
        );
        for (x, px) in row.iter_mut().enumerate() {
            let i = y * w + x;
            let bd = backdrop(x, y);
            let open = (1.0 - exposure.hidden[i] as f64 / total_weight).max(0.0);
            let (dx, dy) = (x as f64 - cx, y as f64 - cy);
            let vig = 1.0 - finish.vignetting * (dx * dx + dy * dy) / corner2.max(1.0);
            for c in 0..3 {
                let mut v = (exposure.light[i][c] as f64 + open * bd[c]) * vig;
                if finish.noise {
                    let e = v.max(0.0) * finish.full_well_e;
                    let n1: f64 = StandardNormal.sample(&mut rng);
                    let n2: f64 = StandardNormal.sample(&mut rng);
                    v = (e + e.sqrt() * n1 + finish.read_noise_e * n2) / finish.full_well_e;
                } else {
                    // Keep the random stream identical whether or not noise is on.
                    let _: f64 = rng.random();
                }
                let v = v.clamp(0.0, 1.0);
                px[c] = if finish.srgb { srgb_encode(v) } else { v } as f32;
            }
        }
    });
    out
}

/// Smooth value noise in about -1..1 at a lattice spacing of `cell` pixels (for backdrop texture).
pub fn value_noise(x: f64, y: f64, cell: f64, seed: u64) -> f64 {
    let (gx, gy) = (x / cell, y / cell);
    let (ix, iy) = (gx.floor(), gy.floor());
    let (fx, fy) = (gx - ix, gy - iy);
    let lattice = |i: f64, j: f64| {
        let mut z = seed
            ^ ((i as i64 as u64).wrapping_mul(0x9E37_79B9_7F4A_7C15))
            ^ ((j as i64 as u64).wrapping_mul(0xC2B2_AE3D_27D4_EB4F));
        // splitmix64 finaliser
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^= z >> 31;
        (z >> 11) as f64 / (1u64 << 53) as f64 * 2.0 - 1.0
    };
    let s = |t: f64| t * t * (3.0 - 2.0 * t);
    let (sx, sy) = (s(fx), s(fy));
    let a = lattice(ix, iy) * (1.0 - sx) + lattice(ix + 1.0, iy) * sx;
    let b = lattice(ix, iy + 1.0) * (1.0 - sx) + lattice(ix + 1.0, iy + 1.0) * sx;
    a * (1.0 - sy) + b * sy
}
