//! Sub-pixel refinement: circles fitted to the edge points each ball image owns.
//!
//! Goes in: a [`Region`]'s sub-pixel edge points and the Hough [`Candidate`]s in it. Comes out:
//! [`CircleFit`]s with centre, radius, a 1-sigma centre uncertainty and a rim-coverage score.
//!
//! Method: an algebraic start (Kasa's fit, "A circle fitting procedure and its error analysis",
//! IEEE Trans. Instrum. Meas. 25, 1976) and a geometric fit minimising the orthogonal distances by
//! Levenberg-Marquardt (Gander, Golub & Strebel, "Least-squares fitting of circles and ellipses",
//! BIT 34, 1994). The images of a cluster are fitted jointly by alternation: every edge point is
//! given to the one circle whose rim it lies on and whose centre its gradient points at; points
//! that two rims claim are left out, so each circle is fitted to the arcs it owns; circles that own
//! too little of their rim keep the photo's common radius. The covariance is the Gauss-Newton one
//! scaled by the residual variance and inflated for the correlation of neighbouring edge points
//! (lag-1 autocorrelation of the residuals along the rim, AR(1) variance factor (1 + rho)/(1 - rho)).

use crate::hough::{Candidate, EdgePoint, Region};
use nalgebra::{Matrix3, Vector3};

/// Euclidean length of (dx, dy); pixel distances cannot overflow, so no `hypot` (slow in libm).
#[inline]
fn dist(dx: f64, dy: f64) -> f64 {
    (dx * dx + dy * dy).sqrt()
}

/// A circle.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Circle {
    /// Centre x, pixels.
    pub x_px: f64,
    /// Centre y, pixels.
    pub y_px: f64,
    /// Radius, pixels.
    pub r_px: f64,
}

/// Result of a geometric fit.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct GeometricFit {
    /// The fitted circle.
    pub circle: Circle,
    /// Covariance of (x, y, r) (r row and column zero when the radius was held), pixels^2.
    pub covariance: Matrix3<f64>,
    /// RMS orthogonal residual, pixels.
    pub rms_px: f64,
}

/// Kasa's algebraic fit: least squares of x^2 + y^2 + D x + E y + F = 0. Needs 3 points not on
/// one line.
pub fn kasa_fit(points: &[[f64; 2]]) -> Option<Circle> {
    if points.len() < 3 {
        return None;
    }
    let n = points.len() as f64;
    let (mx, my) = points
        .iter()
        .fold((0.0, 0.0), |(a, b), p| (a + p[0] / n, b + p[1] / n));
    let mut ata = Matrix3::<f64>::zeros();
    let mut atb = Vector3::<f64>::zeros();
    for p in points {
        let (x, y) = (p[0] - mx, p[1] - my);
        let row = Vector3::new(x, y, 1.0);
        let z = -(x * x + y * y);
        ata += row * row.transpose();
        atb += row * z;
    }
    let sol = ata.lu().solve(&atb)?;
    let (cx, cy) = (-sol[0] / 2.0, -sol[1] / 2.0);
    let r2 = cx * cx + cy * cy - sol[2];
    if r2.is_nan() || r2 <= 0.0 || !r2.is_finite() {
        return None;
    }
    Some(Circle {
        x_px: cx + mx,
        y_px: cy + my,
        r_px: r2.sqrt(),
    })
}

/// Geometric circle fit by Levenberg-Marquardt from `start`; `fixed_r` holds the radius.
pub fn geometric_fit(
    points: &[[f64; 2]],
    start: Circle,
    fixed_r: Option<f64>,
) -> Option<GeometricFit> {
    let p = if fixed_r.is_some() { 2 } else { 3 };
    if points.len() <= p {
        return None;
    }
    let mut c = start;
    if let Some(r) = fixed_r {
        c.r_px = r;
    }
    let cost = |c: &Circle| -> f64 {
        points
            .iter()
            .map(|q| {
                let d = dist(q[0] - c.x_px, q[1] - c.y_px) - c.r_px;
                d * d
            })
            .sum()
    };
    let normal = |c: &Circle| -> (Matrix3<f64>, Vector3<f64>) {
        let mut jtj = Matrix3::zeros();
        let mut jtr = Vector3::zeros();
        for q in points {
            let (dx, dy) = (q[0] - c.x_px, q[1] - c.y_px);
            let rho = dist(dx, dy).max(1e-12);
            let res = rho - c.r_px;
            let j = Vector3::new(
                -dx / rho,
                -dy / rho,
                if fixed_r.is_some() { 0.0 } else { -1.0 },
            );
            jtj += j * j.transpose();
            jtr += j * res;
        }
        if fixed_r.is_some() {
            jtj[(2, 2)] = 1.0;
        }
        (jtj, jtr)
    };
    let mut lambda = 1e-3;
    let mut f = cost(&c);
    for _ in 0..100 {
        let (jtj, jtr) = normal(&c);
        let mut a = jtj;
        for i in 0..3 {
            a[(i, i)] *= 1.0 + lambda;
        }
        let Some(step) = a.lu().solve(&(-jtr)) else {
            break;
        };
        let trial = Circle {
            x_px: c.x_px + step[0],
            y_px: c.y_px + step[1],
            r_px: if fixed_r.is_some() {
                c.r_px
            } else {
                c.r_px + step[2]
            },
        };
        let ft = cost(&trial);
        if ft <= f {
            let small = step.norm() < 1e-10 * (1.0 + c.r_px);
            c = trial;
            let done = (f - ft) <= 1e-14 * f.max(1e-300) || small;
            f = ft;
            lambda = (lambda * 0.3).max(1e-12);
            if done {
                break;
            }
        } else {
            lambda *= 10.0;
            if lambda > 1e12 {
                break;
            }
        }
    }
    if c.r_px.is_nan() || c.r_px <= 0.0 || !c.x_px.is_finite() || !c.y_px.is_finite() {
        return None;
    }
    let (jtj, _) = normal(&c);
    let dof = (points.len() - p) as f64;
    let s2 = f / dof;
    let mut cov = jtj.try_inverse()? * s2;
    if fixed_r.is_some() {
        for i in 0..3 {
            cov[(2, i)] = 0.0;
            cov[(i, 2)] = 0.0;
        }
    }
    Some(GeometricFit {
        circle: c,
        covariance: cov,
        rms_px: (f / points.len() as f64).sqrt(),
    })
}

/// Settings of the refinement stage.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct RefineOptions {
    /// Largest distance of an edge point from a rim to belong to it, pixels.
    pub rim_tolerance_px: f64,
    /// Smallest cosine between an edge point's gradient and the direction to the centre.
    pub min_cosine: f64,
    /// Rounds of assignment and fitting in a cluster.
    pub rounds: usize,
    /// Below this rim coverage the radius is held at the photo's common radius.
    pub free_radius_coverage: f64,
    /// Fewest owned edge points for a fit.
    pub min_points: usize,
    /// After each round, candidates with less rim coverage than this are dropped.
    pub prune_coverage: f64,
}

impl Default for RefineOptions {
    fn default() -> Self {
        RefineOptions {
            rim_tolerance_px: 1.5,
            min_cosine: 0.75,
            rounds: 4,
            free_radius_coverage: 0.6,
            min_points: 8,
            prune_coverage: 0.15,
        }
    }
}

/// A refined ball image candidate.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CircleFit {
    /// The circle.
    pub circle: Circle,
    /// 1-sigma centre uncertainty per axis, pixels.
    pub sigma_px: f64,
    /// Fraction of the rim (64 angular bins) with owned edge points within 1 px.
    pub coverage: f64,
    /// RMS residual, pixels.
    pub rms_px: f64,
    /// Owned edge points.
    pub points: usize,
    /// Median gradient magnitude of the owned points (contrast of the rim).
    pub edge_strength: f64,
    /// The radius was held at the common radius.
    pub radius_held: bool,
}

const BINS: usize = 64;

fn coverage_of(c: &Circle, pts: &[[f64; 2]]) -> f64 {
    let mut bins = [false; BINS];
    for q in pts {
        let (dx, dy) = (q[0] - c.x_px, q[1] - c.y_px);
        if (dist(dx, dy) - c.r_px).abs() <= 1.0 {
            let a = dy.atan2(dx) + std::f64::consts::PI;
            let b = ((a / (2.0 * std::f64::consts::PI)) * BINS as f64) as usize % BINS;
            bins[b] = true;
        }
    }
    bins.iter().filter(|b| **b).count() as f64 / BINS as f64
}

/// Variance inflation for residuals correlated along the rim (AR(1) model).
fn correlation_factor(c: &Circle, pts: &[[f64; 2]]) -> f64 {
    let mut r: Vec<(f64, f64)> = pts
        .iter()
        .map(|q| {
            let (dx, dy) = (q[0] - c.x_px, q[1] - c.y_px);
            (dy.atan2(dx), dist(dx, dy) - c.r_px)
        })
        .collect();
    if r.len() < 6 {
        return 1.0;
    }
    r.sort_by(|a, b| a.0.total_cmp(&b.0));
    let mean = r.iter().map(|v| v.1).sum::<f64>() / r.len() as f64;
    let var: f64 = r.iter().map(|v| (v.1 - mean).powi(2)).sum();
    if var <= 0.0 {
        return 1.0;
    }
    let lag: f64 = r
        .windows(2)
        .map(|w| (w[0].1 - mean) * (w[1].1 - mean))
        .sum();
    let rho = (lag / var).clamp(0.0, 0.9);
    (1.0 + rho) / (1.0 - rho)
}

/// The radius of the ball's images across the photo: r = a + bx x + by y (pixels). Under a
/// perspective tilt the scale, and so the radius, changes linearly across the plane to first order.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct RadiusModel {
    /// Radius at the pixel origin, pixels.
    pub a_px: f64,
    /// Change per pixel in x.
    pub bx: f64,
    /// Change per pixel in y.
    pub by: f64,
}

impl RadiusModel {
    /// The same radius everywhere.
    pub fn constant(r_px: f64) -> RadiusModel {
        RadiusModel {
            a_px: r_px,
            bx: 0.0,
            by: 0.0,
        }
    }

    /// Radius expected at a pixel.
    pub fn at(&self, x_px: f64, y_px: f64) -> f64 {
        self.a_px + self.bx * x_px + self.by * y_px
    }

    /// Fit to well-measured circles: least squares of a plane with two rounds of rejection of
    /// circles more than 3 robust sigmas off; the median radius when fewer than 8 circles, or when
    /// they span less than 5 radii.
    pub fn fit(circles: &[Circle]) -> Option<RadiusModel> {
        if circles.is_empty() {
            return None;
        }
        let mut radii: Vec<f64> = circles.iter().map(|c| c.r_px).collect();
        radii.sort_by(f64::total_cmp);
        let median = RadiusModel::constant(radii[radii.len() / 2]);
        let (xmin, xmax) = circles
            .iter()
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), c| {
                (a.min(c.x_px), b.max(c.x_px))
            });
        let (ymin, ymax) = circles
            .iter()
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), c| {
                (a.min(c.y_px), b.max(c.y_px))
            });
        if circles.len() < 8 || (xmax - xmin).max(ymax - ymin) < 5.0 * median.a_px {
            return Some(median);
        }
        let mut model = median;
        let mut use_all: Vec<&Circle> = circles.iter().collect();
        for _ in 0..3 {
            let mut ata = Matrix3::zeros();
            let mut atb = Vector3::zeros();
            for c in &use_all {
                let row = Vector3::new(1.0, c.x_px, c.y_px);
                ata += row * row.transpose();
                atb += row * c.r_px;
            }
            let Some(sol) = ata.lu().solve(&atb) else {
                return Some(median);
            };
            model = RadiusModel {
                a_px: sol[0],
                bx: sol[1],
                by: sol[2],
            };
            let mut dev: Vec<f64> = circles
                .iter()
                .map(|c| (c.r_px - model.at(c.x_px, c.y_px)).abs())
                .collect();
            dev.sort_by(f64::total_cmp);
            let cut = (3.0 * 1.4826 * dev[dev.len() / 2]).max(0.02 * median.a_px);
            use_all = circles
                .iter()
                .filter(|c| (c.r_px - model.at(c.x_px, c.y_px)).abs() <= cut)
                .collect();
            if use_all.len() < 8 {
                return Some(median);
            }
        }
        Some(model)
    }
}

/// Fit all candidates of a region jointly. `radius` is the photo's radius model when known.
pub fn refine_region(
    region: &Region,
    candidates: &[Candidate],
    radius: Option<&RadiusModel>,
    options: &RefineOptions,
) -> Vec<CircleFit> {
    let mut circles: Vec<Circle> = candidates
        .iter()
        .map(|c| Circle {
            x_px: c.x_px,
            y_px: c.y_px,
            r_px: radius.map_or(c.r_px, |m| m.at(c.x_px, c.y_px)),
        })
        .collect();
    let mut held = vec![false; circles.len()];
    let mut alive = vec![true; circles.len()];
    let mut result: Vec<Option<CircleFit>> = vec![None; circles.len()];
    for round in 0..options.rounds {
        let tol = if round == 0 {
            2.0 * options.rim_tolerance_px
        } else {
            options.rim_tolerance_px
        };
        let owned = assign(&region.edges, &circles, &alive, tol, options.min_cosine);
        for (i, pts_idx) in owned.iter().enumerate() {
            if !alive[i] {
                continue;
            }
            if pts_idx.len() < options.min_points {
                alive[i] = false;
                result[i] = None;
                continue;
            }
            let pts: Vec<[f64; 2]> = pts_idx
                .iter()
                .map(|&k| [region.edges[k].x_px, region.edges[k].y_px])
                .collect();
            let cov = coverage_of(&circles[i], &pts);
            let hold = match radius {
                Some(m) if cov < options.free_radius_coverage => {
                    Some(m.at(circles[i].x_px, circles[i].y_px))
                }
                _ => None,
            };
            let Some(fit) = geometric_fit(&pts, circles[i], hold) else {
                alive[i] = false;
                result[i] = None;
                continue;
            };
            // Drop gross outliers (beyond 3 robust sigmas) and refit once.
            let mut res: Vec<f64> = pts
                .iter()
                .map(|q| {
                    (dist(q[0] - fit.circle.x_px, q[1] - fit.circle.y_px) - fit.circle.r_px).abs()
                })
                .collect();
            let mut sorted = res.clone();
            sorted.sort_by(f64::total_cmp);
            let cut = (3.0 * 1.4826 * sorted[sorted.len() / 2]).max(0.05);
            let kept: Vec<[f64; 2]> = pts
                .iter()
                .zip(res.iter_mut())
                .filter(|(_, r)| **r <= cut)
                .map(|(q, _)| *q)
                .collect();
            let fit = if kept.len() >= options.min_points && kept.len() < pts.len() {
                geometric_fit(&kept, fit.circle, hold).unwrap_or(fit)
            } else {
                fit
            };
            let used = if kept.len() >= options.min_points {
                &kept
            } else {
                &pts
            };
            circles[i] = fit.circle;
            held[i] = hold.is_some();
            let mut mags: Vec<f32> = pts_idx.iter().map(|&k| region.edges[k].magnitude).collect();
            let mid = mags.len() / 2;
            let strength = *mags.select_nth_unstable_by(mid, f32::total_cmp).1 as f64;
            let inflation = correlation_factor(&fit.circle, used);
            let var = 0.5 * (fit.covariance[(0, 0)] + fit.covariance[(1, 1)]) * inflation;
            result[i] = Some(CircleFit {
                circle: fit.circle,
                sigma_px: var.max(0.0).sqrt(),
                coverage: coverage_of(&fit.circle, used),
                rms_px: fit.rms_px,
                points: used.len(),
                edge_strength: strength,
                radius_held: held[i],
            });
        }
        // Candidates with almost no rim stop claiming points.
        for i in 0..circles.len() {
            if alive[i] && result[i].is_some_and(|f| f.coverage < options.prune_coverage) {
                alive[i] = false;
                result[i] = None;
            }
        }
        // Merge circles that converged onto one image: keep the better supported.
        for i in 0..circles.len() {
            for j in i + 1..circles.len() {
                if !(alive[i] && alive[j]) {
                    continue;
                }
                let d =
                    (circles[i].x_px - circles[j].x_px).hypot(circles[i].y_px - circles[j].y_px);
                if d < 0.3 * circles[i].r_px.min(circles[j].r_px) {
                    // The better rim coverage wins, then the more points.
                    let key = |k: usize| result[k].map_or((0.0, 0), |f| (f.coverage, f.points));
                    let (ki, kj) = (key(i), key(j));
                    let drop = if ki.0 > kj.0 || (ki.0 == kj.0 && ki.1 >= kj.1) {
                        j
                    } else {
                        i
                    };
                    alive[drop] = false;
                    result[drop] = None;
                }
            }
        }
    }
    result.into_iter().flatten().collect()
}

/// Give each edge point to the circle whose rim it lies on and whose centre its gradient points
/// at; when two rims claim it about equally (within `tol` / 2 of each other), nobody gets it.
fn assign(
    edges: &[EdgePoint],
    circles: &[Circle],
    alive: &[bool],
    tol: f64,
    min_cos: f64,
) -> Vec<Vec<usize>> {
    let mut owned = vec![Vec::new(); circles.len()];
    for (k, e) in edges.iter().enumerate() {
        let mut best: Option<(usize, f64)> = None;
        let mut second = f64::INFINITY;
        for (i, c) in circles.iter().enumerate() {
            if !alive[i] {
                continue;
            }
            let (dx, dy) = (c.x_px - e.x_px, c.y_px - e.y_px);
            let rho = dist(dx, dy);
            let res = (rho - c.r_px).abs();
            if res > tol || rho < 1e-9 {
                continue;
            }
            let cos = (dx * e.ux + dy * e.uy) / rho;
            if cos < min_cos {
                continue;
            }
            match best {
                Some((_, b)) if res >= b => second = second.min(res),
                _ => {
                    if let Some((_, b)) = best {
                        second = second.min(b);
                    }
                    best = Some((i, res));
                }
            }
        }
        if let Some((i, b)) = best
            && second - b > 0.5 * tol
        {
            owned[i].push(k);
        }
    }
    owned
}
