//! Synthetic multi-flash photographs with exact ground truth.
//!
//! Goes in: a [`Scene`]. Comes out: a [`Rendered`] photo (linear-light simulation, then sensor
//! noise, tone curve and quantisation) and its [`Truth`]: every flash with the ball's exact centre
//! in pixels and metres, every bounce, the launch. The motion comes from physics ([`sim`]), the
//! projection from a camera model ([`camera`]), the pixels from exact area coverage ([`paint`]).
//!
//! # Examples
//! ```
//! use beadline::synth::{render, scene::Scene};
//! let mut scene = Scene::demo();
//! scene.camera.width_px = 400;
//! scene.camera.height_px = 240;
//! scene.camera.px_per_m = 250.0;
//! scene.camera.origin_x_px = 80.0;
//! scene.camera.origin_y_px = 220.0;
//! let photo = render(&scene);
//! assert_eq!(photo.truth.flashes[0].n, 0);
//! assert!(photo.truth.bounces.len() >= 2);
//! ```

pub mod camera;
pub mod paint;
pub mod plan;
pub mod scene;
pub mod sim;

use crate::core::light::{Polarity, Tone};
use crate::error::{Error, Result};
use camera::Projection;
use paint::{Clip, Finish, Lighting, Pattern, Stamp};
use scene::Scene;
use serde::{Deserialize, Serialize};
use sim::{BounceEvent, LaunchEvent, Motion, Phase};
use std::path::Path;

/// Version of the truth JSON layout.
pub const TRUTH_VERSION: u32 = 1;

/// One flash of the strobe and where the ball was.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FlashTruth {
    /// Flash index, 0 = first flash.
    pub n: usize,
    /// Time after release, seconds (middle of the flash).
    pub t_s: f64,
    /// Centre x, pixels (x right, pixel centres at integer coordinates).
    pub x_px: f64,
    /// Centre y, pixels (y down).
    pub y_px: f64,
    /// Radius of the ball's image, pixels.
    pub r_px: f64,
    /// Centre x, metres (world, x right).
    pub x_m: f64,
    /// Centre y, metres (world, y up, floor at 0).
    pub y_m: f64,
    /// What the ball was doing.
    pub phase: Phase,
    /// Flight arc: 0 before the first bounce, k after the k-th.
    pub arc: usize,
    /// The whole image lies inside the frame.
    pub in_frame: bool,
    /// The ball's turn about the axis toward the camera since release, degrees,
    /// counter-clockwise positive as seen in the photo (unwrapped; the scene's
    /// `ball.orientation_deg` at release).
    #[serde(default)]
    pub spin_angle_deg: f64,
    /// How far the ball has left the plane of motion toward the camera, metres.
    #[serde(default)]
    pub depth_m: f64,
}

/// A distractor as painted.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DistractorTruth {
    /// Centre x, pixels.
    pub x_px: f64,
    /// Centre y, pixels.
    pub y_px: f64,
    /// Radius, pixels.
    pub r_px: f64,
}

/// Ground truth of a rendered photo.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Truth {
    /// Layout version.
    pub version: u32,
    /// Image width, pixels.
    pub width_px: u32,
    /// Image height, pixels.
    pub height_px: u32,
    /// Scale at the image centre, pixels per metre.
    pub scale_px_per_m: f64,
    /// Flash rate, hertz.
    pub rate_hz: f64,
    /// Flash interval, seconds.
    pub interval_s: f64,
    /// Gravity, m/s^2.
    pub gravity_mps2: f64,
    /// Ball radius, metres.
    pub ball_radius_m: f64,
    /// Moment-of-inertia factor of the ball.
    pub inertia_factor: f64,
    /// Rolling acceleration on the incline, m/s^2.
    pub incline_accel_mps2: Option<f64>,
    /// Leaving the incline (or the free start).
    pub launch: LaunchEvent,
    /// Every bounce.
    pub bounces: Vec<BounceEvent>,
    /// Every flash in time order.
    pub flashes: Vec<FlashTruth>,
    /// Round objects that are not the ball.
    pub distractors: Vec<DistractorTruth>,
    /// Mirror images of the ball in a glossy floor (centres, pixels): those of the flashes when
    /// the ball is low enough for part of its mirror image to show on the floor plate.
    pub reflections: Vec<DistractorTruth>,
    /// What is printed on the ball.
    #[serde(default)]
    pub markings: scene::Markings,
}

/// A rendered photo: channel values 0..1 (sRGB or linear as the scene says) and its truth.
#[derive(Debug, Clone)]
pub struct Rendered {
    /// Width, pixels.
    pub width: u32,
    /// Height, pixels.
    pub height: u32,
    /// RGB values 0..1, row-major.
    pub pixels: Vec<[f32; 3]>,
    /// The truth.
    pub truth: Truth,
    /// Grey output requested.
    pub grey: bool,
    /// Bits per channel for PNG/TIFF.
    pub bit_depth: u8,
    /// JPEG quality.
    pub jpeg_quality: u8,
}

/// Largest sub-step of the ball between painted samples (motion blur and ambient streak), pixels.
const BLUR_STEP_PX: f64 = 0.25;
const STREAK_STEP_PX: f64 = 0.5;

/// Render a scene.
#[must_use]
pub fn render(scene: &Scene) -> Rendered {
    render_with(scene, true)
}

/// Render the scene's clean plate: the same exposure, backdrop, rig and distractors without the
/// ball (its images, mirror images and ambient streak), with its own sensor noise. The truth is
/// the photo's, so a plate and its photo go together.
#[must_use]
pub fn render_plate(scene: &Scene) -> Rendered {
    render_with(scene, false)
}

/// One shot being rendered: the scene, its camera and the ball's motion, with the photo's
/// exposure levels resolved.
struct Shot<'a> {
    scene: &'a Scene,
    proj: Projection,
    motion: Motion,
    times: Vec<f64>,
    t_end: f64,
    r_m: f64,
    w: usize,
    h: usize,
    ball_albedo: f64,
    backdrop_level: f64,
    flash: f64,
    total_weight: f64,
    with_ball: bool,
    lighting: Lighting,
    pattern: Option<Pattern>,
    camera_distance_m: f64,
}

/// What the flashes leave: the stamps to paint and the truth of each image.
#[derive(Default)]
struct Flashes {
    stamps: Vec<Stamp>,
    flashes: Vec<FlashTruth>,
    reflections: Vec<DistractorTruth>,
}

impl<'a> Shot<'a> {
    fn new(scene: &'a Scene, with_ball: bool) -> Shot<'a> {
        let cam = &scene.camera;
        let proj = Projection::new(cam);
        let times = scene.strobe.flash_times_s();
        let t_last = *times.last().expect("at least one flash");
        let t_end = scene.strobe.first_flash_s + scene.strobe.exposure_s;
        let motion = Motion::simulate(scene, t_end.max(t_last) + 1.0);
        let r_m = scene.ball.radius_m();
        let p = &scene.photo;
        let (w, h) = (cam.width_px as usize, cam.height_px as usize);
        let n_flash = times.len() as f64;
        let (ball_albedo, backdrop_level) = match p.polarity {
            Polarity::Bright => (
                p.ball_albedo.unwrap_or(0.9),
                p.backdrop_level.unwrap_or(0.05),
            ),
            Polarity::Dark => (
                p.ball_albedo.unwrap_or(0.08),
                p.backdrop_level.unwrap_or(0.75),
            ),
        };
        let flash = p.flash_exposure.unwrap_or(match p.polarity {
            Polarity::Bright => 0.6,
            Polarity::Dark => backdrop_level / n_flash,
        });
        let total_weight = flash * n_flash + p.ambient_exposure;
        let b = &scene.ball;
        Shot {
            lighting: Lighting {
                dir: p.light_dir,
                fill: p.fill,
                gloss: p.gloss,
                gloss_power: p.gloss_power,
                gloss_dir: p.gloss_dir,
            },
            pattern: Pattern::new(b.markings, b.marking_albedo, b.marking_width, scene.seed),
            camera_distance_m: scene.camera_distance_m(),
            scene,
            proj,
            motion,
            times,
            t_end,
            r_m,
            w,
            h,
            ball_albedo,
            backdrop_level,
            flash,
            total_weight,
            with_ball,
        }
    }

    /// How far the ball has left the plane of motion toward the camera at time `t`, metres.
    fn depth_m(&self, t: f64) -> f64 {
        self.scene
            .depth
            .as_ref()
            .map_or(0.0, |d| d.toward_camera_mps * t.max(0.0))
    }

    /// A pixel of the plane of motion moved by perspective for a ball `depth_m` toward the
    /// camera: scaled by D / (D - z) about the image centre (exact for a camera square to the
    /// plane; about the image centre also under the tilt model). Comes out with that scale.
    fn toward_camera(&self, c: [f64; 2], depth_m: f64) -> ([f64; 2], f64) {
        if depth_m == 0.0 {
            return (c, 1.0);
        }
        let d = self.camera_distance_m;
        let k = d / (d - depth_m);
        let (cx, cy) = ((self.w as f64 - 1.0) / 2.0, (self.h as f64 - 1.0) / 2.0);
        ([cx + (c[0] - cx) * k, cy + (c[1] - cy) * k], k)
    }

    /// The ball's state, image centre and image radius at time `t`.
    fn image_of(&self, t: f64) -> (sim::MotionPoint, [f64; 2], f64) {
        let m = self.motion.at(t);
        let (c, k) = self.toward_camera(self.proj.to_pixel(m.x_m, m.y_m), self.depth_m(t));
        let r = self.r_m * self.proj.scale_px_per_m(m.x_m, m.y_m) * k;
        (m, c, r)
    }

    /// The markings of an image of the ball turned by `turn_rad` (seen in the floor's mirror
    /// when `mirror`).
    fn marks(&self, turn_rad: f64, mirror: bool) -> Option<paint::Marks> {
        self.pattern.map(|pattern| paint::Marks {
            pattern,
            turn_rad,
            mirror,
        })
    }

    /// The floor plate's clip of a mirror image near `x_m`.
    fn floor_clip(&self, x_m: f64) -> Clip {
        let proj = &self.proj;
        let a = proj.to_pixel(x_m - 0.05, 0.0);
        let b = proj.to_pixel(x_m + 0.05, 0.0);
        let slope = (b[1] - a[1]) / (b[0] - a[0]);
        Clip {
            line_a: a[1] - slope * a[0],
            line_b: slope,
            depth_px: self.scene.floor.depth_m * proj.scale_px_per_m(x_m, 0.0),
        }
    }

    /// Every flash's image (motion-blurred in sub-steps, with its mirror image on a glossy
    /// floor) and its truth.
    fn flash_images(&self) -> Flashes {
        let (scene, proj, flash, ball_albedo, with_ball) = (
            self.scene,
            &self.proj,
            self.flash,
            self.ball_albedo,
            self.with_ball,
        );
        let (p, w, h) = (&scene.photo, self.w, self.h);
        let image_of = |t: f64| self.image_of(t);
        let floor_clip = |x_m: f64| self.floor_clip(x_m);
        let Flashes {
            mut stamps,
            mut flashes,
            mut reflections,
        } = Flashes::default();
        let dur = if p.motion_blur {
            scene.strobe.flash_duration_s
        } else {
            0.0
        };
        for (n, &t) in self.times.iter().enumerate() {
            let (m, c, r) = image_of(t);
            let speed_px = (m.vx_mps.hypot(m.vy_mps)) * proj.scale_px_per_m(m.x_m, m.y_m);
            let subs = ((speed_px * dur / BLUR_STEP_PX).ceil() as usize).clamp(1, 256);
            for k in 0..subs {
                let ts = if subs == 1 {
                    t
                } else {
                    t - dur / 2.0 + dur * (k as f64 + 0.5) / subs as f64
                };
                let (ms, cs, rs) = image_of(ts);
                if !with_ball {
                    continue;
                }
                stamps.push(Stamp {
                    x_px: cs[0],
                    y_px: cs[1],
                    r_px: rs,
                    weight: flash / subs as f64,
                    albedo: ball_albedo,
                    rgb: p.ball_rgb,
                    light: p.shading.then_some(self.lighting),
                    marks: self.marks(ms.spin_rad, false),
                    occludes: true,
                    clip: None,
                });
                if scene.floor.glossy {
                    let mc = self
                        .toward_camera(proj.to_pixel(ms.x_m, -ms.y_m), self.depth_m(ts))
                        .0;
                    stamps.push(Stamp {
                        x_px: mc[0],
                        y_px: mc[1],
                        r_px: rs,
                        weight: flash * scene.floor.reflectance / subs as f64,
                        albedo: ball_albedo,
                        rgb: p.ball_rgb,
                        // The mirror world's light comes from the mirrored side.
                        light: p.shading.then_some(self.lighting.mirrored()),
                        marks: self.marks(ms.spin_rad, true),
                        occludes: false,
                        clip: Some(floor_clip(ms.x_m)),
                    });
                }
            }
            let in_frame = c[0] - r >= -0.5
                && c[1] - r >= -0.5
                && c[0] + r <= w as f64 - 0.5
                && c[1] + r <= h as f64 - 0.5;
            // The mirror image shows only on the floor plate's visible depth below y = 0: its
            // top lies as far below the floor as the ball's underside lies above it.
            let mirror_top_m = m.y_m - scene.ball.radius_m();
            if scene.floor.glossy && mirror_top_m < scene.floor.depth_m {
                let mc = self
                    .toward_camera(proj.to_pixel(m.x_m, -m.y_m), self.depth_m(t))
                    .0;
                reflections.push(DistractorTruth {
                    x_px: mc[0],
                    y_px: mc[1],
                    r_px: r,
                });
            }
            flashes.push(FlashTruth {
                n,
                t_s: t,
                x_px: c[0],
                y_px: c[1],
                r_px: r,
                x_m: m.x_m,
                y_m: m.y_m,
                phase: m.phase,
                arc: m.arc,
                in_frame,
                spin_angle_deg: m.spin_rad.to_degrees(),
                depth_m: self.depth_m(t),
            });
        }
        Flashes {
            stamps,
            flashes,
            reflections,
        }
    }

    /// The ball lit by ambient light along its whole path during the exposure.
    fn ambient_streak(&self, stamps: &mut Vec<Stamp>) {
        let (scene, proj, ball_albedo, with_ball, t_end) = (
            self.scene,
            &self.proj,
            self.ball_albedo,
            self.with_ball,
            self.t_end,
        );
        let p = &scene.photo;
        let image_of = |t: f64| self.image_of(t);
        if with_ball && p.ambient_exposure > 0.0 {
            let t0 = scene.strobe.first_flash_s;
            let mut samples = Vec::new();
            let mut t = t0;
            while t < t_end {
                let (m, c, r) = image_of(t);
                let speed_px = m.vx_mps.hypot(m.vy_mps) * proj.scale_px_per_m(m.x_m, m.y_m);
                let dt = (STREAK_STEP_PX / speed_px.max(1e-9))
                    .min(t_end - t)
                    .min(0.01);
                samples.push((c, r, dt, m.spin_rad));
                t += dt;
                if samples.len() > 2_000_000 {
                    break;
                }
            }
            let span = t_end - t0;
            for (c, r, dt, turn) in samples {
                stamps.push(Stamp {
                    x_px: c[0],
                    y_px: c[1],
                    r_px: r,
                    weight: p.ambient_exposure * dt / span,
                    albedo: ball_albedo,
                    rgb: p.ball_rgb,
                    light: None,
                    marks: self.marks(turn, false),
                    occludes: true,
                    clip: None,
                });
            }
        }
    }

    /// The round objects that are not the ball, and their truth.
    fn distractors(&self, stamps: &mut Vec<Stamp>) -> Vec<DistractorTruth> {
        let (scene, total_weight) = (self.scene, self.total_weight);
        let p = &scene.photo;
        let mut distractors = Vec::new();
        for d in &scene.distractors {
            stamps.push(Stamp {
                x_px: d.x_px,
                y_px: d.y_px,
                r_px: d.r_px,
                weight: total_weight,
                albedo: d.albedo,
                rgb: [1.0, 1.0, 1.0],
                light: p.shading.then_some(self.lighting),
                marks: None,
                occludes: true,
                clip: None,
            });
            distractors.push(DistractorTruth {
                x_px: d.x_px,
                y_px: d.y_px,
                r_px: d.r_px,
            });
        }
        distractors
    }

    /// The painted exposure over the backdrop and the rig, toned and with noise: the pixels.
    fn develop(&self, exposure: &paint::Exposure) -> Vec<[f32; 3]> {
        let (scene, proj, w, with_ball) = (self.scene, &self.proj, self.w, self.with_ball);
        let (p, cam) = (&scene.photo, &scene.camera);
        let (backdrop_level, total_weight) = (self.backdrop_level, self.total_weight);
        let rig = Rig::new(scene, p.floor_level, p.incline_level);
        let seed = scene.seed;
        let backdrop = |x: usize, y: usize| {
            let (xf, yf) = (x as f64, y as f64);
            let tex = 1.0
                + p.texture
                    * (0.7 * paint::value_noise(xf, yf, 48.0, seed)
                        + 0.3 * paint::value_noise(xf, yf, 9.0, seed ^ 0x5151));
            let grad = 1.0 + p.gradient * (xf / w as f64 - 0.5);
            let base = backdrop_level * tex * grad;
            let mut out = [
                base * p.backdrop_rgb[0],
                base * p.backdrop_rgb[1],
                base * p.backdrop_rgb[2],
            ];
            for sh in &scene.backdrop_shapes {
                let cover = |d: f64, half: f64| (half - d.abs() + 0.5).clamp(0.0, 1.0);
                let c = cover(xf - sh.x_px, sh.width_px / 2.0)
                    * cover(yf - sh.y_px, sh.height_px / 2.0);
                if c > 0.0 {
                    for o in out.iter_mut() {
                        *o = *o * (1.0 - c) + sh.level * c;
                    }
                }
            }
            if p.draw_rig {
                let wp = proj.to_world(xf, yf);
                let scale = cam.px_per_m;
                if let Some((coverage, level)) = rig.cover(wp, scale) {
                    let metal =
                        level * (1.0 + 0.05 * paint::value_noise(xf, yf, 3.0, seed ^ 0xABCD));
                    for o in out.iter_mut() {
                        *o = *o * (1.0 - coverage) + metal * coverage;
                    }
                }
            }
            out
        };
        paint::finish(
            exposure,
            total_weight,
            backdrop,
            Finish {
                vignetting: p.vignetting,
                noise: p.noise,
                full_well_e: p.full_well_e,
                read_noise_e: p.read_noise_e,
                srgb: p.tone == Tone::Srgb,
                seed: if with_ball {
                    seed ^ 0x00C0_FFEE
                } else {
                    seed ^ 0x0091_A7E5
                },
            },
        )
    }
}

fn render_with(scene: &Scene, with_ball: bool) -> Rendered {
    let shot = Shot::new(scene, with_ball);
    let Flashes {
        mut stamps,
        flashes,
        reflections,
    } = shot.flash_images();
    shot.ambient_streak(&mut stamps);
    let distractors = shot.distractors(&mut stamps);
    let exposure = paint::paint(shot.w, shot.h, &stamps);
    let pixels = shot.develop(&exposure);
    let (cam, p, motion) = (&scene.camera, &scene.photo, &shot.motion);
    let truth = Truth {
        version: TRUTH_VERSION,
        width_px: cam.width_px,
        height_px: cam.height_px,
        scale_px_per_m: cam.px_per_m,
        rate_hz: scene.strobe.rate_hz,
        interval_s: scene.strobe.interval_s(),
        gravity_mps2: scene.flight.gravity_mps2,
        ball_radius_m: shot.r_m,
        inertia_factor: scene.ball.inertia_factor(),
        incline_accel_mps2: motion.incline_accel_mps2,
        launch: motion.launch,
        bounces: motion.bounces.clone(),
        flashes,
        distractors,
        reflections,
        markings: scene.ball.markings,
    };
    Rendered {
        width: cam.width_px,
        height: cam.height_px,
        pixels,
        truth,
        grey: !p.color,
        bit_depth: p.bit_depth,
        jpeg_quality: p.jpeg_quality,
    }
}

/// The incline and the floor plate, in world coordinates.
struct Rig {
    /// Floor plate: y from -depth to 0.
    floor_depth_m: f64,
    floor_level: f64,
    incline_level: f64,
    /// Incline surface from `a` (lower end) to `b` (upper end), with thickness below it.
    incline: Option<([f64; 2], [f64; 2], f64)>,
}

impl Rig {
    fn new(scene: &Scene, floor_level: f64, incline_level: f64) -> Rig {
        let incline = scene.incline.as_ref().map(|inc| {
            let th = inc.angle_deg.to_radians();
            let a = [inc.bottom_x_m, inc.bottom_height_m];
            let len = inc.length_m + 2.0 * scene.ball.diameter_m;
            let b = [a[0] - len * th.cos(), a[1] + len * th.sin()];
            (a, b, 0.3 * scene.ball.diameter_m.max(0.005))
        });
        Rig {
            floor_depth_m: scene.floor.depth_m,
            floor_level,
            incline_level,
            incline,
        }
    }

    /// Coverage (0..1) and brightness level of the rig at world point `p`; `scale` in px per metre
    /// for antialiasing.
    fn cover(&self, p: [f64; 2], scale: f64) -> Option<(f64, f64)> {
        let aa = |d_m: f64| (0.5 - d_m * scale).clamp(0.0, 1.0);
        // Floor: inside when -depth <= y <= 0; signed distance to the band.
        let d_floor = (p[1]).max(-self.floor_depth_m - p[1]);
        let floor = aa(d_floor);
        let mut best = if floor > 0.0 {
            Some((floor, self.floor_level))
        } else {
            None
        };
        if let Some((a, b, thick)) = self.incline {
            // Distance along the surface and below it.
            let dir = [b[0] - a[0], b[1] - a[1]];
            let len = dir[0].hypot(dir[1]);
            let u = [dir[0] / len, dir[1] / len];
            let nrm = [-u[1], u[0]];
            let rel = [p[0] - a[0], p[1] - a[1]];
            let along = rel[0] * u[0] + rel[1] * u[1];
            let above = rel[0] * nrm[0] + rel[1] * nrm[1];
            // nrm points up-left of a surface rising to the left; the bar lies below the surface.
            let up = if nrm[1] >= 0.0 { above } else { -above };
            let d = (up).max(-thick - up).max(-along).max(along - len);
            let c = aa(d);
            if c > 0.0 && best.is_none_or(|(f, _)| c > f) {
                best = Some((c, self.incline_level));
            }
        }
        best
    }
}

impl Rendered {
    /// Write the photo; the format follows the extension (.png, .jpg/.jpeg, .tif/.tiff).
    pub fn save(&self, path: &Path) -> Result<()> {
        let ext = path
            .extension()
            .map(|e| e.to_string_lossy().to_lowercase())
            .unwrap_or_default();
        let (w, h) = (self.width, self.height);
        let channels: usize = if self.grey { 1 } else { 3 };
        let to_grey = |p: &[f32; 3]| 0.2126 * p[0] + 0.7152 * p[1] + 0.0722 * p[2];
        let wide = self.bit_depth == 16 && ext != "jpg" && ext != "jpeg";
        let image: image::DynamicImage = if wide {
            let mut data = Vec::with_capacity(self.pixels.len() * channels);
            for p in &self.pixels {
                if self.grey {
                    data.push((to_grey(p) * 65535.0).round() as u16);
                } else {
                    data.extend(p.iter().map(|v| (v * 65535.0).round() as u16));
                }
            }
            if self.grey {
                image::ImageBuffer::<image::Luma<u16>, _>::from_raw(w, h, data)
                    .expect("buffer size matches")
                    .into()
            } else {
                image::ImageBuffer::<image::Rgb<u16>, _>::from_raw(w, h, data)
                    .expect("buffer size matches")
                    .into()
            }
        } else {
            let mut data = Vec::with_capacity(self.pixels.len() * channels);
            for p in &self.pixels {
                if self.grey {
                    data.push((to_grey(p) * 255.0).round() as u8);
                } else {
                    data.extend(p.iter().map(|v| (v * 255.0).round() as u8));
                }
            }
            if self.grey {
                image::GrayImage::from_raw(w, h, data)
                    .expect("buffer size matches")
                    .into()
            } else {
                image::RgbImage::from_raw(w, h, data)
                    .expect("buffer size matches")
                    .into()
            }
        };
        let format = match ext.as_str() {
            "png" => image::ImageFormat::Png,
            "jpg" | "jpeg" => image::ImageFormat::Jpeg,
            "tif" | "tiff" => image::ImageFormat::Tiff,
            _ => {
                return Err(Error::config(
                    path,
                    "unknown photo format (use .png, .jpg or .tif)",
                ));
            }
        };
        let quality = self.jpeg_quality;
        crate::core::output::write_atomic(path, |wr| {
            if format == image::ImageFormat::Jpeg {
                let enc = image::codecs::jpeg::JpegEncoder::new_with_quality(wr, quality);
                image.write_with_encoder(enc).map_err(std::io::Error::other)
            } else {
                let mut buf = std::io::Cursor::new(Vec::new());
                image
                    .write_to(&mut buf, format)
                    .map_err(std::io::Error::other)?;
                wr.write_all(buf.get_ref())
            }
        })
    }
}
