//! Camera model of the renderer: the plane of motion seen through a pinhole camera that may be
//! rolled and turned (a plane-to-image homography), then radial lens distortion (Brown's model,
//! k1 r^2 + k2 r^4, on coordinates normalised by the focal length, about the image centre).
//!
//! Goes in: the scene's [`Camera`]. Comes out: world (metres, y up) to pixel (x right, y down,
//! pixel centres at integer coordinates) and back, and the local scale in pixels per metre.

use super::scene::Camera;
use nalgebra::{Matrix3, Vector3};

/// The forward and inverse projection of a scene's camera.
#[derive(Debug, Clone)]
pub struct Projection {
    /// Homography from world plane (x_m, y_m, 1) to undistorted pixel coordinates.
    pub homography: Matrix3<f64>,
    inverse: Matrix3<f64>,
    centre_px: [f64; 2],
    focal_px: f64,
    k1: f64,
    k2: f64,
}

impl Projection {
    /// Build the projection of `camera`.
    pub fn new(camera: &Camera) -> Projection {
        let cx = (camera.width_px as f64 - 1.0) / 2.0;
        let cy = (camera.height_px as f64 - 1.0) / 2.0;
        let f = camera.focal_px.unwrap_or(camera.width_px as f64);
        let s = camera.px_per_m;
        // World point seen at the image centre.
        let x0 = (cx - camera.origin_x_px) / s;
        let y0 = (camera.origin_y_px - cy) / s;
        // Camera frame: X right, Y down, Z forward; the plane is at distance d = f / s so that the
        // scale at the centre is s. The camera is turned by `tilt` about its Y axis.
        let d = f / s;
        let (st, ct) = camera.tilt_deg.to_radians().sin_cos();
        let rot_y = Matrix3::new(ct, 0.0, st, 0.0, 1.0, 0.0, -st, 0.0, ct);
        // Plane point (x, y) -> camera point = R * (x - x0, -(y - y0), 0) + (0, 0, d)
        //   = R[:,0] (x - x0) - R[:,1] (y - y0) + (0, 0, d).
        let c0 = rot_y.column(0).into_owned();
        let c1 = -rot_y.column(1).into_owned();
        let t = Vector3::new(0.0, 0.0, d) - c0 * x0 - c1 * y0;
        let plane_to_cam = Matrix3::from_columns(&[c0, c1, t]);
        let (sr, cr) = camera.roll_deg.to_radians().sin_cos();
        // Intrinsics with the roll folded in: rotate the image about its centre.
        let k = Matrix3::new(f, 0.0, 0.0, 0.0, f, 0.0, 0.0, 0.0, 1.0);
        let roll = Matrix3::new(cr, -sr, 0.0, sr, cr, 0.0, 0.0, 0.0, 1.0);
        let shift = Matrix3::new(1.0, 0.0, cx, 0.0, 1.0, cy, 0.0, 0.0, 1.0);
        let homography = shift * roll * k * plane_to_cam;
        let inverse = homography
            .try_inverse()
            .expect("a camera within the validated ranges sees the plane");
        Projection {
            homography,
            inverse,
            centre_px: [cx, cy],
            focal_px: f,
            k1: camera.k1,
            k2: camera.k2,
        }
    }

    fn distort(&self, u: [f64; 2]) -> [f64; 2] {
        if self.k1 == 0.0 && self.k2 == 0.0 {
            return u;
        }
        let xn = (u[0] - self.centre_px[0]) / self.focal_px;
        let yn = (u[1] - self.centre_px[1]) / self.focal_px;
        let r2 = xn * xn + yn * yn;
        let factor = 1.0 + self.k1 * r2 + self.k2 * r2 * r2;
        [
            self.centre_px[0] + self.focal_px * xn * factor,
            self.centre_px[1] + self.focal_px * yn * factor,
        ]
    }

    fn undistort(&self, d: [f64; 2]) -> [f64; 2] {
        if self.k1 == 0.0 && self.k2 == 0.0 {
            return d;
        }
        let xd = (d[0] - self.centre_px[0]) / self.focal_px;
        let yd = (d[1] - self.centre_px[1]) / self.focal_px;
        let (mut x, mut y) = (xd, yd);
        for _ in 0..20 {
            let r2 = x * x + y * y;
            let factor = 1.0 + self.k1 * r2 + self.k2 * r2 * r2;
            x = xd / factor;
            y = yd / factor;
        }
        [
            self.centre_px[0] + self.focal_px * x,
            self.centre_px[1] + self.focal_px * y,
        ]
    }

    /// World point (metres, y up) to pixel (x right, y down).
    pub fn to_pixel(&self, x_m: f64, y_m: f64) -> [f64; 2] {
        let p = self.homography * Vector3::new(x_m, y_m, 1.0);
        self.distort([p.x / p.z, p.y / p.z])
    }

    /// Pixel to world point in the plane of motion.
    pub fn to_world(&self, x_px: f64, y_px: f64) -> [f64; 2] {
        let u = self.undistort([x_px, y_px]);
        let p = self.inverse * Vector3::new(u[0], u[1], 1.0);
        [p.x / p.z, p.y / p.z]
    }

    /// Local scale at a world point, pixels per metre (square root of the Jacobian determinant).
    pub fn scale_px_per_m(&self, x_m: f64, y_m: f64) -> f64 {
        let h = 1e-4;
        let a = self.to_pixel(x_m - h, y_m);
        let b = self.to_pixel(x_m + h, y_m);
        let c = self.to_pixel(x_m, y_m - h);
        let d = self.to_pixel(x_m, y_m + h);
        let jx = [(b[0] - a[0]) / (2.0 * h), (b[1] - a[1]) / (2.0 * h)];
        let jy = [(d[0] - c[0]) / (2.0 * h), (d[1] - c[1]) / (2.0 * h)];
        (jx[0] * jy[1] - jx[1] * jy[0]).abs().sqrt()
    }
}
