//! Command-line arguments (what the user typed) and their validation into library settings.

use anyhow::{Context, Result};
use beadline::render::{self, scene::Scene};
use clap::{Parser, Subcommand};
use std::path::{Path, PathBuf};
use std::process::ExitCode;

/// Beadline: measure a ball from one multi-flash strobe photograph.
#[derive(Debug, Parser)]
#[command(name = "beadline", version, about, long_about = None)]
pub struct Args {
    #[command(subcommand)]
    command: Command,
}

#[derive(Debug, Subcommand)]
enum Command {
    /// Render a synthetic strobe photo and its ground truth from a scene file.
    Render {
        /// Scene file (TOML).
        scene: PathBuf,
        /// Photo to write (.png, .jpg or .tif).
        #[arg(long)]
        out: PathBuf,
        /// Ground-truth JSON to write.
        #[arg(long)]
        truth: Option<PathBuf>,
    },
    /// Render the built-in demo scene into a folder and measure it.
    Demo {
        /// Folder for the demo's files.
        #[arg(long, default_value = "beadline-demo")]
        dir: PathBuf,
    },
}

/// Parse, run, and map the outcome to an exit status.
pub fn run() -> ExitCode {
    let args = Args::parse();
    match dispatch(args) {
        Ok(code) => code,
        Err(e) => {
            eprintln!("beadline: {}", one_line(&e));
            ExitCode::from(1)
        }
    }
}

/// The error chain on one line.
fn one_line(e: &anyhow::Error) -> String {
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
        Command::Render { scene, out, truth } => {
            let scene = Scene::load(&scene)?;
            render_to(&scene, &out, truth.as_deref())?;
            Ok(ExitCode::SUCCESS)
        }
        Command::Demo { dir } => demo(&dir),
    }
}

fn render_to(scene: &Scene, out: &Path, truth: Option<&Path>) -> Result<render::Rendered> {
    let photo = render::render(scene);
    photo.save(out)?;
    if let Some(t) = truth {
        beadline::output::write_json(t, &photo.truth)?;
    }
    Ok(photo)
}

fn demo(dir: &Path) -> Result<ExitCode> {
    std::fs::create_dir_all(dir)
        .with_context(|| format!("{}: cannot create folder", dir.display()))?;
    let scene = Scene::demo();
    let scene_path = dir.join("scene.toml");
    beadline::output::write_text(&scene_path, render::scene::DEMO_SCENE)?;
    let photo_path = dir.join("photo.png");
    let truth_path = dir.join("truth.json");
    let photo = render_to(&scene, &photo_path, Some(&truth_path))?;
    let t = &photo.truth;
    println!("Beadline demo: quality-control rig, solid rubber ball, 25 Hz strobe");
    println!("  scene  {}", scene_path.display());
    println!(
        "  photo  {} ({} x {} px)",
        photo_path.display(),
        t.width_px,
        t.height_px
    );
    println!("  truth  {}", truth_path.display());
    println!(
        "  {} flashes, launch {:.3} m/s at {:.1} deg, {} bounces",
        t.flashes.len(),
        t.launch.speed_mps,
        t.launch.angle_deg,
        t.bounces.len()
    );
    Ok(ExitCode::SUCCESS)
}
