//! Renderer checks for real balls: the spin (rolling kinematics and the bounce's angular
//! momentum), markings that turn with the ball as seen in the photo, the motion in depth
//! (pinhole perspective) and shapes on the backdrop.

use beadline::synth::scene::Scene;
use beadline::synth::{self, FlashTruth, Rendered};
use std::f64::consts::PI;
use std::path::Path;

/// A photo with no noise, texture or rig and flat light (fill 1, no highlight), linear tone:
/// pixel values are the ball's albedo times its markings.
const FLAT_LOOK: &str = r#"
[photo]
noise = false
texture = 0.0
gradient = 0.0
vignetting = 0.0
ambient_exposure = 0.0
backdrop_level = 0.0
draw_rig = false
color = false
tone = "linear"
bit_depth = 16
flash_exposure = 0.5
ball_albedo = 1.0
ball_rgb = [1.0, 1.0, 1.0]
fill = 1.0
gloss = 0.0
"#;

fn scene(text: &str) -> Scene {
    Scene::from_toml(text, Path::new("test.toml")).unwrap()
}

/// Grey value (linear) of pixel (x, y).
fn grey(photo: &Rendered, x: usize, y: usize) -> f64 {
    let p = photo.pixels[y * photo.width as usize + x];
    0.2126 * p[0] as f64 + 0.7152 * p[1] as f64 + 0.0722 * p[2] as f64
}

/// Angle (degrees, counter-clockwise as seen) of the centroid of the dark printed pixels within
/// 0.9 radius of an image's centre.
fn ink_angle_deg(photo: &Rendered, f: &FlashTruth) -> f64 {
    let (mut sx, mut sy, mut n) = (0.0, 0.0, 0.0);
    let r = f.r_px;
    let (x0, x1) = ((f.x_px - r) as usize, (f.x_px + r) as usize + 1);
    let (y0, y1) = ((f.y_px - r) as usize, (f.y_px + r) as usize + 1);
    for y in y0..=y1 {
        for x in x0..=x1 {
            let (dx, dy) = (x as f64 - f.x_px, y as f64 - f.y_px);
            if dx.hypot(dy) < 0.9 * r && grey(photo, x, y) < 0.25 {
                sx += dx;
                sy += dy;
                n += 1.0;
            }
        }
    }
    assert!(n > 10.0, "no printed patch seen on flash {}", f.n);
    (-sy).atan2(sx).to_degrees()
}

#[test]
fn a_printed_dot_turns_counter_clockwise_by_the_truth_s_spin_angle() {
    // A thrown ball spinning at +1.5 turns/s (counter-clockwise as seen): the dark patch's
    // direction from the image centre must advance by the truth's spin angle, and sit at the
    // pattern's own direction (atan2(0.25, 0.45) = 29.05 deg as seen) plus the orientation at
    // release. Geometry only: the patch is symmetric about its radial direction, so its
    // projected centroid lies on that direction.
    let text = format!(
        r#"
[ball]
diameter_m = 0.1
markings = "dot"
marking_albedo = 0.0
marking_width = 0.15
orientation_deg = 10.0
[start]
x_m = 0.1
y_m = 0.35
vx_mps = 1.5
spin_hz = 1.5
[strobe]
rate_hz = 10.0
exposure_s = 0.25
[camera]
px_per_m = 400.0
width_px = 260
height_px = 200
origin_x_px = 0.0
origin_y_px = 199.0
{FLAT_LOOK}"#
    );
    let photo = synth::render(&scene(&text));
    let flashes = &photo.truth.flashes;
    assert_eq!(flashes.len(), 3);
    let pattern_deg = 0.25f64.atan2(0.45).to_degrees();
    for f in flashes {
        assert!(f.in_frame);
        let want = pattern_deg + f.spin_angle_deg;
        let got = ink_angle_deg(&photo, f);
        let diff = (got - want + 540.0).rem_euclid(360.0) - 180.0;
        assert!(
            diff.abs() < 1.0,
            "flash {}: ink at {got:.2} deg, truth {want:.2} deg",
            f.n
        );
        // Constant spin in flight: 10 deg at release + 360 * 1.5 * t.
        let expect = 10.0 + 360.0 * 1.5 * f.t_s;
        assert!((f.spin_angle_deg - expect).abs() < 1e-9);
    }
}

#[test]
fn on_the_incline_the_ball_turns_by_the_distance_rolled_over_its_radius() {
    // Rolling without slipping: the contact point is at rest, so the ball turns by s / r for a
    // distance s rolled (standard rigid-body kinematics), clockwise for a slope descending to
    // the right; with a slip fraction the spin lags: (1 - slip) s / r.
    for slip in [0.0, 0.05] {
        let text = format!(
            r#"
[ball]
diameter_m = 0.04
[incline]
length_m = 0.4
angle_deg = 25.0
bottom_height_m = 0.4
slip = {slip}
[strobe]
rate_hz = 30.0
exposure_s = 1.0
[camera]
px_per_m = 500.0
width_px = 800
height_px = 400
origin_x_px = 200.0
origin_y_px = 380.0
"#
        );
        let photo = synth::render(&scene(&text));
        let f = &photo.truth.flashes;
        let rolling: Vec<_> = f
            .windows(2)
            .filter(|w| w[1].phase == synth::sim::Phase::Incline)
            .collect();
        assert!(rolling.len() >= 4);
        for w in rolling {
            let s_m = (w[1].x_m - w[0].x_m).hypot(w[1].y_m - w[0].y_m);
            let turn_rad = (w[1].spin_angle_deg - w[0].spin_angle_deg).to_radians();
            let want = -(1.0 - slip) * s_m / 0.02;
            assert!(
                (turn_rad - want).abs() < 1e-9 * want.abs().max(1.0),
                "{turn_rad} vs {want}"
            );
        }
    }
}

#[test]
fn a_bounce_keeps_the_angular_momentum_about_the_contact_point() {
    // Both contact impulses act through the contact point, so the angular momentum about it,
    // I omega - m r vx (counter-clockwise positive), is the same before and after: with
    // I = k m r^2, k r omega - vx is conserved (rigid-body impact mechanics; e.g. R. Garwin,
    // Am. J. Phys. 37, 88 (1969), from memory). Between bounces the spin is constant.
    let text = r#"
[ball]
diameter_m = 0.04
build = "shell"
[start]
x_m = 0.0
y_m = 0.5
vx_mps = 0.8
spin_hz = 3.0
[floor]
tangential_ratio = 0.8
[strobe]
rate_hz = 25.0
exposure_s = 1.5
[camera]
px_per_m = 500.0
width_px = 900
height_px = 400
origin_x_px = 50.0
origin_y_px = 380.0
"#;
    let photo = synth::render(&scene(text));
    let t = &photo.truth;
    let (k, r) = (t.inertia_factor, t.ball_radius_m);
    assert!((k - 2.0 / 3.0).abs() < 1e-12);
    assert!(t.bounces.len() >= 2);
    let mut before_hz = 3.0;
    for b in &t.bounces {
        assert!((b.spin_before_hz - before_hz).abs() < 1e-12);
        let l_in = k * r * 2.0 * PI * b.spin_before_hz - b.impact_velocity_mps[0];
        let l_out = k * r * 2.0 * PI * b.spin_after_hz - b.rebound_velocity_mps[0];
        assert!((l_in - l_out).abs() < 1e-12, "{l_in} vs {l_out}");
        before_hz = b.spin_after_hz;
    }
    // Flashes within one arc turn at that arc's spin.
    for w in t
        .flashes
        .windows(2)
        .filter(|w| w[0].arc == w[1].arc && w[0].arc >= 1)
    {
        let spin_hz = t.bounces[w[0].arc - 1].spin_after_hz;
        let turn = w[1].spin_angle_deg - w[0].spin_angle_deg;
        assert!((turn - 360.0 * spin_hz * (w[1].t_s - w[0].t_s)).abs() < 1e-9);
    }
}

#[test]
fn a_ball_moving_toward_the_camera_grows_as_a_pinhole_camera_sees_it() {
    // Pinhole camera square to the plane, D metres away: a point X metres off the axis at
    // distance D - z images at f X / (D - z) from the principal point, with f = scale * D, and
    // the disc's radius scales the same way (small-angle). The rendered disc's area must be
    // pi r^2 of that radius.
    let text = format!(
        r#"
[ball]
diameter_m = 0.05
[start]
x_m = 0.1
y_m = 0.2
vx_mps = 0.3
vy_mps = 0.5
[flight]
gravity_mps2 = 1.0
[depth]
toward_camera_mps = 0.6
camera_distance_m = 1.2
[strobe]
rate_hz = 4.0
exposure_s = 0.5
[camera]
px_per_m = 400.0
width_px = 240
height_px = 200
origin_x_px = 0.0
origin_y_px = 199.0
{FLAT_LOOK}"#
    );
    let sc = scene(&text);
    let (cx, cy) = (119.5, 99.5);
    for f in synth::render(&sc).truth.flashes {
        let z = 0.6 * f.t_s;
        assert!((f.depth_m - z).abs() < 1e-12);
        let k = 1.2 / (1.2 - z);
        let (px, py) = (400.0 * f.x_m, 199.0 - 400.0 * f.y_m);
        assert!((f.x_px - (cx + (px - cx) * k)).abs() < 1e-9);
        assert!((f.y_px - (cy + (py - cy) * k)).abs() < 1e-9);
        assert!((f.r_px - 400.0 * 0.025 * k).abs() < 1e-9);
    }
    // One flash at a time, rendered: its light is the area of the grown disc.
    for first_s in [0.0, 0.25, 0.5] {
        let mut one = sc.clone();
        one.strobe.first_flash_s = first_s;
        one.strobe.max_flashes = Some(1);
        let photo = synth::render(&one);
        let f = &photo.truth.flashes[0];
        let mut sum = 0.0;
        for y in 0..200 {
            for x in 0..240 {
                sum += grey(&photo, x, y);
            }
        }
        let area = PI * f.r_px * f.r_px;
        assert!(
            (sum / 0.5 - area).abs() < 2e-3 * area,
            "{} vs {area}",
            sum / 0.5
        );
    }
}

#[test]
fn a_backdrop_shape_replaces_the_backdrop_inside_it_in_the_plate_too() {
    let text = format!(
        r#"
[ball]
diameter_m = 0.05
[start]
x_m = 0.1
y_m = 0.2
[strobe]
rate_hz = 10.0
exposure_s = 0.01
[camera]
px_per_m = 400.0
width_px = 200
height_px = 120
origin_x_px = 0.0
origin_y_px = 119.0
[[backdrop_shapes]]
x_px = 150.0
y_px = 40.0
width_px = 40.0
height_px = 30.0
level = 0.4
{FLAT_LOOK}"#
    );
    let plate = synth::render_plate(&scene(&text));
    // Inside (edges soft over one pixel), outside, and at the shape's edge (half covered).
    assert!((grey(&plate, 150, 40) - 0.4).abs() < 1e-6);
    assert!((grey(&plate, 140, 30) - 0.4).abs() < 1e-6);
    assert!(grey(&plate, 100, 40).abs() < 1e-6);
    assert!((grey(&plate, 170, 40) - 0.2).abs() < 1e-6);
}

#[test]
fn absurd_real_ball_keys_are_refused_by_name() {
    let base = r#"
[ball]
diameter_m = 0.05
BALL
[start]
x_m = 0.1
y_m = 0.2
[strobe]
rate_hz = 10.0
exposure_s = 1.0
[camera]
px_per_m = 400.0
width_px = 200
height_px = 120
origin_x_px = 0.0
origin_y_px = 119.0
MORE
"#;
    for (ball, more, key) in [
        ("marking_width = 0.0", "", "ball.marking_width"),
        ("marking_albedo = 1.5", "", "ball.marking_albedo"),
        ("", "[photo]\nfill = -0.1", "photo.fill"),
        ("", "[photo]\ngloss_power = 0.0", "photo.gloss_power"),
        (
            "",
            "[depth]\ntoward_camera_mps = 0.5",
            "depth.toward_camera_mps",
        ),
        // A value the layout refuses: the line, the column and the key.
        (
            "markings = \"stripes\"",
            "",
            "line 4, column 12, key ball.markings",
        ),
    ] {
        let text = base.replace("BALL", ball).replace("MORE", more);
        let err = Scene::from_toml(&text, Path::new("s.toml"))
            .unwrap_err()
            .to_string();
        assert!(err.contains(key) && err.contains("s.toml"), "{key}: {err}");
    }
}
