//! Pictures are drawn on the photo as `load` reads it: same orientation, same limits.

use beadline::draw::overlay::Canvas;
use beadline::image::load::{LoadOptions, load};

/// A 40 x 20 grey JPEG, bright in its 8 left columns, stored with EXIF Orientation 6 (EXIF 2.32,
/// CIPA DC-008-2019, tag 0x0112: the stored image must be turned 90 degrees clockwise to be
/// upright).
fn turned_jpeg(dir: &std::path::Path) -> std::path::PathBuf {
    let img = image::GrayImage::from_fn(40, 20, |x, _| image::Luma([if x < 8 { 250 } else { 10 }]));
    let plain = dir.join("plain.jpg");
    img.save(&plain).unwrap();
    let bytes = std::fs::read(&plain).unwrap();
    // APP1 "Exif": a big-endian TIFF header and one IFD entry (Orientation, SHORT, 1, value 6).
    let mut tiff = b"MM\0\x2a\0\0\0\x08".to_vec();
    tiff.extend_from_slice(&[
        0, 1, 0x01, 0x12, 0, 3, 0, 0, 0, 1, 0, 6, 0, 0, 0, 0, 0, 0, 0, 0,
    ]);
    let mut app1 = b"Exif\0\0".to_vec();
    app1.extend_from_slice(&tiff);
    let mut out = bytes[..2].to_vec();
    out.extend_from_slice(&[0xFF, 0xE1]);
    out.extend_from_slice(&((app1.len() + 2) as u16).to_be_bytes());
    out.extend_from_slice(&app1);
    out.extend_from_slice(&bytes[2..]);
    let turned = dir.join("turned.jpg");
    std::fs::write(&turned, &out).unwrap();
    turned
}

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
