//! The command line: clap arguments (what the user typed) -> validated library settings -> the
//! pipeline -> documents, pictures and an exit status. Nothing else lives here.

mod args;
mod commands;
mod profile;
mod rig;
mod settings;

use anyhow::Result;
use args::{Args, Command, Format, OutArgs};
use beadline::report::spots::SpotsDoc;
use beadline::synth::{self, scene::Scene};
use clap::Parser;
use commands::{
    demo, detect, emit, formatted, render_to, spots_overlay, verdict_status, write_measure,
};
use settings::parse_start;
use std::process::ExitCode;

/// Parse, run, and map the outcome to an exit status.
pub fn run() -> ExitCode {
    let args = match Args::try_parse() {
        Ok(a) => a,
        // `rig` keeps exit status 2 for photos that could not be measured: a usage error of
        // the run itself is 1 there.
        Err(e) if e.use_stderr() && std::env::args_os().nth(1).is_some_and(|a| a == "rig") => {
            let _ = e.print();
            return ExitCode::from(1);
        }
        Err(e) => e.exit(),
    };
    match dispatch(args) {
        Ok(code) => code,
        Err(e) => {
            eprintln!("beadline: {}", one_line(&e));
            ExitCode::from(1)
        }
    }
}

/// The error chain on one line.
pub(crate) fn one_line(e: &anyhow::Error) -> String {
    let mut parts: Vec<String> = Vec::new();
    for cause in e.chain() {
        let s = cause.to_string();
        if !parts.iter().any(|p| p.contains(&s)) {
            parts.push(s);
        }
    }
    parts.join(": ").replace('\n', " ")
}

fn dispatch(args: Args) -> Result<ExitCode> {
    match args.command {
        Command::Render {
            scene,
            out,
            truth,
            plate,
        } => {
            let scene = Scene::load(&scene)?;
            render_to(&scene, &out, truth.as_deref())?;
            if let Some(p) = plate {
                synth::render_plate(&scene).save(&p)?;
            }
            Ok(ExitCode::SUCCESS)
        }
        Command::Spots {
            photo,
            detect: d,
            out,
        } => {
            let d = d.validate()?;
            let report = detect(&photo, &d)?;
            let doc = SpotsDoc::new(
                &photo.display().to_string(),
                &report,
                &d.options,
                d.plate.is_some(),
            );
            let text = formatted(out.format, &doc, || doc.text(), || doc.csv())?;
            if let Some(o) = &out.overlay {
                spots_overlay(&photo, &report, o)?;
            }
            emit(&out, &text)?;
            Ok(ExitCode::SUCCESS)
        }
        Command::Path {
            photo,
            detect: d,
            start,
            out,
        } => {
            let d = d.validate()?;
            let report = detect(&photo, &d)?;
            let options = beadline::track::PathOptions {
                start: parse_start(start.as_deref())?,
                ..Default::default()
            };
            let result = beadline::track::order_path(&report.spots, &options);
            let doc = beadline::report::path::PathDoc::new(&photo.display().to_string(), &result);
            let text = formatted(out.format, &doc, || doc.text(), || doc.csv())?;
            if let Some(o) = &out.overlay {
                spots_overlay(&photo, &report, o)?;
            }
            emit(&out, &text)?;
            Ok(ExitCode::SUCCESS)
        }
        Command::Measure {
            photo,
            detect: d,
            measure,
            out,
            plot,
        } => {
            let d = d.validate()?;
            let settings = measure.validate(&d)?;
            let m = beadline::pipeline::measure_photo(&photo, &settings)?;
            write_measure(&photo, &m, &out, plot.as_deref())?;
            Ok(verdict_status(&m.doc))
        }
        Command::Plan {
            scene: scene_path,
            preview,
            format,
            output,
        } => {
            let scene = Scene::load(&scene_path)?;
            let plan = beadline::synth::plan::plan(&scene)
                .map_err(|e| anyhow::anyhow!("{}: {e}", scene_path.display()))?;
            if let Some(p) = &preview {
                synth::render(&plan.apply(&scene)).save(p)?;
            }
            let text = match format {
                Format::Json => serde_json::to_string_pretty(&plan)? + "\n",
                Format::Text | Format::Csv => plan.text(),
            };
            emit(
                &OutArgs {
                    format,
                    output,
                    overlay: None,
                },
                &text,
            )?;
            Ok(ExitCode::SUCCESS)
        }
        Command::Demo { dir } => demo(&dir),
        Command::Rig(r) => rig::rig(*r),
    }
}
