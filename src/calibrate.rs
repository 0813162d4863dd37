//! Calibration: pixels (x right, y down) to world metres in the plane of motion (x right, y up).
//!
//! Goes in: one of (a) a uniform scale in pixels per metre, the pixel of the world origin and an
//! optional camera roll; (b) four or more image points with their world coordinates (a plane file,
//! TOML), optionally with radial distortion k1, k2 and a focal length; (c) a ruler (two pixel
//! points a known distance apart) or the ball's diameter, which give a scale with its sigma. Comes
//! out: a [`Calibration`] mapping pixels to metres and back, with the local Jacobian that turns a
//! pixel sigma into a metre sigma.
//!
//! Methods: the plane homography is found by the normalised direct linear transform (Hartley &
//! Zisserman, Multiple View Geometry, 2nd ed., algorithm 4.2): both point sets are translated to
//! their centroid and scaled to a mean distance of sqrt(2), the 2n x 9 DLT system is solved by SVD
//! and the normalisation undone. Radial distortion follows the renderer's camera model
//! (`render::camera`): x_d = x_u (1 + k1 r^2 + k2 r^4) on coordinates normalised by the focal
//! length about the image centre; measured pixels are undistorted by fixed-point iteration before
//! the homography is applied.

use crate::error::{Error, Result};
use nalgebra::{DMatrix, Matrix3, Vector3};
use serde::{Deserialize, Serialize};
use std::path::Path;

/// Radial lens distortion about the image centre (Brown's model, two terms).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Distortion {
    /// Coefficient of r^2 (r on focal-normalised coordinates).
    pub k1: f64,
    /// Coefficient of r^4.
    pub k2: f64,
    /// Focal length, pixels.
    pub focal_px: f64,
    /// Image centre x, pixels.
    pub centre_x_px: f64,
    /// Image centre y, pixels.
    pub centre_y_px: f64,
}

impl Distortion {
    /// The centre of a `width_px` x `height_px` image with pixel centres at integer coordinates.
    pub fn for_image(k1: f64, k2: f64, focal_px: f64, width_px: u32, height_px: u32) -> Self {
        Distortion {
            k1,
            k2,
            focal_px,
            centre_x_px: (width_px as f64 - 1.0) / 2.0,
            centre_y_px: (height_px as f64 - 1.0) / 2.0,
        }
    }

    /// Undistorted pixel to distorted (as recorded) pixel.
    pub fn distort(&self, p: [f64; 2]) -> [f64; 2] {
        let xn = (p[0] - self.centre_x_px) / self.focal_px;
        let yn = (p[1] - self.centre_y_px) / self.focal_px;
        let r2 = xn * xn + yn * yn;
        let f = 1.0 + self.k1 * r2 + self.k2 * r2 * r2;
        [
            self.centre_x_px + self.focal_px * xn * f,
            self.centre_y_px + self.focal_px * yn * f,
        ]
    }

    /// Recorded pixel to undistorted pixel (fixed-point iteration of the forward model).
    pub fn undistort(&self, p: [f64; 2]) -> [f64; 2] {
        let xd = (p[0] - self.centre_x_px) / self.focal_px;
        let yd = (p[1] - self.centre_y_px) / self.focal_px;
        let (mut x, mut y) = (xd, yd);
        for _ in 0..50 {
            let r2 = x * x + y * y;
            let f = 1.0 + self.k1 * r2 + self.k2 * r2 * r2;
            let (nx, ny) = (xd / f, yd / f);
            let done = (nx - x).abs() + (ny - y).abs() < 1e-15;
            x = nx;
            y = ny;
            if done {
                break;
            }
        }
        [
            self.centre_x_px + self.focal_px * x,
            self.centre_y_px + self.focal_px * y,
        ]
    }

    fn validate(&self) -> Result<()> {
        let ok = [self.k1, self.k2, self.centre_x_px, self.centre_y_px]
            .iter()
            .all(|v| v.is_finite())
            && self.focal_px.is_finite()
            && self.focal_px > 0.0;
        if ok {
            Ok(())
        } else {
            Err(Error::setting(
                "distortion",
                "k1, k2 and the centre must be finite and the focal length positive",
            ))
        }
    }
}

/// A pixel-to-world mapping of the plane of motion.
#[derive(Debug, Clone)]
pub struct Calibration {
    world_to_pixel: Matrix3<f64>,
    pixel_to_world: Matrix3<f64>,
    distortion: Option<Distortion>,
}

fn apply(h: &Matrix3<f64>, p: [f64; 2]) -> [f64; 2] {
    let v = h * Vector3::new(p[0], p[1], 1.0);
    [v.x / v.z, v.y / v.z]
}

impl Calibration {
    /// Uniform scale: `px_per_m` about the pixel (`origin_x_px`, `origin_y_px`) where the world
    /// origin appears, the picture turned clockwise by `roll_deg` (the renderer's sign).
    pub fn uniform(
        px_per_m: f64,
        origin_x_px: f64,
        origin_y_px: f64,
        roll_deg: f64,
    ) -> Result<Self> {
        if !(px_per_m.is_finite() && px_per_m > 0.0) {
            return Err(Error::setting(
                "px_per_m",
                "must be a positive finite number",
            ));
        }
        if !(origin_x_px.is_finite() && origin_y_px.is_finite() && roll_deg.is_finite()) {
            return Err(Error::setting("origin", "origin and roll must be finite"));
        }
        let (sn, c) = roll_deg.to_radians().sin_cos();
        let s = px_per_m;
        // pixel = origin + s R(roll) (x, -y), R acting on pixel axes (y down).
        let h = Matrix3::new(
            s * c,
            s * sn,
            origin_x_px,
            s * sn,
            -s * c,
            origin_y_px,
            0.0,
            0.0,
            1.0,
        );
        Self::from_homography(h, None)
    }

    /// A plane-to-image homography (world metres to undistorted pixels) and optional distortion.
    pub fn from_homography(
        world_to_pixel: Matrix3<f64>,
        distortion: Option<Distortion>,
    ) -> Result<Self> {
        if let Some(d) = &distortion {
            d.validate()?;
        }
        let pixel_to_world = world_to_pixel
            .try_inverse()
            .filter(|m| m.iter().all(|v| v.is_finite()))
            .ok_or_else(|| Error::setting("homography", "is singular"))?;
        Ok(Calibration {
            world_to_pixel,
            pixel_to_world,
            distortion,
        })
    }

    /// Plane calibration from four or more image points (as recorded, distorted when `distortion`
    /// is given) and their world coordinates, by the normalised DLT.
    pub fn from_points(
        image_px: &[[f64; 2]],
        world_m: &[[f64; 2]],
        distortion: Option<Distortion>,
    ) -> Result<Self> {
        if let Some(d) = &distortion {
            d.validate()?;
        }
        let undistorted: Vec<[f64; 2]> = image_px
            .iter()
            .map(|&p| distortion.map_or(p, |d| d.undistort(p)))
            .collect();
        let h = homography_dlt(world_m, &undistorted)?;
        Self::from_homography(h, distortion)
    }

    /// The homography from world (x_m, y_m, 1) to undistorted pixels, scaled so h33 = 1 when it
    /// is not zero.
    pub fn homography(&self) -> Matrix3<f64> {
        self.world_to_pixel
    }

    /// The same mapping into a new world frame: each world position w of this calibration
    /// becomes `factor` R(`roll_rad`) w - `origin_m`, where R turns (x, y) to
    /// (x cos - y sin, x sin + y cos) (the physics' level correction), so the world point
    /// `origin_m` of the turned and scaled frame is the new origin.
    pub fn reframed(&self, roll_rad: f64, factor: f64, origin_m: [f64; 2]) -> Result<Self> {
        if !(factor.is_finite() && factor > 0.0) {
            return Err(Error::setting(
                "frame",
                "the length factor must be positive",
            ));
        }
        if !(roll_rad.is_finite() && origin_m.iter().all(|v| v.is_finite())) {
            return Err(Error::setting("frame", "roll and origin must be finite"));
        }
        let (s, c) = roll_rad.sin_cos();
        let to_new = Matrix3::new(
            factor * c,
            -factor * s,
            -origin_m[0],
            factor * s,
            factor * c,
            -origin_m[1],
            0.0,
            0.0,
            1.0,
        );
        let back = to_new
            .try_inverse()
            .ok_or_else(|| Error::setting("frame", "is singular"))?;
        let mut h = self.world_to_pixel * back;
        if h[(2, 2)] != 0.0 {
            h /= h[(2, 2)];
        }
        Self::from_homography(h, self.distortion)
    }

    /// Recorded pixel to world metres.
    pub fn to_world(&self, x_px: f64, y_px: f64) -> [f64; 2] {
        let u = self
            .distortion
            .map_or([x_px, y_px], |d| d.undistort([x_px, y_px]));
        apply(&self.pixel_to_world, u)
    }

    /// World metres to recorded pixel.
    pub fn to_pixel(&self, x_m: f64, y_m: f64) -> [f64; 2] {
        let u = apply(&self.world_to_pixel, [x_m, y_m]);
        self.distortion.map_or(u, |d| d.distort(u))
    }

    /// Jacobian d(world)/d(pixel) at a recorded pixel, metres per pixel, rows (x_m, y_m).
    pub fn jacobian_m_per_px(&self, x_px: f64, y_px: f64) -> [[f64; 2]; 2] {
        let h = 0.01;
        let a = self.to_world(x_px - h, y_px);
        let b = self.to_world(x_px + h, y_px);
        let c = self.to_world(x_px, y_px - h);
        let d = self.to_world(x_px, y_px + h);
        [
            [(b[0] - a[0]) / (2.0 * h), (d[0] - c[0]) / (2.0 * h)],
            [(b[1] - a[1]) / (2.0 * h), (d[1] - c[1]) / (2.0 * h)],
        ]
    }

    /// Metre sigma per world axis of a point whose pixel centre has an isotropic 1-sigma
    /// `sigma_px`: sigma_px * sqrt(trace(J J^T) / 2), the root-mean-square over both axes of the
    /// locally propagated covariance.
    pub fn sigma_m(&self, x_px: f64, y_px: f64, sigma_px: f64) -> f64 {
        let j = self.jacobian_m_per_px(x_px, y_px);
        let tr = j[0][0].powi(2) + j[0][1].powi(2) + j[1][0].powi(2) + j[1][1].powi(2);
        sigma_px * (tr / 2.0).sqrt()
    }

    /// Local scale at a recorded pixel, pixels per metre (1 / sqrt|det J|).
    pub fn scale_px_per_m(&self, x_px: f64, y_px: f64) -> f64 {
        let j = self.jacobian_m_per_px(x_px, y_px);
        1.0 / (j[0][0] * j[1][1] - j[0][1] * j[1][0]).abs().sqrt()
    }
}

/// Hartley normalisation: translate to the centroid, scale to mean distance sqrt(2).
fn normaliser(p: &[[f64; 2]]) -> Result<Matrix3<f64>> {
    let n = p.len() as f64;
    let cx = p.iter().map(|q| q[0]).sum::<f64>() / n;
    let cy = p.iter().map(|q| q[1]).sum::<f64>() / n;
    let mean = p.iter().map(|q| (q[0] - cx).hypot(q[1] - cy)).sum::<f64>() / n;
    if !(mean.is_finite() && mean > 0.0) {
        return Err(Error::setting(
            "points",
            "the calibration points must be finite and distinct",
        ));
    }
    let s = std::f64::consts::SQRT_2 / mean;
    Ok(Matrix3::new(
        s,
        0.0,
        -s * cx,
        0.0,
        s,
        -s * cy,
        0.0,
        0.0,
        1.0,
    ))
}

/// Homography H with to ~ H from (homogeneous), from four or more point pairs by the normalised
/// DLT (Hartley & Zisserman, algorithm 4.2). Scaled so that h33 = 1 when it is not near zero.
/// Refuses fewer than four pairs, non-finite values and degenerate configurations (three or more
/// of four points collinear, all points on a line).
pub fn homography_dlt(from: &[[f64; 2]], to: &[[f64; 2]]) -> Result<Matrix3<f64>> {
    if from.len() != to.len() {
        return Err(Error::setting(
            "points",
            format!("{} world points for {} image points", from.len(), to.len()),
        ));
    }
    if from.len() < 4 {
        return Err(Error::setting(
            "points",
            format!("a homography needs at least 4 points, got {}", from.len()),
        ));
    }
    if from
        .iter()
        .chain(to)
        .any(|p| !(p[0].is_finite() && p[1].is_finite()))
    {
        return Err(Error::setting(
            "points",
            "a coordinate is not a finite number",
        ));
    }
    let tf = normaliser(from)?;
    let tt = normaliser(to)?;
    let n = from.len();
    let rows = (2 * n).max(9);
    let mut a = DMatrix::zeros(rows, 9);
    for i in 0..n {
        let [x, y] = apply(&tf, from[i]);
        let [u, v] = apply(&tt, to[i]);
        let r = [0.0, 0.0, 0.0, -x, -y, -1.0, v * x, v * y, v];
        let s = [x, y, 1.0, 0.0, 0.0, 0.0, -u * x, -u * y, -u];
        for k in 0..9 {
            a[(2 * i, k)] = r[k];
            a[(2 * i + 1, k)] = s[k];
        }
    }
    let svd = nalgebra::SVD::try_new(a, false, true, 1e-15, 0)
        .ok_or_else(|| Error::setting("points", "the DLT system did not converge"))?;
    let v_t = svd
        .v_t
        .as_ref()
        .ok_or_else(|| Error::setting("points", "the DLT system did not converge"))?;
    let sv = &svd.singular_values;
    let mut order: Vec<usize> = (0..sv.len()).collect();
    order.sort_by(|&i, &j| sv[j].total_cmp(&sv[i]));
    let smallest = order[8];
    if sv[order[7]] <= 1e-10 * sv[order[0]] {
        return Err(Error::setting(
            "points",
            "the calibration points are degenerate (collinear): they do not fix a homography",
        ));
    }
    let h = v_t.row(smallest);
    let hn = Matrix3::new(h[0], h[1], h[2], h[3], h[4], h[5], h[6], h[7], h[8]);
    let tt_inv = tt
        .try_inverse()
        .ok_or_else(|| Error::setting("points", "degenerate image points"))?;
    let mut out = tt_inv * hn * tf;
    let norm = out.norm();
    if out[(2, 2)].abs() > 1e-12 * norm {
        out /= out[(2, 2)];
    } else {
        out /= norm;
    }
    let det = out.determinant();
    if !(det.is_finite() && det.abs() > 1e-12 * out.norm().powi(3)) {
        return Err(Error::setting(
            "points",
            "the image points are degenerate (collinear): they do not fix a homography",
        ));
    }
    Ok(out)
}

/// One calibration point of a plane file.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PlanePoint {
    /// Recorded pixel x.
    pub x_px: f64,
    /// Recorded pixel y.
    pub y_px: f64,
    /// World x, metres.
    pub x_m: f64,
    /// World y, metres (up).
    pub y_m: f64,
}

/// A plane file (TOML): `[[points]]` tables with `x_px`, `y_px`, `x_m`, `y_m` (four or more), and
/// optional `k1`, `k2`, `focal_px` (default: image width) for radial distortion.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PlaneFile {
    /// The calibration points.
    pub points: Vec<PlanePoint>,
    /// Radial distortion coefficient of r^2.
    #[serde(default)]
    pub k1: Option<f64>,
    /// Radial distortion coefficient of r^4.
    #[serde(default)]
    pub k2: Option<f64>,
    /// Focal length for the distortion model, pixels.
    #[serde(default)]
    pub focal_px: Option<f64>,
}

impl PlaneFile {
    /// Parse a plane file; `path` names it in errors.
    pub fn from_toml(text: &str, path: &Path) -> Result<Self> {
        let plane: PlaneFile = toml::from_str(text).map_err(|e| Error::toml(path, text, &e))?;
        if plane.points.len() < 4 {
            return Err(Error::config(
                path,
                format!("points: at least 4 are needed, got {}", plane.points.len()),
            ));
        }
        Ok(plane)
    }

    /// Read and parse a plane file.
    pub fn load(path: &Path) -> Result<Self> {
        let text = std::fs::read_to_string(path).map_err(|e| Error::io(path, e))?;
        Self::from_toml(&text, path)
    }

    /// The calibration for a photo of `width_px` x `height_px` (which fixes the distortion centre).
    pub fn calibration(&self, width_px: u32, height_px: u32) -> Result<Calibration> {
        let distortion = match (self.k1, self.k2) {
            (None, None) => None,
            (k1, k2) => Some(Distortion::for_image(
                k1.unwrap_or(0.0),
                k2.unwrap_or(0.0),
                self.focal_px.unwrap_or(width_px as f64),
                width_px,
                height_px,
            )),
        };
        let image: Vec<[f64; 2]> = self.points.iter().map(|p| [p.x_px, p.y_px]).collect();
        let world: Vec<[f64; 2]> = self.points.iter().map(|p| [p.x_m, p.y_m]).collect();
        Calibration::from_points(&image, &world, distortion)
    }
}

/// A scale with its 1-sigma uncertainty.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Scale {
    /// Pixels per metre.
    pub px_per_m: f64,
    /// 1-sigma, pixels per metre.
    pub sigma_px_per_m: f64,
}

/// Scale from a ruler: two recorded pixel points `distance_m` apart, each with an isotropic
/// 1-sigma `sigma_px` (the length in pixels then has sigma sqrt(2) sigma_px).
pub fn ruler_scale(
    a_px: [f64; 2],
    b_px: [f64; 2],
    distance_m: f64,
    sigma_px: f64,
) -> Result<Scale> {
    if !(distance_m.is_finite() && distance_m > 0.0) {
        return Err(Error::setting(
            "ruler",
            "the distance must be a positive number of metres",
        ));
    }
    if !(sigma_px.is_finite() && sigma_px >= 0.0) {
        return Err(Error::setting("ruler", "the pixel sigma must be >= 0"));
    }
    let len = (b_px[0] - a_px[0]).hypot(b_px[1] - a_px[1]);
    if !(len.is_finite() && len > 0.0) {
        return Err(Error::setting(
            "ruler",
            "the two ruler points must be distinct and finite",
        ));
    }
    Ok(Scale {
        px_per_m: len / distance_m,
        sigma_px_per_m: std::f64::consts::SQRT_2 * sigma_px / distance_m,
    })
}

/// Scale from the ball: mean detected radius (pixels, with its 1-sigma) and the true diameter.
pub fn ball_scale(mean_radius_px: f64, radius_sigma_px: f64, diameter_m: f64) -> Result<Scale> {
    if !(diameter_m.is_finite() && diameter_m > 0.0) {
        return Err(Error::setting(
            "ball diameter",
            "must be a positive number of metres",
        ));
    }
    if !(mean_radius_px.is_finite() && mean_radius_px > 0.0) {
        return Err(Error::setting(
            "ball radius",
            "must be a positive number of pixels",
        ));
    }
    if !(radius_sigma_px.is_finite() && radius_sigma_px >= 0.0) {
        return Err(Error::setting("ball radius", "the sigma must be >= 0"));
    }
    Ok(Scale {
        px_per_m: 2.0 * mean_radius_px / diameter_m,
        sigma_px_per_m: 2.0 * radius_sigma_px / diameter_m,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn uniform_round_trip_and_scale() {
        let c = Calibration::uniform(800.0, 100.0, 700.0, 2.0).unwrap();
        let p = c.to_pixel(0.3, 0.2);
        let w = c.to_world(p[0], p[1]);
        assert!((w[0] - 0.3).abs() < 1e-12 && (w[1] - 0.2).abs() < 1e-12);
        assert!((c.scale_px_per_m(500.0, 300.0) - 800.0).abs() < 1e-6);
        assert!((c.sigma_m(500.0, 300.0, 0.8) - 0.001).abs() < 1e-9);
        let o = c.to_world(100.0, 700.0);
        assert!(o[0].abs() < 1e-12 && o[1].abs() < 1e-12);
    }

    #[test]
    fn reframed_turns_scales_and_shifts_the_world() {
        // Seen without its roll, a picture turned by 2 degrees gives world positions turned by
        // -2 degrees; turning them back by the roll (the physics' level correction) is the
        // calibration that knows the roll. Then a factor and a new origin.
        let level = Calibration::uniform(800.0, 100.0, 700.0, 0.0).unwrap();
        let rolled = Calibration::uniform(800.0, 100.0, 700.0, 2.0).unwrap();
        let turned = level.reframed(2f64.to_radians(), 1.0, [0.0, 0.0]).unwrap();
        let moved = level.reframed(2f64.to_radians(), 1.5, [0.2, -0.1]).unwrap();
        for p in [[100.0, 700.0], [900.0, 120.0], [350.5, 480.25]] {
            let (a, b) = (turned.to_world(p[0], p[1]), rolled.to_world(p[0], p[1]));
            assert!((a[0] - b[0]).abs() < 1e-12 && (a[1] - b[1]).abs() < 1e-12);
            let m = moved.to_world(p[0], p[1]);
            assert!((m[0] - (1.5 * b[0] - 0.2)).abs() < 1e-12);
            assert!((m[1] - (1.5 * b[1] + 0.1)).abs() < 1e-12);
            let q = moved.to_pixel(m[0], m[1]);
            assert!((q[0] - p[0]).abs() < 1e-9 && (q[1] - p[1]).abs() < 1e-9);
        }
    }

    #[test]
    fn refuses_degenerate_points() {
        let line = [[0.0, 0.0], [1.0, 0.0], [2.0, 0.0], [3.0, 0.0]];
        let img = [[0.0, 0.0], [1.0, 1.0], [2.0, 0.5], [3.0, 3.0]];
        assert!(homography_dlt(&line, &img).is_err());
        assert!(homography_dlt(&img[..3], &img[..3]).is_err());
        let nan = [[f64::NAN, 0.0], [1.0, 0.0], [1.0, 1.0], [0.0, 1.0]];
        assert!(homography_dlt(&nan, &img).is_err());
        assert!(Calibration::uniform(0.0, 0.0, 0.0, 0.0).is_err());
        assert!(ruler_scale([0.0, 0.0], [0.0, 0.0], 1.0, 0.1).is_err());
        assert!(ball_scale(f64::NAN, 0.1, 0.04).is_err());
    }

    #[test]
    fn plane_file_parses_and_refuses_unknown_keys() {
        let text = "k1 = -0.01\n[[points]]\nx_px = 0\ny_px = 0\nx_m = 0\ny_m = 0\n";
        let err = PlaneFile::from_toml(text, Path::new("p.toml"))
            .unwrap_err()
            .to_string();
        assert!(err.contains("at least 4"), "{err}");
        let err = PlaneFile::from_toml("zoom = 1\npoints = []", Path::new("p.toml"))
            .unwrap_err()
            .to_string();
        assert!(err.contains("zoom"), "{err}");
    }
}
