//! A ball moving toward the camera: its images brought into one plane before the physics,
//! against the renderer's exact truth (pinhole perspective about the image centre, checked in
//! tests/ball_surface.rs).

mod common;

use beadline::physics::checks::CheckOutcome;
use beadline::pipeline::measure_photo;
use beadline::synth::scene::Scene;
use std::path::Path;

fn incline(toward_camera_mps: f64) -> Scene {
    let text = format!(
        r#"
seed = 77
[ball]
diameter_m = 0.04
[incline]
length_m = 0.25
angle_deg = 20.0
bottom_height_m = 0.45
[floor]
restitution = 0.78
tangential_ratio = 0.97
[strobe]
rate_hz = 25.0
first_flash_s = 0.15
exposure_s = 1.45
[camera]
px_per_m = 800.0
width_px = 1280
height_px = 720
origin_x_px = 240.0
origin_y_px = 656.0
[depth]
toward_camera_mps = {toward_camera_mps}
camera_distance_m = 1.6
"#
    );
    Scene::from_toml(&text, Path::new("depth.toml")).unwrap()
}

#[test]
fn a_ball_moving_toward_the_camera_is_measured_in_one_plane() {
    // Truth: restitution 0.78 at both bounces and the incline's rolling acceleration
    // g sin(20 deg) / (1 + 2/5) (rigid-body rolling, handbook formula), whatever the depth.
    let dir = common::tempdir();
    let scene = incline(0.08);
    let (photo, truth) = common::shoot(&scene, dir.path(), "depth.png");
    let settings = common::ball_settings(25.0, 0.04);
    let m = measure_photo(&photo, &settings).expect("a measurement");
    let doc = &m.doc;
    let depth = doc.depth.expect("the motion in depth");
    // The size change the renderer drew, first to last image.
    let f = &truth.flashes;
    let drawn = f[f.len() - 1].r_px / f[0].r_px - 1.0;
    assert!(
        (depth.size_change - drawn).abs() < 0.01,
        "{depth:?} vs {drawn}"
    );
    // The distance shrinks at 0.08 m/s out of about 1.6 m: about -5 % per second.
    assert!(
        (-0.06..-0.04).contains(&depth.distance_change_per_s),
        "{depth:?}"
    );
    let trend = doc
        .measurement
        .checks
        .iter()
        .find(|c| c.check == "radius_trend")
        .unwrap();
    assert_eq!(trend.outcome, CheckOutcome::Pass, "{trend:?}");
    assert!(!doc.measurement.doubtful(), "{:#?}", doc.measurement.checks);
    for b in &doc.measurement.bounces {
        assert!(
            (b.restitution - 0.78).abs() < 3.0 * b.restitution_sigma + 0.002,
            "{b:?}"
        );
    }
    let inc = doc.measurement.incline.as_ref().expect("the incline");
    let want = truth.incline_accel_mps2.unwrap();
    assert!(
        (inc.accel_mps2 - want).abs() < 3.0 * inc.accel_sigma_mps2,
        "{inc:?} vs {want}"
    );
}

#[test]
fn the_focal_length_gives_the_speed_toward_the_camera() {
    // Truth: the renderer's pinhole camera 1.6 m from the plane where 1 m spans 800 px, so its
    // focal length is 800 x 1.6 = 1280 px; the ball moves toward it at 0.08 m/s.
    let dir = common::tempdir();
    let (photo, truth) = common::shoot(&incline(0.08), dir.path(), "depth.png");
    let mut settings = common::ball_settings(25.0, 0.04);
    settings.focal_px = Some(1280.0);
    let doc = measure_photo(&photo, &settings).expect("a measurement").doc;
    let depth = doc.depth.expect("the motion in depth");
    let (v, sigma) = (
        depth.toward_camera_mps.unwrap(),
        depth.toward_camera_sigma_mps.unwrap(),
    );
    assert!(
        (v - 0.08).abs() < 3.0 * sigma && sigma < 0.01,
        "{v} +- {sigma}"
    );
    // The distance at the median image: between the first and last image's.
    let d = depth.distance_m.unwrap();
    let f = &truth.flashes;
    let (far, near) = (1.6 - f[0].depth_m, 1.6 - f[f.len() - 1].depth_m);
    assert!(near < d && d < far, "{d} m, not in {near}..{far}");
    // Without a focal length only the relative rate is given.
    let plain = measure_photo(&photo, &common::ball_settings(25.0, 0.04)).unwrap();
    assert!(plain.doc.depth.unwrap().toward_camera_mps.is_none());
}

#[test]
fn a_ball_in_one_plane_is_not_moved() {
    let dir = common::tempdir();
    let (photo, _) = common::shoot(&incline(0.0), dir.path(), "flat.png");
    let settings = common::ball_settings(25.0, 0.04);
    let m = measure_photo(&photo, &settings).expect("a measurement");
    assert!(m.doc.depth.is_none(), "{:?}", m.doc.depth);
}
