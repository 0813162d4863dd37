//! Scene description for the renderer and the shot planner: the ball, the incline, the floor, the
//! strobe, the camera and the look of the photograph. Read from TOML; every quantity is SI with its
//! unit in the key name (`_m`, `_s`, `_hz`, `_deg`, `_px`, `_mps`).
//!
//! Goes in: a TOML text. Comes out: a validated [`Scene`]. Unknown keys and absurd values are
//! refused with the key named.

use crate::core::ball::{Build, inertia_factor};
use crate::core::light::{Polarity, Tone};
use crate::core::units::STANDARD_GRAVITY_MPS2;
use crate::error::{Error, Result};
use serde::{Deserialize, Serialize};
use std::path::Path;

/// A complete scene.
#[derive(Debug, Clone, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Scene {
    /// Seed of every random choice (texture, noise, random distractors).
    #[serde(default)]
    pub seed: u64,
    /// The ball.
    pub ball: Ball,
    /// Straight incline the ball rolls down from rest; when absent, [`Scene::start`] is used.
    #[serde(default)]
    pub incline: Option<Incline>,
    /// Free start (drop test or throw) when there is no incline.
    #[serde(default)]
    pub start: Option<Start>,
    /// Free flight.
    #[serde(default)]
    pub flight: Flight,
    /// Horizontal floor at world y = 0.
    #[serde(default)]
    pub floor: Floor,
    /// The multi-flash strobe.
    pub strobe: Strobe,
    /// The camera.
    pub camera: Camera,
    /// The look of the photograph.
    #[serde(default)]
    pub photo: PhotoLook,
    /// Round objects that are not the ball.
    #[serde(default)]
    pub distractors: Vec<Distractor>,
    /// Motion toward the camera, out of the plane the camera is set up for.
    #[serde(default)]
    pub depth: Option<Depth>,
    /// Flat bright or dark objects on the backdrop, behind the ball's path.
    #[serde(default)]
    pub backdrop_shapes: Vec<BackdropShape>,
    /// The flash unit's limits (used by `beadline plan`; the renderer ignores it).
    #[serde(default)]
    pub flash_unit: Option<FlashUnit>,
    /// What the photo must show (used by `beadline plan`; the renderer ignores it).
    #[serde(default)]
    pub wishes: Option<Wishes>,
}

/// A flash unit: at each power level it can fire a limited number of flashes at a limited rate.
#[derive(Debug, Clone, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct FlashUnit {
    /// Power levels, strongest first is customary; at least one.
    pub levels: Vec<PowerLevel>,
}

/// One power setting of a flash unit.
#[derive(Debug, Clone, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PowerLevel {
    /// Name shown in the plan (for example "1/4").
    pub name: String,
    /// Fastest flash rate at this power, hertz.
    pub max_rate_hz: f64,
    /// Most flashes in one burst at this power.
    pub max_flashes: usize,
    /// Duration of one flash at this power, seconds.
    pub flash_duration_s: f64,
}

/// What the user wants the photo to show.
#[derive(Debug, Clone, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Wishes {
    /// At least this many images on every flight arc covered.
    #[serde(default = "default_images_per_arc")]
    pub min_images_per_arc: usize,
    /// Where the ball is fastest, consecutive images at least this many diameters apart.
    #[serde(default = "default_separation")]
    pub min_separation_diameters: f64,
    /// Cover the path up to this bounce (0: only the launch arc to the first bounce).
    #[serde(default = "default_bounces")]
    pub bounces: usize,
    /// Largest motion blur within one flash, pixels.
    #[serde(default = "default_blur")]
    pub max_blur_px: f64,
}

fn default_images_per_arc() -> usize {
    5
}
fn default_separation() -> f64 {
    1.0
}
fn default_bounces() -> usize {
    2
}
fn default_blur() -> f64 {
    0.5
}

/// The ball.
#[derive(Debug, Clone, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Ball {
    /// Outer diameter, metres.
    pub diameter_m: f64,
    /// Build: solid, shell or thick.
    #[serde(default)]
    pub build: Build,
    /// Inner diameter of a thick shell, metres.
    #[serde(default)]
    pub inner_diameter_m: Option<f64>,
    /// What is printed on the ball (default none: a plain ball).
    #[serde(default)]
    pub markings: Markings,
    /// Brightness of the markings relative to the ball's surface, 0..1 (0: black lines).
    #[serde(default = "default_marking_albedo")]
    pub marking_albedo: f64,
    /// Width of a marking line (or radius of a dot), as a fraction of the ball's radius.
    #[serde(default = "default_marking_width")]
    pub marking_width: f64,
    /// The ball's turn about the axis toward the camera at release, degrees, counter-clockwise
    /// positive as seen in the photo.
    #[serde(default)]
    pub orientation_deg: f64,
}

/// What is printed on the ball: lines and patches on its surface that turn with it.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Markings {
    /// A plain ball.
    #[default]
    None,
    /// Three seam lines on great circles, crossing on the ball's face (a ball with panels
    /// sewn together).
    Seams,
    /// One band around the ball on a great circle (it looks the same turned half a turn).
    Band,
    /// One round printed patch off the centre of the ball's face.
    Dot,
    /// Five panel lines on great circles drawn from the scene's seed.
    Panels,
}

fn default_marking_albedo() -> f64 {
    0.25
}
fn default_marking_width() -> f64 {
    0.1
}

impl Ball {
    /// Radius, metres.
    pub fn radius_m(&self) -> f64 {
        self.diameter_m / 2.0
    }

    /// Moment-of-inertia factor k = I / (m r^2).
    pub fn inertia_factor(&self) -> f64 {
        inertia_factor(
            self.build,
            self.inner_diameter_m.map(|d| d / self.diameter_m),
        )
    }
}

/// A straight incline descending to the right (+x), ending above the floor.
#[derive(Debug, Clone, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Incline {
    /// Rolling length along the slope, metres (the contact point travels this far).
    pub length_m: f64,
    /// Angle of the slope above horizontal, degrees.
    pub angle_deg: f64,
    /// Height of the incline's lower end above the floor, metres.
    pub bottom_height_m: f64,
    /// World x of the incline's lower end, metres.
    #[serde(default)]
    pub bottom_x_m: f64,
    /// Rolling-resistance coefficient (dimensionless, resisting force / normal force).
    #[serde(default)]
    pub rolling_resistance: f64,
    /// Slip of the spin on the slope: omega r = (1 - slip) v (0: rolling without slipping).
    #[serde(default)]
    pub slip: f64,
}

/// A free start: position of the ball's centre and its velocity at t = 0.
#[derive(Debug, Clone, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Start {
    /// Centre x, metres.
    pub x_m: f64,
    /// Centre y above the floor, metres.
    pub y_m: f64,
    /// Initial horizontal velocity, m/s.
    #[serde(default)]
    pub vx_mps: f64,
    /// Initial vertical velocity (up positive), m/s.
    #[serde(default)]
    pub vy_mps: f64,
    /// Initial spin about the axis toward the camera, turns per second, counter-clockwise
    /// positive as seen in the photo.
    #[serde(default)]
    pub spin_hz: f64,
}

/// Free flight.
#[derive(Debug, Clone, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Flight {
    /// Acceleration of gravity, m/s^2.
    #[serde(default = "default_gravity")]
    pub gravity_mps2: f64,
    /// Quadratic drag: acceleration = -drag_per_m * |v| * v, 1/m (0 = vacuum).
    #[serde(default)]
    pub drag_per_m: f64,
}

fn default_gravity() -> f64 {
    STANDARD_GRAVITY_MPS2
}

impl Default for Flight {
    fn default() -> Self {
        Flight {
            gravity_mps2: STANDARD_GRAVITY_MPS2,
            drag_per_m: 0.0,
        }
    }
}

/// Horizontal floor at y = 0.
#[derive(Debug, Clone, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Floor {
    /// Normal coefficient of restitution at zero impact speed.
    #[serde(default = "default_restitution")]
    pub restitution: f64,
    /// Change of restitution per m/s of impact speed, s/m (e = restitution + slope * v_in, clamped
    /// to 0..1).
    #[serde(default)]
    pub restitution_slope_s_per_m: f64,
    /// Tangential rule: horizontal velocity after a bounce = ratio * before.
    #[serde(default = "one")]
    pub tangential_ratio: f64,
    /// Glossy floor: the ball's mirror image shows in it.
    #[serde(default)]
    pub glossy: bool,
    /// Reflectance of a glossy floor (0..1).
    #[serde(default = "default_reflectance")]
    pub reflectance: f64,
    /// Visible depth of the floor plate in the photo, metres below y = 0.
    #[serde(default = "default_floor_depth")]
    pub depth_m: f64,
}

fn default_restitution() -> f64 {
    0.8
}
fn one() -> f64 {
    1.0
}
fn default_reflectance() -> f64 {
    0.3
}
fn default_floor_depth() -> f64 {
    0.02
}

impl Default for Floor {
    fn default() -> Self {
        Floor {
            restitution: default_restitution(),
            restitution_slope_s_per_m: 0.0,
            tangential_ratio: 1.0,
            glossy: false,
            reflectance: default_reflectance(),
            depth_m: default_floor_depth(),
        }
    }
}

impl Floor {
    /// Normal restitution for an impact at `speed_mps` (vertical component).
    pub fn restitution_at(&self, speed_mps: f64) -> f64 {
        (self.restitution + self.restitution_slope_s_per_m * speed_mps).clamp(0.0, 1.0)
    }
}

/// The multi-flash strobe.
#[derive(Debug, Clone, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Strobe {
    /// Flash rate, hertz.
    pub rate_hz: f64,
    /// Time of the first flash after release, seconds.
    #[serde(default)]
    pub first_flash_s: f64,
    /// Exposure length from the first flash, seconds; flashes fire while inside it.
    pub exposure_s: f64,
    /// Duration of one flash, seconds (motion blur within it).
    #[serde(default = "default_flash_duration")]
    pub flash_duration_s: f64,
    /// Cap on the number of flashes (flash units have one).
    #[serde(default)]
    pub max_flashes: Option<usize>,
}

fn default_flash_duration() -> f64 {
    20e-6
}

impl Strobe {
    /// Flash interval, seconds.
    pub fn interval_s(&self) -> f64 {
        1.0 / self.rate_hz
    }

    /// Times of all flashes, seconds.
    pub fn flash_times_s(&self) -> Vec<f64> {
        let count = (self.exposure_s * self.rate_hz + 1e-9).floor() as usize + 1;
        let count = self.max_flashes.map_or(count, |m| count.min(m));
        (0..count)
            .map(|i| self.first_flash_s + i as f64 / self.rate_hz)
            .collect()
    }
}

/// The camera looking at the vertical plane of motion.
#[derive(Debug, Clone, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Camera {
    /// Scale in the plane of motion at the image centre, pixels per metre.
    pub px_per_m: f64,
    /// Image width, pixels.
    pub width_px: u32,
    /// Image height, pixels.
    pub height_px: u32,
    /// Pixel x where the world origin (floor level, x = 0) falls.
    pub origin_x_px: f64,
    /// Pixel y where the world origin falls.
    pub origin_y_px: f64,
    /// Camera roll, degrees (positive turns the picture clockwise).
    #[serde(default)]
    pub roll_deg: f64,
    /// Perspective tilt: rotation of the camera about its vertical axis, degrees.
    #[serde(default)]
    pub tilt_deg: f64,
    /// Focal length in pixels for the perspective and distortion models (default: image width).
    #[serde(default)]
    pub focal_px: Option<f64>,
    /// Radial distortion coefficient k1 (on coordinates normalised by the focal length).
    #[serde(default)]
    pub k1: f64,
    /// Radial distortion coefficient k2.
    #[serde(default)]
    pub k2: f64,
}

/// The look of the photograph.
#[derive(Debug, Clone, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PhotoLook {
    /// Bright ball on dark, or dark on bright.
    #[serde(default)]
    pub polarity: Polarity,
    /// Linear exposure of a white surface by one flash (default: 0.6 for bright polarity; for
    /// dark polarity the backdrop level divided by the number of flashes).
    #[serde(default)]
    pub flash_exposure: Option<f64>,
    /// Linear exposure of a white surface by ambient light over the whole exposure.
    #[serde(default = "default_ambient")]
    pub ambient_exposure: f64,
    /// Ball albedo (default 0.9 bright, 0.08 dark).
    #[serde(default)]
    pub ball_albedo: Option<f64>,
    /// Linear brightness the backdrop reaches over the whole exposure, 0..1 (default 0.05 bright,
    /// 0.75 dark). A ball image hides the backdrop for its own flash only, so a dark ball on a
    /// bright backdrop dims it by about 1/N of this level for N flashes, as in a real long
    /// exposure.
    #[serde(default)]
    pub backdrop_level: Option<f64>,
    /// Linear brightness of the floor plate over the exposure, 0..1.
    #[serde(default = "default_floor_level")]
    pub floor_level: f64,
    /// Linear brightness of the incline over the exposure, 0..1.
    #[serde(default = "default_incline_level")]
    pub incline_level: f64,
    /// Relative amplitude of the backdrop texture.
    #[serde(default = "default_texture")]
    pub texture: f64,
    /// Relative brightness change across the image width.
    #[serde(default = "default_gradient")]
    pub gradient: f64,
    /// Relative darkening in the corners.
    #[serde(default = "default_vignetting")]
    pub vignetting: f64,
    /// Shade the ball as a lit sphere with a highlight (false: flat disc).
    #[serde(default = "yes")]
    pub shading: bool,
    /// Direction towards the flash in the camera frame (x right, y down, z towards the camera);
    /// the default is a flash up and to the left of the lens, about 27 degrees off its axis.
    #[serde(default = "default_light")]
    pub light_dir: [f64; 3],
    /// Fraction of the flash's light on the ball that is diffuse fill, 0..1 (low with a flash
    /// beside the rig: the ball shows a crescent).
    #[serde(default = "default_fill")]
    pub fill: f64,
    /// Strength of the glossy highlight (Blinn-Phong specular term), 0 for a matte ball.
    #[serde(default = "default_gloss")]
    pub gloss: f64,
    /// Blinn-Phong exponent of the highlight (higher: smaller, sharper).
    #[serde(default = "default_gloss_power")]
    pub gloss_power: f64,
    /// Direction toward the light source that makes the highlight, camera frame (default: the
    /// flash's `light_dir`).
    #[serde(default)]
    pub gloss_dir: Option<[f64; 3]>,
    /// Sensor noise on (photon + read noise).
    #[serde(default = "yes")]
    pub noise: bool,
    /// Full-well capacity, electrons (sets the photon noise).
    #[serde(default = "default_full_well")]
    pub full_well_e: f64,
    /// Read noise, electrons RMS.
    #[serde(default = "default_read_noise")]
    pub read_noise_e: f64,
    /// Motion blur within each flash's duration.
    #[serde(default = "yes")]
    pub motion_blur: bool,
    /// Draw the incline and the floor.
    #[serde(default = "yes")]
    pub draw_rig: bool,
    /// Colour (RGB) photo; false writes grey.
    #[serde(default = "yes")]
    pub color: bool,
    /// Ball colour (linear RGB multipliers).
    #[serde(default = "default_ball_rgb")]
    pub ball_rgb: [f64; 3],
    /// Backdrop colour (linear RGB multipliers).
    #[serde(default = "default_backdrop_rgb")]
    pub backdrop_rgb: [f64; 3],
    /// Tone curve.
    #[serde(default)]
    pub tone: Tone,
    /// Bits per channel of a PNG or TIFF: 8 or 16.
    #[serde(default = "default_bits")]
    pub bit_depth: u8,
    /// JPEG quality 1..100 when the output is a JPEG.
    #[serde(default = "default_quality")]
    pub jpeg_quality: u8,
}

fn yes() -> bool {
    true
}
fn default_light() -> [f64; 3] {
    [-0.3, -0.4, 1.0]
}
fn default_fill() -> f64 {
    0.3
}
fn default_gloss() -> f64 {
    0.35
}
fn default_gloss_power() -> f64 {
    40.0
}
fn default_ambient() -> f64 {
    0.03
}
fn default_floor_level() -> f64 {
    0.22
}
fn default_incline_level() -> f64 {
    0.3
}
fn default_texture() -> f64 {
    0.15
}
fn default_gradient() -> f64 {
    0.2
}
fn default_vignetting() -> f64 {
    0.25
}
fn default_full_well() -> f64 {
    20000.0
}
fn default_read_noise() -> f64 {
    6.0
}
fn default_ball_rgb() -> [f64; 3] {
    [1.0, 0.55, 0.25]
}
fn default_backdrop_rgb() -> [f64; 3] {
    [0.9, 0.95, 1.0]
}
fn default_bits() -> u8 {
    8
}
fn default_quality() -> u8 {
    92
}

impl Default for PhotoLook {
    fn default() -> Self {
        toml::from_str("").expect("every photo field has a default")
    }
}

/// Motion toward the camera: the ball leaves the plane of motion at a constant speed from its
/// release, so its image grows (moving toward the camera) or shrinks by perspective about the
/// image centre: scale D / (D - z) for a camera D metres from the plane.
#[derive(Debug, Clone, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Depth {
    /// Speed toward the camera, m/s (negative: away from it).
    pub toward_camera_mps: f64,
    /// Distance from the camera to the plane of motion, metres (default: the focal length in
    /// pixels over the scale in pixels per metre).
    #[serde(default)]
    pub camera_distance_m: Option<f64>,
}

/// A flat rectangle on the backdrop (a panel, a lamp, a bright sign), with soft edges of one
/// pixel.
#[derive(Debug, Clone, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct BackdropShape {
    /// Centre x, pixels.
    pub x_px: f64,
    /// Centre y, pixels.
    pub y_px: f64,
    /// Width, pixels.
    pub width_px: f64,
    /// Height, pixels.
    pub height_px: f64,
    /// Linear brightness it reaches over the whole exposure, 0..1 (replaces the backdrop's).
    pub level: f64,
}

/// A round object that is not the ball, placed in pixels.
#[derive(Debug, Clone, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Distractor {
    /// Centre x, pixels.
    pub x_px: f64,
    /// Centre y, pixels.
    pub y_px: f64,
    /// Radius, pixels.
    pub r_px: f64,
    /// Albedo (0..1).
    #[serde(default = "default_distractor_albedo")]
    pub albedo: f64,
}

fn default_distractor_albedo() -> f64 {
    0.5
}

/// The scene file's checks, each refusal naming the file and the key.
struct Check<'a> {
    path: &'a Path,
}

impl Check<'_> {
    fn bad(&self, key: &str, why: &str) -> Result<()> {
        Err(Error::config(self.path, format!("{key}: {why}")))
    }

    fn positive(&self, key: &str, v: f64) -> Result<()> {
        if v.is_finite() && v > 0.0 {
            Ok(())
        } else {
            self.bad(key, "must be a positive finite number")
        }
    }

    fn finite(&self, key: &str, v: f64) -> Result<()> {
        if v.is_finite() {
            Ok(())
        } else {
            self.bad(key, "must be a finite number")
        }
    }

    fn unit(&self, key: &str, v: f64) -> Result<()> {
        if v.is_finite() && (0.0..=1.0).contains(&v) {
            Ok(())
        } else {
            self.bad(key, "must be between 0 and 1")
        }
    }
}

impl Scene {
    /// Parse and validate a scene from TOML text; `path` names the source in errors.
    pub fn from_toml(text: &str, path: &Path) -> Result<Scene> {
        let scene: Scene = toml::from_str(text).map_err(|e| Error::toml(path, text, &e))?;
        scene.validate(path)?;
        Ok(scene)
    }

    /// Read, parse and validate a scene file.
    pub fn load(path: &Path) -> Result<Scene> {
        let text = std::fs::read_to_string(path).map_err(|e| Error::io(path, e))?;
        Scene::from_toml(&text, path)
    }

    /// Refuse absurd values, naming the key.
    pub fn validate(&self, path: &Path) -> Result<()> {
        let ck = Check { path };
        self.check_motion(&ck)?;
        self.check_strobe_and_camera(&ck)?;
        self.check_photo(&ck)?;
        self.check_real_ball(&ck)?;
        self.check_planning(&ck)
    }

    /// The markings, the spin, the motion in depth and the backdrop's shapes.
    fn check_real_ball(&self, ck: &Check) -> Result<()> {
        let b = &self.ball;
        ck.unit("ball.marking_albedo", b.marking_albedo)?;
        if !(b.marking_width.is_finite() && b.marking_width > 0.0 && b.marking_width <= 1.0) {
            return ck.bad(
                "ball.marking_width",
                "must be above 0 and at most 1 (of the radius)",
            );
        }
        ck.finite("ball.orientation_deg", b.orientation_deg)?;
        if let Some(inc) = &self.incline
            && !(inc.slip.is_finite() && inc.slip.abs() <= 1.0)
        {
            return ck.bad("incline.slip", "must be between -1 and 1");
        }
        if let Some(s) = &self.start
            && !(s.spin_hz.is_finite() && s.spin_hz.abs() <= 1000.0)
        {
            return ck.bad("start.spin_hz", "must be within +-1000 turns per second");
        }
        if let Some(d) = &self.depth {
            if !(d.toward_camera_mps.is_finite() && d.toward_camera_mps.abs() <= 100.0) {
                return ck.bad("depth.toward_camera_mps", "must be within +-100 m/s");
            }
            let dist = self.camera_distance_m();
            if let Some(v) = d.camera_distance_m {
                ck.positive("depth.camera_distance_m", v)?;
            }
            let t_end = self.strobe.first_flash_s + self.strobe.exposure_s;
            if d.toward_camera_mps * t_end > 0.75 * dist {
                return ck.bad(
                    "depth.toward_camera_mps",
                    "the ball would come within a quarter of the camera's distance",
                );
            }
        }
        for sh in &self.backdrop_shapes {
            for (key, v) in [("x_px", sh.x_px), ("y_px", sh.y_px)] {
                ck.finite(&format!("backdrop_shapes.{key}"), v)?;
            }
            ck.positive("backdrop_shapes.width_px", sh.width_px)?;
            ck.positive("backdrop_shapes.height_px", sh.height_px)?;
            ck.unit("backdrop_shapes.level", sh.level)?;
        }
        Ok(())
    }

    /// Distance from the camera to the plane of motion, metres: the depth section's, else the
    /// focal length in pixels (default the image width) over the scale.
    pub fn camera_distance_m(&self) -> f64 {
        let c = &self.camera;
        self.depth
            .as_ref()
            .and_then(|d| d.camera_distance_m)
            .unwrap_or(c.focal_px.unwrap_or(c.width_px as f64) / c.px_per_m)
    }

    /// The ball, the incline or the start, the flight and the floor.
    fn check_motion(&self, ck: &Check) -> Result<()> {
        ck.positive("ball.diameter_m", self.ball.diameter_m)?;
        if self.ball.build == Build::Thick {
            match self.ball.inner_diameter_m {
                Some(d) if d.is_finite() && d >= 0.0 && d < self.ball.diameter_m => {}
                _ => {
                    return ck.bad(
                        "ball.inner_diameter_m",
                        "a thick shell needs 0 <= inner diameter < diameter",
                    );
                }
            }
        }
        match (&self.incline, &self.start) {
            (Some(inc), None) => {
                ck.positive("incline.length_m", inc.length_m)?;
                if !(inc.angle_deg.is_finite() && inc.angle_deg > 0.0 && inc.angle_deg < 90.0) {
                    return ck.bad("incline.angle_deg", "must be between 0 and 90 degrees");
                }
                ck.positive("incline.bottom_height_m", inc.bottom_height_m)?;
                ck.finite("incline.bottom_x_m", inc.bottom_x_m)?;
                if !(inc.rolling_resistance.is_finite() && inc.rolling_resistance >= 0.0) {
                    return ck.bad("incline.rolling_resistance", "must be >= 0");
                }
                let th = inc.angle_deg.to_radians();
                if th.sin() - inc.rolling_resistance * th.cos() <= 0.0 {
                    return ck.bad(
                        "incline.rolling_resistance",
                        "too large: the ball would not start rolling",
                    );
                }
            }
            (None, Some(s)) => {
                ck.finite("start.x_m", s.x_m)?;
                ck.finite("start.vx_mps", s.vx_mps)?;
                ck.finite("start.vy_mps", s.vy_mps)?;
                if !(s.y_m.is_finite() && s.y_m >= self.ball.radius_m()) {
                    return ck.bad(
                        "start.y_m",
                        "the ball's centre must start at or above one radius",
                    );
                }
            }
            (Some(_), Some(_)) => {
                return ck.bad("start", "give either [incline] or [start], not both");
            }
            (None, None) => return ck.bad("incline", "give either [incline] or [start]"),
        }
        ck.positive("flight.gravity_mps2", self.flight.gravity_mps2)?;
        if !(self.flight.drag_per_m.is_finite() && self.flight.drag_per_m >= 0.0) {
            return ck.bad("flight.drag_per_m", "must be >= 0");
        }
        ck.unit("floor.restitution", self.floor.restitution)?;
        ck.finite(
            "floor.restitution_slope_s_per_m",
            self.floor.restitution_slope_s_per_m,
        )?;
        ck.unit("floor.tangential_ratio", self.floor.tangential_ratio)?;
        ck.unit("floor.reflectance", self.floor.reflectance)?;
        ck.positive("floor.depth_m", self.floor.depth_m)?;
        Ok(())
    }

    /// The strobe and the camera.
    fn check_strobe_and_camera(&self, ck: &Check) -> Result<()> {
        ck.positive("strobe.rate_hz", self.strobe.rate_hz)?;
        if self.strobe.rate_hz > 1e5 {
            return ck.bad("strobe.rate_hz", "above 100 kHz is not a strobe");
        }
        ck.finite("strobe.first_flash_s", self.strobe.first_flash_s)?;
        if self.strobe.first_flash_s < 0.0 {
            return ck.bad("strobe.first_flash_s", "must be >= 0 (release is at t = 0)");
        }
        ck.positive("strobe.exposure_s", self.strobe.exposure_s)?;
        if self.strobe.exposure_s * self.strobe.rate_hz > 100_000.0 {
            return ck.bad("strobe.exposure_s", "more than 100000 flashes");
        }
        if !(self.strobe.flash_duration_s.is_finite()
            && self.strobe.flash_duration_s >= 0.0
            && self.strobe.flash_duration_s < self.strobe.interval_s())
        {
            return ck.bad(
                "strobe.flash_duration_s",
                "must be >= 0 and shorter than the flash interval",
            );
        }
        if self.strobe.max_flashes == Some(0) {
            return ck.bad("strobe.max_flashes", "must be at least 1");
        }
        let c = &self.camera;
        ck.positive("camera.px_per_m", c.px_per_m)?;
        if c.width_px == 0 || c.height_px == 0 || c.width_px > 20000 || c.height_px > 20000 {
            return ck.bad("camera.width_px", "image sides must be 1..20000 pixels");
        }
        ck.finite("camera.origin_x_px", c.origin_x_px)?;
        ck.finite("camera.origin_y_px", c.origin_y_px)?;
        if !(c.roll_deg.is_finite() && c.roll_deg.abs() <= 45.0) {
            return ck.bad("camera.roll_deg", "must be within +-45 degrees");
        }
        if !(c.tilt_deg.is_finite() && c.tilt_deg.abs() <= 60.0) {
            return ck.bad("camera.tilt_deg", "must be within +-60 degrees");
        }
        if let Some(f) = c.focal_px {
            ck.positive("camera.focal_px", f)?;
        }
        if !(c.k1.is_finite() && c.k1.abs() < 1.0) {
            return ck.bad("camera.k1", "must be within +-1");
        }
        if !(c.k2.is_finite() && c.k2.abs() < 1.0) {
            return ck.bad("camera.k2", "must be within +-1");
        }
        Ok(())
    }

    /// The look of the photograph.
    fn check_photo(&self, ck: &Check) -> Result<()> {
        let p = &self.photo;
        if let Some(v) = p.flash_exposure {
            ck.positive("photo.flash_exposure", v)?;
        }
        if !(p.ambient_exposure.is_finite() && p.ambient_exposure >= 0.0) {
            return ck.bad("photo.ambient_exposure", "must be >= 0");
        }
        if let Some(v) = p.ball_albedo {
            ck.unit("photo.ball_albedo", v)?;
        }
        if let Some(v) = p.backdrop_level {
            ck.unit("photo.backdrop_level", v)?;
        }
        ck.unit("photo.floor_level", p.floor_level)?;
        ck.unit("photo.incline_level", p.incline_level)?;
        ck.unit("photo.texture", p.texture)?;
        ck.unit("photo.gradient", p.gradient)?;
        ck.unit("photo.vignetting", p.vignetting)?;
        ck.positive("photo.full_well_e", p.full_well_e)?;
        if !(p.read_noise_e.is_finite() && p.read_noise_e >= 0.0) {
            return ck.bad("photo.read_noise_e", "must be >= 0");
        }
        for (i, v) in p.ball_rgb.iter().chain(p.backdrop_rgb.iter()).enumerate() {
            if !(v.is_finite() && (0.0..=1.0).contains(v)) {
                let key = if i < 3 {
                    "photo.ball_rgb"
                } else {
                    "photo.backdrop_rgb"
                };
                return ck.bad(key, "colour multipliers must be between 0 and 1");
            }
        }
        if !(p.light_dir.iter().all(|v| v.is_finite()) && p.light_dir[2] > 0.0) {
            return ck.bad(
                "photo.light_dir",
                "must be finite with z > 0 (the flash is on the camera's side)",
            );
        }
        ck.unit("photo.fill", p.fill)?;
        if !(p.gloss.is_finite() && (0.0..=10.0).contains(&p.gloss)) {
            return ck.bad("photo.gloss", "must be between 0 and 10");
        }
        if !(p.gloss_power.is_finite() && (1.0..=10000.0).contains(&p.gloss_power)) {
            return ck.bad("photo.gloss_power", "must be between 1 and 10000");
        }
        if let Some(g) = p.gloss_dir
            && !(g.iter().all(|v| v.is_finite()) && g[2] > 0.0)
        {
            return ck.bad("photo.gloss_dir", "must be finite with z > 0");
        }
        if p.bit_depth != 8 && p.bit_depth != 16 {
            return ck.bad("photo.bit_depth", "must be 8 or 16");
        }
        if p.jpeg_quality == 0 || p.jpeg_quality > 100 {
            return ck.bad("photo.jpeg_quality", "must be 1..100");
        }
        Ok(())
    }

    /// The flash unit, the wishes and the distractors.
    fn check_planning(&self, ck: &Check) -> Result<()> {
        if let Some(u) = &self.flash_unit {
            if u.levels.is_empty() {
                return ck.bad("flash_unit.levels", "give at least one power level");
            }
            for (i, l) in u.levels.iter().enumerate() {
                ck.positive(
                    &format!("flash_unit.levels[{i}].max_rate_hz"),
                    l.max_rate_hz,
                )?;
                ck.positive(
                    &format!("flash_unit.levels[{i}].flash_duration_s"),
                    l.flash_duration_s,
                )?;
                if l.max_flashes < 2 {
                    return ck.bad(
                        &format!("flash_unit.levels[{i}].max_flashes"),
                        "a strobe photo needs at least 2 flashes",
                    );
                }
            }
        }
        if let Some(w) = &self.wishes {
            if w.min_images_per_arc == 0 {
                return ck.bad("wishes.min_images_per_arc", "must be at least 1");
            }
            if !(w.min_separation_diameters.is_finite() && w.min_separation_diameters >= 0.0) {
                return ck.bad("wishes.min_separation_diameters", "must be >= 0");
            }
            ck.positive("wishes.max_blur_px", w.max_blur_px)?;
        }
        for (i, d) in self.distractors.iter().enumerate() {
            ck.finite(&format!("distractors[{i}].x_px"), d.x_px)?;
            ck.finite(&format!("distractors[{i}].y_px"), d.y_px)?;
            ck.positive(&format!("distractors[{i}].r_px"), d.r_px)?;
            ck.unit(&format!("distractors[{i}].albedo"), d.albedo)?;
        }
        Ok(())
    }

    /// The built-in demo scene: a quality-control rig where a solid rubber ball rolls down a short
    /// aluminium launch chute and bounces along a steel floor plate under a 25 Hz strobe.
    pub fn demo() -> Scene {
        Scene::from_toml(DEMO_SCENE, Path::new("<built-in demo>"))
            .expect("the built-in demo scene is valid")
    }
}

/// TOML text of the built-in demo scene.
pub const DEMO_SCENE: &str = r#"# Beadline demo: quality-control rig. A solid rubber ball (40 mm) rolls from rest down a
# 0.25 m aluminium launch chute at 20 degrees, leaves it 0.45 m above a steel floor plate and
# bounces along it. Strobe at 25 Hz for 1.45 s; camera square to the plane at 1000 px/m.
seed = 2026

[ball]
diameter_m = 0.04
build = "solid"

[incline]
length_m = 0.25
angle_deg = 20.0
bottom_height_m = 0.45
bottom_x_m = 0.0

[floor]
restitution = 0.78
tangential_ratio = 0.97

[strobe]
rate_hz = 25.0
first_flash_s = 0.15
exposure_s = 1.45

[camera]
px_per_m = 1000.0
width_px = 1600
height_px = 900
origin_x_px = 300.0
origin_y_px = 820.0
"#;
