//! Renderer checks against physics formulas and exact geometry.

mod common;

use beadline::core::ball::{Build, inertia_factor};
use beadline::core::geometry::disc_coverage;
use beadline::core::units::STANDARD_GRAVITY_MPS2;
use beadline::synth::scene::Scene;
use beadline::synth::sim::{Motion, Phase, rolling_end_speed_mps};
use beadline::synth::{self};
use std::path::Path;

fn incline_scene(build: &str, angle_deg: f64, length_m: f64) -> Scene {
    let text = format!(
        r#"
[ball]
diameter_m = 0.04
build = "{build}"
[incline]
length_m = {length_m}
angle_deg = {angle_deg}
bottom_height_m = 0.4
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
    Scene::from_toml(&text, Path::new("test.toml")).unwrap()
}

#[test]
fn standard_gravity_is_the_cgpm_value() {
    // Standard acceleration of gravity, 9.80665 m/s^2 exactly (3rd CGPM 1901; ISO 80000-3).
    assert_eq!(STANDARD_GRAVITY_MPS2, 9.80665);
    let scene = incline_scene("solid", 20.0, 0.3);
    assert_eq!(scene.flight.gravity_mps2, 9.80665);
}

#[test]
fn rolling_without_slipping_matches_the_handbook_formula() {
    // Rolling without slipping from rest down a height h: v = sqrt(2 g h / (1 + k)),
    // a = g sin(theta) / (1 + k), with k = 2/5 (solid sphere) and 2/3 (thin shell)
    // (standard mechanics handbook formulas, energy conservation with I = k m r^2).
    for (build, k) in [("solid", 0.4), ("shell", 2.0 / 3.0)] {
        for angle in [10.0f64, 25.0, 40.0] {
            let length = 0.35;
            let scene = incline_scene(build, angle, length);
            assert!((scene.ball.inertia_factor() - k).abs() < 1e-15);
            let motion = Motion::simulate(&scene, 2.0);
            let g = 9.80665;
            let h = length * angle.to_radians().sin();
            let expected_v = (2.0 * g * h / (1.0 + k)).sqrt();
            assert!((motion.launch.speed_mps - expected_v).abs() < 1e-12 * expected_v);
            assert!((rolling_end_speed_mps(h, k, g) - expected_v).abs() < 1e-15);
            let expected_a = g * angle.to_radians().sin() / (1.0 + k);
            let a = motion.incline_accel_mps2.unwrap();
            assert!((a - expected_a).abs() < 1e-12);
            // The launch direction is along the slope, downwards.
            assert!((motion.launch.angle_deg + angle).abs() < 1e-9);
            // Distance along the slope grows as a t^2 / 2.
            let p0 = motion.at(0.0);
            let t = 0.5 * motion.launch.t_s;
            let p1 = motion.at(t);
            let s = (p1.x_m - p0.x_m).hypot(p1.y_m - p0.y_m);
            assert!((s - 0.5 * expected_a * t * t).abs() < 1e-12);
            assert_eq!(p1.phase, Phase::Incline);
        }
    }
}

#[test]
fn thick_shell_inertia_factor_has_the_right_limits() {
    // I = 2/5 m (R^5 - r^5) / (R^3 - r^3) for a thick spherical shell (standard formula):
    // q -> 0 gives the solid sphere 2/5, q -> 1 the thin shell 2/3.
    assert!((inertia_factor(Build::Thick, Some(0.0)) - 0.4).abs() < 1e-15);
    assert!((inertia_factor(Build::Thick, Some(0.999_99)) - 2.0 / 3.0).abs() < 1e-4);
    // q = 0.5: 0.4 * (1 - 1/32) / (1 - 1/8) = 0.4 * 31/28.
    assert!((inertia_factor(Build::Thick, Some(0.5)) - 0.4 * 31.0 / 28.0).abs() < 1e-15);
}

#[test]
fn flight_is_an_exact_parabola_and_bounces_scale_by_restitution() {
    let mut scene = Scene::demo();
    scene.floor.tangential_ratio = 1.0;
    let e = scene.floor.restitution;
    let motion = Motion::simulate(&scene, 3.0);
    assert!(motion.bounces.len() >= 3);
    let g = scene.flight.gravity_mps2;
    let r = scene.ball.radius_m();
    // Between bounces: third differences of y at equal steps vanish, x is linear in t.
    let b0 = &motion.bounces[0];
    let b1 = &motion.bounces[1];
    let dt = (b1.t_s - b0.t_s) / 20.0;
    let ys: Vec<f64> = (1..20)
        .map(|i| motion.at(b0.t_s + i as f64 * dt).y_m)
        .collect();
    let xs: Vec<f64> = (1..20)
        .map(|i| motion.at(b0.t_s + i as f64 * dt).x_m)
        .collect();
    for i in 0..ys.len() - 3 {
        let d3 = ys[i + 3] - 3.0 * ys[i + 2] + 3.0 * ys[i + 1] - ys[i];
        assert!(d3.abs() < 1e-12, "third difference {d3}");
        let d2 = ys[i + 2] - 2.0 * ys[i + 1] + ys[i];
        assert!((d2 + g * dt * dt).abs() < 1e-12, "second difference {d2}");
        let dx2 = xs[i + 2] - 2.0 * xs[i + 1] + xs[i];
        assert!(dx2.abs() < 1e-12);
    }
    // Rebound speed = e * impact speed (vertical components), and apex heights over the floor
    // scale as e^2 for constant restitution (h = v^2 / 2g).
    for b in &motion.bounces {
        assert!((b.rebound_velocity_mps[1] + e * b.impact_velocity_mps[1]).abs() < 1e-12);
        assert_eq!(b.restitution, e);
    }
    let apex = |k: usize| {
        let v = motion.bounces[k].rebound_velocity_mps[1];
        let t_top = motion.bounces[k].t_s + v / g;
        motion.at(t_top).y_m - r
    };
    for k in 0..motion.bounces.len() - 2 {
        let ratio = apex(k + 1) / apex(k);
        assert!(
            (ratio - e * e).abs() < 1e-9,
            "apex ratio {ratio} vs e^2 {}",
            e * e
        );
    }
}

#[test]
fn speed_dependent_restitution_is_applied_per_bounce() {
    let mut scene = Scene::demo();
    scene.floor.restitution = 0.9;
    scene.floor.restitution_slope_s_per_m = -0.05;
    let motion = Motion::simulate(&scene, 3.0);
    for b in &motion.bounces {
        let v_in = b.impact_velocity_mps[1].abs();
        assert!((b.restitution - (0.9 - 0.05 * v_in)).abs() < 1e-12);
    }
}

#[test]
fn drag_slows_the_ball_and_keeps_contact_at_the_floor() {
    let mut scene = Scene::demo();
    let vacuum = Motion::simulate(&scene, 3.0);
    scene.flight.drag_per_m = 0.2;
    let air = Motion::simulate(&scene, 3.0);
    let (bv, ba) = (&vacuum.bounces[0], &air.bounces[0]);
    assert!(ba.impact_velocity_mps[0] < bv.impact_velocity_mps[0]);
    assert!(ba.t_s > bv.t_s);
    let p = air.at(ba.t_s);
    assert!((p.y_m - scene.ball.radius_m()).abs() < 1e-9);
}

#[test]
fn pixel_coverage_of_a_disc_is_exact() {
    // The areas of all pixels sum to pi r^2 (exact geometry of the disc). The centroid of the
    // areas binned at pixel centres is the centre up to the moment lost inside edge pixels, which
    // is far below 0.01 px.
    for &(cx, cy, r) in &[(10.3, 11.7, 5.2), (20.01, 19.5, 12.25), (8.5, 8.5, 3.0)] {
        let (mut sum, mut sx, mut sy) = (0.0, 0.0, 0.0);
        for y in 0..48 {
            for x in 0..48 {
                let c = disc_coverage(x as f64, y as f64, cx, cy, r);
                sum += c;
                sx += c * x as f64;
                sy += c * y as f64;
            }
        }
        let area = std::f64::consts::PI * r * r;
        assert!((sum - area).abs() < 1e-9 * area, "area {sum} vs {area}");
        assert!((sx / sum - cx).abs() < 2e-3, "x {}", sx / sum - cx);
        assert!((sy / sum - cy).abs() < 2e-3, "y {}", sy / sum - cy);
    }
}

fn one_flash_scene(x_m: f64, y_m: f64) -> Scene {
    let text = format!(
        r#"
[ball]
diameter_m = 0.05
[start]
x_m = {x_m}
y_m = {y_m}
[strobe]
rate_hz = 10.0
exposure_s = 0.01
[camera]
px_per_m = 400.0
width_px = 96
height_px = 96
origin_x_px = 0.0
origin_y_px = 95.0
[photo]
shading = false
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
"#
    );
    Scene::from_toml(&text, Path::new("disc.toml")).unwrap()
}

#[test]
fn rendered_disc_has_the_analytic_centroid_and_area() {
    // A single flat disc rendered to a 16-bit linear PNG and read back: its intensity centroid is
    // the truth centre within 0.01 px and its area is pi r^2 within 0.1 % (analytic disc).
    let dir = common::tempdir();
    for &(x_m, y_m) in &[(0.1, 0.12), (0.1213, 0.1171), (0.09876, 0.13333)] {
        let scene = one_flash_scene(x_m, y_m);
        let photo = synth::render(&scene);
        let path = dir.path().join("disc.png");
        photo.save(&path).unwrap();
        let img = image::open(&path).unwrap().to_luma16();
        let (mut sum, mut sx, mut sy) = (0.0, 0.0, 0.0);
        for (x, y, p) in img.enumerate_pixels() {
            let v = p.0[0] as f64 / 65535.0;
            sum += v;
            sx += v * x as f64;
            sy += v * y as f64;
        }
        let f = &photo.truth.flashes[0];
        let area = sum / 0.5;
        let expected = std::f64::consts::PI * f.r_px * f.r_px;
        assert!(
            (area - expected).abs() < 1e-3 * expected,
            "area {area} vs {expected}"
        );
        assert!(
            (sx / sum - f.x_px).abs() < 0.01,
            "x {} vs {}",
            sx / sum,
            f.x_px
        );
        assert!(
            (sy / sum - f.y_px).abs() < 0.01,
            "y {} vs {}",
            sy / sum,
            f.y_px
        );
        // The camera maps the world as documented: x right, y down, 400 px/m from the origin.
        assert!((f.x_px - 400.0 * x_m).abs() < 1e-9);
        assert!((f.y_px - (95.0 - 400.0 * y_m)).abs() < 1e-9);
    }
}

#[test]
fn renderer_is_deterministic_for_a_seed() {
    let mut scene = Scene::demo();
    scene.camera.width_px = 320;
    scene.camera.height_px = 200;
    scene.camera.px_per_m = 200.0;
    scene.camera.origin_x_px = 60.0;
    scene.camera.origin_y_px = 180.0;
    let a = synth::render(&scene);
    let b = synth::render(&scene);
    assert_eq!(a.pixels, b.pixels);
    assert_eq!(a.truth, b.truth);
    scene.seed += 1;
    let c = synth::render(&scene);
    assert_ne!(a.pixels, c.pixels);
    assert_eq!(a.truth.flashes, c.truth.flashes);
}

#[test]
fn camera_roll_and_tilt_round_trip() {
    use beadline::synth::camera::Projection;
    let mut scene = Scene::demo();
    scene.camera.roll_deg = 3.0;
    scene.camera.tilt_deg = 15.0;
    scene.camera.k1 = -0.05;
    scene.camera.k2 = 0.01;
    let proj = Projection::new(&scene.camera);
    for &(x, y) in &[(0.0, 0.0), (0.4, 0.3), (1.1, 0.05), (-0.2, 0.5)] {
        let p = proj.to_pixel(x, y);
        let w = proj.to_world(p[0], p[1]);
        assert!((w[0] - x).abs() < 1e-9 && (w[1] - y).abs() < 1e-9);
    }
}

#[test]
fn scene_errors_name_the_key() {
    let bad_key = "[ball]\ndiameter_m = 0.04\nspin = 3\n";
    let err = Scene::from_toml(bad_key, Path::new("s.toml"))
        .unwrap_err()
        .to_string();
    assert!(err.contains("s.toml") && err.contains("spin"), "{err}");
    let mut text = beadline::synth::scene::DEMO_SCENE.replace("rate_hz = 25.0", "rate_hz = -25.0");
    let err = Scene::from_toml(&text, Path::new("s.toml"))
        .unwrap_err()
        .to_string();
    assert!(err.contains("strobe.rate_hz"), "{err}");
    text = beadline::synth::scene::DEMO_SCENE.replace("angle_deg = 20.0", "angle_deg = nan");
    let err = Scene::from_toml(&text, Path::new("s.toml"))
        .unwrap_err()
        .to_string();
    assert!(err.contains("incline.angle_deg"), "{err}");
}

#[test]
fn the_clean_plate_is_the_photo_without_the_ball() {
    // Physics of the long exposure (the renderer's model): a dark ball hides a lit backdrop for
    // its own flash only, so the plate is brighter by about 1/N of the backdrop level at each
    // image centre and equal wherever no image falls.
    let mut scene = Scene::demo();
    scene.photo.polarity = beadline::core::light::Polarity::Dark;
    scene.photo.noise = false;
    scene.photo.ambient_exposure = 0.0;
    scene.photo.vignetting = 0.0;
    scene.photo.tone = beadline::core::light::Tone::Linear;
    let photo = synth::render(&scene);
    let plate = synth::render_plate(&scene);
    assert_eq!(photo.truth, plate.truth);
    let w = photo.width as usize;
    let n = photo.truth.flashes.len() as f64;
    let level = scene.photo.backdrop_level.unwrap_or(0.75);
    let grey = |p: &[f32; 3]| (p[0] + p[1] + p[2]) as f64 / 3.0;
    let fl = &photo.truth.flashes;
    let (mut far, mut centres) = (0, 0);
    for (i, (a, b)) in photo.pixels.iter().zip(&plate.pixels).enumerate() {
        let (x, y) = ((i % w) as f64, (i / w) as f64);
        let nearest = fl
            .iter()
            .map(|f| (f.x_px - x).hypot(f.y_px - y) - f.r_px)
            .fold(f64::INFINITY, f64::min);
        if nearest > 2.0 {
            assert!((grey(a) - grey(b)).abs() < 1e-6, "({x}, {y}) differs");
            far += 1;
        }
    }
    for (k, f) in fl.iter().enumerate() {
        let alone = fl
            .iter()
            .enumerate()
            .all(|(j, g)| j == k || (g.x_px - f.x_px).hypot(g.y_px - f.y_px) > 2.2 * f.r_px);
        if !f.in_frame || !alone {
            continue;
        }
        let i = f.y_px.round() as usize * w + f.x_px.round() as usize;
        let dip = grey(&plate.pixels[i]) - grey(&photo.pixels[i]);
        // The ball itself returns a little light (albedo 0.08), so the dip is a bit under 1/N.
        assert!(
            dip > 0.8 * level / n && dip < 1.05 * level / n,
            "dip {dip} vs {}",
            level / n
        );
        centres += 1;
    }
    assert!(far > 100_000 && centres > 10, "{far} {centres}");
}

#[test]
fn a_glossy_floor_shows_the_mirror_images_its_truth_lists_and_no_others() {
    // Plane-mirror geometry: the mirror image of a ball whose underside is h above the floor
    // starts h below it, so it shows on a plate of visible depth d only when h < d. Truth and
    // photo must agree: every listed reflection changes the photo under the floor line, and
    // every change lies on a listed one.
    for depth_m in [0.02, 0.075] {
        let mut glossy = Scene::demo();
        glossy.floor.glossy = true;
        glossy.floor.depth_m = depth_m;
        glossy.photo.noise = false;
        let mut matte = glossy.clone();
        matte.floor.glossy = false;
        let (a, b) = (synth::render(&glossy), synth::render(&matte));
        let listed = &a.truth.reflections;
        let (w, h) = (a.width as usize, a.height as usize);
        let mut changed_off_listed = 0;
        let mut changed_on = vec![false; listed.len()];
        for y in 0..h {
            for x in 0..w {
                let (pa, pb) = (a.pixels[y * w + x], b.pixels[y * w + x]);
                if (0..3).all(|c| (pa[c] - pb[c]).abs() < 1e-6) {
                    continue;
                }
                let on = listed
                    .iter()
                    .position(|m| (m.x_px - x as f64).hypot(m.y_px - y as f64) <= m.r_px + 2.0);
                match on {
                    Some(i) => changed_on[i] = true,
                    None => changed_off_listed += 1,
                }
            }
        }
        assert_eq!(
            changed_off_listed, 0,
            "depth {depth_m}: pixels changed off the list"
        );
        let unseen = changed_on.iter().filter(|c| !**c).count();
        assert_eq!(
            unseen, 0,
            "depth {depth_m}: {unseen} listed reflections do not show"
        );
        if depth_m > 0.05 {
            assert!(
                !listed.is_empty(),
                "a deep plate shows the low flashes' mirror images"
            );
        }
    }
}
