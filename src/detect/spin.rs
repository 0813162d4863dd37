//! Spin from markings: how far the ball turned (about the axis toward the camera) between one
//! path image and the next, read from what is printed on it.
//!
//! Goes in: the photo's linear light as a function of the pixel, and the path's images in time
//! order (centre and radius). Comes out: per image its turn since the first readable image,
//! counter-clockwise positive as seen in the photo (unwrapped), or nothing where the ball shows
//! no usable marking, where another image covers it, or where the turn cannot be told.
//!
//! Method: each image's interior (0.25 to 0.75 radius, clear of the rim) is sampled on rings of
//! 96 angles (bilinear interpolation). The light's shading and highlight stay fixed to the
//! camera while the markings turn, so the mean of every image's rings holds the light, and each
//! image's ratio to that mean holds its markings ([`signatures`]). The turn between two images
//! is the shift that maximises the circular cross-correlation of one image's ratio with the
//! other's weighted by the mean light squared (the weight does not move with the shift, so a
//! light on one side does not pull the turn toward none), evaluated from the Fourier terms
//! 1..24 on a 0.25-degree grid and refined by a parabola through the peak: the polar form of
//! phase correlation for a rotation (Reddy & Chatterji, "An FFT-based technique for
//! translation, rotation, and scale-invariant image registration", IEEE Trans. Image Process. 5,
//! 1996). A pattern that looks the same turned half a turn (its odd terms carry under a tenth of
//! its power), a second peak within 10 % of the best, or a turn within 20 degrees of half a
//! turn gives no reading.

use std::f64::consts::TAU;

/// Samples per ring.
const ANGLES: usize = 96;
/// Ring radii as fractions of the image radius.
const RINGS: [f64; 6] = [0.25, 0.35, 0.45, 0.55, 0.65, 0.75];
/// Fourier terms kept on a ring.
const TERMS: std::ops::RangeInclusive<usize> = 1..=24;
/// A marking must vary the ball's light by this fraction (weighted RMS of the ratio to the
/// common light).
const MIN_CONTRAST: f64 = 0.1;
/// The correlation at the turn read, as a fraction of its largest possible value (the two
/// images' markings the same up to the turn): under this, the markings do not match.
const MIN_MATCH: f64 = 0.6;
/// Share of the kept power the odd terms must carry for the turn to be told from a half turn.
const MIN_ODD_SHARE: f64 = 0.1;
/// A second correlation peak this close to the best (as a fraction) makes the turn ambiguous.
const SECOND_PEAK: f64 = 0.9;
/// Turns within this of half a turn (degrees) have no telling direction.
const NEAR_HALF_TURN_DEG: f64 = 20.0;
/// An image with more than this share of its samples covered by another image (or outside the
/// photo) gives no reading; below it, the covered samples are left out.
const MAX_HIDDEN: f64 = 0.4;
/// Where the common light is under this fraction of its largest value, the ratio is not used.
const DARK_SHARE: f64 = 0.05;

/// The light of one image's interior sampled on rings, camera frame: `[ring][angle]`.
#[derive(Debug, Clone)]
pub struct Rings {
    samples: Vec<[f64; ANGLES]>,
}

/// One image's markings as Fourier terms (1..24) per ring, (re, im): of its light's ratio to
/// the common light less one (`ratio`), and of that ratio weighted by the common light squared
/// (`weighted`, the other side of a correlation, so that dim parts count little).
#[derive(Debug, Clone)]
pub struct Signature {
    ratio: Vec<Vec<(f64, f64)>>,
    weighted: Vec<Vec<(f64, f64)>>,
}

/// Why an image gives no reading.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum NoReading {
    /// Another image covers part of it, or it is cut by the frame.
    Covered,
    /// Its interior shows no marking above the threshold (or fewer than three images could be
    /// sampled to tell the markings from the light).
    Plain,
    /// Its markings look the same turned half a turn.
    Symmetric,
}

/// The rings of the image at (x, y) with radius `r`; `light(x, y)` is the linear light at a
/// pixel (None outside the photo); `others` are the other images (x, y, r) that may cover it.
pub fn rings(
    light: &impl Fn(i64, i64) -> Option<f64>,
    (x, y, r): (f64, f64, f64),
    others: &[(f64, f64, f64)],
) -> Result<Rings, NoReading> {
    let covered = |px: f64, py: f64| {
        others.iter().any(|&(ox, oy, or)| {
            (ox - x).hypot(oy - y) > 0.5 && (px - ox).hypot(py - oy) < or + 1.0
        })
    };
    let sample = |px: f64, py: f64| -> Option<f64> {
        let (x0, y0) = (px.floor(), py.floor());
        let (fx, fy) = (px - x0, py - y0);
        let (ix, iy) = (x0 as i64, y0 as i64);
        let v = |dx: i64, dy: i64| light(ix + dx, iy + dy);
        Some(
            (v(0, 0)? * (1.0 - fx) + v(1, 0)? * fx) * (1.0 - fy)
                + (v(0, 1)? * (1.0 - fx) + v(1, 1)? * fx) * fy,
        )
    };
    let mut samples = Vec::with_capacity(RINGS.len());
    let mut hidden = 0;
    for frac in RINGS {
        let rho = frac * r;
        let mut ring = [0.0; ANGLES];
        for (k, v) in ring.iter_mut().enumerate() {
            let phi = TAU * k as f64 / ANGLES as f64;
            // Counter-clockwise as seen: y grows downward.
            let (px, py) = (x + rho * phi.cos(), y - rho * phi.sin());
            *v = match sample(px, py) {
                Some(v) if !covered(px, py) => v,
                _ => {
                    hidden += 1;
                    f64::NAN
                }
            };
        }
        samples.push(ring);
    }
    if hidden as f64 > MAX_HIDDEN * (RINGS.len() * ANGLES) as f64 {
        return Err(NoReading::Covered);
    }
    Ok(Rings { samples })
}

/// Fourier terms [`TERMS`] of one ring, (re, im), normalised by the number of samples.
fn terms(ring: &[f64; ANGLES]) -> Vec<(f64, f64)> {
    TERMS
        .map(|m| {
            let (mut re, mut im) = (0.0, 0.0);
            for (k, v) in ring.iter().enumerate() {
                let a = TAU * (m * k) as f64 / ANGLES as f64;
                re += v * a.cos();
                im -= v * a.sin();
            }
            (re / ANGLES as f64, im / ANGLES as f64)
        })
        .collect()
}

/// What turns with the ball. The light's shading and highlight are fixed to the camera and the same
/// on every image, while the markings turn: the mean of every image's rings (the common light)
/// holds the first, with the markings averaged out over the turns. Each image's light divided by
/// the common light, less one, is its markings alone (a marking multiplies the surface's light),
/// wherever the common light is not dark. An image whose ratio varies by under `MIN_CONTRAST` (10
/// %) (RMS, weighted by the common light squared) is plain; one whose odd terms carry under
/// `MIN_ODD_SHARE` (a tenth) of the power is symmetric under a half turn. Fewer than three images
/// sampled: every image is plain (the markings cannot be told from the light).
pub fn signatures(rings: &[Result<Rings, NoReading>]) -> Vec<Result<Signature, NoReading>> {
    let read: Vec<&Rings> = rings.iter().filter_map(|r| r.as_ref().ok()).collect();
    if read.len() < 3 {
        return rings
            .iter()
            .map(|r| Err(r.as_ref().err().copied().unwrap_or(NoReading::Plain)))
            .collect();
    }
    // The common light: at each sample, the mean over the images that show it (NaN where fewer
    // than three do).
    let mut common = vec![[0.0; ANGLES]; RINGS.len()];
    for (ring, c) in common.iter_mut().enumerate() {
        for (k, cv) in c.iter_mut().enumerate() {
            let mut seen: Vec<f64> = read
                .iter()
                .map(|r| r.samples[ring][k])
                .filter(|v| v.is_finite())
                .collect();
            *cv = if seen.len() >= 3 {
                seen.sort_by(f64::total_cmp);
                seen[seen.len() / 2]
            } else {
                f64::NAN
            };
        }
    }
    let top = common
        .iter()
        .flatten()
        .filter(|v| v.is_finite())
        .fold(0.0f64, |m, v| m.max(v.abs()));
    rings
        .iter()
        .map(|r| {
            let r = r.as_ref().map_err(|e| *e)?;
            let (mut ratio, mut weighted) = (Vec::new(), Vec::new());
            let (mut contrast, mut weight) = (0.0, 0.0);
            for (s, c) in r.samples.iter().zip(&common) {
                let mut q = [0.0; ANGLES];
                let mut wq = [0.0; ANGLES];
                for k in 0..ANGLES {
                    // NaN (covered, or seen by too few images) fails the comparison.
                    if s[k].is_finite() && c[k].abs() > DARK_SHARE * top {
                        q[k] = s[k] / c[k] - 1.0;
                        wq[k] = q[k] * c[k] * c[k] / (top * top);
                        contrast += q[k] * q[k] * c[k] * c[k];
                        weight += c[k] * c[k];
                    }
                }
                ratio.push(terms(&q));
                weighted.push(terms(&wq));
            }
            let (mut all, mut odd) = (0.0, 0.0);
            for ring in &ratio {
                for (j, (re, im)) in ring.iter().enumerate() {
                    let power = re * re + im * im;
                    all += power;
                    if (*TERMS.start() + j) % 2 == 1 {
                        odd += power;
                    }
                }
            }
            if !(weight > 0.0 && (contrast / weight).sqrt() > MIN_CONTRAST) {
                Err(NoReading::Plain)
            } else if odd < MIN_ODD_SHARE * all {
                Err(NoReading::Symmetric)
            } else {
                Ok(Signature { ratio, weighted })
            }
        })
        .collect()
}

/// Correlation of `b` against `a` turned by `delta` radians counter-clockwise.
fn correlation(a: &Signature, b: &Signature, delta: f64) -> f64 {
    let mut s = 0.0;
    for (ra, rb) in a.ratio.iter().zip(&b.weighted) {
        for (j, (&(ar, ai), &(br, bi))) in ra.iter().zip(rb).enumerate() {
            let m = (*TERMS.start() + j) as f64;
            // b(phi) = a(phi - delta): B_m = A_m e^{-i m delta}; sum Re(B_m conj(A_m) e^{i m d}).
            let (sin, cos) = (m * delta).sin_cos();
            let (pr, pi) = (br * ar + bi * ai, bi * ar - br * ai);
            s += pr * cos - pi * sin;
        }
    }
    s
}

/// The turn from image `a` to image `b`, degrees in (-180, 180], counter-clockwise positive as
/// seen; None when it cannot be told (a second peak nearly as high, or near half a turn).
pub fn turn_deg(a: &Signature, b: &Signature) -> Option<f64> {
    const STEPS: usize = 1440;
    let score: Vec<f64> = (0..STEPS)
        .map(|k| correlation(a, b, TAU * k as f64 / STEPS as f64))
        .collect();
    let best = (0..STEPS).max_by(|&i, &j| score[i].total_cmp(&score[j]))?;
    // Cauchy-Schwarz over the terms: the correlation reaches this only when the two images'
    // markings agree up to the turn.
    let bound: f64 = a
        .ratio
        .iter()
        .zip(&b.weighted)
        .flat_map(|(ra, rb)| ra.iter().zip(rb))
        .map(|(&(ar, ai), &(br, bi))| ar.hypot(ai) * br.hypot(bi))
        .sum();
    if score[best].is_nan() || score[best] <= MIN_MATCH * bound {
        return None;
    }
    // The best other peak: a local maximum at least 20 degrees away.
    let away = STEPS / 18;
    let second = (0..STEPS)
        .filter(|&k| {
            let d = (k as i64 - best as i64).rem_euclid(STEPS as i64) as usize;
            d.min(STEPS - d) > away
                && score[k] >= score[(k + 1) % STEPS]
                && score[k] >= score[(k + STEPS - 1) % STEPS]
        })
        .map(|k| score[k])
        .fold(f64::NEG_INFINITY, f64::max);
    if second > SECOND_PEAK * score[best] {
        return None;
    }
    let (l, c, r) = (
        score[(best + STEPS - 1) % STEPS],
        score[best],
        score[(best + 1) % STEPS],
    );
    let curve = l - 2.0 * c + r;
    let offset = if curve < 0.0 {
        (0.5 * (l - r) / curve).clamp(-0.5, 0.5)
    } else {
        0.0
    };
    let mut deg = (best as f64 + offset) * 360.0 / STEPS as f64;
    if deg > 180.0 {
        deg -= 360.0;
    }
    (deg.abs() < 180.0 - NEAR_HALF_TURN_DEG).then_some(deg)
}

/// The turns between consecutive images of a path: entry k is the turn from image k to image
/// k + 1 (degrees), None where either image gives no reading or the turn cannot be told.
pub fn steps(signatures: &[Result<Signature, NoReading>]) -> Vec<Option<f64>> {
    signatures
        .windows(2)
        .map(|w| match (&w[0], &w[1]) {
            (Ok(a), Ok(b)) => turn_deg(a, b),
            _ => None,
        })
        .collect()
}
