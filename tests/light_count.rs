//! Light counting (issue 17, point 1): the number of ball images a group of touching spots
//! holds, from the light it adds in linear light, against the rendered truth. The renderer adds
//! every flash's light in linear light, as a long exposure does, so the truth count of a group is
//! the number of flashes whose image is centred inside one of the group's found images.

mod common;

use beadline::detect::{SpotOptions, SpotReport, find_spots_in_file};
use beadline::image::load::LoadOptions;
use beadline::synth::{Truth, scene::Scene};
use common::shoot;
use std::path::Path;

/// The flashes centred within a radius of one of the group's spots.
fn truth_count(report: &SpotReport, spots: &[usize], truth: &Truth) -> usize {
    truth
        .flashes
        .iter()
        .filter(|f| f.in_frame)
        .filter(|f| {
            spots.iter().any(|&i| {
                let s = &report.spots[i];
                (s.x_px - f.x_px).hypot(s.y_px - f.y_px) < f.r_px
            })
        })
        .count()
}

/// Render `scene` as `name`, find its spots; the report and the truth.
fn spots_of(scene: &Scene, name: &str) -> (SpotReport, Truth) {
    let dir = common::tempdir();
    let (photo, truth) = shoot(scene, dir.path(), name);
    let report = find_spots_in_file(
        &photo,
        None,
        &LoadOptions::default(),
        &SpotOptions::default(),
    )
    .expect("spots");
    (report, truth)
}

/// Every group with a count that is not marked uncertain holds the truth's number of images;
/// returns the number of such groups holding two or more images.
fn check_counts(report: &SpotReport, truth: &Truth) -> usize {
    let mut merged = 0;
    for g in &report.light_groups {
        let Some(images) = g.images.filter(|_| !g.uncertain) else {
            continue;
        };
        let expected = truth_count(report, &g.spots, truth);
        assert_eq!(
            images,
            expected,
            "group at ({:.0}, {:.0}) of {} spots: light of {:?} images",
            g.x_px,
            g.y_px,
            g.spots.len(),
            g.images_by_light
        );
        merged += usize::from(expected >= 2);
    }
    merged
}

#[test]
fn the_demo_groups_hold_the_images_their_light_says() {
    let (report, truth) = spots_of(&Scene::demo(), "demo.png");
    let merged = check_counts(&report, &truth);
    assert!(merged >= 4, "{merged} groups of two or more images counted");
    // Every spot is in one group.
    let mut all: Vec<usize> = report
        .light_groups
        .iter()
        .flat_map(|g| g.spots.clone())
        .collect();
    all.sort_unstable();
    assert_eq!(all, (0..report.spots.len()).collect::<Vec<_>>());
}

#[test]
fn merged_images_no_spot_was_fitted_to_are_counted_by_their_light() {
    // Sweep shot 80 (tests/data/drop_rise_over_fall.toml, JPEG quality 89 as the sweep saved
    // it): where the rise passes over the fall, six spots were fitted to the light of eight
    // images.
    let path = Path::new("tests/data/drop_rise_over_fall.toml");
    let scene = Scene::from_toml(&std::fs::read_to_string(path).unwrap(), path).unwrap();
    let (report, truth) = spots_of(&scene, "drop.jpg");
    check_counts(&report, &truth);
    let more = report
        .light_groups
        .iter()
        .filter(|g| !g.uncertain && g.images.is_some_and(|n| n > g.spots.len()))
        .count();
    assert!(
        more >= 1,
        "a group whose light holds more images than its spots"
    );
}
