//! The spin read from a ball's markings (`path[].spin_angle_deg`, `spin[]`) against the
//! renderer's exact truth: each image's turn and each phase's spin rate, the slip on an incline,
//! and the refusals (a plain ball, markings that look the same turned half a turn).

mod common;

use beadline::physics::checks::CheckOutcome;
use beadline::pipeline::measure_photo;
use beadline::report::measure::MeasureDoc;
use beadline::synth::Truth;
use beadline::synth::scene::Scene;
use std::path::Path;

/// A throw of an 80 mm ball (20 px radius) spinning at `spin_hz`, 2.5 radii between flashes at
/// 20 Hz, with the given markings.
fn throw(markings: &str, spin_hz: f64) -> Scene {
    let text = format!(
        r#"
seed = 31
[ball]
diameter_m = 0.08
markings = "{markings}"
[start]
x_m = 0.1
y_m = 0.7
vx_mps = 2.0
vy_mps = 1.0
spin_hz = {spin_hz}
[floor]
restitution = 0.8
tangential_ratio = 0.9
[strobe]
rate_hz = 20.0
exposure_s = 0.85
[camera]
px_per_m = 500.0
width_px = 1000
height_px = 520
origin_x_px = 0.0
origin_y_px = 500.0
"#
    );
    Scene::from_toml(&text, Path::new("throw.toml")).unwrap()
}

fn measured(scene: &Scene, name: &str) -> (MeasureDoc, Truth) {
    let dir = common::tempdir();
    let (photo, truth) = common::shoot(scene, dir.path(), name);
    let m = measure_photo(
        &photo,
        &common::ball_settings(scene.strobe.rate_hz, scene.ball.diameter_m),
    )
    .expect("a measurement");
    (m.doc, truth)
}

#[test]
fn a_printed_dot_gives_each_image_s_turn_and_each_arc_s_spin() {
    // Truth: the renderer turns the ball at its spin (constant in flight) and changes the spin
    // at each bounce by the angular momentum about the contact point (tests/ball_surface.rs).
    // Targets of the real-balls issue: angles within 3 degrees RMS, spin rate within 2 %.
    let (doc, truth) = measured(&throw("dot", -3.0), "dot.png");
    let mut errs = Vec::new();
    let mut base = None;
    for p in &doc.path {
        let (Some(a), Some(s)) = (p.spin_angle_deg, p.spin_angle_sigma_deg) else {
            continue;
        };
        let f = common::flash_at(&truth, p.x_px, p.y_px);
        let (a0, t0) = *base.get_or_insert((a, f.spin_angle_deg));
        let err = (a - a0) - (f.spin_angle_deg - t0);
        assert!(
            err.abs() <= 3.0 * s + 0.5,
            "flash {}: {err:.2} deg off, sigma {s:.2}",
            p.n
        );
        errs.push(err);
    }
    assert!(errs.len() >= 10, "only {} images have an angle", errs.len());
    let rms = (errs.iter().map(|e| e * e).sum::<f64>() / errs.len() as f64).sqrt();
    assert!(rms < 3.0, "angle RMS {rms:.2} deg");
    assert!(!doc.spin.is_empty());
    for s in &doc.spin {
        // The arc's true spin: the launch spin before the first bounce, then each bounce's.
        let mut arc = truth
            .bounces
            .iter()
            .filter(|b| b.t_s < truth.flashes[s.first_n].t_s);
        let true_hz = arc.next_back().map_or(-3.0, |b| b.spin_after_hz);
        let err = s.spin_hz - true_hz;
        assert!(
            err.abs() < 0.02 * true_hz.abs(),
            "{} vs {true_hz}",
            s.spin_hz
        );
        assert!(
            err.abs() < 3.0 * s.spin_hz_sigma,
            "{err} vs sigma {}",
            s.spin_hz_sigma
        );
    }
    // The spin at each bounce read on both sides against the truth's, and the moment-of-inertia
    // factor it implies against the renderer's solid ball (k = 2/5, the standard rigid-body
    // formula): the renderer keeps the angular momentum about the contact point.
    assert!(!doc.spin_bounces.is_empty(), "no spin read across a bounce");
    for b in &doc.spin_bounces {
        let t = &truth.bounces[b.bounce - 1];
        for (got, sigma, want) in [
            (b.spin_before_hz, b.spin_before_hz_sigma, t.spin_before_hz),
            (b.spin_after_hz, b.spin_after_hz_sigma, t.spin_after_hz),
        ] {
            assert!(
                (got - want).abs() < 3.0 * sigma,
                "bounce {}: {got} vs {want}",
                b.bounce
            );
        }
        let (k, sk) = (b.inertia_factor.unwrap(), b.inertia_factor_sigma.unwrap());
        assert!((k - 0.4).abs() < 3.0 * sk && sk < 0.05, "k {k} +- {sk}");
    }
    let at_bounce: Vec<_> = doc
        .measurement
        .checks
        .iter()
        .filter(|c| c.check == "spin_at_bounce")
        .collect();
    assert_eq!(at_bounce.len(), doc.spin_bounces.len());
    assert!(at_bounce.iter().all(|c| c.outcome == CheckOutcome::Pass));
}

#[test]
fn a_plain_ball_and_a_band_give_no_spin_and_say_why() {
    for (markings, why) in [("none", "no marking"), ("band", "half a turn")] {
        let (doc, _) = measured(&throw(markings, -3.0), "plain.png");
        assert!(doc.spin.is_empty(), "{markings}: {:?}", doc.spin);
        assert!(doc.path.iter().all(|p| p.spin_angle_deg.is_none()));
        let note = doc.spin_note.as_deref().unwrap_or("");
        assert!(note.contains(why), "{markings}: {note}");
    }
}

#[test]
fn the_incline_s_slip_tells_five_percent_from_rolling_without_slipping() {
    // Truth: the renderer turns the ball by (1 - slip) s / r for a distance s rolled
    // (tests/ball_surface.rs). The real-balls issue's target: a slip of 5 % told from none.
    let mut slips = Vec::new();
    for slip in [0.0, 0.05] {
        let text = format!(
            r#"
seed = 5
[ball]
diameter_m = 0.06
markings = "seams"
[incline]
length_m = 0.6
angle_deg = 12.0
bottom_height_m = 0.3
slip = {slip}
[strobe]
rate_hz = 15.0
first_flash_s = 0.0
exposure_s = 1.8
[camera]
px_per_m = 500.0
width_px = 1400
height_px = 520
origin_x_px = 700.0
origin_y_px = 500.0
"#
        );
        let scene = Scene::from_toml(&text, Path::new("incline.toml")).unwrap();
        let (doc, _) = measured(&scene, "incline.png");
        let incline = doc
            .spin
            .iter()
            .find(|p| p.kind == "incline")
            .expect("the incline's spin");
        let (got, sigma) = (incline.slip.unwrap(), incline.slip_sigma.unwrap());
        assert!(
            (got - slip).abs() < 3.0 * sigma,
            "slip {got} +- {sigma} for {slip}"
        );
        assert!(sigma < 0.015, "slip sigma {sigma}");
        // The rolling check passes rolling without slipping and warns at 5 %.
        let check = doc
            .measurement
            .checks
            .iter()
            .find(|c| c.check == "rolling_slip")
            .expect("a rolling_slip check");
        let want = if slip > 0.0 {
            CheckOutcome::Warn
        } else {
            CheckOutcome::Pass
        };
        assert_eq!(check.outcome, want, "{}", check.detail);
        slips.push((got, sigma));
    }
    let (a, b) = (slips[0], slips[1]);
    assert!((b.0 - a.0) > 3.0 * a.1.hypot(b.1), "{a:?} vs {b:?}");
}
