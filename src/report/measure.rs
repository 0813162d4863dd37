//! The document of `beadline measure`: the timed path in pixels and metres, and the physics.

use super::csv_rows;
use crate::core::numbers::{fixed, measured};
use crate::core::words::count;
use crate::physics::checks::{self, Check, CheckOutcome};
use crate::physics::{Measurement, Quantity};
use crate::track::Stray;
use serde::Serialize;

/// One point of the timed path in the output.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct PathEntry {
    /// Flash index, 0 = first image found.
    pub n: usize,
    /// Time from the first image, seconds.
    pub t_s: f64,
    /// Centre x, pixels.
    pub x_px: f64,
    /// Centre y, pixels.
    pub y_px: f64,
    /// Radius, pixels.
    pub r_px: f64,
    /// 1-sigma of the centre, pixels.
    pub sigma_px: f64,
    /// Centre x, metres (the reported world frame of [`MeasureDoc::origin`], x right).
    pub x_m: f64,
    /// Centre y, metres (the reported world frame, y up: the height above the floor when the
    /// floor was found).
    pub y_m: f64,
    /// How the image was found: `detected`, or `predicted_and_confirmed` (a candidate the
    /// detector rejected, kept where the path's physics puts a missing flash).
    pub source: crate::detect::SpotSource,
    /// The ball's turn since the first image whose turn was read, degrees, counter-clockwise
    /// positive as seen in the photo, from its markings (null: no reading, see `spin_note`).
    pub spin_angle_deg: Option<f64>,
    /// 1-sigma of `spin_angle_deg`, degrees.
    pub spin_angle_sigma_deg: Option<f64>,
}

/// The ball's motion in depth, found from its image's size along the path; every image was
/// brought into the plane of the path's median image before the physics.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct DepthDoc {
    /// Size change of the ball's image from the first to the last image, relative (negative:
    /// it shrinks, the ball moves away from the camera).
    pub size_change: f64,
    /// Rate of change of the ball's distance to the camera over that distance, per second
    /// (positive: away).
    pub distance_change_per_s: f64,
    /// The distance from the camera to the ball at the median image, metres: the focal length in
    /// pixels over the scale (null without `--focal-px`).
    pub distance_m: Option<f64>,
    /// The ball's speed toward the camera, m/s (negative: away; null without `--focal-px`).
    pub toward_camera_mps: Option<f64>,
    /// 1-sigma of `toward_camera_mps`.
    pub toward_camera_sigma_mps: Option<f64>,
    /// Relative RMS scatter of the radii about the fitted motion in depth.
    pub radius_scatter: f64,
    /// Detected images the fit used (a few blurred or merged ones are left out).
    pub images_used: usize,
}

/// The spin read from the markings over one phase of the path.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SpinPhase {
    /// `incline` or `flight` (or `floor`).
    pub kind: String,
    /// First flash index of the phase.
    pub first_n: usize,
    /// Last flash index of the phase.
    pub last_n: usize,
    /// Turns between consecutive images read in the phase.
    pub steps_read: usize,
    /// Mean spin over the turns read in the phase, turns per second, counter-clockwise positive
    /// as seen (on an incline, where the spin grows, the mean of those turns).
    pub spin_hz: f64,
    /// 1-sigma of `spin_hz`.
    pub spin_hz_sigma: f64,
    /// On an incline: 1 - (the ball's turn x its radius) / (the distance its centre moved), both
    /// in pixels (0: rolling without slipping); null elsewhere.
    pub slip: Option<f64>,
    /// 1-sigma of `slip`.
    pub slip_sigma: Option<f64>,
}

/// The spin on either side of a bounce, read from the markings of the phases before and after it.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SpinBounce {
    /// The bounce's number along the path (1: the first), as in `bounces[]`.
    pub bounce: usize,
    /// Spin of the phase before, turns per second, counter-clockwise positive as seen.
    pub spin_before_hz: f64,
    /// 1-sigma of `spin_before_hz`.
    pub spin_before_hz_sigma: f64,
    /// Spin of the phase after, turns per second.
    pub spin_after_hz: f64,
    /// 1-sigma of `spin_after_hz`.
    pub spin_after_hz_sigma: f64,
    /// Horizontal velocity after less before, m/s (null when the ball barely moves sideways).
    pub tangential_change_mps: Option<f64>,
    /// 1-sigma of `tangential_change_mps`.
    pub tangential_change_sigma_mps: Option<f64>,
    /// The moment-of-inertia factor I / (m r^2) the two changes imply, the angular momentum about
    /// the contact point kept (null unless both changes are over three sigmas).
    pub inertia_factor: Option<f64>,
    /// 1-sigma of `inertia_factor`.
    pub inertia_factor_sigma: Option<f64>,
}

/// Where the origin of the reported world frame lies. Every position of the document (the path
/// entries' `x_m` and `y_m`, the floor's `y_m`, the launch's `x_m` and `y_m`, the bounces' `x_m`)
/// is in this one frame: metres, x right, y up, levelled by the camera roll when it was
/// corrected, and in the estimated scale when the scale was estimated.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct WorldOrigin {
    /// `launch`: x = 0 at the ball's centre when it leaves the incline (the launch point);
    /// `first_bounce`: at its centre at the first bounce contact (no incline); `first_image`:
    /// at its first image on the path (neither); `plane`: the plane file's own origin and axes.
    pub x: String,
    /// `floor`: y = 0 at the floor line found from the bounce contacts (or given);
    /// `lowest_image`: no floor was found, y = 0 at the underside of the ball at its lowest
    /// image (the floor only if the ball rested on it there); `plane`: the plane file's own.
    pub y: String,
}

impl WorldOrigin {
    /// The origin in words.
    pub fn words(&self) -> String {
        let x = match self.x.as_str() {
            "launch" => "x = 0 at the launch point (ball centre leaving the incline)",
            "first_bounce" => "x = 0 at the ball's centre at the first bounce",
            "first_image" => "x = 0 at the first image on the path",
            _ => "x and y as in the plane file",
        };
        let y = match self.y.as_str() {
            "floor" => ", y = 0 at the floor",
            "lowest_image" => {
                ", y = 0 at the underside of the ball's lowest image (no floor found: not the floor)"
            }
            _ => "",
        };
        format!("{x}{y}")
    }
}

/// `beadline measure --format json`.
#[derive(Debug, Clone, Serialize)]
pub struct MeasureDoc {
    /// The photo.
    pub file: String,
    /// Width, pixels.
    pub width_px: usize,
    /// Height, pixels.
    pub height_px: usize,
    /// Ball images found.
    pub spots_found: usize,
    /// The origin of the world frame of every position in the document.
    pub origin: WorldOrigin,
    /// The timed path (times in the measured flash interval).
    pub path: Vec<PathEntry>,
    /// Flash indexes with no image.
    pub missing: Vec<usize>,
    /// Spots not on the path, with the reason.
    pub strays: Vec<Stray>,
    /// The motion in depth (null: the images are in one plane, or a plane file was given).
    pub depth: Option<DepthDoc>,
    /// The spin read from the ball's markings, per phase with enough readings.
    pub spin: Vec<SpinPhase>,
    /// The spin before and after each bounce with a spin read on both sides.
    pub spin_bounces: Vec<SpinBounce>,
    /// Why some or all images give no spin reading (null when every image was read).
    pub spin_note: Option<String>,
    /// The physics (flattened: `schema_version`, `phases`, `bounces`, `launch`, ...).
    #[serde(flatten)]
    pub measurement: Measurement,
}

/// A calibration quantity with its sigma and where it came from.
fn quantity(q: &Quantity, unit: &str) -> String {
    format!("{} ({})", measured(q.value, q.sigma, unit), q.source)
}

/// The checks that did not pass, worst first, one line each; a last line saying whether the
/// numbers can be trusted.
fn checks_text(checks: &[Check]) -> String {
    let mut shown: Vec<&Check> = checks
        .iter()
        .filter(|c| c.outcome != CheckOutcome::Pass)
        .collect();
    shown.sort_by_key(|c| std::cmp::Reverse(c.outcome));
    let mut s = String::new();
    for c in &shown {
        let word = if c.outcome == CheckOutcome::Fail {
            "FAIL"
        } else {
            "warn"
        };
        s += &format!(
            "  {word} {}: {} (expected {})\n",
            c.check, c.detail, c.expected
        );
    }
    s += &match checks::worst(checks) {
        CheckOutcome::Pass => format!("  checks         all {} passed\n", checks.len()),
        CheckOutcome::Warn => format!(
            "  checks         {} of {} warn: read the numbers they name with care\n",
            shown.len(),
            checks.len()
        ),
        CheckOutcome::Fail => {
            "  checks         FAILED: the numbers above are not to be trusted (exit status 4)\n"
                .to_string()
        }
    };
    s
}

/// The incline, launch, floor and bounce lines.
fn motion_text(m: &Measurement) -> String {
    let mut s = String::new();
    if let Some(i) = &m.incline {
        s += &format!(
            "  incline        {}, accel {} (ideal rolling {}), end speed {} (ideal {}), \
             rolling loss {}\n",
            measured(i.angle_deg, i.angle_sigma_deg, "deg"),
            measured(i.accel_mps2, i.accel_sigma_mps2, "m/s^2"),
            fixed(i.ideal_accel_mps2, 4),
            measured(i.end_speed_mps, i.end_speed_sigma_mps, "m/s"),
            fixed(i.ideal_end_speed_mps, 4),
            measured(i.rolling_loss, i.rolling_loss_sigma, "")
        );
    }
    if let Some(l) = &m.launch {
        s += &format!(
            "  launch         {} at {}, t = {}, at x = {} m, y = {} m\n",
            measured(l.speed_mps, l.speed_sigma_mps, "m/s"),
            measured(l.angle_deg, l.angle_sigma_deg, "deg"),
            measured(l.t_s, l.t_sigma_s, "s"),
            fixed(l.x_m, 4),
            fixed(l.y_m, 4)
        );
    }
    s += &format!(
        "  floor          y = {} ({})\n",
        measured(m.floor.y_m, m.floor.sigma_m, "m"),
        m.floor.source
    );
    for (i, b) in m.bounces.iter().enumerate() {
        s += &format!(
            "  bounce {}       t = {} s, x = {} m, e = {}, speed in {} m/s (normal {}), out {} \
             m/s (normal {})",
            i + 1,
            fixed(b.t_s, 4),
            fixed(b.x_m, 4),
            measured(b.restitution, b.restitution_sigma, ""),
            fixed(b.impact_speed_mps, 3),
            fixed(b.impact_normal_speed_mps, 3),
            fixed(b.rebound_speed_mps, 3),
            fixed(b.rebound_velocity_mps[1].abs(), 3)
        );
        if let Some(a) = b.restitution_from_apex {
            s += &format!(", apex check {}", fixed(a, 4));
        }
        s += "\n";
    }
    s
}

impl MeasureDoc {
    /// Summary for a person: every value with the digits its sigma warrants
    /// ([`crate::core::numbers`]).
    pub fn text(&self) -> String {
        let m = &self.measurement;
        let mut s = format!(
            "{}: {}, {} on the path ({} missing), {}\n",
            self.file,
            count(self.spots_found, "ball image", "ball images"),
            self.path.len(),
            count(self.missing.len(), "flash", "flashes"),
            count(self.strays.len(), "stray", "strays")
        );
        s += &format!("  world frame    {}\n", self.origin.words());
        s += &format!("  scale          {}\n", quantity(&m.scale_px_per_m, "px/m"));
        s += &format!("  flash interval {}\n", quantity(&m.flash_interval_s, "s"));
        s += &format!("  gravity        {}\n", quantity(&m.gravity_mps2, "m/s^2"));
        if let Some(r) = m.level.roll_deg {
            s += &format!(
                "  camera roll    {}{}\n",
                measured(r, m.level.roll_sigma_deg.unwrap_or(f64::NAN), "deg"),
                if m.level.corrected {
                    " (corrected)"
                } else {
                    ""
                }
            );
        }
        s += &motion_text(m);
        s += &self.extras_text();
        for v in &m.verdicts {
            s += &format!("  {}\n", v.text());
        }
        s + &checks_text(&m.checks)
    }

    /// The restitution trend, drag, motion in depth and spin lines.
    fn extras_text(&self) -> String {
        let m = &self.measurement;
        let mut s = String::new();
        if let Some(t) = &m.restitution_trend {
            s += &format!(
                "  e vs impact    slope {} over {}\n",
                measured(t.slope_s_per_m, t.slope_sigma_s_per_m, "s/m"),
                count(t.bounces, "bounce", "bounces")
            );
        }
        if let Some(d) = &m.drag {
            s += &format!(
                "  drag           {}\n",
                measured(d.drag_per_m, d.drag_sigma_per_m, "1/m")
            );
        }
        if let Some(d) = &self.depth {
            let change = fixed(d.distance_change_per_s * 100.0, 1);
            let sign = if change.starts_with('-') || change == "0.0" {
                ""
            } else {
                "+"
            };
            s += &format!(
                "  depth          the ball's image {} by {} % along the path: its distance \
                 changes by {sign}{change} % per second; every image brought into the plane of \
                 the median image\n",
                if d.size_change >= 0.0 {
                    "grows"
                } else {
                    "shrinks"
                },
                fixed(d.size_change.abs() * 100.0, 1),
            );
            if let (Some(v), Some(sv), Some(z)) =
                (d.toward_camera_mps, d.toward_camera_sigma_mps, d.distance_m)
            {
                s += &format!(
                    "  depth speed    {} toward the camera ({} m away)\n",
                    measured(v, sv, "m/s"),
                    fixed(z, 3)
                );
            }
        }
        for p in &self.spin {
            s += &format!(
                "  spin           {} n {}..{}: {} ({} turns read)",
                p.kind,
                p.first_n,
                p.last_n,
                measured(p.spin_hz, p.spin_hz_sigma, "turns/s"),
                p.steps_read
            );
            if let (Some(slip), Some(sig)) = (p.slip, p.slip_sigma) {
                s += &format!(
                    ", slip {} (0: rolling without slipping)",
                    measured(slip, sig, "")
                );
            }
            s += "\n";
        }
        for b in &self.spin_bounces {
            s += &format!(
                "  spin at bounce {}: {} before, {} after",
                b.bounce,
                measured(b.spin_before_hz, b.spin_before_hz_sigma, "turns/s"),
                measured(b.spin_after_hz, b.spin_after_hz_sigma, "turns/s")
            );
            if let (Some(k), Some(sk)) = (b.inertia_factor, b.inertia_factor_sigma) {
                s += &format!(" (moment-of-inertia factor {})", measured(k, sk, ""));
            }
            s += "\n";
        }
        if let Some(note) = &self.spin_note {
            s += &format!("  spin note      {note}\n");
        }
        s
    }

    /// CSV of the path.
    pub fn csv(&self) -> std::io::Result<String> {
        csv_rows(&self.path)
    }
}
