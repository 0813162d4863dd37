//! Measurement core checks: NIST reference data, textbook homographies and rendered ground truth.

mod common;

use beadline::calibrate::{Calibration, Distortion, homography_dlt};
use beadline::core::ball::Build;
use beadline::physics::bands::{Band, Outcome};
use beadline::physics::checks::CheckOutcome;
use beadline::physics::fit::{CovarianceScaling, FitOptions, polynomial_fit};
use beadline::physics::{MeasureOptions, Measurement, Quantity, TimedPoint, Unknown, measure};
use beadline::synth::camera::Projection;
use beadline::synth::scene::Scene;
use beadline::synth::sim::{Motion, rolling_end_speed_mps};
use common::DropScene;
use nalgebra::Matrix3;
use rand::SeedableRng;
use rand_distr::{Distribution, Normal};

const NOISE_PX: f64 = 0.05;

#[test]
fn pontius_certified_values() {
    // NIST StRD linear regression dataset "Pontius" (certified values in the file header): a
    // parabola fit must reproduce the coefficients to 9 digits and the standard deviations (from
    // the unweighted residual standard deviation) to 6 digits.
    let text = std::fs::read_to_string("tests/data/nist-strd-pontius.txt").unwrap();
    let (mut x, mut y) = (Vec::new(), Vec::new());
    let mut certified = Vec::new();
    for line in text.lines() {
        if let Some(rest) = line.trim_start_matches('#').trim().strip_prefix('B') {
            if rest.len() > 2 && rest.as_bytes()[1] == b' ' {
                let nums: Vec<f64> = rest
                    .split(|c: char| c == '=' || c == '(' || c == ')' || c.is_whitespace())
                    .filter_map(|s| s.parse().ok())
                    .collect();
                certified.push((nums[1], nums[2]));
            }
            continue;
        }
        if line.starts_with('#') || line.trim().is_empty() {
            continue;
        }
        let v: Vec<f64> = line
            .split_whitespace()
            .map(|s| s.parse().unwrap())
            .collect();
        y.push(v[0]);
        x.push(v[1]);
    }
    assert_eq!(x.len(), 40);
    assert_eq!(certified.len(), 3);
    let fit = polynomial_fit(
        &x,
        &y,
        None,
        2,
        &FitOptions {
            covariance: CovarianceScaling::ReducedChiSquare,
        },
    )
    .unwrap();
    for (i, (b, sd)) in certified.iter().enumerate() {
        let rel = ((fit.coefficients[i] - b) / b).abs();
        assert!(
            rel < 1e-9,
            "B{i}: {} vs {b} (rel {rel:e})",
            fit.coefficients[i]
        );
        let rs = ((fit.sigma(i) - sd) / sd).abs();
        assert!(rs < 1e-6, "sd B{i}: {} vs {sd} (rel {rs:e})", fit.sigma(i));
    }
}

fn normalised(h: &Matrix3<f64>) -> Matrix3<f64> {
    let n = h / h.norm();
    if n[(2, 2)] < 0.0 { -n } else { n }
}

#[test]
fn dlt_recovers_the_renderer_homography() {
    // Exact points of a tilted, rolled camera (synth::camera): the normalised DLT (Hartley &
    // Zisserman alg. 4.2) must return the same homography to 1e-9 relative.
    let mut scene = Scene::demo();
    scene.camera.tilt_deg = 20.0;
    scene.camera.roll_deg = 3.0;
    let proj = Projection::new(&scene.camera);
    let world = [
        [0.0, 0.0],
        [1.0, 0.0],
        [1.1, 0.6],
        [0.0, 0.7],
        [0.5, 0.3],
        [-0.2, 0.4],
    ];
    let image: Vec<[f64; 2]> = world.iter().map(|w| proj.to_pixel(w[0], w[1])).collect();
    let h = homography_dlt(&world, &image).unwrap();
    let diff = (normalised(&h) - normalised(&proj.homography)).norm();
    assert!(diff < 1e-9, "relative difference {diff:e}");

    // With 0.1 px noise on the image points the mapping errs by about 0.1 px / 1000 px/m, a
    // fraction of a millimetre, inside the points' hull.
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(1);
    let noise = Normal::new(0.0, 0.1).unwrap();
    let noisy: Vec<[f64; 2]> = image
        .iter()
        .map(|p| [p[0] + noise.sample(&mut rng), p[1] + noise.sample(&mut rng)])
        .collect();
    let cal = Calibration::from_points(&noisy, &world, None).unwrap();
    let mut worst: f64 = 0.0;
    for &(x, y) in &[(0.2, 0.1), (0.5, 0.5), (0.9, 0.3), (0.1, 0.6)] {
        let p = proj.to_pixel(x, y);
        let w = cal.to_world(p[0], p[1]);
        worst = worst.max((w[0] - x).hypot(w[1] - y));
    }
    assert!(worst < 4e-4, "worst error {worst} m");
}

#[test]
fn unit_square_to_quad_matches_the_closed_form() {
    // Heckbert (1989), "Fundamentals of Texture Mapping": closed-form projective map of the unit
    // square to the quad (x0,y0)..(x3,y3).
    let q = [[1.0, 1.0], [4.0, 1.5], [3.5, 4.0], [0.5, 3.0]];
    let (dx1, dx2, sx) = (
        q[1][0] - q[2][0],
        q[3][0] - q[2][0],
        q[0][0] - q[1][0] + q[2][0] - q[3][0],
    );
    let (dy1, dy2, sy) = (
        q[1][1] - q[2][1],
        q[3][1] - q[2][1],
        q[0][1] - q[1][1] + q[2][1] - q[3][1],
    );
    let den = dx1 * dy2 - dx2 * dy1;
    let g = (sx * dy2 - dx2 * sy) / den;
    let h = (dx1 * sy - sx * dy1) / den;
    let m = Matrix3::new(
        q[1][0] - q[0][0] + g * q[1][0],
        q[3][0] - q[0][0] + h * q[3][0],
        q[0][0],
        q[1][1] - q[0][1] + g * q[1][1],
        q[3][1] - q[0][1] + h * q[3][1],
        q[0][1],
        g,
        h,
        1.0,
    );
    let square = [[0.0, 0.0], [1.0, 0.0], [1.0, 1.0], [0.0, 1.0]];
    let got = homography_dlt(&square, &q).unwrap();
    assert!((got - m).norm() < 1e-12 * m.norm(), "{got} vs {m}");
}

struct Shot {
    points: Vec<TimedPoint>,
    motion: Motion,
    first_flash_s: f64,
}

/// The scene's truth flashes seen through `cal` (pixel -> metres) with 0.05 px Gaussian noise.
fn shot(scene: &Scene, cal: &Calibration, seed: u64) -> Shot {
    let times = scene.strobe.flash_times_s();
    let motion = Motion::simulate(scene, times.last().unwrap() + 1.0);
    let proj = Projection::new(&scene.camera);
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
    let noise = Normal::new(0.0, NOISE_PX).unwrap();
    let (w, h) = (scene.camera.width_px as f64, scene.camera.height_px as f64);
    let mut points = Vec::new();
    for (n, &t) in times.iter().enumerate() {
        let m = motion.at(t);
        let p = proj.to_pixel(m.x_m, m.y_m);
        if p[0] < 20.0 || p[1] < 20.0 || p[0] > w - 20.0 || p[1] > h - 20.0 {
            continue;
        }
        let px = [p[0] + noise.sample(&mut rng), p[1] + noise.sample(&mut rng)];
        let wm = cal.to_world(px[0], px[1]);
        points.push(TimedPoint {
            n,
            t_s: n as f64 * scene.strobe.interval_s(),
            x_m: wm[0],
            y_m: wm[1],
            sigma_m: cal.sigma_m(px[0], px[1], NOISE_PX),
        });
    }
    Shot {
        points,
        motion,
        first_flash_s: scene.strobe.first_flash_s,
    }
}

fn level_cal(scene: &Scene) -> Calibration {
    let c = &scene.camera;
    Calibration::uniform(c.px_per_m, c.origin_x_px, c.origin_y_px, 0.0).unwrap()
}

fn options(scene: &Scene) -> MeasureOptions {
    MeasureOptions {
        interval: Some(Quantity::new(scene.strobe.interval_s(), 0.0, "given")),
        scale: Some(Quantity::new(scene.camera.px_per_m, 0.0, "given")),
        build: scene.ball.build,
        ..MeasureOptions::default()
    }
}

/// Every truth bounce seen with flights on both sides is measured within 0.01 in restitution.
fn check_bounces(m: &Measurement, s: &Shot, min_bounces: usize) -> f64 {
    assert!(
        m.bounces.len() >= min_bounces,
        "{} bounces: {:?}",
        m.bounces.len(),
        m.phases
    );
    let mut worst: f64 = 0.0;
    for b in &m.bounces {
        let t = b.t_s + s.first_flash_s;
        let truth = s
            .motion
            .bounces
            .iter()
            .min_by(|a, c| (a.t_s - t).abs().total_cmp(&(c.t_s - t).abs()))
            .unwrap();
        assert!(
            (truth.t_s - t).abs() < 2e-3,
            "bounce time {t} vs {}",
            truth.t_s
        );
        let err = (b.restitution - truth.restitution).abs();
        assert!(
            err < 0.01,
            "restitution {} vs {}",
            b.restitution,
            truth.restitution
        );
        worst = worst.max(err);
    }
    worst
}

#[test]
fn demo_incline_launch_bounces_and_gravity() {
    // Rendered ground truth (synth::sim): Scene::demo with a longer exposure and a wider view so
    // that 3 bounces have fitted arcs on both sides; incline + 3 bounces, gravity estimated.
    let mut scene = Scene::demo();
    scene.strobe.exposure_s = 2.0;
    scene.camera.px_per_m = 700.0;
    let s = shot(&scene, &level_cal(&scene), 1);
    let m = measure(&s.points, scene.ball.radius_m(), &options(&scene)).unwrap();
    let worst = check_bounces(&m, &s, 3);
    let launch = m.launch.as_ref().expect("a launch off the incline");
    let dv = (launch.speed_mps - s.motion.launch.speed_mps).abs() / s.motion.launch.speed_mps;
    assert!(
        dv < 0.005,
        "launch speed {} vs {}",
        launch.speed_mps,
        s.motion.launch.speed_mps
    );
    let dg = (m.gravity_mps2.value - 9.80665).abs() / 9.80665;
    assert!(dg < 0.005, "gravity {}", m.gravity_mps2.value);
    assert!(m.level.roll_deg.unwrap().abs() < 0.05);
    eprintln!(
        "demo: restitution error {worst:.4}, launch speed rel error {dv:.2e}, gravity rel error {dg:.2e}"
    );
    let json = serde_json::to_value(&m).unwrap();
    for key in [
        "phases",
        "bounces",
        "launch",
        "gravity_mps2",
        "flash_interval_s",
        "scale_px_per_m",
        "verdicts",
        "schema_version",
    ] {
        assert!(json.get(key).is_some(), "missing {key}");
    }
    for key in [
        "restitution",
        "restitution_sigma",
        "impact_speed_mps",
        "rebound_speed_mps",
        "t_s",
    ] {
        assert!(
            json["bounces"][0].get(key).is_some(),
            "missing bounces.{key}"
        );
    }
}

#[test]
fn drop_test_estimates_the_flash_interval() {
    // Rendered drop test ([start] from rest): gravity given, flash interval estimated within
    // 0.2 % of the strobe's, restitution within 0.01.
    let scene = DropScene::wide(1.0, 0.8, 30.0, 700.0).scene();
    let s = shot(&scene, &level_cal(&scene), 2);
    let mut o = options(&scene);
    o.unknown = Unknown::Interval;
    // The path was timed with a wrong nominal interval (2 % off).
    let wrong = scene.strobe.interval_s() * 1.02;
    let pts: Vec<TimedPoint> = s
        .points
        .iter()
        .map(|p| TimedPoint {
            t_s: p.n as f64 * wrong,
            ..*p
        })
        .collect();
    o.interval = Some(Quantity::new(wrong, 0.0, "given"));
    let m = measure(&pts, scene.ball.radius_m(), &o).unwrap();
    let di =
        (m.flash_interval_s.value - scene.strobe.interval_s()).abs() / scene.strobe.interval_s();
    assert!(di < 0.002, "interval {}", m.flash_interval_s.value);
    assert!(m.launch.is_none());
    let worst = check_bounces(&m, &s, 2);
    eprintln!("drop: interval rel error {di:.2e}, restitution error {worst:.4}");
}

#[test]
fn tilted_camera_through_a_plane_calibration() {
    // A camera turned 20 degrees and rolled 3 degrees; pixels mapped back through a homography
    // fitted by DLT to 6 exact plane markers. Restitution within 0.01, gravity within 0.5 %.
    let mut scene = Scene::demo();
    scene.camera.tilt_deg = 20.0;
    scene.camera.roll_deg = 3.0;
    scene.camera.px_per_m = 900.0;
    let proj = Projection::new(&scene.camera);
    let world = [
        [-0.2, 0.0],
        [1.2, 0.0],
        [1.2, 0.7],
        [-0.2, 0.7],
        [0.5, 0.35],
        [0.3, 0.6],
    ];
    let image: Vec<[f64; 2]> = world.iter().map(|w| proj.to_pixel(w[0], w[1])).collect();
    let cal = Calibration::from_points(&image, &world, None).unwrap();
    let s = shot(&scene, &cal, 3);
    let mut o = options(&scene);
    o.camera_level = true;
    let m = measure(&s.points, scene.ball.radius_m(), &o).unwrap();
    let worst = check_bounces(&m, &s, 2);
    let dg = (m.gravity_mps2.value - 9.80665).abs() / 9.80665;
    assert!(dg < 0.005, "gravity {}", m.gravity_mps2.value);
    let launch = m.launch.as_ref().unwrap();
    let dv = (launch.speed_mps - s.motion.launch.speed_mps).abs() / s.motion.launch.speed_mps;
    assert!(dv < 0.005, "launch {}", launch.speed_mps);
    eprintln!("tilted: restitution error {worst:.4}, gravity rel error {dg:.2e}, launch {dv:.2e}");
}

#[test]
fn rolled_level_camera_is_corrected() {
    // Camera rolled 2 degrees, calibrated as if level: the roll is estimated from the direction of
    // the flight arcs' acceleration and corrected.
    let mut scene = Scene::demo();
    scene.camera.roll_deg = 2.0;
    let s = shot(&scene, &level_cal(&scene), 4);
    let m = measure(&s.points, scene.ball.radius_m(), &options(&scene)).unwrap();
    let roll = m.level.roll_deg.unwrap();
    assert!((roll - 2.0).abs() < 0.05, "roll {roll}");
    check_bounces(&m, &s, 2);
    eprintln!("roll: estimated {roll:.4} deg for 2");
}

#[test]
fn speed_dependent_restitution_trend() {
    // Rendered truth with e = 0.9 - 0.05 s/m * impact speed (floor.restitution_slope_s_per_m).
    let mut scene = DropScene::wide(1.2, 0.9, 40.0, 700.0).scene();
    scene.floor.restitution_slope_s_per_m = -0.05;
    let s = shot(&scene, &level_cal(&scene), 5);
    let m = measure(&s.points, scene.ball.radius_m(), &options(&scene)).unwrap();
    check_bounces(&m, &s, 3);
    let t = m.restitution_trend.as_ref().unwrap();
    assert!(t.slope_s_per_m < 0.0);
    assert!(
        (t.slope_s_per_m + 0.05).abs() < 0.01,
        "slope {}",
        t.slope_s_per_m
    );
    eprintln!(
        "trend: slope {:.4} +- {:.4} s/m (truth -0.05)",
        t.slope_s_per_m, t.slope_sigma_s_per_m
    );
}

#[test]
fn rolling_end_speed_matches_the_handbook_formula() {
    // Rolling without slipping from rest: v = sqrt(2 g h / (1 + k)), k = 2/5 solid, 2/3 shell
    // (standard mechanics handbook formula); the fitted rolling loss is about zero.
    for build in [Build::Solid, Build::Shell] {
        let mut scene = Scene::demo();
        scene.ball.build = build;
        scene.strobe.rate_hz = 50.0;
        let inc = scene.incline.clone().unwrap();
        let s = shot(&scene, &level_cal(&scene), 6);
        let m = measure(&s.points, scene.ball.radius_m(), &options(&scene)).unwrap();
        let r = m.incline.as_ref().unwrap();
        let h = inc.length_m * inc.angle_deg.to_radians().sin();
        let v = rolling_end_speed_mps(h, scene.ball.inertia_factor(), 9.80665);
        let dv = (r.end_speed_mps - v).abs() / v;
        assert!(
            dv < 0.005,
            "{build:?}: end speed {} vs {v}",
            r.end_speed_mps
        );
        assert!(
            r.rolling_loss.abs() < 0.01,
            "{build:?}: loss {}",
            r.rolling_loss
        );
        eprintln!(
            "{build:?}: end speed rel error {dv:.2e}, loss {:.4} +- {:.4}",
            r.rolling_loss, r.rolling_loss_sigma
        );
    }
}

fn verdict(scene: &Scene, band: &str, seed: u64) -> Outcome {
    let s = shot(scene, &level_cal(scene), seed);
    let mut o = options(scene);
    o.bands = vec![Band::parse(band).unwrap()];
    let m = measure(&s.points, scene.ball.radius_m(), &o).unwrap();
    m.verdicts[0].outcome
}

#[test]
fn rebound_standards_as_acceptance_bands() {
    // Values quoted from memory: ITF rules, a tennis ball dropped from 254 cm must rebound
    // 135-147 cm, e = sqrt(h'/h) about 0.73-0.76; ITTF, a table-tennis ball dropped from 305 mm
    // onto steel must rebound 240-260 mm, e about 0.89-0.92.
    let tennis = "restitution=0.73..0.76";
    assert_eq!(
        verdict(
            &DropScene::wide(2.54, 0.745, 30.0, 340.0).scene(),
            tennis,
            7
        ),
        Outcome::Pass
    );
    assert_eq!(
        verdict(&DropScene::wide(2.54, 0.70, 30.0, 340.0).scene(), tennis, 8),
        Outcome::Fail
    );
    let mut tt = DropScene::wide(0.305, 0.905, 60.0, 1500.0).scene();
    tt.ball.diameter_m = 0.04;
    tt.ball.build = Build::Shell;
    if let Some(st) = tt.start.as_mut() {
        st.y_m = 0.305 + 0.02;
        st.x_m = 0.1;
    }
    let table = "restitution=0.89..0.92";
    assert_eq!(verdict(&tt, table, 9), Outcome::Pass);
    tt.floor.restitution = 0.85;
    assert_eq!(verdict(&tt, table, 10), Outcome::Fail);
}

#[test]
fn refuses_bad_paths_without_panicking() {
    let o = MeasureOptions::default();
    assert!(measure(&[], 0.02, &o).is_err());
    let line: Vec<TimedPoint> = (0..10)
        .map(|n| TimedPoint {
            n,
            t_s: n as f64 * 0.04,
            x_m: n as f64 * 0.01,
            y_m: 0.1,
            sigma_m: 1e-4,
        })
        .collect();
    assert!(measure(&line, 0.02, &o).is_err());
    let mut nan = line.clone();
    nan[3].y_m = f64::NAN;
    assert!(measure(&nan, 0.02, &o).is_err());
    // A distortion for a 1600 x 900 image: its centre with pixel centres at integer
    // coordinates, and with k1 = k2 = 0 both ways are the identity.
    let d = Distortion::for_image(0.0, 0.0, 1600.0, 1600, 900);
    assert_eq!((d.centre_x_px, d.centre_y_px), (799.5, 449.5));
    for p in [[0.0, 0.0], [1599.0, 899.0], [123.4, 567.8]] {
        for q in [d.distort(p), d.undistort(p)] {
            assert!(
                (q[0] - p[0]).abs() < 1e-9 && (q[1] - p[1]).abs() < 1e-9,
                "{p:?} -> {q:?}"
            );
        }
    }
}

#[test]
fn quadratic_drag_is_recovered_when_asked() {
    // Rendered truth with quadratic drag a = -D |v| v (synth::sim, RK4): the drag fit returns D.
    let mut scene = Scene::demo();
    scene.flight.drag_per_m = 0.1;
    scene.strobe.rate_hz = 50.0;
    let s = shot(&scene, &level_cal(&scene), 11);
    let mut o = options(&scene);
    o.fit_drag = true;
    // Drag decelerates x as well, so the acceleration no longer points straight down: the level
    // estimate from the arcs would absorb part of the drag. The camera is level here.
    o.camera_level = true;
    let m = measure(&s.points, scene.ball.radius_m(), &o).unwrap();
    let d = m.drag.as_ref().unwrap();
    assert!(
        (d.drag_per_m - 0.1).abs() < 0.01,
        "drag {} +- {}",
        d.drag_per_m,
        d.drag_sigma_per_m
    );
    eprintln!(
        "drag: {:.4} +- {:.4} per m (truth 0.1)",
        d.drag_per_m, d.drag_sigma_per_m
    );
}

// ---------------------------------------------------------------------------------------------
// Self-checks

#[test]
fn chi_square_points_match_the_handbook_table() {
    // Upper-tail 0.001 critical values of chi-square, NIST/SEMATECH e-Handbook of Statistical
    // Methods, section 1.3.6.7.4 (values from memory of that table). Wilson-Hilferty is within
    // 3.5 % at 1 and 2 degrees of freedom and within 1 % from 5 on.
    use beadline::physics::checks::chi_square_999;
    for (dof, table, tolerance) in [
        (1, 10.828, 0.035),
        (2, 13.816, 0.035),
        (5, 20.515, 0.015),
        (10, 29.588, 0.01),
        (20, 45.315, 0.01),
        (50, 86.661, 0.01),
        (100, 149.449, 0.01),
    ] {
        let got = chi_square_999(dof);
        assert!(
            (got - table).abs() / table < tolerance,
            "{dof} dof: {got} vs {table}"
        );
    }
}

fn not_passed(m: &Measurement) -> Vec<String> {
    m.checks
        .iter()
        .filter(|c| c.outcome != CheckOutcome::Pass)
        .map(|c| format!("{} {:?}: {}", c.check, c.outcome, c.detail))
        .collect()
}

fn failed(m: &Measurement, name: &str) -> bool {
    m.checks
        .iter()
        .any(|c| c.check == name && c.outcome == CheckOutcome::Fail)
}

#[test]
fn right_measurements_pass_every_check() {
    // Rendered truth with honest 0.05 px noise: a right measurement must not cry wolf. Three
    // shots (incline and bounces, a drop with drift, a tennis-style drop) over 4 noise draws.
    let mut demo = Scene::demo();
    demo.strobe.exposure_s = 2.0;
    demo.camera.px_per_m = 700.0;
    let scenes = [
        demo,
        DropScene::wide(1.0, 0.8, 30.0, 700.0).scene(),
        DropScene::tennis(0.75, 1.0, 0.065).scene(),
    ];
    for scene in &scenes {
        for seed in 1..=4 {
            let s = shot(scene, &level_cal(scene), seed);
            let m = measure(&s.points, scene.ball.radius_m(), &options(scene)).unwrap();
            assert!(m.checks.len() >= 5, "{} checks", m.checks.len());
            let bad = not_passed(&m);
            assert!(
                bad.is_empty(),
                "seed {seed}, {} bounces, roll {:?} +- {:?}, floor {:?}: {bad:#?}",
                m.bounces.len(),
                m.level.roll_deg,
                m.level.roll_sigma_deg,
                m.floor
            );
            assert!(!m.doubtful());
        }
    }
}

#[test]
fn a_wrong_image_on_an_arc_fails_the_arc_fit() {
    // One flight image 3 px off its place (a stray blob taken for the ball).
    let mut scene = Scene::demo();
    scene.strobe.exposure_s = 2.0;
    scene.camera.px_per_m = 700.0;
    let mut s = shot(&scene, &level_cal(&scene), 3);
    let k = s.points.len() * 2 / 3;
    s.points[k].y_m += 3.0 / 700.0;
    let m = measure(&s.points, scene.ball.radius_m(), &options(&scene)).unwrap();
    assert!(failed(&m, "arc_fit"), "{:#?}", not_passed(&m));
    assert!(m.doubtful());
}

#[test]
fn an_uncounted_missing_flash_is_caught() {
    // A flash with no image in the middle of the path, and the ordering did not notice: every
    // later image is numbered one flash early. The times then lie, and some check must fail.
    let scene = DropScene::wide(1.0, 0.8, 30.0, 700.0).scene();
    let s = shot(&scene, &level_cal(&scene), 4);
    let k = s.points.len() / 2;
    let dt = scene.strobe.interval_s();
    let pts: Vec<TimedPoint> = s
        .points
        .iter()
        .enumerate()
        .filter(|(i, _)| *i != k)
        .map(|(i, p)| {
            let n = if i > k { p.n - 1 } else { p.n };
            TimedPoint {
                n,
                t_s: n as f64 * dt,
                ..*p
            }
        })
        .collect();
    let m = measure(&pts, scene.ball.radius_m(), &options(&scene)).unwrap();
    assert!(m.doubtful(), "{:#?}", not_passed(&m));
}

#[test]
fn a_wrong_ball_build_fails_the_rolling_check() {
    // The demo's ball is solid (k = 2/5); measured as a thin shell (k = 2/3) it rolls faster
    // than a shell can: a negative rolling loss (standard rigid-body rolling, a = g sin / (1+k)).
    let mut scene = Scene::demo();
    scene.strobe.exposure_s = 2.0;
    scene.camera.px_per_m = 700.0;
    let s = shot(&scene, &level_cal(&scene), 5);
    let mut o = options(&scene);
    o.build = Build::Shell;
    let m = measure(&s.points, scene.ball.radius_m(), &o).unwrap();
    assert!(failed(&m, "incline_rolling"), "{:#?}", not_passed(&m));
    let right = measure(&s.points, scene.ball.radius_m(), &options(&scene)).unwrap();
    assert!(!failed(&right, "incline_rolling"));
}
