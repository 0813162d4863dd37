//! Path ordering checks against a brute-force linear scan and against rendered ground truth.

mod common;

use beadline::detect::{Spot, SpotSource};
use beadline::synth::{self, FlashTruth, scene::Scene};
use beadline::track::{PathOptions, PathResult, PixelPoint, SpotTree, StrayReason, order_path};
use common::DropScene;
use rand::seq::SliceRandom;
use rand::{RngExt, SeedableRng};
use rand_chacha::ChaCha8Rng;

/// Truth flashes inside the frame, in time order.
fn truth_flashes(scene: &Scene) -> Vec<FlashTruth> {
    let photo = synth::render(scene);
    photo
        .truth
        .flashes
        .into_iter()
        .filter(|f| f.in_frame)
        .collect()
}

/// Spots at the truth centres with seeded jitter of +-0.05 px, shuffled; returns the spots and
/// the truth flash index of each.
fn shuffled_spots(flashes: &[FlashTruth], seed: u64) -> (Vec<Spot>, Vec<usize>) {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let mut pairs: Vec<(Spot, usize)> = flashes
        .iter()
        .map(|f| {
            let spot = Spot {
                x_px: f.x_px + (rng.random::<f64>() - 0.5) * 0.1,
                y_px: f.y_px + (rng.random::<f64>() - 0.5) * 0.1,
                r_px: f.r_px,
                sigma_px: 0.05,
                score: 1.0,
                source: SpotSource::Detected,
            };
            (spot, f.n)
        })
        .collect();
    pairs.shuffle(&mut rng);
    pairs.into_iter().unzip()
}

/// Assert that the best path lists every truth flash in order, with n = truth n - first truth n,
/// and return how many points it has.
fn assert_truth_order(result: &PathResult, truth_n: &[Option<usize>]) -> usize {
    let path = &result.paths[0];
    let expected: Vec<usize> = {
        let mut v: Vec<usize> = truth_n.iter().flatten().copied().collect();
        v.sort_unstable();
        v
    };
    let first = expected[0];
    let got: Vec<(usize, Option<usize>)> = path
        .points
        .iter()
        .map(|p| (p.n, truth_n[p.spot_index]))
        .collect();
    let want: Vec<(usize, Option<usize>)> =
        expected.iter().map(|&n| (n - first, Some(n))).collect();
    assert_eq!(got, want, "recovered (n, truth n) pairs");
    path.points.len()
}

#[test]
fn kd_tree_queries_match_a_linear_scan() {
    // Source of truth: a brute-force linear scan over all points, sorted by (distance, index).
    let mut rng = ChaCha8Rng::seed_from_u64(4);
    let spots: Vec<Spot> = (0..10_000)
        .map(|_| Spot {
            x_px: rng.random::<f64>() * 1600.0,
            y_px: rng.random::<f64>() * 900.0,
            r_px: 10.0,
            sigma_px: 0.1,
            score: 1.0,
            source: SpotSource::Detected,
        })
        .collect();
    let tree = SpotTree::new(&spots);
    let scan = |x: f64, y: f64| {
        let mut all: Vec<(f64, usize)> = spots
            .iter()
            .enumerate()
            .map(|(i, s)| ((s.x_px - x).hypot(s.y_px - y), i))
            .collect();
        all.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
        all
    };
    for _ in 0..300 {
        let x = rng.random::<f64>() * 1700.0 - 50.0;
        let y = rng.random::<f64>() * 1000.0 - 50.0;
        let radius_px = rng.random::<f64>() * 60.0;
        let all = scan(x, y);
        let within: Vec<usize> = all
            .iter()
            .filter(|(d, _)| *d <= radius_px)
            .map(|(_, i)| *i)
            .collect();
        let got: Vec<usize> = tree
            .within(x, y, radius_px, usize::MAX)
            .iter()
            .map(|nb| nb.index)
            .collect();
        assert_eq!(got, within);
        let capped: Vec<usize> = tree
            .within(x, y, radius_px, 4)
            .iter()
            .map(|nb| nb.index)
            .collect();
        assert_eq!(capped, within.iter().take(4).copied().collect::<Vec<_>>());
        let nearest = tree.nearest(x, y, 7);
        for (nb, (d, i)) in nearest.iter().zip(&all) {
            assert_eq!(nb.index, *i);
            assert!((nb.distance_px - d).abs() < 1e-9);
        }
        assert_eq!(nearest.len(), 7);
    }
    assert!(tree.within(f64::NAN, 0.0, 10.0, 5).is_empty());
    assert!(tree.within(0.0, 0.0, f64::NAN, 5).is_empty());
}

#[test]
fn demo_path_is_recovered_in_order() {
    // Source of truth: the renderer's exact flash positions (incline start with overlapping
    // images, then flight and bounces).
    let flashes = truth_flashes(&Scene::demo());
    let (spots, truth_n) = shuffled_spots(&flashes, 1);
    let result = order_path(&spots, &PathOptions::default());
    let truth: Vec<Option<usize>> = truth_n.iter().map(|&n| Some(n)).collect();
    let found = assert_truth_order(&result, &truth);
    assert_eq!(found, flashes.len());
    assert!(result.paths[0].missing.is_empty());
    assert!(result.strays.is_empty());
    assert_eq!(result.paths.len(), 1);
}

#[test]
fn images_that_grow_along_the_path_stay_on_one_path() {
    // Source of truth: the renderer's exact flash positions of the demo. Under a camera tilted
    // 30 degrees the images grow along the path (the sweep's seed 45: 4.0 px at the top of the
    // incline, 7.8 px at the last bounce), far more than the radius tolerance from end to end
    // but a few percent from one image to the next.
    let flashes = truth_flashes(&Scene::demo());
    let (mut spots, truth_n) = shuffled_spots(&flashes, 3);
    let last_n = flashes.last().unwrap().n as f64;
    for (s, &n) in spots.iter_mut().zip(&truth_n) {
        s.r_px *= 0.7 + 0.6 * n as f64 / last_n;
    }
    let result = order_path(&spots, &PathOptions::default());
    let truth: Vec<Option<usize>> = truth_n.iter().map(|&n| Some(n)).collect();
    assert_eq!(assert_truth_order(&result, &truth), flashes.len());
    assert_eq!(result.paths.len(), 1);
    assert!(result.strays.is_empty());
}

#[test]
fn the_arc_after_a_bounce_keeps_the_flash_count() {
    // Source of truth: the renderer's exact flash positions of the sweep's shot 188 (a throw at
    // 1.42 m/s with air drag, 38 Hz, 29 px ball, 33 images). Walked backward across the first
    // bounce, the two images after it left the flash count open and the path took every other
    // flash for the whole first arc (n 0, 2, ..., 24; a quarter of gravity per step squared).
    // The arc's third image must now give it the gravity of the arc before the bounce.
    let path = std::path::Path::new("tests/data/throw_drag_fast.toml");
    let scene = Scene::from_toml(&std::fs::read_to_string(path).unwrap(), path).unwrap();
    let flashes = truth_flashes(&scene);
    let (spots, truth_n) = shuffled_spots(&flashes, 4);
    let result = order_path(&spots, &PathOptions::default());
    let truth: Vec<Option<usize>> = truth_n.iter().map(|&n| Some(n)).collect();
    assert_eq!(assert_truth_order(&result, &truth), flashes.len());
    assert!(result.paths[0].missing.is_empty());
}

#[test]
fn drop_test_with_bounces_is_recovered_in_order() {
    // Source of truth: the renderer's exact flash positions for a drop with a slow sideways
    // drift, so the arcs come down close to where they went up.
    let scene = DropScene::drifting().scene();
    let flashes = truth_flashes(&scene);
    let photo = synth::render(&scene);
    assert!(photo.truth.bounces.len() >= 3);
    let (spots, truth_n) = shuffled_spots(&flashes, 2);
    let result = order_path(&spots, &PathOptions::default());
    let truth: Vec<Option<usize>> = truth_n.iter().map(|&n| Some(n)).collect();
    assert_eq!(assert_truth_order(&result, &truth), flashes.len());
    assert!(result.strays.is_empty());
}

#[test]
fn a_deleted_image_is_listed_missing_and_later_flashes_keep_their_index() {
    // Source of truth: the renderer's flashes with one removed in flight and one on the incline.
    for scene in [Scene::demo(), DropScene::drifting().scene()] {
        let all = truth_flashes(&scene);
        for removed in [5usize, 20] {
            let flashes: Vec<FlashTruth> = all.iter().filter(|f| f.n != removed).cloned().collect();
            let (spots, truth_n) = shuffled_spots(&flashes, 3 + removed as u64);
            let result = order_path(&spots, &PathOptions::default());
            let truth: Vec<Option<usize>> = truth_n.iter().map(|&n| Some(n)).collect();
            assert_truth_order(&result, &truth);
            assert_eq!(result.paths[0].missing, vec![removed - all[0].n]);
        }
    }
}

#[test]
fn distractors_are_strays() {
    // Source of truth: the renderer's flashes plus spots placed by the test away from the path
    // and one of another radius between two images.
    let flashes = truth_flashes(&Scene::demo());
    let (mut spots, truth_n) = shuffled_spots(&flashes, 5);
    let mut truth: Vec<Option<usize>> = truth_n.iter().map(|&n| Some(n)).collect();
    let r_px = flashes[0].r_px;
    let mut rng = ChaCha8Rng::seed_from_u64(6);
    let mut added = 0;
    while added < 8 {
        let x_px = rng.random::<f64>() * 1600.0;
        let y_px = rng.random::<f64>() * 900.0;
        let clear = flashes
            .iter()
            .all(|f| (f.x_px - x_px).hypot(f.y_px - y_px) > 6.0 * r_px);
        if clear {
            spots.push(Spot {
                x_px,
                y_px,
                r_px: r_px * (0.95 + 0.1 * rng.random::<f64>()),
                sigma_px: 0.05,
                score: 1.0,
                source: SpotSource::Detected,
            });
            truth.push(None);
            added += 1;
        }
    }
    let (a, b) = (&flashes[15], &flashes[16]);
    spots.push(Spot {
        x_px: (a.x_px + b.x_px) / 2.0,
        y_px: (a.y_px + b.y_px) / 2.0,
        r_px: 2.0 * r_px,
        sigma_px: 0.05,
        score: 1.0,
        source: SpotSource::Detected,
    });
    truth.push(None);
    let result = order_path(&spots, &PathOptions::default());
    assert_eq!(assert_truth_order(&result, &truth), flashes.len());
    assert_eq!(result.paths.len(), 1);
    let stray_indices: Vec<usize> = result.strays.iter().map(|s| s.spot_index).collect();
    let expected: Vec<usize> = (flashes.len()..spots.len()).collect();
    assert_eq!(stray_indices, expected);
    let last = result.strays.last().unwrap();
    assert_eq!(last.reason, StrayReason::RadiusDiffers);
    for stray in &result.strays[..result.strays.len() - 1] {
        assert!(matches!(
            stray.reason,
            StrayReason::OffPath | StrayReason::TooFewPoints
        ));
    }
}

#[test]
fn a_start_point_sets_the_direction() {
    // Source of truth: the renderer's flashes; the start given at the last image reverses n.
    let flashes = truth_flashes(&Scene::demo());
    let (spots, truth_n) = shuffled_spots(&flashes, 7);
    let last = flashes.last().unwrap();
    let options = PathOptions {
        start: Some(PixelPoint {
            x_px: last.x_px + 3.0,
            y_px: last.y_px,
        }),
        ..PathOptions::default()
    };
    let result = order_path(&spots, &options);
    let path = &result.paths[0];
    assert_eq!(path.points.len(), flashes.len());
    for p in &path.points {
        assert_eq!(p.n, last.n - truth_n[p.spot_index]);
    }
}

#[test]
fn small_and_broken_inputs_do_not_panic() {
    // Source of truth: the documented contract (every spot is on a path or a stray, once).
    let options = PathOptions::default();
    let empty = order_path(&[], &options);
    assert!(empty.paths.is_empty() && empty.strays.is_empty());
    let spot = |x_px: f64, y_px: f64| Spot {
        x_px,
        y_px,
        r_px: 10.0,
        sigma_px: 0.1,
        score: 1.0,
        source: SpotSource::Detected,
    };
    let one = order_path(&[spot(5.0, 5.0)], &options);
    assert!(one.paths.is_empty());
    assert_eq!(one.strays.len(), 1);
    assert_eq!(one.strays[0].reason, StrayReason::TooFewPoints);
    let two = order_path(&[spot(5.0, 5.0), spot(25.0, 5.0)], &options);
    assert!(two.paths.is_empty());
    assert_eq!(two.strays.len(), 2);
    let broken = [
        spot(f64::NAN, 5.0),
        spot(5.0, f64::INFINITY),
        Spot {
            r_px: -1.0,
            ..spot(1.0, 1.0)
        },
        Spot {
            sigma_px: f64::NAN,
            ..spot(1.0, 1.0)
        },
    ];
    let result = order_path(&broken, &options);
    assert!(result.paths.is_empty());
    assert!(
        result
            .strays
            .iter()
            .all(|s| s.reason == StrayReason::Invalid)
    );
    assert_eq!(result.strays.len(), 4);
    let odd = PathOptions {
        gate_radii: f64::NAN,
        radius_tolerance: -1.0,
        min_restitution: f64::INFINITY,
        max_misses: usize::MAX,
        min_points: 0,
        max_paths: usize::MAX,
        start: Some(PixelPoint {
            x_px: f64::NAN,
            y_px: 0.0,
        }),
        fall_px_per_flash2: Some(f64::NEG_INFINITY),
    };
    let mut rng = ChaCha8Rng::seed_from_u64(8);
    let mut spots: Vec<Spot> = (0..10_000)
        .map(|_| Spot {
            x_px: rng.random::<f64>() * 1600.0,
            y_px: rng.random::<f64>() * 900.0,
            r_px: 5.0 + 10.0 * rng.random::<f64>(),
            sigma_px: 0.1,
            score: 1.0,
            source: SpotSource::Detected,
        })
        .collect();
    spots[17].x_px = f64::NAN;
    for opts in [&options, &odd] {
        let result = order_path(&spots, opts);
        let mut seen = vec![0usize; spots.len()];
        for p in result.paths.iter().flat_map(|p| &p.points) {
            seen[p.spot_index] += 1;
        }
        for s in &result.strays {
            seen[s.spot_index] += 1;
        }
        assert!(seen.iter().all(|&c| c == 1));
        assert_eq!(
            result
                .strays
                .iter()
                .find(|s| s.spot_index == 17)
                .unwrap()
                .reason,
            StrayReason::Invalid
        );
    }
}

#[test]
fn json_uses_the_documented_field_names() {
    // Source of truth: the field names promised to JSON consumers.
    let flashes = truth_flashes(&Scene::demo());
    let (spots, _) = shuffled_spots(&flashes, 9);
    let result = order_path(&spots, &PathOptions::default());
    let json = serde_json::to_value(&result).unwrap();
    let point = &json["paths"][0]["points"][0];
    for key in ["n", "spot_index", "x_px", "y_px", "r_px", "sigma_px"] {
        assert!(point.get(key).is_some(), "{key}");
    }
    assert!(json["paths"][0]["missing"].is_array());
    assert!(json["strays"].is_array());
}

#[test]
fn two_balls_give_two_paths() {
    // Source of truth: the renderer's flashes of two scenes laid over each other (the drop
    // moved right so that its arcs cross the demo's last arcs).
    let demo = truth_flashes(&Scene::demo());
    let mut drop = truth_flashes(&DropScene::drifting().scene());
    for f in &mut drop {
        f.x_px += 700.0;
    }
    let (mut spots, demo_n) = shuffled_spots(&demo, 10);
    let (drop_spots, drop_n) = shuffled_spots(&drop, 11);
    spots.extend(drop_spots);
    let result = order_path(&spots, &PathOptions::default());
    assert_eq!(result.paths.len(), 2);
    assert!(result.strays.is_empty());
    let demo_truth: Vec<Option<usize>> = demo_n
        .iter()
        .map(|&n| Some(n))
        .chain(drop_n.iter().map(|_| None))
        .collect();
    let drop_truth: Vec<Option<usize>> = demo_n
        .iter()
        .map(|_| None)
        .chain(drop_n.iter().map(|&n| Some(n)))
        .collect();
    // Paths come longest first; tell them apart by whose spots they hold.
    let demo_first = result.paths[0].points[0].spot_index < demo.len();
    let (first, second) = if demo_first {
        (demo_truth, drop_truth)
    } else {
        (drop_truth, demo_truth)
    };
    assert!(result.paths[0].points.len() >= result.paths[1].points.len());
    assert_truth_order(&result, &first);
    let rest = PathResult {
        paths: result.paths[1..].to_vec(),
        strays: Vec::new(),
    };
    assert_truth_order(&rest, &second);
}

#[test]
fn the_path_text_counts_missing_flashes_in_words_as_measure_does() {
    use beadline::report::path::missing_words;
    assert_eq!(missing_words(&[]), "0 flashes missing");
    assert_eq!(missing_words(&[4]), "1 flash missing (n 4)");
    assert_eq!(missing_words(&[4, 7]), "2 flashes missing (n 4, 7)");
    let dir = common::tempdir();
    common::render_to(&common::small_scene(), &dir.path().join("small.png"));
    let out = common::beadline(&["path", "small.png"], dir.path());
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let text = String::from_utf8_lossy(&out.stdout);
    let first = text.lines().next().unwrap();
    assert!(
        first.contains(", 0 flashes missing, ") && !first.contains('['),
        "{first}"
    );
}
