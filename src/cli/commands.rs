//! What each command does with validated settings: run the library, write the documents and
//! pictures asked for.

use super::args::{Format, OutArgs};
use super::settings::Detect;
use anyhow::{Context, Result};
use beadline::core::numbers::fixed;
use beadline::detect;
use beadline::image::load::LoadOptions;
use beadline::synth::{self, scene::Scene};
use std::path::Path;
use std::process::ExitCode;

/// A document as text, JSON or CSV.
pub(crate) fn formatted<T: serde::Serialize>(
    format: Format,
    doc: &T,
    text: impl FnOnce() -> String,
    csv: impl FnOnce() -> std::io::Result<String>,
) -> Result<String> {
    Ok(match format {
        Format::Text => text(),
        Format::Json => serde_json::to_string_pretty(doc)? + "\n",
        Format::Csv => csv()?,
    })
}

/// Write `text` to the output file (atomically) or standard output.
pub(crate) fn emit(out: &OutArgs, text: &str) -> Result<()> {
    match &out.output {
        Some(p) => beadline::core::output::write_text(p, text)?,
        None => {
            use std::io::Write;
            let mut stdout = std::io::stdout().lock();
            stdout.write_all(text.as_bytes())?;
            stdout.flush()?;
        }
    }
    Ok(())
}

/// Find spots, writing debug images when asked.
pub(crate) fn detect(photo_path: &Path, detect: &Detect) -> Result<detect::SpotReport> {
    let load = LoadOptions::default();
    let photo = beadline::image::load::load(photo_path, &load)?;
    let plate = detect
        .plate
        .as_deref()
        .map(|p| beadline::image::load::load(p, &load))
        .transpose()?;
    let mut debug = detect
        .debug_dir
        .as_ref()
        .map(|_| detect::DebugImages::default());
    let report = detect::find_spots(&photo, plate.as_ref(), &detect.options, debug.as_mut())?;
    if let (Some(dir), Some(d)) = (&detect.debug_dir, &debug) {
        write_debug(dir, &photo, &report, d)?;
    }
    Ok(report)
}

pub(crate) fn write_debug(
    dir: &Path,
    photo: &beadline::image::load::Photo,
    report: &detect::SpotReport,
    d: &detect::DebugImages,
) -> Result<()> {
    use beadline::draw::overlay::{Canvas, GREEN, RED};
    std::fs::create_dir_all(dir)
        .with_context(|| format!("{}: cannot create folder", dir.display()))?;
    let (w, h) = (photo.width, photo.height);
    let scaled = |v: &[f32]| -> Vec<f32> {
        let max = v.iter().copied().fold(1e-9f32, f32::max);
        v.iter().map(|x| x.max(0.0) / max / 0.75).collect()
    };
    Canvas::from_luma(
        w,
        h,
        &d.background.iter().map(|v| v / 0.75).collect::<Vec<_>>(),
    )
    .save(&dir.join("1-background.png"))?;
    Canvas::from_luma(w, h, &scaled(&d.difference)).save(&dir.join("2-difference.png"))?;
    if let Some(m) = &d.mask {
        let v: Vec<f32> = m
            .as_raw()
            .iter()
            .map(|&b| b as f32 / 255.0 / 0.75)
            .collect();
        Canvas::from_luma(m.width() as usize, m.height() as usize, &v)
            .save(&dir.join("3-threshold.png"))?;
    }
    Canvas::from_luma(w, h, &scaled(&d.votes)).save(&dir.join("4-votes.png"))?;
    let mut c = Canvas::from_luma(w, h, &photo.luma());
    for s in &report.spots {
        c.circle(s.x_px, s.y_px, s.r_px, GREEN);
    }
    for s in &report.rejected {
        c.circle(s.x_px, s.y_px, s.r_px, RED);
    }
    c.save(&dir.join("5-spots.png"))?;
    Ok(())
}

/// Write a measurement: the document in the chosen format, and the pictures asked for.
pub(crate) fn write_measure(
    photo: &Path,
    m: &beadline::pipeline::Measured,
    out: &OutArgs,
    plot: Option<&Path>,
) -> Result<()> {
    let text = formatted(out.format, &m.doc, || m.doc.text(), || m.doc.csv())?;
    if let Some(o) = &out.overlay {
        beadline::draw::overlay::measure_overlay(photo, m, o)?;
    }
    if let Some(p) = plot {
        beadline::core::output::write_text(p, &beadline::draw::plot::svg(&m.doc))?;
    }
    emit(out, &text)
}

/// Write the HTML report of a measurement: its pictures, and the settings with the command line
/// as typed.
pub(crate) fn write_report(
    photo: &Path,
    m: &beadline::pipeline::Measured,
    settings: &beadline::pipeline::MeasureSettings,
    out: &Path,
) -> Result<()> {
    let mut rows = beadline::report::html::settings_rows(settings);
    let typed: Vec<String> = std::env::args().skip(1).collect();
    rows.insert(
        0,
        (
            "command line".into(),
            format!("beadline {}", typed.join(" ")),
        ),
    );
    let pictures = beadline::draw::pictures(photo, m)?;
    beadline::report::html::write(out, &m.doc, &pictures, &rows)?;
    Ok(())
}

/// Exit status 4 when a self-check failed (the numbers are not to be trusted), else 3 when a
/// result lies outside an acceptance band or a band's quantity was not measured, else 0.
pub(crate) fn verdict_status(doc: &beadline::report::measure::MeasureDoc) -> ExitCode {
    if doc.measurement.doubtful() {
        ExitCode::from(4)
    } else if doc.measurement.out_of_band() {
        ExitCode::from(3)
    } else {
        ExitCode::SUCCESS
    }
}

pub(crate) fn render_to(
    scene: &Scene,
    out: &Path,
    truth: Option<&Path>,
) -> Result<synth::Rendered> {
    let photo = synth::render(scene);
    // Both or neither: the truth first (a photo without its truth is no test input), and it
    // goes again when the photo cannot be written (a regular file only: never a device).
    if let Some(t) = truth {
        beadline::core::output::write_json(t, &photo.truth)?;
    }
    if let Err(e) = photo.save(out) {
        if let Some(t) = truth
            && std::fs::symlink_metadata(t).is_ok_and(|m| m.is_file())
        {
            let _ = std::fs::remove_file(t);
        }
        return Err(e.into());
    }
    Ok(photo)
}

pub(crate) fn demo(dir: &Path) -> Result<ExitCode> {
    std::fs::create_dir_all(dir)
        .with_context(|| format!("{}: cannot create folder", dir.display()))?;
    let scene = Scene::demo();
    let scene_path = dir.join("scene.toml");
    beadline::core::output::write_text(&scene_path, synth::scene::DEMO_SCENE)?;
    let photo_path = dir.join("photo.png");
    let truth_path = dir.join("truth.json");
    let photo = render_to(&scene, &photo_path, Some(&truth_path))?;
    let t = &photo.truth;
    println!("Beadline demo: quality-control rig, solid 40 mm rubber ball, 25 Hz strobe");
    println!("  scene    {}", scene_path.display());
    println!(
        "  photo    {} ({} x {} px, {} flashes)",
        photo_path.display(),
        t.width_px,
        t.height_px,
        t.flashes.len()
    );
    println!("  truth    {}", truth_path.display());
    // The main job, as a user would run it:
    //   beadline measure photo.png --rate 25 --ball-diameter 0.04 --accept restitution=0.75..0.80
    let mut settings = beadline::pipeline::MeasureSettings {
        rate_hz: Some(scene.strobe.rate_hz),
        ball_diameter_m: Some(scene.ball.diameter_m),
        scale: Some(beadline::pipeline::ScaleSource::BallDiameter),
        ..Default::default()
    };
    settings.physics.bands = vec![beadline::physics::bands::Band::parse(
        "restitution=0.75..0.80",
    )?];
    let m = beadline::pipeline::measure_photo(&photo_path, &settings)?;
    let json = dir.join("measure.json");
    let overlay = dir.join("overlay.png");
    let plot = dir.join("plot.svg");
    let report = dir.join("report.html");
    beadline::core::output::write_json(&json, &m.doc)?;
    beadline::draw::overlay::measure_overlay(&photo_path, &m, &overlay)?;
    beadline::core::output::write_text(&plot, &beadline::draw::plot::svg(&m.doc))?;
    write_report(&photo_path, &m, &settings, &report)?;
    println!(
        "  measured {}, {}, {}, {}",
        json.display(),
        overlay.display(),
        plot.display(),
        report.display()
    );
    println!();
    print!("{}", m.doc.text());
    println!();
    println!(
        "  truth: launch {} m/s at {} deg, restitution {}, gravity {} m/s^2, {} px/m",
        fixed(t.launch.speed_mps, 4),
        fixed(t.launch.angle_deg, 2),
        t.bounces
            .first()
            .map_or("none (no bounce)".to_string(), |b| fixed(b.restitution, 3)),
        t.gravity_mps2,
        t.scale_px_per_m
    );
    Ok(ExitCode::SUCCESS)
}
