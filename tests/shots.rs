//! Shots a new user takes beside the demo (issue 16, point 4): a small ball on the incline, low
//! and high flash rates, throws, and flashes without an image. Each photo is rendered with exact
//! ground truth (src/synth), measured as `beadline measure PHOTO --rate R --ball-diameter D`
//! does, and checked against that truth: every value within max(3 sigma, 1 %), the path's flash
//! indices and missing flashes against the truth's flashes.

mod common;

use beadline::detect::find_spots;
use beadline::image::load::{LoadOptions, load};
use beadline::physics::{Measurement, PhaseKind};
use beadline::pipeline::{MeasureSettings, Measured, ScaleSource, measure_photo, measure_spots};
use beadline::synth::sim::Phase;
use beadline::synth::{FlashTruth, Truth, scene::Scene};
use beadline::track::{BallPath, PathOptions, order_path};
use common::{DropScene, shoot};
use std::path::Path;

/// `measured +- sigma` agrees with `truth` within max(3 sigma, 1 %).
fn agrees(what: &str, measured: f64, sigma: f64, truth: f64) {
    let tolerance = (3.0 * sigma).max(0.01 * truth.abs());
    assert!(
        (measured - truth).abs() <= tolerance,
        "{what}: {measured} +- {sigma} against the truth {truth}"
    );
}

/// The settings of `beadline measure PHOTO --rate R --ball-diameter D`.
fn settings(rate_hz: f64, diameter_m: f64) -> MeasureSettings {
    common::ball_settings(rate_hz, diameter_m)
}

/// The scene `tests/data/{name}.toml` (a sweep shot kept as a regression case).
fn test_scene(name: &str) -> Scene {
    let path = format!("tests/data/{name}.toml");
    let path = Path::new(&path);
    Scene::from_toml(&std::fs::read_to_string(path).unwrap(), path).unwrap()
}

/// A value is right as the sweep scores it: within 3 sigma or 1 % of the truth.
fn right_by_sweep_rule(measured: f64, sigma: f64, truth: f64) -> bool {
    (measured - truth).abs() <= (3.0 * sigma).max(0.01 * truth.abs())
}

/// The measured launch speed is right by the sweep's rule against the rendered truth.
fn assert_launch_right(ms: &Measurement, truth: &Truth) {
    let launch = ms.launch.as_ref().expect("a launch");
    assert!(
        right_by_sweep_rule(
            launch.speed_mps,
            launch.speed_sigma_mps,
            truth.launch.speed_mps
        ),
        "launch {} +- {} (truth {})",
        launch.speed_mps,
        launch.speed_sigma_mps,
        truth.launch.speed_mps
    );
}

/// Some check of the measurement warned or failed.
fn any_check_not_passed(ms: &Measurement) -> bool {
    beadline::physics::checks::worst(&ms.checks) != beadline::physics::checks::CheckOutcome::Pass
}

/// The truth flash nearest to a path point, if its centre is within half a radius.
fn truth_n(truth: &Truth, x_px: f64, y_px: f64) -> Option<usize> {
    let distance = |f: &&FlashTruth| (f.x_px - x_px).hypot(f.y_px - y_px);
    truth
        .flashes
        .iter()
        .filter(|f| f.in_frame)
        .min_by(|a, b| distance(a).total_cmp(&distance(b)))
        .filter(|f| distance(f) < 0.5 * f.r_px)
        .map(|f| f.n)
}

/// Check the path against the truth: every point is a truth flash, numbered from the first
/// (n = truth n - first truth n), and the missing flashes are the truth flashes in between that
/// are not on it. Returns the truth index of the path's first point.
fn check_path(path: &BallPath, truth: &Truth) -> usize {
    let found: Vec<usize> = path
        .points
        .iter()
        .map(|p| truth_n(truth, p.x_px, p.y_px).expect("every path point is a ball image"))
        .collect();
    let first = found[0];
    let numbered: Vec<usize> = path.points.iter().map(|p| p.n + first).collect();
    assert_eq!(numbered, found, "path flash indices against the truth");
    let last = *found.last().unwrap();
    let missing: Vec<usize> = (first..=last)
        .filter(|n| !found.contains(n))
        .map(|n| n - first)
        .collect();
    assert_eq!(path.missing, missing, "missing flashes against the truth");
    first
}

/// Render `scene`, measure it with `settings` and check the path; the measurement, the truth
/// and the truth index of the path's first point.
fn measure_scene(scene: &Scene, settings: &MeasureSettings) -> (Measured, Truth, usize) {
    measure_scene_as(scene, settings, "shot.png")
}

/// [`measure_scene`] with the photo saved as `name` (its extension sets the format).
fn measure_scene_as(
    scene: &Scene,
    settings: &MeasureSettings,
    name: &str,
) -> (Measured, Truth, usize) {
    let dir = common::tempdir();
    let (photo, truth) = shoot(scene, dir.path(), name);
    let m = measure_photo(&photo, settings).expect("a measurement");
    let first = check_path(&m.paths.paths[0], &truth);
    (m, truth, first)
}

/// Gravity and every measured bounce's restitution (matched to the truth bounce nearest in
/// time) against the truth.
fn check_physics(m: &Measurement, truth: &Truth, first: usize) {
    agrees(
        "gravity",
        m.gravity_mps2.value,
        m.gravity_mps2.sigma,
        truth.gravity_mps2,
    );
    let t0_s = truth.flashes[first].t_s;
    for b in &m.bounces {
        let t = truth
            .bounces
            .iter()
            .min_by(|x, y| {
                (x.t_s - t0_s - b.t_s)
                    .abs()
                    .total_cmp(&(y.t_s - t0_s - b.t_s).abs())
            })
            .unwrap();
        agrees(
            "restitution",
            b.restitution,
            b.restitution_sigma,
            t.restitution,
        );
    }
}

/// The incline's acceleration and the launch against the truth.
fn check_incline(m: &Measurement, truth: &Truth) {
    let accel = truth.incline_accel_mps2.expect("a scene with an incline");
    let inc = m.incline.as_ref().expect("the incline measured");
    agrees(
        "incline acceleration",
        inc.accel_mps2,
        inc.accel_sigma_mps2,
        accel,
    );
    let launch = m.launch.as_ref().expect("the launch measured");
    agrees(
        "launch speed",
        launch.speed_mps,
        launch.speed_sigma_mps,
        truth.launch.speed_mps,
    );
    agrees(
        "launch angle",
        launch.angle_deg,
        launch.angle_sigma_deg,
        truth.launch.angle_deg,
    );
}

/// Every path image found `predicted_and_confirmed` lies within 2 sigma (at least 0.02 px) and
/// half a radius of the truth flash its `n` names (the path's first point on truth flash
/// `first`); their number.
fn check_added(m: &Measured, truth: &Truth, first: usize) -> usize {
    let added: Vec<_> = m
        .doc
        .path
        .iter()
        .filter(|p| p.source == beadline::detect::SpotSource::PredictedAndConfirmed)
        .collect();
    for p in &added {
        let t = &truth.flashes[p.n + first];
        let error = (p.x_px - t.x_px).hypot(p.y_px - t.y_px);
        assert!(
            error <= (2.0 * p.sigma_px.max(0.02)).min(0.5 * t.r_px),
            "flash {}: {error} px off, sigma {}",
            t.n,
            p.sigma_px
        );
    }
    added.len()
}

/// The truth flashes in frame on the incline.
fn incline_flashes(truth: &Truth) -> usize {
    truth
        .flashes
        .iter()
        .filter(|f| f.in_frame && f.phase == Phase::Incline)
        .count()
}

#[test]
fn a_small_ball_keeps_the_incline_on_its_path() {
    // The demo with a 16 mm ball (8 px radius): the images on the incline once made a path of
    // their own (incline 28.26 deg, rolling loss -0.13).
    let mut scene = Scene::demo();
    scene.ball.diameter_m = 0.016;
    let (m, truth, first) = measure_scene(&scene, &settings(25.0, 0.016));
    let in_frame = truth.flashes.iter().filter(|f| f.in_frame).count();
    assert_eq!(m.paths.paths.len(), 1, "one path");
    assert_eq!(m.paths.paths[0].points.len(), in_frame);
    assert!(m.paths.strays.is_empty());
    let doc = &m.doc.measurement;
    check_physics(doc, &truth, first);
    check_incline(doc, &truth);
    let inc = doc.incline.as_ref().unwrap();
    agrees(
        "incline angle",
        inc.angle_deg,
        inc.angle_sigma_deg,
        scene.incline.as_ref().unwrap().angle_deg,
    );
    assert_eq!(inc.last_n + 1, incline_flashes(&truth));
}

#[test]
fn at_a_low_flash_rate_the_incline_ends_where_its_line_does() {
    // The demo at 8 Hz: three images on the incline and a first arc of two before the bounce.
    // The last incline image once went into the first flight arc (bounce 1 e = 0.8076 against
    // 0.78, reduced chi-square 47,970).
    let mut scene = Scene::demo();
    scene.strobe.rate_hz = 8.0;
    let (m, truth, first) = measure_scene(&scene, &settings(8.0, 0.04));
    let in_frame = truth.flashes.iter().filter(|f| f.in_frame).count();
    assert_eq!(m.paths.paths[0].points.len(), in_frame);
    let doc = &m.doc.measurement;
    let incline = doc
        .phases
        .iter()
        .find(|p| p.kind == PhaseKind::Incline)
        .expect("an incline phase");
    assert_eq!(incline.last_n + 1, incline_flashes(&truth));
    for arc in doc.arcs.iter().filter(|a| a.kind == PhaseKind::Flight) {
        assert!(arc.first_n > incline.last_n, "a flight arc on the incline");
    }
    assert!(!doc.bounces.is_empty());
    check_physics(doc, &truth, first);
}

#[test]
fn at_a_high_flash_rate_the_incline_is_an_incline_and_the_camera_level() {
    // The demo at 60 Hz: the slow start's images overlap (not all are found; detection is
    // another issue). Once numbered as consecutive flashes, the incline came out as a floor
    // phase, g = 9.50 +- 0.07 and a roll of -0.453 deg "corrected" (truth: level).
    let mut scene = Scene::demo();
    scene.strobe.rate_hz = 60.0;
    let (m, truth, first) = measure_scene(&scene, &settings(60.0, 0.04));
    let doc = &m.doc.measurement;
    assert_eq!(doc.phases[0].kind, PhaseKind::Incline);
    let roll = doc.level.roll_deg.unwrap();
    let roll_sigma = doc.level.roll_sigma_deg.unwrap();
    assert!(
        roll.abs() <= 3.0 * roll_sigma,
        "roll {roll} +- {roll_sigma}"
    );
    check_physics(doc, &truth, first);
}

#[test]
fn throws_are_measured_exactly() {
    // Thrown up and sideways (vx != 0, vy > 0), both ways across the frame.
    for (x_m, vx_mps, vy_mps, rate_hz) in [(0.1, 0.5, 2.0, 20.0), (0.9, -0.3, 1.5, 30.0)] {
        let mut drop = DropScene::drifting();
        drop.x_m = x_m;
        drop.y_m = 0.35;
        drop.vx_mps = Some(vx_mps);
        drop.rate_hz = rate_hz;
        let toml = drop.toml().replace(
            &format!("vx_mps = {vx_mps:?}\n"),
            &format!("vx_mps = {vx_mps:?}\nvy_mps = {vy_mps:?}\n"),
        );
        let scene = Scene::from_toml(&toml, Path::new("throw.toml")).unwrap();
        let (m, truth, first) = measure_scene(&scene, &settings(rate_hz, 0.04));
        let in_frame = truth.flashes.iter().filter(|f| f.in_frame).count();
        assert_eq!(m.paths.paths[0].points.len(), in_frame);
        assert!(m.doc.measurement.bounces.len() >= 2);
        check_physics(&m.doc.measurement, &truth, first);
    }
}

#[test]
fn missing_images_are_counted_from_the_physics() {
    // Images taken out of the spots a photo gave (a flash that did not fire, an image hidden
    // by something in front of it): the path lists exactly those flashes as missing and keeps
    // every later flash's index, on the incline, in flight and next to a bounce, and the
    // physics stays right.
    let dir = common::tempdir();
    let scene = Scene::demo();
    let (photo, truth) = shoot(&scene, dir.path(), "demo.png");
    let img = load(&photo, &LoadOptions::default()).unwrap();
    let settings = settings(25.0, 0.04);
    let report = find_spots(&img, None, &settings.spots, None).unwrap();
    for removed in [[4usize, 11], [17, 30], [6, 14]] {
        let mut spots = report.clone();
        spots.spots.retain(|s| {
            removed.iter().all(|&n| {
                let f = &truth.flashes[n];
                (s.x_px - f.x_px).hypot(s.y_px - f.y_px) > 0.5 * f.r_px
            })
        });
        let path = &order_path(&spots.spots, &PathOptions::default()).paths[0];
        let first = check_path(path, &truth);
        for n in removed {
            assert!(path.missing.contains(&(n - first)), "flash {n} missing");
        }
        let m = measure_spots(&photo, spots, &settings).unwrap();
        check_physics(&m.doc.measurement, &truth, first);
        check_incline(&m.doc.measurement, &truth);
    }
}

#[test]
fn straight_down_drops_are_right_or_flagged() {
    // vx = 0: the rise passes over the fall on one line and many images merge (r 16 px); the
    // in-line search orders what stays apart by arcs of the curvature rate and scale give.
    // Against the rendered truth: no value may be wrong while every check passes, and gravity
    // (from the longest clean arc) is right on most of these shots. Where the bounces cannot
    // be ordered the checks say so (the 25 Hz shot today: its apex images merge into blobs
    // the detector does not split, issue 17).
    let mut gravity_right = 0;
    let shots = [
        (25.0, 0.8, 800.0),
        (40.0, 0.6, 800.0),
        (20.0, 0.8, 800.0),
        (30.0, 0.7, 600.0),
        (50.0, 0.6, 800.0),
    ];
    for (rate_hz, restitution, px_per_m) in shots {
        let mut drop = DropScene::drifting();
        drop.vx_mps = Some(0.0);
        drop.x_m = 0.4;
        drop.rate_hz = rate_hz;
        drop.restitution = restitution;
        drop.px_per_m = px_per_m;
        let dir = common::tempdir();
        let (photo, truth) = shoot(&drop.scene(), dir.path(), "drop.png");
        let settings = MeasureSettings {
            scale: Some(ScaleSource::PxPerM(px_per_m)),
            ..settings(rate_hz, drop.diameter_m)
        };
        let m = measure_photo(&photo, &settings).expect("a measurement");
        let ms = &m.doc.measurement;
        let flagged = any_check_not_passed(ms);
        let g = &ms.gravity_mps2;
        let g_right = right_by_sweep_rule(g.value, g.sigma, truth.gravity_mps2);
        gravity_right += usize::from(g_right);
        assert!(
            g_right || flagged,
            "{rate_hz} Hz: g {} +- {} unflagged",
            g.value,
            g.sigma
        );
        for b in &ms.bounces {
            let e_right = right_by_sweep_rule(b.restitution, b.restitution_sigma, restitution);
            assert!(
                e_right || flagged,
                "{rate_hz} Hz: e {} +- {} unflagged (truth {restitution})",
                b.restitution,
                b.restitution_sigma
            );
        }
    }
    assert!(
        gravity_right >= 3,
        "gravity right on {gravity_right} of 5 drops"
    );
}

#[test]
fn a_drop_released_near_a_flash_keeps_its_fall() {
    // Sweep shot 291: a 41 px ball dropped straight down at 29.5 Hz, released 1.05 flashes before
    // its first image. The fall's parabola is then nearly symmetric about a flash, so its
    // mirror half (the rise the ball never made) lands on the fall's own images; every fall
    // image counted twice was left off and the photo was refused ("no flight arc with 4 or
    // more points"). Against the rendered truth: gravity and the first restitution right by
    // the sweep's rule, and the fall's first 4 images on the path.
    let scene = test_scene("drop_released_on_flash");
    let dir = common::tempdir();
    let (photo, truth) = shoot(&scene, dir.path(), "drop.png");
    let settings = MeasureSettings {
        scale: Some(ScaleSource::PxPerM(scene.camera.px_per_m)),
        ..settings(scene.strobe.rate_hz, scene.ball.diameter_m)
    };
    let m = measure_photo(&photo, &settings).expect("a measurement");
    let path = &m.paths.paths[0];
    let fall: Vec<usize> = path
        .points
        .iter()
        .filter_map(|p| truth_n(&truth, p.x_px, p.y_px))
        .filter(|&n| {
            truth.flashes[n].phase == Phase::Flight && truth.flashes[n].t_s < truth.bounces[0].t_s
        })
        .collect();
    // The fifth fall image lies 0.8 radius from the first rise image: a blend of both, left off.
    assert_eq!(fall, vec![0, 1, 2, 3], "fall images on the path");
    let ms = &m.doc.measurement;
    let g = &ms.gravity_mps2;
    assert!(
        right_by_sweep_rule(g.value, g.sigma, truth.gravity_mps2),
        "g {} +- {}",
        g.value,
        g.sigma
    );
    let b = ms.bounces.first().expect("the first bounce");
    let e_truth = truth.bounces[0].restitution;
    assert!(
        right_by_sweep_rule(b.restitution, b.restitution_sigma, e_truth),
        "e {} +- {} (truth {e_truth})",
        b.restitution,
        b.restitution_sigma
    );
}

#[test]
fn a_rebound_threaded_through_merged_images_is_flagged() {
    // Sweep shot 1008: a drop of an 8 px ball at 42 Hz with a slight drift (camera roll 2.8
    // degrees), JPEG q61, three round distractors. After the first bounce the rise passes over
    // the fall 1-6 px apart, so its images merge in pairs; the path went on through three of the
    // merged blobs (truth flashes 27, 30, 26) and read e = 0.319 +- 0.049 for a true 0.491.
    // Against the rendered truth: every value is right or a check warns (here: four strays of
    // the ball's size lie on the path's own track).
    let scene = test_scene("drop_small_merged");
    let dir = common::tempdir();
    let (photo, truth) = shoot(&scene, dir.path(), "drop.jpg");
    let settings = settings(scene.strobe.rate_hz, scene.ball.diameter_m);
    let m = measure_photo(&photo, &settings).expect("a measurement");
    let ms = &m.doc.measurement;
    let flagged = any_check_not_passed(ms);
    let e_truth = truth.bounces[0].restitution;
    for b in &ms.bounces {
        assert!(
            right_by_sweep_rule(b.restitution, b.restitution_sigma, e_truth) || flagged,
            "e {} +- {} unflagged (truth {e_truth})",
            b.restitution,
            b.restitution_sigma
        );
    }
    let g = &ms.gravity_mps2;
    assert!(right_by_sweep_rule(g.value, g.sigma, truth.gravity_mps2) || flagged);
}

#[test]
fn the_flashes_of_a_crowded_incline_start_are_counted_from_the_launch() {
    // Sweep shot 296: a 44 px ball rolling from rest down a 25 degree incline at 79 Hz. Its
    // first images are 10 to 25 px apart: truth flashes 1 to 3 merge and are not found, and the
    // walk (one missing flash per step at most) counted one flash where there were three. The
    // incline then came out at -2.04 m/s^2 (truth 2.93) and the launch at 0.255 m/s (truth
    // 0.269), both flagged by the launch checks. Recounted until the incline meets the flight,
    // both are right against the rendered truth (within 3 sigma or 1 %, the sweep's rule).
    let scene = test_scene("incline_crowded_start");
    let dir = common::tempdir();
    let (photo, truth) = shoot(&scene, dir.path(), "incline.png");
    let settings = MeasureSettings {
        scale: Some(ScaleSource::PxPerM(scene.camera.px_per_m)),
        ..settings(scene.strobe.rate_hz, scene.ball.diameter_m)
    };
    let m = measure_photo(&photo, &settings).expect("a measurement");
    let ms = &m.doc.measurement;
    let incline = ms.incline.as_ref().expect("an incline");
    let accel_truth = truth.incline_accel_mps2.unwrap();
    assert!(
        right_by_sweep_rule(incline.accel_mps2, incline.accel_sigma_mps2, accel_truth),
        "incline {} +- {} (truth {accel_truth})",
        incline.accel_mps2,
        incline.accel_sigma_mps2
    );
    assert_launch_right(ms, &truth);
    // The path numbers the flashes as the truth does: one constant offset.
    let first = truth_n(&truth, m.doc.path[0].x_px, m.doc.path[0].y_px).unwrap();
    for p in &m.doc.path {
        if let Some(n) = truth_n(&truth, p.x_px, p.y_px) {
            assert_eq!(p.n + first, n, "path image at ({}, {})", p.x_px, p.y_px);
        }
    }
}

#[test]
fn an_image_just_after_the_launch_is_put_in_the_flight() {
    // Sweep shot 199: a 19 px ball rolling down a 45 degree incline at 52 Hz, JPEG q70, scaled
    // by the ball's diameter. Its first flight image is taken 0.07 flash interval after the
    // launch: it lies on the incline's line within its noise, and the chi-square put it on
    // the incline. The phases' velocities then met outside the gap between their images, the
    // launch was held at that image and read 1.1346 +- 0.0032 m/s for a true 1.1228 (flagged).
    // Against the rendered truth: the incline ends at its last image, the launch checks pass and
    // the launch speed is right by the sweep's rule.
    let scene = test_scene("launch_just_before_a_flash");
    let dir = common::tempdir();
    let (photo, truth) = shoot(&scene, dir.path(), "incline.jpg");
    let m = measure_photo(
        &photo,
        &settings(scene.strobe.rate_hz, scene.ball.diameter_m),
    )
    .expect("a measurement");
    let ms = &m.doc.measurement;
    let incline = ms.incline.as_ref().expect("an incline");
    let last = m
        .doc
        .path
        .iter()
        .find(|p| p.n == incline.last_n)
        .and_then(|p| truth_n(&truth, p.x_px, p.y_px))
        .expect("the incline's last image is a ball image");
    assert_eq!(
        truth.flashes[last].phase,
        Phase::Incline,
        "last incline image"
    );
    assert_eq!(
        truth.flashes[last + 1].phase,
        Phase::Flight,
        "the image after it"
    );
    let launch_check = ms
        .checks
        .iter()
        .find(|c| c.check == "launch_speed_agreement")
        .expect("the launch checked");
    assert_eq!(
        launch_check.outcome,
        beadline::physics::checks::CheckOutcome::Pass,
        "{}",
        launch_check.detail
    );
    assert_launch_right(ms, &truth);
}

#[test]
fn a_path_whose_bounces_gain_energy_is_read_the_other_way_in_time() {
    // Sweep shot 208 (tests/data/throw_read_backwards.toml): a throw bouncing twice, seen by a
    // camera tilted 26 degrees. The walk's apex-height vote ordered the path backwards and the
    // one bounce read e = 1.099 +- 0.001 for a true 0.910 (flagged by restitution_range). A
    // passive bounce never returns more speed than it takes, so the path read the other way is
    // the photo's. Against the rendered truth: the path's flash indices run with the truth's
    // and the restitution is right.
    let scene = test_scene("throw_read_backwards");
    let settings = MeasureSettings {
        scale: Some(ScaleSource::Plane(
            "tests/data/throw_read_backwards.plane.toml".into(),
        )),
        ..settings(scene.strobe.rate_hz, scene.ball.diameter_m)
    };
    let (m, truth, first) = measure_scene(&scene, &settings);
    let ms = &m.doc.measurement;
    assert!(!ms.bounces.is_empty(), "a bounce measured");
    check_physics(ms, &truth, first);
}

#[test]
fn a_step_the_walk_miscounted_is_counted_again_from_the_physics() {
    // Sweep shot 5 (tests/data/drop_first_step_miscounted.toml, saved as JPEG quality 70 as
    // the sweep saved it): a drop whose first arc holds three images; the walk bridged its
    // first step as two flashes, and three points fit a parabola either way. The arcs after
    // the bounce then disagreed with it: floor_contacts and restitution_agreement failed on a
    // photo whose values were right. Counted again step by step, one flash in that step makes
    // every check pass. Against the rendered truth: the path's flash indices and missing
    // flashes, gravity and every restitution.
    let scene = test_scene("drop_first_step_miscounted");
    let (m, truth, first) = measure_scene_as(
        &scene,
        &settings(scene.strobe.rate_hz, scene.ball.diameter_m),
        "drop.jpg",
    );
    let ms = &m.doc.measurement;
    check_physics(ms, &truth, first);
    let failed: Vec<&str> = ms
        .checks
        .iter()
        .filter(|c| c.outcome == beadline::physics::checks::CheckOutcome::Fail)
        .map(|c| c.check)
        .collect();
    assert!(failed.is_empty(), "failed checks: {failed:?}");
}

#[test]
fn the_images_merged_at_the_start_of_a_roll_are_counted_and_placed_by_their_pixels() {
    // The bench's overlap_r20 scene (bench/suite.py, seed 501): a 20 px ball released from rest
    // on a 12 degree incline at 40 Hz. Its first 12 images lie 0.02 to 0.5 radius apart in one
    // bright sausage whose red and green channels clip; the detector finds a blob at the start
    // and the images from 0.5 radius apart on. Before, the path began at truth flash 12. The
    // images before it are counted and placed by the photo's own image of the ball along the
    // incline's motion (detect::chain): every truth flash of the roll is on the path, numbered
    // as the truth numbers it, and each added image is within 2 sigma of its truth.
    let scene = test_scene("roll_from_rest_merged");
    let settings = settings(scene.strobe.rate_hz, scene.ball.diameter_m);
    let (m, truth, first) = measure_scene(&scene, &settings);
    assert_eq!(first, 0, "the path starts at the first flash");
    let added = check_added(&m, &truth, first);
    assert!(added >= 12, "{added} images added");
    check_incline(&m.doc.measurement, &truth);
}

#[test]
fn a_missing_flash_between_merged_images_is_found_from_its_pixels() {
    // The bench's dark_r32 scene (bench/suite.py, seed 402): a dark 32 px ball rolling from rest,
    // measured against its clean plate. Its second image, 0.5 radius from both neighbours, is
    // not separated by the detector and no rejected candidate lies at its predicted place: the
    // path had flash 1 missing. Fitted along the incline's motion with the photo's own image of
    // the ball, it is added within 2 sigma of its truth (and half a radius), numbered as the
    // truth numbers it.
    let scene = test_scene("dark_roll_gap");
    let dir = common::tempdir();
    let (photo, truth) = shoot(&scene, dir.path(), "dark.png");
    let plate = dir.path().join("plate.png");
    beadline::synth::render_plate(&scene)
        .save(&plate)
        .expect("save the plate");
    let settings = MeasureSettings {
        plate: Some(plate),
        ..settings(scene.strobe.rate_hz, scene.ball.diameter_m)
    };
    let m = measure_photo(&photo, &settings).expect("a measurement");
    let first = check_path(&m.paths.paths[0], &truth);
    assert!(check_added(&m, &truth, first) > 0, "no image added");
    assert!(m.doc.missing.is_empty(), "missing {:?}", m.doc.missing);
    check_incline(&m.doc.measurement, &truth);
}

/// Every point of `path` within half a radius of the truth flash its `n` names, numbered from
/// the truth flash of its last point (images at the start of a roll may lie nearer another
/// flash's truth than their own: flashes 0 and 1 of a roll from rest are 0.02 radius apart).
/// Returns the truth index of the path's first point.
fn check_numbered_from_last(path: &BallPath, truth: &Truth) -> usize {
    let last = path.points.last().expect("a path");
    let first = truth_n(truth, last.x_px, last.y_px).expect("a ball image") - last.n;
    for p in &path.points {
        let t = &truth.flashes[p.n + first];
        let error = (p.x_px - t.x_px).hypot(p.y_px - t.y_px);
        assert!(
            error < 0.5 * t.r_px,
            "n {}: {error} px from truth flash {}",
            p.n,
            t.n
        );
    }
    first
}

#[test]
fn a_small_ball_s_merged_start_is_counted_from_its_least_misfit() {
    // The bench's overlap_r12 scene: a 12 px ball released from rest, its first 11 images 0.04
    // to 0.72 radius apart. Counted image by image from none, each gain in misfit was swamped by
    // the light of the images not yet counted and none was added (the path began at truth flash
    // 9, flash 10 missing); counted down from the count of least misfit and held at the release
    // point before the motion's turn, all 10 are added, each within 2 sigma of its truth.
    let scene = test_scene("roll_from_rest_small");
    let settings = settings(scene.strobe.rate_hz, scene.ball.diameter_m);
    let (m, truth, first) = measure_scene(&scene, &settings);
    assert_eq!(first, 0, "the path starts at the first flash");
    assert!(m.doc.missing.is_empty(), "missing {:?}", m.doc.missing);
    let added = check_added(&m, &truth, first);
    assert!(added >= 10, "{added} images added");
    check_incline(&m.doc.measurement, &truth);
}

#[test]
fn an_incline_whose_images_all_merged_is_found_behind_the_flight() {
    // The bench's overlap_r30 scene: a 30 px ball on a 12 degree incline, the first 23 of its 24
    // incline images 0.02 to 0.65 radius apart. The detector's path began with the last (taken
    // for the flight's first: no incline, no launch) and two blobs on the incline were strays.
    // From the flight's first image back through the strays, the roll from rest is fitted to
    // the pixels: every incline flash is on the path, the incline and the launch are measured
    // and agree with the truth.
    let scene = test_scene("incline_all_merged");
    let settings = settings(scene.strobe.rate_hz, scene.ball.diameter_m);
    let dir = common::tempdir();
    let (photo, truth) = shoot(&scene, dir.path(), "shot.png");
    let m = measure_photo(&photo, &settings).expect("a measurement");
    let first = check_numbered_from_last(&m.paths.paths[0], &truth);
    assert_eq!(first, 0, "the path starts at the first flash");
    assert!(m.doc.missing.is_empty(), "missing {:?}", m.doc.missing);
    assert_eq!(incline_flashes(&truth), 24);
    let added = check_added(&m, &truth, first);
    assert!(added >= 22, "{added} images added");
    check_incline(&m.doc.measurement, &truth);
}

#[test]
fn a_drop_s_merged_first_images_are_found_backwards_along_its_flight() {
    // Sweep shot 197 (tests/data/drop_start_merged.toml, saved as JPEG quality 65 as the sweep
    // saved it): a 4.5 mm ball dropped from rest at 115 Hz, its first images 0.18 to 0.84 radius
    // apart. The path began at truth flash 4. Fitted backwards along the flight's own motion
    // (the path's own images held where a trial falls on one), the first four are on the path,
    // those added each within 2 sigma and half a radius of its truth, numbered as the truth
    // numbers them (the detector now keeps two of them itself: their rims' brightest quarter is
    // not faint).
    let scene = test_scene("drop_start_merged");
    let settings = MeasureSettings {
        scale: Some(ScaleSource::Plane(
            "tests/data/drop_start_merged.plane.toml".into(),
        )),
        ..settings(scene.strobe.rate_hz, scene.ball.diameter_m)
    };
    let (m, truth, first) = measure_scene_as(&scene, &settings, "drop.jpg");
    assert_eq!(first, 0, "the path starts at the first flash");
    let added = check_added(&m, &truth, first);
    assert!(added >= 2, "{added} images added");
    for n in 0..4 {
        let p = m
            .doc
            .path
            .iter()
            .find(|p| p.n == n)
            .expect("the first four on the path");
        let t = &truth.flashes[n];
        assert!(
            (p.x_px - t.x_px).hypot(p.y_px - t.y_px) < 0.5 * t.r_px,
            "flash {n}"
        );
    }
    check_physics(&m.doc.measurement, &truth, first);
}

#[test]
fn a_circle_straddling_a_printed_image_and_the_incline_is_no_image() {
    // The real-balls bench's panels_jpeg_r14_c1 photo (tests/data/printed_crowded_start.toml):
    // a 14 px panel-lined ball at JPEG 85 rolling down an incline. Two circles 0.7 radius below
    // the images of flashes 0 and 4, half on the image and half on the incline's bar, were kept
    // as images: found twice, the path misnumbered, both bounces flagged. Without them the
    // pixels are explained better (their neighbours' shaded fits then hold): every spot is one
    // truth image, within 0.3 radius of it, and the path numbers the flashes as the truth does.
    let scene = test_scene("printed_crowded_start");
    let dir = common::tempdir();
    let (photo, truth) = shoot(&scene, dir.path(), "roll.jpg");
    let settings = settings(scene.strobe.rate_hz, scene.ball.diameter_m);
    let img = load(&photo, &LoadOptions::default()).unwrap();
    let report = find_spots(&img, None, &settings.spots, None).unwrap();
    for s in &report.spots {
        let nearest = truth
            .flashes
            .iter()
            .map(|f| (f.x_px - s.x_px).hypot(f.y_px - s.y_px) / f.r_px)
            .fold(f64::INFINITY, f64::min);
        assert!(
            nearest < 0.3,
            "spot at ({}, {}) {nearest} radii off",
            s.x_px,
            s.y_px
        );
    }
    let m = measure_photo(&photo, &settings).expect("a measurement");
    let first = truth_n(&truth, m.doc.path[0].x_px, m.doc.path[0].y_px).unwrap();
    for p in &m.doc.path {
        let n = truth_n(&truth, p.x_px, p.y_px);
        assert_eq!(
            n,
            Some(p.n + first),
            "path image at ({}, {})",
            p.x_px,
            p.y_px
        );
    }
    // The two bounces in the frame, each matched to the truth's bounce nearest in time.
    let ms = &m.doc.measurement;
    assert_eq!(ms.bounces.len(), 2);
    for b in &ms.bounces {
        let t = truth
            .bounces
            .iter()
            .min_by(|x, y| (x.t_s - b.t_s).abs().total_cmp(&(y.t_s - b.t_s).abs()))
            .unwrap();
        let e = t.restitution;
        assert!(
            right_by_sweep_rule(b.restitution, b.restitution_sigma, e),
            "e {} +- {} (truth {e})",
            b.restitution,
            b.restitution_sigma
        );
    }
}
