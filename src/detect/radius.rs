//! The ball's radius: the range to search, estimated from the blobs, and the radius of its
//! images across the photo, learned from the first circle fits.
//!
//! Goes in: the threshold's [`Blobs`]; later the first [`CircleFit`]s. Comes out: a radius range
//! ([`auto_radius`]) and a [`RadiusModel`] with the photo's common radius ([`learn`]).
//!
//! Method: the median size of the compact blobs, or, with none alone, the largest inscribed disc
//! of each blob (Felzenszwalb & Huttenlocher's distance transform); the model is a least-squares
//! plane r = a + bx x + by y through the circles within 3 robust sigmas (1.4826 x MAD) of the
//! model so far, starting from the median radius.

use crate::core::stats::MAD_TO_SIGMA;
use crate::detect::circle::{Circle, CircleFit};
use crate::detect::well_covered;
use crate::image::threshold::{Blob, Blobs};
use nalgebra::{Matrix3, Vector3};

/// Estimate the radius range to search, pixels of the blobs' photo, from the compact, isolated
/// blobs (None: no blob to estimate it from).
pub fn auto_radius(blobs: &Blobs) -> Option<(f64, f64)> {
    let mut radii: Vec<f64> = blobs
        .blobs
        .iter()
        .filter(|b| b.is_compact())
        .map(|b| 0.25 * (b.width_px() + b.height_px()))
        .collect();
    // A chain's largest inscribed disc also takes in the halo of the threshold and whatever
    // the chain rests on (an incline's edge): its radius is an upper bound more than a measure.
    let (low, chains) = if radii.is_empty() {
        radii = inscribed_radii(blobs, |_| true)
            .iter()
            .map(|c| c.0)
            .collect();
        (0.5, Vec::new())
    } else {
        (0.8, inscribed_radii(blobs, |b| !b.is_compact()))
    };
    if radii.is_empty() {
        return None;
    }
    radii.sort_by(f64::total_cmp);
    let r0 = ball_radius(&radii, &chains);
    let slack = blobs.block_px as f64;
    Some(((low * r0 - slack).max(3.0), 1.25 * r0 + slack + 1.0))
}

/// The ball's radius among compact blob radii sorted increasing: their median, unless blobs
/// over twice that radius (compact ones, and the `chains`, blobs of overlapping images, by
/// their inscribed radius and area) are at least [`BALL_IMAGES_MIN`] and hold
/// [`BIG_AREA_RATIO`] times the area of the smaller compact ones; then the median of those
/// radii. The noise of a difference of two JPEGs (a dark ball against its clean plate) leaves
/// hundreds of small compact specks that outnumber the ball's images, of which all but three
/// may touch a neighbour (sweep shot 39: 3 compact images of 28 px among 146 specks, and
/// chains); a round object beside the path is one to three blobs, not four.
fn ball_radius(radii: &[f64], chains: &[(f64, f64)]) -> f64 {
    let median = radii[radii.len() / 2];
    let split = radii.partition_point(|&r| r <= 2.0 * median);
    let (small, big) = radii.split_at(split);
    let area = |rs: &[f64]| std::f64::consts::PI * rs.iter().map(|r| r * r).sum::<f64>();
    let big_chains: Vec<&(f64, f64)> = chains.iter().filter(|c| c.0 > 2.0 * median).collect();
    let mut big_radii: Vec<f64> = big.to_vec();
    big_radii.extend(big_chains.iter().map(|c| c.0));
    big_radii.sort_by(f64::total_cmp);
    let big_area = area(big) + big_chains.iter().map(|c| c.1).sum::<f64>();
    if big_radii.len() >= BALL_IMAGES_MIN && big_area >= BIG_AREA_RATIO * area(small) {
        big_radii[big_radii.len() / 2]
    } else {
        median
    }
}

/// Fewest blobs of one size taken for the ball's images over a crowd of smaller specks.
const BALL_IMAGES_MIN: usize = 4;

/// Area ratio by which larger blobs outweigh a crowd of smaller specks (see [`ball_radius`]).
const BIG_AREA_RATIO: f64 = 3.0;

/// With no round blob alone (every image touches a neighbour: a chain rolling down an incline),
/// the radius of each blob of four blocks or more (with its area, pixels) is that of the
/// largest disc inside it: its
/// largest Euclidean distance to a block outside (Felzenszwalb & Huttenlocher, "Distance
/// transforms of sampled functions", via imageproc). A chain of overlapping images of radius r
/// is 2 r wide, so that disc has radius r; a bounding box would give the chain's extent.
fn inscribed_radii(blobs: &Blobs, keep: impl Fn(&Blob) -> bool) -> Vec<(f64, f64)> {
    use image::{GrayImage, Luma};
    let (w, h) = blobs.mask.dimensions();
    // Outside the photo counts as outside the blob: a one-block frame around the mask.
    let mut outside = GrayImage::from_pixel(w + 2, h + 2, Luma([255u8]));
    for (x, y, p) in blobs.mask.enumerate_pixels() {
        if p[0] > 0 {
            outside.put_pixel(x + 1, y + 1, Luma([0]));
        }
    }
    let d2 = imageproc::distance_transform::euclidean_squared_distance_transform(&outside);
    let b = blobs.block_px;
    blobs
        .blobs
        .iter()
        .filter(|blob| blob.blocks >= 4 && keep(blob))
        .filter_map(|blob| {
            let (bx0, by0) = (blob.x0 / b, blob.y0 / b);
            let (bx1, by1) = (
                (blob.x1 / b).min(w as usize - 1),
                (blob.y1 / b).min(h as usize - 1),
            );
            let mut best: f64 = 0.0;
            for by in by0..=by1 {
                for bx in bx0..=bx1 {
                    best = best.max(d2.get_pixel(bx as u32 + 1, by as u32 + 1)[0]);
                }
            }
            (best > 0.0).then(|| (best.sqrt() * b as f64, blob.area_px))
        })
        .collect()
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

    /// Fit to well-measured circles: three rounds of least squares of a plane through the
    /// circles within 3 robust sigmas of the model so far, starting from the median radius; the
    /// median radius when fewer than 8 circles, or when they span less than 5 radii.
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
        // Start from the median: a plane through every circle first would lean toward the
        // texture's and the rig's edges' circles, and the cut would then keep them.
        let mut model = median;
        for _ in 0..3 {
            let mut dev: Vec<f64> = circles
                .iter()
                .map(|c| (c.r_px - model.at(c.x_px, c.y_px)).abs())
                .collect();
            dev.sort_by(f64::total_cmp);
            let cut = (3.0 * MAD_TO_SIGMA * dev[dev.len() / 2]).max(0.02 * median.a_px);
            let inliers: Vec<&Circle> = circles
                .iter()
                .filter(|c| (c.r_px - model.at(c.x_px, c.y_px)).abs() <= cut)
                .collect();
            if inliers.len() < 8 {
                return Some(median);
            }
            let mut ata = Matrix3::zeros();
            let mut atb = Vector3::zeros();
            for c in &inliers {
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
        }
        Some(model)
    }
}

/// The photo's radius model and common radius (the median of the model at the circles' centres)
/// from the first fits: those well covered (see [`well_covered`]) with a radius
/// in `r_min_px..=r_max_px`, or, with none, all with coverage at least `min_score`. None when no
/// fit qualifies.
pub fn learn(
    first: &[Vec<CircleFit>],
    (r_min_px, r_max_px): (f64, f64),
    min_score: f64,
) -> Option<(RadiusModel, f64)> {
    let mut good: Vec<Circle> = first
        .iter()
        .flatten()
        .filter(|f| {
            well_covered(f.coverage, f.circle.r_px)
                && f.circle.r_px >= r_min_px
                && f.circle.r_px <= r_max_px
        })
        .map(|f| f.circle)
        .collect();
    if good.is_empty() {
        good = first
            .iter()
            .flatten()
            .filter(|f| f.coverage >= min_score)
            .map(|f| f.circle)
            .collect();
    }
    let model = RadiusModel::fit(&good)?;
    let mut at_centre = good
        .iter()
        .map(|c| model.at(c.x_px, c.y_px))
        .collect::<Vec<_>>();
    at_centre.sort_by(f64::total_cmp);
    Some((model, at_centre[at_centre.len() / 2]))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn specks_do_not_outvote_the_ball() {
        // The sweep's shot 275: a dark ball of 47 px against its clean plate, both JPEG q65;
        // the difference's noise leaves hundreds of compact specks of 2 to 5 px beside the 19
        // images (blob radii in pixels, sorted as auto_radius sorts them).
        let mut radii: Vec<f64> = (0..300).map(|i| 2.0 + 3.0 * (i % 7) as f64 / 6.0).collect();
        radii.extend((0..19).map(|i| 45.0 + 0.2 * i as f64));
        radii.sort_by(f64::total_cmp);
        let r = ball_radius(&radii, &[]);
        assert!((45.0..=49.0).contains(&r), "{r}");
        // Thirty images of 6 px with three round objects of 20 px beside them: the images.
        let mut radii: Vec<f64> = (0..30).map(|i| 5.8 + 0.01 * i as f64).collect();
        radii.extend([19.0, 20.0, 21.0]);
        let r = ball_radius(&radii, &[]);
        assert!((5.8..=6.1).contains(&r), "{r}");
        // The sweep's shot 39: a dark ball of 22 px, JPEG photo and plate; 146 specks of 2 to
        // 11.5 px, 3 compact images of 28 px (with the threshold's halo), the rest of the
        // images in one chain (inscribed radius 24.7 px, about 50 images' area): the images.
        let mut radii: Vec<f64> = (0..146).map(|i| 2.0 + 0.065 * i as f64).collect();
        radii.extend([28.0, 28.0, 28.5]);
        let chain_area = 50.0 * std::f64::consts::PI * 22.0 * 22.0;
        let r = ball_radius(&radii, &[(24.7, chain_area), (4.0, 60.0)]);
        assert!((24.0..=28.5).contains(&r), "{r}");
        // Without the chain, three images do not outvote the specks (they could be objects).
        let r = ball_radius(&radii, &[]);
        assert!(r < 12.0, "{r}");
    }

    #[test]
    fn junk_circles_do_not_tilt_the_radius_plane() {
        // 45 ball images of 6.0 px (+-0.05) over a 1600 x 1000 photo; a floor edge's row of 20
        // candidates of 6.7 px at y = 1011 and 10 texture candidates of 4.4 to 11 px at the
        // top (as in the sweep's shot 286: 55 images, 25 others). The model must stay at
        // 6.0 px everywhere.
        let mut circles = Vec::new();
        for i in 0..45 {
            let f = i as f64;
            circles.push(Circle {
                x_px: 30.0 + 35.0 * f,
                y_px: 100.0 + (f * 137.0) % 850.0,
                r_px: 6.0 + 0.05 * (f * 1.7).sin(),
            });
        }
        for i in 0..20 {
            circles.push(Circle {
                x_px: 400.0 + 10.0 * i as f64,
                y_px: 1011.0,
                r_px: 6.7,
            });
        }
        for i in 0..10 {
            circles.push(Circle {
                x_px: 300.0 + 120.0 * i as f64,
                y_px: 40.0,
                r_px: 4.4 + 0.7 * i as f64,
            });
        }
        let model = RadiusModel::fit(&circles).unwrap();
        for (x, y) in [(0.0, 0.0), (1600.0, 0.0), (0.0, 1000.0), (1600.0, 1000.0)] {
            let r = model.at(x, y);
            assert!((r - 6.0).abs() < 0.05, "{r} at ({x}, {y})");
        }
    }

    #[test]
    fn a_real_gradient_is_kept() {
        // A camera tilted 30 degrees: the radius grows from 4 px at the top to 8 px at the bottom
        // of a 1000 px photo; 40 images.
        let circles: Vec<Circle> = (0..40)
            .map(|i| {
                let y = 25.0 * i as f64;
                Circle {
                    x_px: 100.0 + (37.0 * i as f64) % 1400.0,
                    y_px: y,
                    r_px: 4.0 + 0.004 * y,
                }
            })
            .collect();
        let model = RadiusModel::fit(&circles).unwrap();
        assert!((model.at(0.0, 0.0) - 4.0).abs() < 0.01);
        assert!((model.at(0.0, 1000.0) - 8.0).abs() < 0.01);
    }
}
