//! Pictures are drawn on the photo as `load` reads it: same orientation, same limits.

mod common;

use beadline::draw::overlay::Canvas;
use beadline::image::load::{LoadOptions, load};
use common::turned_jpeg;

#[test]
fn an_overlay_of_an_exif_rotated_photo_is_drawn_upright() {
    let dir = tempfile::tempdir().unwrap();
    let turned = turned_jpeg(dir.path());
    let photo = load(&turned, &LoadOptions::default()).unwrap();
    let canvas = Canvas::open(&turned).unwrap();
    // The canvas has the loaded photo's size (20 x 40 upright, not 40 x 20 as stored)...
    assert_eq!(
        (
            canvas.image.width() as usize,
            canvas.image.height() as usize
        ),
        (photo.width, photo.height)
    );
    assert_eq!((photo.width, photo.height), (20, 40));
    // ...and its pixels: the stored left band is the top band of both, dimmed to 0.75 on the
    // canvas (250 x 0.75 = 187, JPEG rounding aside).
    let top = canvas.image.get_pixel(10, 2)[0] as f64;
    let below = canvas.image.get_pixel(10, 30)[0] as f64;
    assert!((top - 187.0).abs() < 8.0 && below < 20.0, "{top} {below}");
    assert!(photo.at(10, 2) > 0.8 && photo.at(10, 30) < 0.2);
}
