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

use beadline::detect::reject::{Reason, Rejected};
use beadline::draw::overlay::{
    DASH_RAD, MAGENTA, RED, YELLOW, dash_on, label_origin, label_scale, measure_canvas,
};
use beadline::pipeline::measure_photo;
use common::{ball_settings, flash_at, render_to, small_scene};

/// The small demo with flash `gone` painted over by empty background from the photo's top rows.
fn demo_without_flash(dir: &std::path::Path, gone: usize) -> (std::path::PathBuf, [f64; 3]) {
    let path = dir.join("gap.png");
    let truth = render_to(&small_scene(), &path);
    let f = truth.flashes.iter().find(|f| f.n == gone).unwrap();
    let mut img = image::open(&path).unwrap().to_rgb16();
    let half = (1.8 * f.r_px).ceil() as i64;
    let (cx, cy) = (f.x_px.round() as i64, f.y_px.round() as i64);
    for dy in -half..=half {
        for dx in -half..=half {
            let from = *img.get_pixel((cx + dx) as u32, (half + 2 + dy) as u32);
            img.put_pixel((cx + dx) as u32, (cy + dy) as u32, from);
        }
    }
    img.save(&path).unwrap();
    (path, [f.x_px, f.y_px, f.r_px])
}

#[test]
fn the_measure_overlay_numbers_by_flash_and_marks_missing_flashes_and_rejected_candidates() {
    let dir = common::tempdir();
    let truth = render_to(&small_scene(), &dir.path().join("whole.png"));
    let (photo, [gx, gy, gr]) = demo_without_flash(dir.path(), 11);
    let mut m = measure_photo(&photo, &ball_settings(25.0, 0.04)).unwrap();
    let doc = &m.doc;
    // The path counts flashes from its first image: flash 11 of the truth is missing.
    let first = flash_at(&truth, doc.path[0].x_px, doc.path[0].y_px).n;
    assert_eq!(
        doc.missing.iter().map(|n| n + first).collect::<Vec<_>>(),
        [11]
    );
    let missing_n = doc.missing[0];
    // A rejected candidate the test adds where nothing else is drawn.
    let (rx, ry) = (700.0, 60.0);
    m.spots.rejected.push(Rejected {
        x_px: rx,
        y_px: ry,
        r_px: gr,
        score: 0.2,
        sigma_px: 0.1,
        reason: Reason::Radius,
    });
    let c = measure_canvas(&photo, &m).unwrap();
    let px = |x: f64, y: f64| c.image.get_pixel(x.round() as u32, y.round() as u32).0;
    // The missing flash's true place: its ring is magenta on the dashes (within a pixel: the
    // place is predicted from the flight's motion) and not in the middle of the gaps.
    let near = |x: f64, y: f64, colour| {
        (-1..=1).any(|dy| (-1..=1).any(|dx| px(x + dx as f64, y + dy as f64) == colour))
    };
    let (mut dashes, mut dashes_hit, mut gaps, mut gaps_clear) = (0, 0, 0, 0);
    for k in 0..40 {
        let a = (k as f64 + 0.5) * DASH_RAD / 2.0;
        let (x, y) = (gx + gr * a.cos(), gy - gr * a.sin());
        if dash_on(a) {
            dashes += 1;
            dashes_hit += near(x, y, MAGENTA) as usize;
        } else {
            gaps += 1;
            gaps_clear += (px(x, y) != MAGENTA) as usize;
        }
    }
    assert!(
        dashes_hit * 10 >= dashes * 9,
        "{dashes_hit} of {dashes} dash points magenta"
    );
    assert!(
        gaps_clear * 10 >= gaps * 7,
        "{gaps_clear} of {gaps} gap points clear"
    );
    // Labels: the image after the gap carries its flash number, glyph for glyph (the magenta
    // label of the missing flash likewise).
    let scale = label_scale(doc.width_px, doc.height_px);
    let after = doc.path.iter().find(|p| p.n == missing_n + 1).unwrap();
    assert_label(
        &c,
        [after.x_px, after.y_px, after.r_px],
        scale,
        after.n,
        YELLOW,
    );
    assert_label(&c, [gx, gy, gr], scale, missing_n, MAGENTA);
    // The rejected candidate: a red x (its diagonals red, the straight arms not).
    for k in [-2.0, 2.0] {
        assert_eq!(px(rx + k, ry + k), RED);
        assert_eq!(px(rx + k, ry - k), RED);
        assert_ne!(px(rx + k, ry), RED);
    }
}

/// The label of the ball image at `at` is `n` in `colour`: inside the label's box, a pixel
/// has that colour exactly where the font puts a glyph pixel of `n` (a label within a pixel of
/// its place: the missing flash's place is predicted).
fn assert_label(c: &Canvas, at: [f64; 3], scale: u32, n: usize, colour: [u8; 3]) {
    let text = n.to_string();
    let (w, h) = (c.image.width() as usize, c.image.height() as usize);
    let best = (-1i32..=1)
        .flat_map(|dy| (-1i32..=1).map(move |dx| (dx, dy)))
        .map(|(dx, dy)| {
            let [x, y] = label_origin(at[0] + dx as f64, at[1] + dy as f64, at[2], scale);
            let mut expected = Canvas::from_luma(w, h, &vec![0.0; w * h]);
            expected.text(x, y, &text, scale, colour);
            let (x0, y0) = (x.round() as u32, y.round() as u32);
            let mut wrong = 0;
            for yy in y0..y0 + 5 * scale {
                for xx in x0..x0 + 4 * scale * text.len() as u32 {
                    let drawn = c.image.get_pixel(xx, yy).0 == colour;
                    let glyph = expected.image.get_pixel(xx, yy).0 == colour;
                    wrong += (drawn != glyph) as usize;
                }
            }
            wrong
        })
        .min()
        .unwrap();
    assert_eq!(best, 0, "label {text} not drawn as the font draws it");
}

#[test]
fn the_path_overlay_numbers_by_flash_and_the_spots_overlay_by_list_place() {
    use beadline::detect::{SpotOptions, find_spots};
    use beadline::draw::overlay::{path_overlay, spots_overlay};
    use beadline::image::load::{LoadOptions, load};
    use beadline::track::{PathOptions, order_path};
    let dir = common::tempdir();
    let (photo, _) = demo_without_flash(dir.path(), 11);
    let report = find_spots(
        &load(&photo, &LoadOptions::default()).unwrap(),
        None,
        &SpotOptions::default(),
        None,
    )
    .unwrap();
    let result = order_path(&report.spots, &PathOptions::default());
    let path = &result.paths[0];
    assert_eq!(path.missing.len(), 1, "{:?}", path.missing);
    let scale = label_scale(report.width_px, report.height_px);
    let out = dir.path().join("path.png");
    path_overlay(&photo, &report, &result, &out).unwrap();
    let c = Canvas::open(&out).unwrap();
    // Canvas::open dims the picture: compare against the dimmed colours.
    let dim = |c: [u8; 3]| c.map(|v| (v as f32 * 0.75) as u8);
    // Past the gap the spot list's place and the flash number differ; the label is the flash.
    let p = path
        .points
        .iter()
        .find(|p| p.n == path.missing[0] + 1)
        .unwrap();
    assert_ne!(p.spot_index, p.n, "a flash whose two numbers differ");
    assert_label(&c, [p.x_px, p.y_px, p.r_px], scale, p.n, dim(YELLOW));
    let out = dir.path().join("spots.png");
    spots_overlay(&photo, &report, &out).unwrap();
    let c = Canvas::open(&out).unwrap();
    let s = &report.spots[p.spot_index];
    let [x, y] = label_origin(s.x_px, s.y_px, s.r_px, scale);
    let mut expected = Canvas::from_luma(
        c.image.width() as usize,
        c.image.height() as usize,
        &vec![0.0; (c.image.width() * c.image.height()) as usize],
    );
    expected.text(x, y, &format!("s{}", p.spot_index), scale, dim(YELLOW));
    for (a, b) in expected.image.pixels().zip(c.image.pixels()) {
        if a.0 == dim(YELLOW) {
            assert_eq!(b.0, dim(YELLOW));
        }
    }
}
