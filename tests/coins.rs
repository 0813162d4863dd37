//! A real photograph of round objects from an open dataset: scikit-image's coins photograph
//! (testimages/coins.png, copied unchanged from the scikit-image 0.26.0 wheel; Greek coins from
//! Pompeii, Brooklyn Museum, no known copyright restrictions; see testimages/coins.README.md).
//! The 24 reference centres come from a watershed + regionprops measurement with scikit-image
//! (bench/coins_truth.py), not from a published table: they are good to about 3 px, the
//! tolerance their file states.

use beadline::detect::{SpotOptions, find_spots};
use beadline::image::load::{LoadOptions, load};
use std::path::Path;

#[test]
fn all_24_coins_are_found_and_nothing_else() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let photo = load(&root.join("testimages/coins.png"), &LoadOptions::default()).unwrap();
    let truth: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(root.join("testimages/coins_truth.json")).unwrap(),
    )
    .unwrap();
    let coins = truth["coins"].as_array().unwrap();
    assert_eq!(coins.len(), 24);
    let tolerance_px = truth["tolerance_px"].as_f64().unwrap_or(3.0);
    // Coins are many objects of different sizes (radii 18-32 px), not the images of one ball:
    // say so, give their radius range, and accept their worn, low-contrast rims.
    let mut options = SpotOptions {
        radius_px: Some((16.0, 34.0)),
        one_radius: false,
        max_rms_px: 1.0,
        faint_fraction: 0.2,
        ..SpotOptions::default()
    };
    options.background.polarity = Some(beadline::core::light::Polarity::Bright);
    let report = find_spots(&photo, None, &options, None).unwrap();
    let mut used = vec![false; report.spots.len()];
    for c in coins {
        let (x, y) = (c["x_px"].as_f64().unwrap(), c["y_px"].as_f64().unwrap());
        let hit = report
            .spots
            .iter()
            .enumerate()
            .filter(|(i, s)| !used[*i] && (s.x_px - x).hypot(s.y_px - y) < tolerance_px)
            .map(|(i, _)| i)
            .next();
        let i = hit.unwrap_or_else(|| panic!("coin at {x}, {y} not found"));
        used[i] = true;
    }
    assert_eq!(report.spots.len(), 24, "extra spots: {:?}", report.spots);
}
