//! A real strobe photograph (testimages/bouncing-ball-25hz-960.jpg, CC BY-SA 3.0, provenance in
//! its README): no exact truth, so the test checks what can be checked.

mod common;

use beadline::detect::SpotSource;
use beadline::physics::PhaseKind;
use beadline::physics::checks::CheckOutcome;
use beadline::pipeline::{MeasureSettings, measure_photo};
use std::path::Path;

#[test]
fn a_ball_moving_in_depth_is_not_measured_silently() {
    // By eye the ball's image shrinks from about 42 px to about 30 px radius from left to right
    // (testimages README): motion in depth. Its radii also swell near the bounces (blur) and
    // shrink at the merged apexes, so they do not follow a steady motion in depth and the
    // measurement must flag it: the radius check fails, and the photo is doubtful.
    let photo = Path::new(env!("CARGO_MANIFEST_DIR")).join("testimages/bouncing-ball-25hz-960.jpg");
    let settings = MeasureSettings {
        rate_hz: Some(25.0),
        ..Default::default()
    };
    let m = measure_photo(&photo, &settings).expect("the photo is measured");
    let checks = &m.doc.measurement.checks;
    let phases = &m.doc.measurement.phases;
    let trend = checks
        .iter()
        .find(|c| c.check == "radius_trend")
        .expect("a radius-trend check");
    assert_eq!(trend.outcome, CheckOutcome::Fail, "{trend:?}");
    let shrink = -trend.value.unwrap();
    assert!((0.15..0.40).contains(&shrink), "shrinks by {shrink}");
    assert!(m.doc.measurement.doubtful(), "{checks:#?}");
    // The arcs do not follow parabolas in the image (the ball leaves the plane): the arc
    // check fails and names the motion out of the plane as the likeliest cause (the
    // real-balls issue: flagged with the cause named).
    let arc = checks
        .iter()
        .find(|c| c.check == "arc_fit" && c.outcome == CheckOutcome::Fail)
        .expect("a failed arc check");
    assert!(arc.detail.contains("does not stay in one plane"), "{arc:?}");
    // The last arc's apex: by eye its images merge, and the horizontal steps there are
    // 20-24 px a flash (labelled from the overlay, testimages README), so the 69 px from the
    // image at x 708 px to the one at x 777 px holds three flashes, not two. Every step of
    // that arc, per flash counted, lies within a quarter of the mean of its neighbouring steps
    // (with two flashes in that gap, the step there is 34.5 px between steps of 22-24 px,
    // about 50 % over them; the steps grow smoothly from 22 to 32 px towards the arc's end as
    // the ball comes nearer).
    let second = phases
        .iter()
        .rfind(|p| p.kind == PhaseKind::Flight)
        .expect("a last arc");
    let arc: Vec<_> = m
        .doc
        .path
        .iter()
        .filter(|p| p.n >= second.first_n && p.n <= second.last_n)
        .collect();
    let steps: Vec<f64> = arc
        .windows(2)
        .map(|w| (w[1].x_px - w[0].x_px) / (w[1].n - w[0].n) as f64)
        .collect();
    assert!(steps.len() >= 8, "x steps per flash {steps:?}");
    for (i, s) in steps.iter().enumerate() {
        let around: Vec<f64> = [i.checked_sub(1), Some(i + 1)]
            .into_iter()
            .flatten()
            .filter_map(|j| steps.get(j).copied())
            .collect();
        let mean = around.iter().sum::<f64>() / around.len() as f64;
        assert!(
            (s / mean - 1.0).abs() < 0.25,
            "step {i} of {steps:?} against its neighbours' {mean:.1} px"
        );
    }
    // About 30 images by eye (testimages README), the last a faint one at about (887, 539) px.
    let path = &m.doc.path;
    assert!(path.len() >= 30, "{} images on the path", path.len());
    let last = path.last().expect("a path");
    assert!(
        (last.x_px - 887.0).hypot(last.y_px - 539.0) < 3.0,
        "the last image at ({:.1}, {:.1}) px",
        last.x_px,
        last.y_px
    );
    // Its first images, falling onto the floor and rising from it, are two phases of flight,
    // not a roll on the floor (the contact lies between the two images whose accelerations
    // jump): no floor phase.
    assert!(
        phases.iter().all(|p| p.kind != PhaseKind::Floor),
        "{phases:?}"
    );
    // The shaded sphere does not describe this seamed, blurred ball: its fits scatter 1.6 px
    // about the edge fits, 5.6 times their sigmas, so none is used and no image's sigma takes
    // that scatter (it gave most images 1.75 px before).
    // The detected images, that is: the merged apex images found along the motion carry the
    // larger sigmas of images half hidden by their neighbours (0.77 and 0.82 px).
    let sigmas: Vec<f64> = m
        .doc
        .path
        .iter()
        .filter(|p| p.source == SpotSource::Detected)
        .map(|p| p.sigma_px)
        .collect();
    assert!(sigmas.iter().all(|s| *s < 0.5), "{sigmas:?}");
    let out = common::beadline(
        &["measure", photo.to_str().unwrap(), "--rate", "25"],
        Path::new(env!("CARGO_MANIFEST_DIR")),
    );
    assert_eq!(out.status.code(), Some(4), "{out:?}");
}

/// The real photo changed as a camera or a file chain might change it (our own choice of
/// changes): moved by a pixel, cropped at its far edges, mirrored, saved again as JPEG at
/// quality 90 and 75, made 10 % darker, and given noise of 2 grey levels.
fn changed_copies(photo: &Path, dir: &Path) -> Vec<std::path::PathBuf> {
    let rgb = image::open(photo).expect("the photo decodes").to_rgb8();
    let (w, h) = rgb.dimensions();
    let crop = |x0: u32, y0: u32, x1: u32, y1: u32| {
        image::imageops::crop_imm(&rgb, x0, y0, x1 - x0, y1 - y0).to_image()
    };
    let mut scaled = rgb.clone();
    scaled
        .pixels_mut()
        .for_each(|p| p.0 = p.0.map(|v| (v as f64 * 0.9).round() as u8));
    // Noise: sums of four uniform numbers (xorshift64*), about normal, sigma 2 grey levels.
    let mut state = 0x9e37_79b9_7f4a_7c15u64;
    let mut uniform = move || {
        state ^= state >> 12;
        state ^= state << 25;
        state ^= state >> 27;
        (state.wrapping_mul(0x2545_f491_4f6c_dd1d) >> 11) as f64 / (1u64 << 53) as f64
    };
    let mut noisy = rgb.clone();
    for p in noisy.pixels_mut() {
        for v in p.0.iter_mut() {
            let z = (0..4).map(|_| uniform()).sum::<f64>() - 2.0;
            // Four uniforms have a variance of 1/3: scaled to sigma 2.
            *v = (*v as f64 + z * 2.0 * 3f64.sqrt())
                .round()
                .clamp(0.0, 255.0) as u8;
        }
    }
    let mut out = Vec::new();
    let mut save = |name: &str, img: &image::RgbImage| {
        let path = dir.join(name);
        img.save(&path).expect("the copy is written");
        out.push(path);
    };
    save("moved.png", &crop(1, 1, w, h));
    save("cropped.png", &crop(0, 0, w - 3, h - 2));
    save("mirrored.png", &image::imageops::flip_horizontal(&rgb));
    save("darker.png", &scaled);
    save("noisy.png", &noisy);
    for quality in [90u8, 75] {
        let path = dir.join(format!("q{quality}.jpg"));
        let file = std::fs::File::create(&path).expect("the copy is written");
        image::codecs::jpeg::JpegEncoder::new_with_quality(file, quality)
            .encode_image(&rgb)
            .expect("the copy encodes");
        out.push(path);
    }
    out
}

#[test]
fn small_changes_to_the_real_photo_keep_its_restitution_or_flag_it() {
    // Never silently wrong on a real photo: the ball's restitution measured on copies changed
    // as a camera or a file chain might change them lies within 3 sigma (the two sigmas in
    // quadrature) of the photo's own, unless the copy's restitution check does not pass.
    // Measured against the photo's 0.868 +- 0.010: mirrored 0.857 +- 0.011, JPEG 90
    // 0.874 +- 0.010, JPEG 75 0.870 +- 0.010 (the check passed); moved 0.909, cropped 1.008,
    // darker 0.920, noisy 0.913 (failed). This blurred, merged, out-of-plane path turns on
    // single images at the second arc's apex, so the number moves with a grey level here and
    // there: the check must say so. (Before the shaded fits' outliers were counted, JPEG 90
    // gave 0.925 and the darker copy lost 6 images: their overlapping images were moved by a
    // pull the shaded fits did not agree on.)
    let photo = Path::new(env!("CARGO_MANIFEST_DIR")).join("testimages/bouncing-ball-25hz-960.jpg");
    let settings = MeasureSettings {
        rate_hz: Some(25.0),
        ..Default::default()
    };
    let restitution = |path: &Path| {
        let m = measure_photo(path, &settings).ok()?;
        let b = m.doc.measurement.bounces.first()?;
        let agreement = m
            .doc
            .measurement
            .checks
            .iter()
            .find(|c| c.check == "restitution_agreement")
            .map(|c| c.outcome);
        Some((b.restitution, b.restitution_sigma, agreement))
    };
    let (e0, sigma0, _) = restitution(&photo).expect("the photo's restitution");
    let dir = common::tempdir();
    let mut compared = 0;
    for copy in changed_copies(&photo, dir.path()) {
        let Some((e, sigma, agreement)) = restitution(&copy) else {
            continue;
        };
        if agreement == Some(CheckOutcome::Pass) {
            compared += 1;
            assert!(
                (e - e0).abs() <= 3.0 * sigma.hypot(sigma0),
                "{}: e = {e:.4} +- {sigma:.4} against {e0:.4} +- {sigma0:.4}, unflagged",
                copy.display()
            );
        }
    }
    assert!(
        compared >= 3,
        "{compared} copies with an unflagged restitution"
    );
}
