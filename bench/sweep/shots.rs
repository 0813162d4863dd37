//! Random shots across the shot space of issue 16 for the sweep bench, and the settings a user
//! would give to measure each.
//!
//! Goes in: a seed (and `small`, which caps the frame at about 0.5 MP for the test slice). Comes
//! out: a [`Shot`]: a valid [`Scene`] (drop, throw or incline 10-60 deg; 5-120 Hz; ball image
//! radius 6-80 px; bright or dark ball; JPEG 60-100 or PNG 8/16 bit, 16 bit linear half the time;
//! square, rolled or tilted camera; glossy floor; distractors; restitution 0.3-0.95 with and
//! without a speed trend; air drag), the plane points of a tilted camera (the renderer's own
//! projection of world points) and [`Shot::settings`], the [`MeasureSettings`] the command line
//! would build from what a user types (`--rate`, `--ball-diameter`, `--ball`, `--scale` or
//! `--plane`, `--plate` for a dark ball, `--tone linear` for a linear photo, `--fit-drag` when
//! drag is strong).
//!
//! The motion is sized from the flash rate so that the first rebound arc holds about 5-16
//! images (a user picks a rate that shows the motion); the scale then follows from the frame
//! (at most 1600 x 1200 px) and the ball's diameter from the drawn image radius.

use beadline::calibrate::PlanePoint;
use beadline::core::ball::Build;
use beadline::core::light::{Polarity, Tone};
use beadline::core::units::STANDARD_GRAVITY_MPS2;
use beadline::pipeline::{MeasureSettings, ScaleSource};
use beadline::synth::camera::Projection;
use beadline::synth::scene::{
    Ball, Camera, Distractor, Flight, Floor, Incline, Markings, PhotoLook, Scene, Start, Strobe,
};
use beadline::synth::sim::Motion;
use rand::{RngExt, SeedableRng};
use rand_chacha::ChaCha8Rng;
use std::path::PathBuf;

/// What the ball does.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Kind {
    /// Let go from rest (vx = 0).
    Drop,
    /// Thrown (vx, vy).
    Throw,
    /// Rolls down an incline, then flies and bounces.
    Incline,
}

/// The photo file.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Format {
    /// JPEG with this quality.
    Jpeg(u8),
    /// 8-bit PNG (sRGB).
    Png8,
    /// 16-bit PNG; `linear`: linear tone (measured with `--tone linear`).
    Png16 { linear: bool },
}

impl Format {
    /// The file extension.
    pub fn extension(self) -> &'static str {
        match self {
            Format::Jpeg(_) => "jpg",
            _ => "png",
        }
    }
}

/// Where the user's scale comes from.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ScaleMode {
    /// `--scale PX_PER_M` (the scene's scale, as measured on a ruler in the plane).
    Given,
    /// Only `--ball-diameter`: the ball is the ruler.
    Ball,
    /// `--plane FILE` (tilted camera).
    Plane,
}

/// One drawn shot.
#[derive(Debug, Clone)]
pub struct Shot {
    /// The seed it was drawn from.
    pub seed: u64,
    /// The scene to render.
    pub scene: Scene,
    /// Drop, throw or incline.
    pub kind: Kind,
    /// File format.
    pub format: Format,
    /// Scale source the user gives.
    pub scale_mode: ScaleMode,
    /// Plane points (tilted camera), the renderer's projection of world points.
    pub plane_points: Vec<PlanePoint>,
    /// The user fits air drag (`--fit-drag`).
    pub fit_drag: bool,
    /// Drag's share of gravity at the fastest point, for the description.
    pub drag_share: f64,
    /// The frame was cropped so that part of the path leaves it.
    pub cropped: bool,
    /// The drawn image radius, pixels.
    pub r_px: f64,
}

fn uni(rng: &mut ChaCha8Rng, a: f64, b: f64) -> f64 {
    a + (b - a) * rng.random::<f64>()
}

fn log_uni(rng: &mut ChaCha8Rng, a: f64, b: f64) -> f64 {
    uni(rng, a.ln(), b.ln()).exp()
}

fn chance(rng: &mut ChaCha8Rng, p: f64) -> bool {
    rng.random::<f64>() < p
}

fn sign(rng: &mut ChaCha8Rng) -> f64 {
    if chance(rng, 0.5) { 1.0 } else { -1.0 }
}

/// The motion's part of a scene: kind, rate, restitution, build and the start or incline.
struct Motion0 {
    kind: Kind,
    rate_hz: f64,
    build: Build,
    start: Option<Start>,
    incline: Option<Incline>,
    first_flash_s: f64,
    floor: Floor,
    drag_per_m: f64,
}

fn inertia(build: Build) -> f64 {
    if build == Build::Shell {
        2.0 / 3.0
    } else {
        0.4
    }
}

/// Draw the motion in metres (ball diameter not yet known: `d_m` is a guess the caller fixes).
fn draw_motion(rng: &mut ChaCha8Rng) -> Motion0 {
    let g = STANDARD_GRAVITY_MPS2;
    let kind = match rng.random::<f64>() {
        u if u < 1.0 / 3.0 => Kind::Drop,
        u if u < 2.0 / 3.0 => Kind::Throw,
        _ => Kind::Incline,
    };
    let rate_hz = log_uni(rng, 5.0, 120.0);
    let e = uni(rng, 0.3, 0.95);
    let build = if chance(rng, 0.6) {
        Build::Solid
    } else {
        Build::Shell
    };
    // Images on the first rebound arc (about 2 e T f for a fall of T seconds).
    let n1 = uni(rng, 5.0, 16.0);
    let fall_s = (n1 / (2.0 * e * rate_hz)).clamp(0.1, 1.0);
    let (start, incline, first_flash_s, impact_mps) = match kind {
        Kind::Drop | Kind::Throw => {
            let h = 0.5 * g * fall_s * fall_s;
            let (vx, vy) = if kind == Kind::Throw {
                let vy = uni(rng, -0.3, 0.6) * (2.0 * g * h).sqrt();
                // Horizontal travel over about three arcs: 1 to 3 times the height.
                let span_s = fall_s * (1.0 + 2.0 * e + 2.0 * e * e);
                (uni(rng, 1.0, 3.0) * h / span_s, vy)
            } else {
                (0.0, 0.0)
            };
            let start = Start {
                x_m: 0.0,
                y_m: h,
                vx_mps: vx,
                vy_mps: vy,
                spin_hz: 0.0,
            };
            let ff = uni(rng, 0.0, 0.3) * fall_s;
            (Some(start), None, ff, (2.0 * g * h + vy * vy).sqrt())
        }
        Kind::Incline => {
            let angle_deg = uni(rng, 10.0, 60.0);
            let th = angle_deg.to_radians();
            let c = if chance(rng, 0.3) {
                uni(rng, 0.0, 0.3) * th.tan()
            } else {
                0.0
            };
            let a = g * (th.sin() - c * th.cos()) / (1.0 + inertia(build));
            let n_inc = uni(rng, 4.0, 12.0);
            let frac = uni(rng, 0.15, 0.4);
            let t1 = n_inc / (rate_hz * (1.0 - frac));
            let length_m = 0.5 * a * t1 * t1;
            let v = a * t1;
            let n0 = uni(rng, 4.0, 14.0);
            let t_fall = (n0 / rate_hz).min(1.0);
            let hb = (v * th.sin() * t_fall + 0.5 * g * t_fall * t_fall).max(0.03);
            let inc = Incline {
                length_m,
                angle_deg,
                bottom_height_m: hb,
                bottom_x_m: 0.0,
                rolling_resistance: c,
                slip: 0.0,
            };
            let vy = v * th.sin();
            (None, Some(inc), frac * t1, (vy * vy + 2.0 * g * hb).sqrt())
        }
    };
    // A speed trend of restitution (a ball loses more at speed) half the time, e kept 0.25..0.97
    // at the first impact.
    let slope = if chance(rng, 0.5) {
        // Slower later impacts: e rises with a negative slope (intercept at most 1) and falls
        // with a positive one (intercept at least 0.25).
        let lo = ((e - 1.0) / impact_mps).max(-0.08);
        let hi = ((e - 0.25) / impact_mps).min(0.02);
        uni(rng, lo, hi.max(lo))
    } else {
        0.0
    };
    let floor = Floor {
        restitution: e - slope * impact_mps,
        restitution_slope_s_per_m: slope,
        tangential_ratio: uni(rng, 0.85, 1.0),
        ..Floor::default()
    };
    let floor = Floor {
        restitution: floor.restitution.clamp(0.0, 1.0),
        ..floor
    };
    let drag_per_m = if chance(rng, 0.25) {
        log_uni(rng, 0.005, 0.1)
    } else {
        0.0
    };
    Motion0 {
        kind,
        rate_hz,
        build,
        start,
        incline,
        first_flash_s,
        floor,
        drag_per_m,
    }
}

/// A scene from the motion with ball diameter `d_m`, a placeholder camera and a long exposure.
fn scene_of(m: &Motion0, d_m: f64, seed: u64) -> Scene {
    let start = m.start.as_ref().map(|s| Start {
        y_m: s.y_m + d_m / 2.0,
        ..s.clone()
    });
    Scene {
        seed,
        ball: Ball {
            diameter_m: d_m,
            build: m.build,
            inner_diameter_m: None,
            markings: Markings::None,
            marking_albedo: 1.0,
            marking_width: 0.1,
            orientation_deg: 0.0,
        },
        incline: m.incline.clone(),
        start,
        flight: Flight {
            gravity_mps2: STANDARD_GRAVITY_MPS2,
            drag_per_m: m.drag_per_m,
        },
        floor: m.floor.clone(),
        depth: None,
        backdrop_shapes: Vec::new(),
        strobe: Strobe {
            rate_hz: m.rate_hz,
            first_flash_s: m.first_flash_s,
            exposure_s: 10.0,
            flash_duration_s: 20e-6,
            max_flashes: None,
        },
        camera: Camera {
            px_per_m: 1000.0,
            width_px: 800,
            height_px: 600,
            origin_x_px: 0.0,
            origin_y_px: 599.0,
            roll_deg: 0.0,
            tilt_deg: 0.0,
            focal_px: None,
            k1: 0.0,
            k2: 0.0,
        },
        photo: PhotoLook::default(),
        distractors: Vec::new(),
        flash_unit: None,
        wishes: None,
    }
}

/// Set the exposure to end `u` of the way into the arc after bounce `k` (1-based); returns the
/// motion over the exposure.
fn set_exposure(scene: &mut Scene, k: usize, u: f64) -> Motion {
    let motion = Motion::simulate(scene, scene.strobe.first_flash_s + 20.0);
    let b = &motion.bounces;
    let launch_t = motion.launch.t_s;
    let end = match (b.get(k - 1), b.get(k)) {
        (Some(a), Some(c)) => a.t_s + u * (c.t_s - a.t_s),
        (Some(a), None) => a.t_s + 0.3,
        _ => b.last().map_or(launch_t + 1.0, |l| l.t_s + 0.3),
    };
    scene.strobe.exposure_s = (end - scene.strobe.first_flash_s).max(0.05);
    motion
}

/// Centres (world, metres) of the ball at every flash.
fn centres(scene: &Scene, motion: &Motion) -> Vec<[f64; 2]> {
    scene
        .strobe
        .flash_times_s()
        .iter()
        .map(|&t| {
            let p = motion.at(t);
            [p.x_m, p.y_m]
        })
        .collect()
}

fn extent(c: &[[f64; 2]]) -> ([f64; 2], [f64; 2]) {
    let mut lo = [f64::INFINITY; 2];
    let mut hi = [f64::NEG_INFINITY; 2];
    for p in c {
        for k in 0..2 {
            lo[k] = lo[k].min(p[k]);
            hi[k] = hi[k].max(p[k]);
        }
    }
    (lo, hi)
}

/// Frame limits, pixels.
fn limits(small: bool) -> (f64, f64) {
    if small {
        (800.0, 600.0)
    } else {
        (1600.0, 1200.0)
    }
}

/// Fit the square camera around the centres: the scale, then the frame and the origin.
fn frame_square(scene: &mut Scene, c: &[[f64; 2]], r_px: f64, small: bool) -> f64 {
    let (wmax, hmax) = limits(small);
    let margin = 12.0 + 0.5 * r_px;
    let depth_px = 12.0;
    let (lo, hi) = extent(c);
    let x0 = (hi[0] - lo[0]).max(1e-6);
    let y0 = hi[1].max(1e-6);
    let s = ((wmax - 2.0 * (r_px + margin)) / x0).min((hmax - 2.0 * margin - depth_px - r_px) / y0);
    let w = (x0 * s + 2.0 * (r_px + margin)).max(0.6 * hmax.min(y0 * s + 2.0 * margin));
    let w = w.clamp(200.0, wmax).round();
    let h = (y0 * s + r_px + 2.0 * margin + depth_px)
        .clamp(200.0, hmax)
        .round();
    let cam = &mut scene.camera;
    cam.px_per_m = s;
    cam.width_px = w as u32;
    cam.height_px = h as u32;
    let path_w = x0 * s + 2.0 * r_px;
    cam.origin_x_px = (w - path_w) / 2.0 + r_px - lo[0] * s;
    cam.origin_y_px = h - 1.0 - margin - depth_px;
    scene.floor.depth_m = depth_px / s;
    s
}

/// Pixel box of the centres +- the local radius under the scene's camera.
fn pixel_box(scene: &Scene, c: &[[f64; 2]]) -> ([f64; 2], [f64; 2]) {
    let proj = Projection::new(&scene.camera);
    let r_m = scene.ball.radius_m();
    let mut lo = [f64::INFINITY; 2];
    let mut hi = [f64::NEG_INFINITY; 2];
    for p in c {
        let q = proj.to_pixel(p[0], p[1]);
        let r = r_m * proj.scale_px_per_m(p[0], p[1]);
        for k in 0..2 {
            lo[k] = lo[k].min(q[k] - r);
            hi[k] = hi[k].max(q[k] + r);
        }
        let f = proj.to_pixel(p[0], 0.0);
        hi[1] = hi[1].max(f[1] + 12.0);
    }
    (lo, hi)
}

/// Re-fit a rolled or tilted camera: shrink the scale and shift the origin until the path's
/// pixel box lies inside the frame (a few rounds of a fixed point).
fn frame_turned(scene: &mut Scene, c: &[[f64; 2]], margin: f64) {
    for _ in 0..6 {
        let (lo, hi) = pixel_box(scene, c);
        let (w, h) = (
            scene.camera.width_px as f64 - 1.0,
            scene.camera.height_px as f64 - 1.0,
        );
        let f = ((w - 2.0 * margin) / (hi[0] - lo[0])).min((h - 2.0 * margin) / (hi[1] - lo[1]));
        let cam = &mut scene.camera;
        if f < 1.0 {
            cam.px_per_m *= f;
        }
        cam.origin_x_px += w / 2.0 - (lo[0] + hi[0]) / 2.0;
        cam.origin_y_px += h / 2.0 - (lo[1] + hi[1]) / 2.0;
    }
}

/// The camera: square, rolled or tilted; returns the scale mode the user gives.
fn draw_camera(rng: &mut ChaCha8Rng, fit_drag: bool) -> (f64, f64, ScaleMode) {
    let u = rng.random::<f64>();
    let given_or_ball = |rng: &mut ChaCha8Rng| {
        if chance(rng, 0.6) {
            ScaleMode::Given
        } else {
            ScaleMode::Ball
        }
    };
    if u < 0.35 {
        // A tilted camera with a plane file.
        let tilt = sign(rng) * uni(rng, 5.0, 30.0);
        let roll = sign(rng) * uni(rng, 0.0, 3.0);
        (roll, tilt, ScaleMode::Plane)
    } else if u < 0.55 && !fit_drag {
        // Rolled only (the README asks for a level camera or a plane file with --fit-drag).
        let roll = sign(rng) * uni(rng, 0.5, 3.0);
        (roll, 0.0, given_or_ball(rng))
    } else {
        (0.0, 0.0, given_or_ball(rng))
    }
}

/// The look: format, polarity, colour, glossy floor.
fn draw_look(rng: &mut ChaCha8Rng, scene: &mut Scene) -> Format {
    let u = rng.random::<f64>();
    let format = if u < 0.4 {
        Format::Jpeg(rng.random_range(60..=100u8))
    } else if u < 0.75 {
        Format::Png8
    } else {
        Format::Png16 {
            linear: chance(rng, 0.5),
        }
    };
    let p = &mut scene.photo;
    match format {
        Format::Jpeg(q) => p.jpeg_quality = q,
        Format::Png8 => p.bit_depth = 8,
        Format::Png16 { linear } => {
            p.bit_depth = 16;
            if linear {
                p.tone = Tone::Linear;
            }
        }
    }
    if chance(rng, 0.25) {
        p.polarity = Polarity::Dark;
    }
    p.color = chance(rng, 0.8);
    if chance(rng, 0.2) {
        scene.floor.glossy = true;
        scene.floor.reflectance = uni(rng, 0.1, 0.5);
    }
    format
}

/// One to three round distractors away from the ball's images.
fn draw_distractors(rng: &mut ChaCha8Rng, scene: &mut Scene, c: &[[f64; 2]]) {
    let proj = Projection::new(&scene.camera);
    let px: Vec<[f64; 2]> = c.iter().map(|p| proj.to_pixel(p[0], p[1])).collect();
    let r_ball = scene.ball.radius_m() * scene.camera.px_per_m;
    let (w, h) = (scene.camera.width_px as f64, scene.camera.height_px as f64);
    let count = rng.random_range(1..=3usize);
    for _ in 0..count {
        let r = r_ball * uni(rng, 0.6, 1.5);
        for _ in 0..50 {
            let (x, y) = (uni(rng, r, w - r), uni(rng, r, h - r));
            if px
                .iter()
                .all(|q| (q[0] - x).hypot(q[1] - y) > 1.5 * (r + r_ball))
            {
                scene.distractors.push(Distractor {
                    x_px: x,
                    y_px: y,
                    r_px: r,
                    albedo: uni(rng, 0.3, 0.9),
                });
                break;
            }
        }
    }
}

/// Plane points: the renderer's projection of six world points around the path.
fn plane_points(scene: &Scene, c: &[[f64; 2]]) -> Vec<PlanePoint> {
    let proj = Projection::new(&scene.camera);
    let (lo, hi) = extent(c);
    let xs = [lo[0], (lo[0] + hi[0]) / 2.0, hi[0].max(lo[0] + 0.05)];
    let ys = [0.0, hi[1].max(0.05)];
    let mut out = Vec::new();
    for &y_m in &ys {
        for &x_m in &xs {
            let q = proj.to_pixel(x_m, y_m);
            out.push(PlanePoint {
                x_px: q[0],
                y_px: q[1],
                x_m,
                y_m,
            });
        }
    }
    out
}

impl Shot {
    /// Draw the shot of `seed`; `small` caps the frame at 800 x 600 px (the test slice).
    pub fn draw(seed: u64, small: bool) -> Shot {
        let mut rng = ChaCha8Rng::seed_from_u64(seed ^ 0x5EE9_5EE9);
        let m = draw_motion(&mut rng);
        let mut r_px = log_uni(&mut rng, 6.0, 80.0);
        if small {
            r_px = (r_px * 0.5).max(6.0);
        }
        let bounces = rng.random_range(1..=3usize);
        let u_end = uni(&mut rng, 0.5, 1.0);
        // The scale fits the path to the frame and the ball's diameter follows from r_px; the
        // path depends a little on the diameter, so a few rounds of a fixed point.
        let mut d_m = 0.04;
        let (mut scene, mut c) = (scene_of(&m, d_m, seed), Vec::new());
        for _ in 0..4 {
            scene = scene_of(&m, d_m, seed);
            let motion = set_exposure(&mut scene, bounces, u_end);
            c = centres(&scene, &motion);
            d_m = 2.0 * r_px / frame_square(&mut scene, &c, r_px, small);
        }
        let v_max = c
            .windows(2)
            .map(|w| (w[1][0] - w[0][0]).hypot(w[1][1] - w[0][1]) * m.rate_hz)
            .fold(0.0, f64::max);
        let drag_share = m.drag_per_m * v_max * v_max / STANDARD_GRAVITY_MPS2;
        // A user fits drag when it is a visible share of gravity (a light ball).
        let fit_drag = drag_share >= 0.01;
        let (roll, tilt, scale_mode) = draw_camera(&mut rng, fit_drag);
        scene.camera.roll_deg = roll;
        scene.camera.tilt_deg = tilt;
        if roll != 0.0 || tilt != 0.0 {
            frame_turned(&mut scene, &c, 12.0 + 0.5 * r_px);
        }
        let format = draw_look(&mut rng, &mut scene);
        let cropped = chance(&mut rng, 0.1);
        if cropped {
            let f = uni(&mut rng, 0.7, 0.9);
            if m.kind == Kind::Drop {
                let cut = (scene.camera.height_px as f64 * (1.0 - f)).round();
                scene.camera.height_px -= cut as u32;
                scene.camera.origin_y_px -= cut;
            } else {
                scene.camera.width_px = (scene.camera.width_px as f64 * f).round() as u32;
            }
        }
        if chance(&mut rng, 0.2) {
            draw_distractors(&mut rng, &mut scene, &c);
        }
        let plane_points = if scale_mode == ScaleMode::Plane {
            plane_points(&scene, &c)
        } else {
            Vec::new()
        };
        scene.seed = seed;
        let r_px = scene.ball.radius_m() * scene.camera.px_per_m;
        Shot {
            seed,
            scene,
            kind: m.kind,
            format,
            scale_mode,
            plane_points,
            fit_drag,
            drag_share,
            cropped,
            r_px,
        }
    }

    /// A dark ball is measured against a clean plate, as a user would photograph it.
    pub fn needs_plate(&self) -> bool {
        self.scene.photo.polarity == Polarity::Dark
    }

    /// The plane file's text (TOML), for a tilted camera.
    pub fn plane_toml(&self) -> String {
        let mut s = String::from("# plane points: the renderer's projection of world points\n");
        for p in &self.plane_points {
            s.push_str(&format!(
                "[[points]]\nx_px = {:?}\ny_px = {:?}\nx_m = {:?}\ny_m = {:?}\n",
                p.x_px, p.y_px, p.x_m, p.y_m
            ));
        }
        s
    }

    /// The settings the command line builds from what a user types for this shot: `--rate`,
    /// `--ball-diameter`, `--ball solid|shell`, `--scale` or `--plane`, `--plate`, `--tone
    /// linear`, `--fit-drag`.
    pub fn settings(&self, plate: Option<PathBuf>, plane: Option<PathBuf>) -> MeasureSettings {
        let mut s = MeasureSettings {
            plate,
            rate_hz: Some(self.scene.strobe.rate_hz),
            ball_diameter_m: Some(self.scene.ball.diameter_m),
            ..MeasureSettings::default()
        };
        if self.format == (Format::Png16 { linear: true }) {
            s.spots.tone = Tone::Linear;
        }
        s.scale = Some(match self.scale_mode {
            ScaleMode::Given => ScaleSource::PxPerM(self.scene.camera.px_per_m),
            ScaleMode::Ball => ScaleSource::BallDiameter,
            ScaleMode::Plane => ScaleSource::Plane(plane.unwrap_or_default()),
        });
        s.physics.build = self.scene.ball.build;
        s.physics.fit_drag = self.fit_drag;
        s
    }

    /// A short description of the shot.
    pub fn describe(&self) -> String {
        let sc = &self.scene;
        let what = match (self.kind, &sc.incline, &sc.start) {
            (Kind::Incline, Some(i), _) => format!("incline {:.0} deg", i.angle_deg),
            (Kind::Throw, _, Some(s)) => format!("throw {:.2},{:.2} m/s", s.vx_mps, s.vy_mps),
            _ => "drop".to_string(),
        };
        let mut d = format!(
            "{what}, {:.1} Hz, r {:.0} px, e {:.2}",
            sc.strobe.rate_hz, self.r_px, sc.floor.restitution
        );
        if sc.floor.restitution_slope_s_per_m != 0.0 {
            d.push_str(&format!(
                " {:+.3} s/m x v_in",
                sc.floor.restitution_slope_s_per_m
            ));
        }
        d.push_str(&match self.format {
            Format::Jpeg(q) => format!(", jpeg q{q}"),
            Format::Png8 => ", png8".into(),
            Format::Png16 { linear: false } => ", png16".into(),
            Format::Png16 { linear: true } => ", png16 linear".into(),
        });
        if self.needs_plate() {
            d.push_str(", dark+plate");
        }
        match self.scale_mode {
            ScaleMode::Given => d.push_str(", --scale"),
            ScaleMode::Ball => d.push_str(", ball scale"),
            ScaleMode::Plane => d.push_str(&format!(
                ", tilt {:.0} roll {:.1} plane",
                sc.camera.tilt_deg, sc.camera.roll_deg
            )),
        }
        if self.scale_mode != ScaleMode::Plane && sc.camera.roll_deg != 0.0 {
            d.push_str(&format!(", roll {:.1}", sc.camera.roll_deg));
        }
        if sc.floor.glossy {
            d.push_str(", glossy");
        }
        if !sc.distractors.is_empty() {
            d.push_str(&format!(", {} distractors", sc.distractors.len()));
        }
        if sc.flight.drag_per_m > 0.0 {
            d.push_str(&format!(
                ", drag {:.1} % of g{}",
                100.0 * self.drag_share,
                if self.fit_drag { " (fit)" } else { "" }
            ));
        }
        if self.cropped {
            d.push_str(", cropped");
        }
        d
    }
}
