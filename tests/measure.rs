//! The main job end to end — photo rendered with exact physics -> spots -> path -> calibration ->
//! fits — against the renderer's ground truth and published acceptance bands.

mod common;

use beadline::detect::SpotSource;
use beadline::physics::bands::{Band, Outcome};
use beadline::physics::{Quantity, Unknown};
use beadline::pipeline::{MeasureSettings, ScaleSource, measure_photo};
use beadline::synth::{self, scene::Scene};
use common::{DropScene, rel, shoot};
use std::path::Path;

/// The demo's settings as its README entry types them: `--rate 25 --ball-diameter 0.04`.
fn demo_settings() -> MeasureSettings {
    MeasureSettings {
        rate_hz: Some(25.0),
        ball_diameter_m: Some(0.04),
        ..Default::default()
    }
}

#[test]
fn incline_and_bounces_give_restitution_launch_speed_and_gravity() {
    // Targets of the measure issue: restitution within 0.01, launch speed within 0.5 %,
    // gravity within 0.5 % (truth: the renderer's physics).
    let dir = common::tempdir();
    let (photo, truth) = shoot(&Scene::demo(), dir.path(), "demo.png");
    let settings = MeasureSettings {
        scale: Some(ScaleSource::PxPerM(1000.0)),
        ..demo_settings()
    };
    let m = measure_photo(&photo, &settings).unwrap();
    let doc = &m.doc.measurement;
    assert!(doc.bounces.len() >= 2, "{} bounces", doc.bounces.len());
    for b in &doc.bounces {
        let t = nearest_truth_bounce(&truth, b.x_m);
        assert!(
            (b.restitution - t.restitution).abs() < 0.01,
            "e {} vs {}",
            b.restitution,
            t.restitution
        );
    }
    let launch = doc.launch.as_ref().expect("an incline launch");
    assert!(
        rel(launch.speed_mps, truth.launch.speed_mps) < 0.005,
        "launch {} vs {}",
        launch.speed_mps,
        truth.launch.speed_mps
    );
    assert!(
        rel(doc.gravity_mps2.value, truth.gravity_mps2) < 0.005,
        "g {}",
        doc.gravity_mps2.value
    );
    // Rolling without slipping on the incline: measured acceleration near g sin(theta)/(1 + k)
    // (handbook formula), so the rolling loss is near zero.
    let inc = doc.incline.as_ref().expect("an incline phase");
    assert!(
        inc.rolling_loss.abs() < 0.01,
        "rolling loss {}",
        inc.rolling_loss
    );
    assert!(rel(inc.accel_mps2, truth.incline_accel_mps2.unwrap()) < 0.01);
}

/// The drop test's settings: flash rate unknown, scale and ball known.
fn interval_settings() -> MeasureSettings {
    let mut settings = MeasureSettings {
        rate_hz: None,
        scale: Some(ScaleSource::PxPerM(290.0)),
        ball_diameter_m: Some(0.067),
        ..Default::default()
    };
    settings.physics.unknown = Unknown::Interval;
    settings
}

#[test]
fn a_drop_test_with_unknown_flash_rate_yields_the_interval() {
    // Standard gravity known (ISO 80000-3), scale known: the flash interval comes from the arcs,
    // target within 0.2 %.
    let dir = common::tempdir();
    let (photo, truth) = shoot(
        &DropScene::tennis(0.75, 2.54, 0.067).scene(),
        dir.path(),
        "drop.png",
    );
    let settings = interval_settings();
    let m = measure_photo(&photo, &settings).unwrap();
    let dt = m.doc.measurement.flash_interval_s.value;
    assert!(
        rel(dt, truth.interval_s) < 0.002,
        "interval {dt} vs {}",
        truth.interval_s
    );
    assert!(
        m.doc
            .measurement
            .flash_interval_s
            .source
            .contains("estimated")
    );
}

#[test]
fn rebound_standards_as_acceptance_bands() {
    // Tennis: dropped from 254 cm onto a hard floor it must rebound 135-147 cm (ITF Rules of
    // Tennis, ball specification; values from memory), i.e. e = sqrt(h_out / h_in) about
    // 0.73..0.76. A rendered drop at e = 0.745 passes, one at e = 0.70 fails.
    let dir = common::tempdir();
    for (e, expected) in [(0.745, Outcome::Pass), (0.70, Outcome::Fail)] {
        let (photo, _) = shoot(
            &DropScene::tennis(e, 2.54, 0.067).scene(),
            dir.path(),
            "tennis.png",
        );
        let mut settings = MeasureSettings {
            rate_hz: Some(30.0),
            scale: Some(ScaleSource::PxPerM(290.0)),
            ball_diameter_m: Some(0.067),
            ..Default::default()
        };
        settings.physics.bands = vec![Band::parse("restitution=0.73..0.76").unwrap()];
        settings.physics.gravity = Quantity::new(9.80665, 0.0, "standard gravity");
        let m = measure_photo(&photo, &settings).unwrap();
        let v = &m.doc.measurement.verdicts[0];
        assert_eq!(v.outcome, expected, "e = {e}: {:?}", v.values);
    }
}

/// A plane file of six points of the plane of motion with their world coordinates, as a user
/// would mark them on the rig, seen through the scene's camera; `header` adds distortion keys.
fn plane_file(scene: &Scene, dir: &Path, header: &str) -> std::path::PathBuf {
    let proj = synth::camera::Projection::new(&scene.camera);
    let mut plane = header.to_string();
    for (x, y) in [
        (0.0, 0.0),
        (1.2, 0.0),
        (0.0, 0.5),
        (1.2, 0.5),
        (0.6, 0.25),
        (0.3, 0.45),
    ] {
        let p = proj.to_pixel(x, y);
        plane += &format!(
            "[[points]]\nx_px = {}\ny_px = {}\nx_m = {x}\ny_m = {y}\n",
            p[0], p[1]
        );
    }
    let path = dir.join("plane.toml");
    std::fs::write(&path, plane).unwrap();
    path
}

#[test]
fn a_tilted_camera_is_measured_through_a_plane_homography() {
    // Perspective: the camera turned 20 degrees and rolled 2 degrees. Six points of the plane of
    // motion with known world coordinates (as a user would mark them on the rig) give the
    // homography (DLT, Hartley & Zisserman alg. 4.2); restitution within 0.01 and gravity within
    // 0.5 % of the truth.
    let dir = common::tempdir();
    let mut scene = Scene::demo();
    scene.camera.tilt_deg = 20.0;
    scene.camera.roll_deg = 2.0;
    let (photo, truth) = shoot(&scene, dir.path(), "tilt.png");
    let plane_path = plane_file(&scene, dir.path(), "");
    let mut settings = MeasureSettings {
        rate_hz: Some(25.0),
        scale: Some(ScaleSource::Plane(plane_path)),
        ball_diameter_m: Some(0.04),
        ..Default::default()
    };
    settings.physics.camera_level = true;
    let m = measure_photo(&photo, &settings).unwrap();
    // The plane file's world is the user's: kept as given, its points are the truth's world.
    assert_eq!(
        (m.doc.origin.x.as_str(), m.doc.origin.y.as_str()),
        ("plane", "plane")
    );
    common::assert_path_in_truth_frame(&m.doc, &truth, [0.0, 0.0], 0.0);
    let doc = &m.doc.measurement;
    assert!(!doc.bounces.is_empty());
    for b in &doc.bounces {
        assert!((b.restitution - 0.78).abs() < 0.01, "e {}", b.restitution);
    }
    assert!(
        rel(doc.gravity_mps2.value, truth.gravity_mps2) < 0.005,
        "g {}",
        doc.gravity_mps2.value
    );
}

#[test]
fn a_photo_without_a_path_is_a_clear_error() {
    let dir = common::tempdir();
    let mut scene = DropScene::tennis(0.8, 1.0, 0.05).scene();
    scene.strobe.max_flashes = Some(1);
    let (photo, _) = shoot(&scene, dir.path(), "one.png");
    let settings = MeasureSettings {
        rate_hz: Some(25.0),
        ..Default::default()
    };
    let err = measure_photo(&photo, &settings).unwrap_err();
    // The stage says what failed: one ball image makes no path.
    assert!(
        matches!(
            err,
            beadline::Error::Track {
                source: beadline::error::TrackError::TooFewImages { found: 1 },
                ..
            }
        ),
        "{err}"
    );
    assert!(err.to_string().contains("one.png"), "{err}");
    // One image is one, in words (not "1 ball image(s)").
    assert!(err.to_string().contains("1 ball image found"), "{err}");
}

#[test]
fn radial_lens_distortion_is_undone_through_the_plane_file() {
    // Barrel distortion k1 = -0.05 on focal-normalised coordinates (Brown's radial model, as the
    // renderer's camera applies it); the plane file carries the same k1 and focal length.
    let dir = common::tempdir();
    let mut scene = Scene::demo();
    scene.camera.k1 = -0.05;
    let (photo, truth) = shoot(&scene, dir.path(), "barrel.png");
    let plane_path = plane_file(&scene, dir.path(), "k1 = -0.05\nfocal_px = 1600.0\n");
    let settings = MeasureSettings {
        rate_hz: Some(25.0),
        scale: Some(ScaleSource::Plane(plane_path)),
        ball_diameter_m: Some(0.04),
        ..Default::default()
    };
    let m = measure_photo(&photo, &settings).unwrap();
    let doc = &m.doc.measurement;
    assert!(!doc.bounces.is_empty());
    for b in &doc.bounces {
        assert!((b.restitution - 0.78).abs() < 0.01, "e {}", b.restitution);
    }
    assert!(
        rel(doc.gravity_mps2.value, truth.gravity_mps2) < 0.005,
        "g {}",
        doc.gravity_mps2.value
    );
}

#[test]
fn the_ball_as_the_ruler_gives_gravity_with_an_honest_sigma() {
    // The demo measured with the ball's own diameter (40 mm) as the only length: the scale comes
    // from the images' radius, so a radius error is a gravity error (it was +0.57 % while the
    // edge fit read a lit ball's radius 0.11 px small). Truth: the renderer's physics with
    // standard gravity 9.80665 m/s^2 (CGPM 1901). The reported sigma carries the scale's own
    // uncertainty, so it covers the error.
    let dir = common::tempdir();
    let (photo, truth) = shoot(&Scene::demo(), dir.path(), "demo.png");
    let settings = MeasureSettings {
        rate_hz: Some(25.0),
        scale: Some(ScaleSource::BallDiameter),
        ball_diameter_m: Some(0.04),
        ..Default::default()
    };
    let m = measure_photo(&photo, &settings).unwrap();
    let g = &m.doc.measurement.gravity_mps2;
    assert!(
        rel(g.value, truth.gravity_mps2) < 0.001,
        "g {} vs {}",
        g.value,
        truth.gravity_mps2
    );
    assert!(
        (g.value - truth.gravity_mps2).abs() <= 3.0 * g.sigma,
        "g {} +- {} vs {}",
        g.value,
        g.sigma,
        truth.gravity_mps2
    );
}

#[test]
fn one_more_true_image_at_an_apex_keeps_the_drop_test_interval() {
    // Regression (path walk): the drop test above, where the fall and the first rise lie side by
    // side (the ball drifts 2 px per flash). The detector once missed the six images at the first
    // bounce's apex (2 flashes before it to 3 after) but, with a second try of its fits, found the
    // image three flashes before the apex. A chain taking every other image (rising on one, up to
    // the release, down the other) is then as smooth as the true one and bridges the six missing
    // images, which stop the true chain: it was longer and won (interval 0.0678 s against
    // 0.0333 s) until steps that pass over an image counted against a chain. Today's detector
    // finds more, so the condition is made here whatever it finds: the six apex images are taken
    // out of its spots, and the image three before the apex is put in (at its truth position)
    // if it is not there. The path must give the interval of the rendered truth within 0.2 %.
    use beadline::detect::{Spot, SpotSource, find_spots};
    use beadline::image::load::{LoadOptions, load};
    use beadline::pipeline::measure_spots;
    use beadline::synth::FlashTruth;
    let dir = common::tempdir();
    let (photo, truth) = shoot(
        &DropScene::tennis(0.75, 2.54, 0.067).scene(),
        dir.path(),
        "drop.png",
    );
    let settings = interval_settings();
    let img = load(&photo, &LoadOptions::default()).unwrap();
    let mut report = find_spots(&img, None, &settings.spots, None).unwrap();
    let arc1: Vec<&FlashTruth> = truth
        .flashes
        .iter()
        .filter(|f| f.arc == 1 && f.in_frame)
        .collect();
    let apex = arc1
        .iter()
        .min_by(|a, b| a.y_px.total_cmp(&b.y_px))
        .unwrap()
        .n as i64;
    let dn = |f: &FlashTruth| f.n as i64 - apex;
    let on = |s: &Spot, f: &FlashTruth| (s.x_px - f.x_px).hypot(s.y_px - f.y_px) < 0.5 * f.r_px;
    let unfound: Vec<&FlashTruth> = arc1
        .iter()
        .filter(|f| (-2..=3).contains(&dn(f)))
        .copied()
        .collect();
    assert_eq!(unfound.len(), 6);
    report.spots.retain(|s| !unfound.iter().any(|f| on(s, f)));
    let third = *arc1.iter().find(|f| dn(f) == -3).unwrap();
    if !report.spots.iter().any(|s| on(s, third)) {
        report.spots.push(Spot {
            x_px: third.x_px,
            y_px: third.y_px,
            r_px: third.r_px,
            sigma_px: 0.1,
            score: 0.5,
            source: SpotSource::Detected,
        });
    }
    // The condition: the image three before the apex is there, the six after it are not.
    assert!(report.spots.iter().any(|s| on(s, third)));
    assert!(
        !report
            .spots
            .iter()
            .any(|s| unfound.iter().any(|f| on(s, f)))
    );
    let m = measure_spots(&photo, report, &settings).unwrap();
    let dt = m.doc.measurement.flash_interval_s.value;
    assert!(
        rel(dt, truth.interval_s) < 0.002,
        "interval {dt} vs {}",
        truth.interval_s
    );
}

#[test]
fn failed_self_checks_and_unmeasured_bands_give_their_exit_status() {
    // The demo's ball is solid; measured as a thin shell it rolls faster than a shell can
    // (standard rigid-body rolling, a = g sin(theta) / (1 + k)): a failed check, exit status 4,
    // and the rig calls the photo doubtful. A drop test has no launch, so a launch-speed band is
    // not measured: exit status 3.
    let dir = common::tempdir();
    let (demo, _) = shoot(&Scene::demo(), dir.path(), "demo.png");
    let demo = demo.to_str().unwrap();
    let common_args = ["--rate", "25", "--ball-diameter", "0.04"];
    let right = common::beadline(&[&["measure", demo][..], &common_args].concat(), dir.path());
    assert_eq!(right.status.code(), Some(0), "{right:?}");
    let args = [&["measure", demo, "--ball", "shell"][..], &common_args].concat();
    let shell = common::beadline(&args, dir.path());
    assert_eq!(shell.status.code(), Some(4), "{shell:?}");
    let text = String::from_utf8_lossy(&shell.stdout);
    assert!(text.contains("FAIL incline_rolling"), "{text}");
    let args = [&["rig", demo, "--ball", "shell"][..], &common_args].concat();
    let rig = common::beadline(&args, dir.path());
    assert_eq!(rig.status.code(), Some(4), "{rig:?}");
    assert!(String::from_utf8_lossy(&rig.stdout).contains("\"status\":\"doubtful\""));

    let (drop, _) = shoot(
        &DropScene::tennis(0.75, 1.0, 0.067).scene(),
        dir.path(),
        "drop.png",
    );
    let drop = drop.to_str().unwrap();
    let args = [
        "measure",
        drop,
        "--rate",
        "30",
        "--scale",
        "290",
        "--ball-diameter",
        "0.067",
        "--accept",
        "launch_speed_mps=1..2",
    ];
    let unmeasured = common::beadline(&args, dir.path());
    assert_eq!(unmeasured.status.code(), Some(3), "{unmeasured:?}");
}

#[test]
fn positions_have_the_floor_at_zero_and_x_from_the_launch_point() {
    // The README's frame: y = 0 at the floor line found from the bounces, x = 0 at the launch
    // point (the ball's centre leaving the incline). Truth: the renderer's world has its floor
    // at y = 0, so every path point, the launch height and each bounce must match the truth once
    // x is counted from the truth's launch point.
    let dir = common::tempdir();
    let (photo, truth) = shoot(&common::small_scene(), dir.path(), "small.png");
    let settings = MeasureSettings {
        rate_hz: Some(25.0),
        scale: Some(ScaleSource::BallDiameter),
        ball_diameter_m: Some(0.04),
        ..Default::default()
    };
    let m = measure_photo(&photo, &settings).unwrap();
    assert_eq!(
        (m.doc.origin.x.as_str(), m.doc.origin.y.as_str()),
        ("launch", "floor")
    );
    let doc = &m.doc.measurement;
    assert!(
        doc.floor.y_m.abs() <= doc.floor.sigma_m.max(1e-9),
        "{:?}",
        doc.floor
    );
    let launch = doc.launch.as_ref().expect("a launch");
    // The origin's own 1-sigma: the launch time's sigma times the horizontal speed.
    let origin_sigma = launch.t_sigma_s * launch.velocity_mps[0].abs();
    assert!(launch.x_m.abs() < 1e-9, "launch x {}", launch.x_m);
    let worst =
        common::assert_path_in_truth_frame(&m.doc, &truth, [truth.launch.x_m, 0.0], origin_sigma);
    assert!(
        (launch.y_m - truth.launch.y_m).abs() < 3.0 * origin_sigma + 1e-3,
        "launch y {} vs {}",
        launch.y_m,
        truth.launch.y_m
    );
    assert!(doc.bounces.len() >= 2);
    for (b, t) in doc.bounces.iter().zip(&truth.bounces) {
        let want = t.x_m - truth.launch.x_m;
        assert!((b.x_m - want).abs() < 1e-3, "bounce x {} vs {want}", b.x_m);
    }
    eprintln!("worst path offset {worst:.6} m, origin sigma {origin_sigma:.6} m");
    // The overlay's calibration maps the reported frame back onto the photo.
    for p in &m.doc.path {
        let q = m.calibration.to_pixel(p.x_m, p.y_m);
        assert!((q[0] - p.x_px).abs() < 1e-6 && (q[1] - p.y_px).abs() < 1e-6);
    }
}

#[test]
fn a_rolled_drop_with_the_scale_estimated_counts_x_from_the_first_bounce() {
    // No incline: x = 0 at the ball's centre at the first bounce contact. The camera is rolled
    // 1.5 degrees (corrected from the arcs) and the scale is the estimated quantity, so the
    // path entries must be levelled and rescaled like the physics to match the truth's world.
    let dir = common::tempdir();
    let mut scene = DropScene::drifting().scene();
    scene.camera.roll_deg = 1.5;
    let (photo, truth) = shoot(&scene, dir.path(), "rolled.png");
    let settings = MeasureSettings {
        rate_hz: Some(25.0),
        ball_diameter_m: Some(0.04),
        ..Default::default()
    };
    let m = measure_photo(&photo, &settings).unwrap();
    assert_eq!(
        (m.doc.origin.x.as_str(), m.doc.origin.y.as_str()),
        ("first_bounce", "floor")
    );
    let doc = &m.doc.measurement;
    assert!(doc.level.corrected);
    assert!(doc.scale_px_per_m.source.contains("estimated"));
    assert!(
        doc.floor.y_m.abs() <= doc.floor.sigma_m.max(1e-9),
        "{:?}",
        doc.floor
    );
    assert!(doc.bounces[0].x_m.abs() < 1e-9);
    let worst =
        common::assert_path_in_truth_frame(&m.doc, &truth, [truth.bounces[0].x_m, 0.0], 0.0);
    for (b, t) in doc.bounces.iter().zip(&truth.bounces) {
        let want = t.x_m - truth.bounces[0].x_m;
        assert!((b.x_m - want).abs() < 1e-3, "bounce x {} vs {want}", b.x_m);
    }
    eprintln!("worst path offset {worst:.6} m");
}

#[test]
fn without_a_bounce_the_height_origin_is_the_lowest_image_and_says_so() {
    // A fall photographed before it reaches the floor: no floor can be found, so heights count
    // from the underside of the ball at its lowest image, and the floor's source says it is not
    // the floor; x = 0 at the first image.
    let dir = common::tempdir();
    let mut scene = DropScene::drifting().scene();
    scene.strobe.max_flashes = Some(7);
    let (photo, truth) = shoot(&scene, dir.path(), "fall.png");
    assert!(truth.flashes.iter().all(|f| f.arc == 0));
    let settings = MeasureSettings {
        rate_hz: Some(25.0),
        scale: Some(ScaleSource::PxPerM(800.0)),
        ball_diameter_m: Some(0.04),
        ..Default::default()
    };
    let m = measure_photo(&photo, &settings).unwrap();
    assert_eq!(
        (m.doc.origin.x.as_str(), m.doc.origin.y.as_str()),
        ("first_image", "lowest_image")
    );
    let doc = &m.doc.measurement;
    assert!(doc.floor.y_m.is_nan());
    assert!(
        doc.floor.source.contains("not from the floor"),
        "{}",
        doc.floor.source
    );
    let first = common::flash_at(&truth, m.doc.path[0].x_px, m.doc.path[0].y_px);
    let lowest = m
        .doc
        .path
        .iter()
        .map(|p| common::flash_at(&truth, p.x_px, p.y_px).y_m)
        .fold(f64::INFINITY, f64::min);
    common::assert_path_in_truth_frame(&m.doc, &truth, [first.x_m, lowest - 0.02], 0.0);
    assert!(m.doc.text().contains("not the floor"));
}

/// Measure `scene` (drag in it) with `--fit-drag` as a user would (rate, scale and ball given),
/// and hold every bounce's restitution, the gravity and (with an incline) the launch speed to
/// the renderer's truth within max(3 sigma, 1 %), with no self-check failing.
fn drag_fitted_results_hold_to_the_truth(scene: &Scene, name: &str) {
    let dir = common::tempdir();
    let (photo, truth) = shoot(scene, dir.path(), name);
    let mut settings = MeasureSettings {
        rate_hz: Some(scene.strobe.rate_hz),
        scale: Some(ScaleSource::PxPerM(scene.camera.px_per_m)),
        ball_diameter_m: Some(scene.ball.diameter_m),
        ..Default::default()
    };
    settings.physics.fit_drag = true;
    let m = measure_photo(&photo, &settings).unwrap();
    let doc = &m.doc.measurement;
    let within = |v: f64, sigma: f64, t: f64| (v - t).abs() <= (3.0 * sigma).max(0.01 * t.abs());
    let failed: Vec<_> = doc
        .checks
        .iter()
        .filter(|c| c.outcome == beadline::physics::checks::CheckOutcome::Fail)
        .collect();
    assert!(failed.is_empty(), "{name}: failed checks {failed:#?}");
    assert!(
        doc.bounces.len() >= 2,
        "{name}: {} bounces",
        doc.bounces.len()
    );
    for b in &doc.bounces {
        let t = nearest_truth_bounce(&truth, b.x_m);
        eprintln!(
            "{name}: e {:.4} +- {:.4} (truth {:.4})",
            b.restitution, b.restitution_sigma, t.restitution
        );
        assert!(b.drag_model.is_some(), "{name}: a vacuum bounce");
        assert!(
            within(b.restitution, b.restitution_sigma, t.restitution),
            "{name}: e {} +- {} vs {}",
            b.restitution,
            b.restitution_sigma,
            t.restitution
        );
    }
    let g = &doc.gravity_mps2;
    eprintln!(
        "{name}: g {:.4} +- {:.4} (truth {})",
        g.value, g.sigma, truth.gravity_mps2
    );
    assert!(
        within(g.value, g.sigma, truth.gravity_mps2),
        "{name}: g {} +- {}",
        g.value,
        g.sigma
    );
    if let Some(l) = &doc.launch {
        eprintln!(
            "{name}: launch {:.4} +- {:.4} (truth {:.4})",
            l.speed_mps, l.speed_sigma_mps, truth.launch.speed_mps
        );
        assert!(within(
            l.speed_mps,
            l.speed_sigma_mps,
            truth.launch.speed_mps
        ));
    }
}

#[test]
fn with_drag_fitted_the_drag_model_gives_restitution_gravity_and_launch() {
    // Quadratic drag a = -D |v| v in the renderer (synth::sim, RK4): about 10 % of g at the
    // fastest image of the demo's incline-and-bounces shot, and about 24 % on a drop from 0.8 m.
    let mut demo = Scene::demo();
    demo.flight.drag_per_m = 0.1;
    drag_fitted_results_hold_to_the_truth(&demo, "demo-drag.png");
    // The drop drifts 0.8 m/s sideways: drag slows the drift, and a slower one piles the
    // images up at the apexes (they merge, which is not this test's matter).
    let mut drift = DropScene::drifting();
    drift.x_m = -0.1;
    drift.vx_mps = Some(0.8);
    let mut drop = drift.scene();
    drop.flight.drag_per_m = 0.15;
    drag_fitted_results_hold_to_the_truth(&drop, "drop-drag.png");
}

/// The truth bounce whose contact x is nearest `x_m`.
fn nearest_truth_bounce(
    truth: &beadline::synth::Truth,
    x_m: f64,
) -> &beadline::synth::sim::BounceEvent {
    truth
        .bounces
        .iter()
        .min_by(|x, y| (x.x_m - x_m).abs().total_cmp(&(y.x_m - x_m).abs()))
        .expect("the truth has bounces")
}

#[test]
fn the_demo_image_inside_its_neighbours_is_found_by_its_limb() {
    // Rendered ground truth: the demo's flash 2 lies 1.0 and 1.2 radius from its neighbours on
    // the incline. Its rim's median contrast is low where it lies inside their light, which
    // once called it faint and left it to the physics' second pass; its limb outside them is as
    // strong as any image's, and the detector keeps it (the second pass is tested on crowded
    // shots in tests/shots.rs).
    let dir = common::tempdir();
    let (photo, truth) = shoot(&Scene::demo(), dir.path(), "demo.png");
    let m = measure_photo(&photo, &demo_settings()).unwrap();
    assert_eq!(
        m.doc.path.len(),
        truth.flashes.len(),
        "every image on the path"
    );
    assert!(m.doc.missing.is_empty(), "missing {:?}", m.doc.missing);
    let p = m
        .doc
        .path
        .iter()
        .find(|p| p.n == 2)
        .expect("flash 2 on the path");
    assert_eq!(p.source, SpotSource::Detected);
    let t = &truth.flashes[2];
    // Centre against the truth: within 0.15 px (the crowding issue's target for images 0.4-0.8
    // radius from a neighbour; this one is farther).
    let error_px = (p.x_px - t.x_px).hypot(p.y_px - t.y_px);
    assert!(error_px < 0.15, "centre {error_px} px off");
    assert!(
        beadline::physics::checks::worst(&m.doc.measurement.checks)
            == beadline::physics::checks::CheckOutcome::Pass
    );
}
