//! The command line: clap arguments (what the user typed) -> validated library settings -> the
//! pipeline -> documents, pictures and an exit status. Nothing else lives here.

mod args;
mod commands;
mod profile;
mod rig;
mod settings;

use anyhow::Result;
use args::{Args, Command, Format, OutArgs, PlanFormat};
use beadline::report::spots::SpotsDoc;
use beadline::synth::{self, scene::Scene};
use clap::Parser;
use commands::{
    demo, detect, emit, formatted, render_to, verdict_status, write_measure, write_report,
};
use settings::parse_start;
use std::process::ExitCode;

/// `--flag -25` read as `--flag=-25` when the flag takes a value and the next word is a
/// negative number (or range, or pair): the parser would take it for a flag of its own and
/// answer with a tip about `--`, where the user wants the number refused with its rule.
fn negatives_joined(argv: Vec<std::ffi::OsString>) -> Vec<std::ffi::OsString> {
    use clap::CommandFactory;
    let cli = Args::command();
    let sub = argv
        .get(1)
        .and_then(|s| s.to_str())
        .and_then(|name| cli.find_subcommand(name));
    let takes_value = |long: &str| {
        sub.and_then(|c| c.get_arguments().find(|a| a.get_long() == Some(long)))
            .is_some_and(|a| a.get_action().takes_values())
    };
    let negative = |w: &str| {
        let mut c = w.chars();
        c.next() == Some('-') && c.next().is_some_and(|d| d.is_ascii_digit() || d == '.')
    };
    let mut out = Vec::with_capacity(argv.len());
    let mut words = argv.into_iter().peekable();
    while let Some(w) = words.next() {
        if w == "--" {
            out.push(w);
            out.extend(words);
            break;
        }
        let joined = w
            .to_str()
            .and_then(|s| s.strip_prefix("--"))
            .filter(|long| !long.contains('=') && takes_value(long))
            .zip(
                words
                    .peek()
                    .and_then(|n| n.to_str())
                    .filter(|n| negative(n)),
            )
            .map(|(long, value)| format!("--{long}={value}"));
        match joined {
            Some(j) => {
                out.push(j.into());
                words.next();
            }
            None => out.push(w),
        }
    }
    out
}

/// Parse, run, and map the outcome to an exit status.
pub fn run() -> ExitCode {
    let args = match Args::try_parse_from(negatives_joined(std::env::args_os().collect())) {
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
                beadline::draw::overlay::spots_overlay(&photo, &report, o)?;
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
                beadline::draw::overlay::path_overlay(&photo, &report, &result, o)?;
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
            report,
        } => {
            let d = d.validate()?;
            let settings = measure.validate(&d)?;
            let m = beadline::pipeline::measure_photo(&photo, &settings)?;
            write_measure(&photo, &m, &out, plot.as_deref())?;
            if let Some(r) = &report {
                write_report(&photo, &m, &settings, r)?;
            }
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
                PlanFormat::Json => serde_json::to_string_pretty(&plan)? + "\n",
                PlanFormat::Text => plan.text(),
            };
            emit(
                &OutArgs {
                    format: match format {
                        PlanFormat::Json => Format::Json,
                        PlanFormat::Text => Format::Text,
                    },
                    output,
                    overlay: None,
                },
                &text,
            )?;
            // The closest plan is given, but the run says it falls short of the wishes.
            match plan.unmet() {
                Some(e) => {
                    eprintln!("beadline: {}: {e}", scene_path.display());
                    Ok(ExitCode::from(3))
                }
                None => Ok(ExitCode::SUCCESS),
            }
        }
        Command::Demo { dir } => demo(&dir),
        Command::Rig(r) => rig::rig(*r),
    }
}
