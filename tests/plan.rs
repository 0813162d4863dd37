//! Shot planning against answers worked out by hand from the equations of motion.

mod common;

use beadline::synth::plan::{CAUTION, plan};
use beadline::synth::{self, scene::Scene, sim::Motion};
use common::DropScene;

#[test]
fn free_fall_spacing_and_first_bounce_arc_match_the_hand_answer() {
    let scene = DropScene::planned(200, 60.0, "min_images_per_arc = 6\nbounces = 1").scene();
    let p = plan(&scene).unwrap();
    assert!(p.meets_wishes, "{:?}", p.warnings);
    let g: f64 = 9.80665;
    let dt = 1.0 / p.rate_hz;
    let motion = Motion::simulate(&p.apply(&scene), 5.0);
    // Free fall from rest, flashes at t0 + i dt: the spacing between images i and i+1 is
    // g dt^2 (k + i + 1/2) with k = t0 / dt (kinematics of uniform acceleration, by hand).
    let k = p.first_flash_s / dt;
    let t_bounce = ((2.0 * (1.02 - 0.02)) / g).sqrt();
    for i in 0..5 {
        let (t1, t2) = (
            p.first_flash_s + i as f64 * dt,
            p.first_flash_s + (i + 1) as f64 * dt,
        );
        if t2 >= t_bounce {
            break;
        }
        let spacing = motion.at(t1).y_m - motion.at(t2).y_m;
        let hand = g * dt * dt * (k + i as f64 + 0.5);
        assert!((spacing - hand).abs() < 1e-12, "{spacing} vs {hand}");
    }
    // The first flash waits until images are 0.8 radius apart: g t0 dt + g dt^2 / 2 >= 0.8 r.
    let gap0 = g * p.first_flash_s * dt + 0.5 * g * dt * dt;
    assert!(gap0 >= 0.8 * 0.02 - 1e-9 && gap0 < 0.8 * 0.02 + g * 1.1e-3 * dt);
    // First rebound: it leaves at v = e g t_b and lands 2 e g t_b / g later; its apex is at
    // t_b + e t_b. Count the planned flashes inside that arc by hand.
    let e = 0.8;
    let arc = (t_bounce, t_bounce + 2.0 * e * t_bounce);
    assert!((motion.bounces[0].t_s - t_bounce).abs() < 1e-12);
    let apex = motion.at(t_bounce + e * t_bounce);
    assert!(apex.vy_mps.abs() < 1e-12);
    let hand_count = (0..p.flashes)
        .map(|i| p.first_flash_s + i as f64 * dt)
        .filter(|&t| t > arc.0 && t < arc.1)
        .count();
    assert_eq!(p.images_per_arc[1], hand_count);
    assert!(hand_count >= 6);
}

#[test]
fn the_flash_unit_limits_are_respected_and_a_wish_to_drop_is_named() {
    // 12 flashes cannot cover a drop and two rebounds at 8 images per arc.
    let scene = DropScene::planned(12, 25.0, "min_images_per_arc = 8\nbounces = 2").scene();
    let p = plan(&scene).unwrap();
    assert!(p.flashes <= 12 && p.rate_hz <= 25.0);
    assert!(!p.meets_wishes);
    assert!(
        p.warnings.iter().any(|w| w.contains("wishes.")),
        "{:?}",
        p.warnings
    );
    // A generous unit meets the same wishes within its limits.
    let scene = DropScene::planned(400, 80.0, "min_images_per_arc = 8\nbounces = 2").scene();
    let p = plan(&scene).unwrap();
    assert!(p.meets_wishes, "{:?}", p.warnings);
    assert!(p.flashes <= 400 && p.rate_hz <= 80.0);
}

#[test]
fn every_plan_in_the_flicker_band_carries_the_caution() {
    let p = plan(&DropScene::planned(200, 60.0, "bounces = 1").scene()).unwrap();
    assert!((3.0..=60.0).contains(&p.rate_hz));
    assert_eq!(p.caution.as_deref(), Some(CAUTION));
    assert!(p.text().contains("photosensitive epilepsy"));
}

#[test]
fn the_preview_is_rendered_with_the_planned_settings() {
    let scene = DropScene::planned(200, 60.0, "bounces = 1").scene();
    let p = plan(&scene).unwrap();
    let photo = synth::render(&p.apply(&scene));
    assert_eq!(photo.truth.flashes.len(), p.flashes);
    assert_eq!(photo.truth.rate_hz, p.rate_hz);
    assert!((photo.truth.flashes[0].t_s - p.first_flash_s).abs() < 1e-12);
}

#[test]
fn a_scene_without_a_flash_unit_is_refused() {
    let err = plan(&Scene::demo()).unwrap_err();
    assert!(err.to_string().contains("[flash_unit]"));
}
