//! Command-line arguments (what the user typed) and their validation into library settings.

use anyhow::{Context, Result, bail};
use beadline::core::light::Polarity;
use beadline::core::light::Tone;
use beadline::core::units::STANDARD_GRAVITY_MPS2;
use beadline::detect::{self, SpotOptions};
use beadline::image::load::LoadOptions;
use beadline::report::SpotsDoc;
use beadline::synth::{self, scene::Scene};
use clap::{Args as ClapArgs, Parser, Subcommand, ValueEnum};
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
        /// Also write the clean plate: the same scene without the ball (same format as --out).
        #[arg(long)]
        plate: Option<PathBuf>,
    },
    /// Find every image of the ball in a strobe photo.
    Spots {
        /// The photo (JPEG, PNG or TIFF).
        photo: PathBuf,
        #[command(flatten)]
        detect: Box<DetectArgs>,
        #[command(flatten)]
        out: OutArgs,
    },
    /// Order the ball images of a strobe photo into the ball's timed path.
    Path {
        /// The photo (JPEG, PNG or TIFF).
        photo: PathBuf,
        #[command(flatten)]
        detect: Box<DetectArgs>,
        /// Start of the path near pixel X,Y (default: found automatically).
        #[arg(long, value_name = "X,Y")]
        start: Option<String>,
        #[command(flatten)]
        out: OutArgs,
    },
    /// Measure the ball from a strobe photo: path, calibration, phases, fits, restitution.
    Measure {
        /// The photo (JPEG, PNG or TIFF).
        photo: PathBuf,
        #[command(flatten)]
        detect: Box<DetectArgs>,
        #[command(flatten)]
        measure: Box<MeasureArgs>,
        #[command(flatten)]
        out: OutArgs,
        /// Write plots (height against time, restitution against impact speed) as SVG.
        #[arg(long, value_name = "SVG", value_parser = svg_path)]
        plot: Option<PathBuf>,
    },
    /// Plan a shot: flash rate, number of flashes, exposure and delay, before taking the photo.
    Plan {
        /// Scene file (TOML) with [flash_unit] and [wishes].
        scene: PathBuf,
        /// Render the planned photo as PNG.
        #[arg(long, value_name = "PNG", value_parser = png_path)]
        preview: Option<PathBuf>,
        /// Output format (text or json).
        #[arg(long, value_enum, default_value = "text")]
        format: Format,
        /// Write the plan to FILE (atomically) instead of standard output.
        #[arg(short = 'o', long = "output", value_name = "FILE")]
        output: Option<PathBuf>,
    },
    /// Measure many photos unattended on a test rig: one JSON line per photo.
    #[command(args_override_self = true, after_help = RIG_HELP)]
    Rig(Box<RigArgs>),
    /// Render the built-in demo scene into a folder and measure it.
    Demo {
        /// Folder for the demo's files.
        #[arg(long, default_value = "beadline-demo")]
        dir: PathBuf,
    },
}

/// Help shown after the rig's options.
const RIG_HELP: &str = "\
Precedence: a flag typed on the command line > the --profile file > the default.
A profile (TOML) holds the detection and measure settings, keys named like the flags in
snake_case with their unit: rate_hz, ball_diameter_m, scale_px_per_m, polarity, radius_px =
[MIN, MAX], threshold_sigma, accept = [\"restitution=0.73..0.76\"], ... Unknown keys are refused.
--accept on the command line replaces the profile's list.

Each result line is the measure JSON plus \"file\" and \"status\": ok | out_of_band | error (with
\"error\"). --out appends to the file. --watch DIR measures each new photo once its size and time
are unchanged over two polls, exactly once also across restarts (journal).

Exit status:
  0  every photo measured and within its acceptance bands
  1  error in the run itself (bad profile or flag, unwritable output...)
  2  some photos could not be read or measured
  3  some results outside acceptance bands (2 wins over 3)";

/// `beadline rig` as typed.
#[derive(Debug, Clone, ClapArgs)]
struct RigArgs {
    /// Photos: files, folders (their photos) or glob patterns such as 'shots/*.jpg'.
    paths: Vec<String>,
    /// Rig profile (TOML) with the station's detection and measure settings.
    #[arg(long, value_name = "RIG.toml")]
    profile: Option<PathBuf>,
    #[command(flatten)]
    detect: Box<DetectArgs>,
    #[command(flatten)]
    measure: Box<MeasureArgs>,
    /// Append the result lines (JSON, one per photo) to FILE instead of standard output.
    #[arg(long, value_name = "FILE")]
    out: Option<PathBuf>,
    /// Write a summary CSV, one row per photo, at the end of the run.
    #[arg(long, value_name = "FILE")]
    summary: Option<PathBuf>,
    /// Write an overlay per photo into DIR (NAME.overlay.png).
    #[arg(long, value_name = "DIR")]
    overlay_dir: Option<PathBuf>,
    /// Watch DIR and measure each new photo once it is completely written.
    #[arg(long, value_name = "DIR")]
    watch: Option<PathBuf>,
    /// Journal of the photos done in watch mode (default: DIR/.beadline-journal).
    #[arg(long, value_name = "FILE")]
    journal: Option<PathBuf>,
    /// Seconds between two looks at the watched folder.
    #[arg(long, value_name = "SECONDS", default_value_t = 0.5)]
    poll_interval: f64,
    /// Stop watching after N photos.
    #[arg(long, value_name = "N")]
    max_photos: Option<usize>,
    /// Stop watching after SECONDS without a new photo.
    #[arg(long, value_name = "SECONDS")]
    idle_exit: Option<f64>,
    /// Worker threads (default: one per core).
    #[arg(long, value_name = "N")]
    jobs: Option<usize>,
    /// Most photos decoded at once (default: the number of threads).
    #[arg(long, value_name = "N")]
    max_decoding: Option<usize>,
    /// No progress bar and no per-photo error lines on standard error.
    #[arg(long)]
    quiet: bool,
}

/// Output format.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
enum Format {
    Text,
    Json,
    Csv,
}

/// Ball polarity as typed.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
enum PolarityArg {
    Auto,
    Bright,
    Dark,
}

/// Tone curve as typed.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
enum ToneArg {
    Srgb,
    Linear,
}

/// A path for an image we write as `kind`: its name must say so, so that no viewer or script
/// takes it for another format.
fn typed_path(s: &str, kind: &str) -> std::result::Result<PathBuf, String> {
    let p = PathBuf::from(s);
    match p.extension().and_then(|e| e.to_str()) {
        Some(e) if e.eq_ignore_ascii_case(kind) => Ok(p),
        _ => Err(format!(
            "'{s}': the image is written as {}, so its name must end in .{kind}",
            kind.to_uppercase()
        )),
    }
}

/// See [`typed_path`].
fn png_path(s: &str) -> std::result::Result<PathBuf, String> {
    typed_path(s, "png")
}

/// See [`typed_path`].
fn svg_path(s: &str) -> std::result::Result<PathBuf, String> {
    typed_path(s, "svg")
}

/// Where and how results go.
#[derive(Debug, Clone, ClapArgs)]
struct OutArgs {
    /// Output format.
    #[arg(long, value_enum, default_value = "text")]
    format: Format,
    /// Write the result to FILE (atomically) instead of standard output.
    #[arg(short = 'o', long = "output", value_name = "FILE")]
    output: Option<PathBuf>,
    /// Draw what was found on the photo and write it as PNG.
    #[arg(long, value_name = "PNG", value_parser = png_path)]
    overlay: Option<PathBuf>,
}

/// Detection settings as typed; see `SpotOptions` for what each does.
#[derive(Debug, Clone, ClapArgs)]
struct DetectArgs {
    /// Clean plate: the same scene photographed without the ball.
    #[arg(long, value_name = "PHOTO")]
    plate: Option<PathBuf>,
    /// Ball against background.
    #[arg(long, value_enum, default_value = "auto")]
    polarity: PolarityArg,
    /// How the stored values encode light: srgb (camera JPEGs and PNGs, IEC 61966-2-1) or linear
    /// (a raw or scientific camera's 16-bit TIFF).
    #[arg(long, value_enum, default_value = "srgb")]
    tone: ToneArg,
    /// Radius range of the ball images, pixels, as MIN..MAX (default: estimated).
    #[arg(long, value_name = "MIN..MAX")]
    radius: Option<String>,
    /// Threshold in robust sigmas of the noise.
    #[arg(long, default_value_t = 4.5)]
    threshold_sigma: f32,
    /// Fixed threshold on the difference from the background, 0..1 (overrides --threshold-sigma).
    #[arg(long)]
    threshold_level: Option<f32>,
    /// Background grid cell, pixels (0 = automatic).
    #[arg(long, default_value_t = 0)]
    background_cell: usize,
    /// Gaussian smoothing before edges, pixels.
    #[arg(long, default_value_t = 0.7)]
    smooth: f32,
    /// Rims whose median edge is this many noise sigmas have their points placed on the
    /// unsmoothed gradient (0: all rims; a huge value: none).
    #[arg(long, default_value_t = 20.0)]
    fine_snr: f64,
    /// Edge points need a gradient above this many noise sigmas.
    #[arg(long, default_value_t = 4.0)]
    edge_sigma: f32,
    /// Smallest fraction of the rim with edge support for a ball image, 0..1.
    #[arg(long, default_value_t = 0.35)]
    min_score: f64,
    /// Ball images' radii may differ from the common radius by this fraction.
    #[arg(long, default_value_t = 0.12)]
    radius_tolerance: f64,
    /// The round objects differ in size (not images of one ball): no common radius.
    #[arg(long)]
    sizes_differ: bool,
    /// Isolated images of a ball up to this radius are refined by fitting a lit sphere's image to
    /// their pixels, pixels (0: edge fit only).
    #[arg(long, default_value_t = 40.0)]
    shaded_max_r: f64,
    /// Smallest radius of a ball on the decimated photo, pixels: with the smallest searched radius
    /// r_min, the photo is averaged over floor(r_min / this) pixels squared for the blobs and the
    /// vote, and the rims are fitted at full resolution (0: full resolution throughout).
    #[arg(long, default_value_t = detect::COARSE_R_PX)]
    coarse_r: f64,
    /// Systematic centre uncertainty of a lit sphere's edge, pixels x radius (common to all images).
    #[arg(long, default_value_t = 0.5)]
    edge_systematic: f64,
    /// Largest RMS distance of rim points from the fitted circle, pixels (or 2.5 x the median of
    /// the photo's well-covered images, when that is larger).
    #[arg(long, default_value_t = 0.5)]
    max_rms: f64,
    /// Images fainter than this fraction of the median rim contrast are rejected as reflections.
    #[arg(long, default_value_t = 0.5)]
    faint: f64,
    /// Refuse photos with more candidate regions than this.
    #[arg(long, default_value_t = 5000)]
    max_candidates: usize,
    /// Write each stage's intermediate image into DIR.
    #[arg(long, value_name = "DIR")]
    debug_dir: Option<PathBuf>,
}

/// What to estimate from the flight arcs.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
enum EstimateArg {
    Gravity,
    Interval,
    Scale,
}

/// Calibration, time and physics settings as typed.
#[derive(Debug, Clone, ClapArgs)]
struct MeasureArgs {
    /// Flash rate, hertz.
    #[arg(long, value_name = "HZ")]
    rate: Option<f64>,
    /// Scale in the plane of motion, pixels per metre.
    #[arg(long, value_name = "PX_PER_M")]
    scale: Option<f64>,
    /// Two image points a known distance apart in the plane of motion: X1,Y1,X2,Y2,METRES.
    #[arg(long, value_name = "X1,Y1,X2,Y2,METRES")]
    ruler: Option<String>,
    /// Ball diameter, metres (also the scale when no other is given).
    #[arg(long, value_name = "METRES")]
    ball_diameter: Option<f64>,
    /// Plane file (TOML: [[points]] x_px, y_px, x_m, y_m; optional k1, k2, focal_px).
    #[arg(long, value_name = "FILE")]
    plane: Option<PathBuf>,
    /// Gravity, m/s^2, when it is not the quantity estimated.
    #[arg(long, default_value_t = STANDARD_GRAVITY_MPS2)]
    gravity: f64,
    /// The quantity estimated from the flight arcs (default: gravity when rate and scale are
    /// given; otherwise the missing one).
    #[arg(long, value_enum)]
    estimate: Option<EstimateArg>,
    /// Ball build: solid, shell, or thick:INNER_DIAMETER_M.
    #[arg(long, default_value = "solid")]
    ball: String,
    /// The camera is level: do not estimate and correct its roll.
    #[arg(long)]
    level: bool,
    /// Fit a quadratic air-drag term to the flight arcs.
    #[arg(long)]
    fit_drag: bool,
    /// Acceptance band QUANTITY=MIN..MAX (repeatable), e.g. restitution=0.73..0.76.
    #[arg(long = "accept", value_name = "Q=MIN..MAX")]
    accept: Vec<String>,
    /// Start of the path near pixel X,Y (default: found automatically).
    #[arg(long, value_name = "X,Y")]
    start: Option<String>,
}

fn parse_numbers(text: &str, count: usize, name: &str) -> Result<Vec<f64>> {
    let v: Vec<f64> = text
        .split(',')
        .map(|p| p.trim().parse::<f64>())
        .collect::<std::result::Result<_, _>>()
        .with_context(|| format!("{name}: '{text}' is not a list of numbers"))?;
    if v.len() != count || v.iter().any(|x| !x.is_finite()) {
        bail!("{name}: expected {count} finite numbers separated by commas, got '{text}'");
    }
    Ok(v)
}

/// `--start X,Y` as a pixel point.
fn parse_start(text: Option<&str>) -> Result<Option<beadline::track::PixelPoint>> {
    text.map(|t| {
        let v = parse_numbers(t, 2, "--start")?;
        Ok(beadline::track::PixelPoint {
            x_px: v[0],
            y_px: v[1],
        })
    })
    .transpose()
}

/// A document as text, JSON or CSV.
fn formatted<T: serde::Serialize>(
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

impl MeasureArgs {
    fn validate(&self, detect: &Detect) -> Result<beadline::pipeline::MeasureSettings> {
        use beadline::physics::{Quantity, Unknown};
        use beadline::pipeline::{MeasureSettings, ScaleSource};
        let mut s = MeasureSettings {
            spots: detect.options,
            plate: detect.plate.clone(),
            ..MeasureSettings::default()
        };
        let positive = |v: f64, name: &str| -> Result<f64> {
            if v.is_finite() && v > 0.0 {
                Ok(v)
            } else {
                bail!("{name}: must be a positive number, got {v}")
            }
        };
        if let Some(r) = self.rate {
            if !(r.is_finite() && r > 0.0 && r <= 1e5) {
                bail!("--rate: must be between 0 and 100000 Hz, got {r}");
            }
            s.rate_hz = Some(r);
        }
        if let Some(d) = self.ball_diameter {
            s.ball_diameter_m = Some(positive(d, "--ball-diameter")?);
        }
        let given = [
            self.scale.is_some(),
            self.ruler.is_some(),
            self.plane.is_some(),
        ];
        if given.iter().filter(|g| **g).count() > 1 {
            bail!("--scale, --ruler and --plane: give only one");
        }
        s.scale = if let Some(v) = self.scale {
            Some(ScaleSource::PxPerM(positive(v, "--scale")?))
        } else if let Some(r) = &self.ruler {
            let v = parse_numbers(r, 5, "--ruler")?;
            Some(ScaleSource::Ruler {
                a_px: [v[0], v[1]],
                b_px: [v[2], v[3]],
                distance_m: positive(v[4], "--ruler distance")?,
            })
        } else if let Some(p) = &self.plane {
            Some(ScaleSource::Plane(p.clone()))
        } else if s.ball_diameter_m.is_some() {
            Some(ScaleSource::BallDiameter)
        } else {
            None
        };
        let g = positive(self.gravity, "--gravity")?;
        s.physics.gravity = Quantity::new(
            g,
            0.0,
            if g == STANDARD_GRAVITY_MPS2 {
                "standard gravity (ISO 80000-3)"
            } else {
                "given"
            },
        );
        s.physics.unknown = match self.estimate {
            Some(EstimateArg::Gravity) => Unknown::Gravity,
            Some(EstimateArg::Interval) => Unknown::Interval,
            Some(EstimateArg::Scale) => Unknown::Scale,
            None if s.rate_hz.is_none() => Unknown::Interval,
            None if s.scale.is_none() => Unknown::Scale,
            None => Unknown::Gravity,
        };
        let (build, inner) = match self.ball.as_str() {
            "solid" => (beadline::core::ball::Build::Solid, None),
            "shell" => (beadline::core::ball::Build::Shell, None),
            other => {
                let Some(d) = other.strip_prefix("thick:") else {
                    bail!("--ball: expected solid, shell or thick:INNER_DIAMETER_M, got '{other}'");
                };
                let inner: f64 = d
                    .parse()
                    .with_context(|| format!("--ball: '{d}' is not a number"))?;
                let outer = s.ball_diameter_m.ok_or_else(|| {
                    anyhow::anyhow!("--ball thick: needs --ball-diameter for the outer diameter")
                })?;
                if !(inner.is_finite() && inner >= 0.0 && inner < outer) {
                    bail!("--ball: the inner diameter must be 0 <= inner < {outer} m");
                }
                (beadline::core::ball::Build::Thick, Some(inner / outer))
            }
        };
        s.physics.build = build;
        s.physics.inner_ratio = inner;
        s.physics.camera_level = self.level;
        s.physics.fit_drag = self.fit_drag;
        s.physics.bands = self
            .accept
            .iter()
            .map(|a| {
                beadline::physics::bands::Band::parse(a).with_context(|| format!("--accept {a}"))
            })
            .collect::<Result<_>>()?;
        s.path.start = parse_start(self.start.as_deref())?;
        Ok(s)
    }
}

/// Validated detection settings.
struct Detect {
    plate: Option<PathBuf>,
    options: SpotOptions,
    debug_dir: Option<PathBuf>,
}

fn parse_range(text: &str, name: &str) -> Result<(f64, f64)> {
    let Some((a, b)) = text.split_once("..") else {
        bail!("{name}: expected MIN..MAX, got '{text}'");
    };
    let (a, b): (f64, f64) = (
        a.trim()
            .parse()
            .with_context(|| format!("{name}: '{a}' is not a number"))?,
        b.trim()
            .parse()
            .with_context(|| format!("{name}: '{b}' is not a number"))?,
    );
    if !(a.is_finite() && b.is_finite()) || a > b {
        bail!("{name}: '{text}' is not a range MIN..MAX with MIN <= MAX");
    }
    Ok((a, b))
}

impl DetectArgs {
    fn validate(&self) -> Result<Detect> {
        let mut o = SpotOptions::default();
        o.background.polarity = match self.polarity {
            PolarityArg::Auto => None,
            PolarityArg::Bright => Some(Polarity::Bright),
            PolarityArg::Dark => Some(Polarity::Dark),
        };
        o.tone = match self.tone {
            ToneArg::Srgb => Tone::Srgb,
            ToneArg::Linear => Tone::Linear,
        };
        if let Some(r) = &self.radius {
            let (a, b) = parse_range(r, "--radius")?;
            if a < 2.0 || b > 2000.0 {
                bail!("--radius: ball images must be 2..2000 px in radius, got {r}");
            }
            o.radius_px = Some((a, b));
        }
        let positive = |v: f64, name: &str| -> Result<()> {
            if v.is_finite() && v > 0.0 {
                Ok(())
            } else {
                bail!("{name}: must be a positive number, got {v}")
            }
        };
        let fraction = |v: f64, name: &str| -> Result<()> {
            if v.is_finite() && (0.0..=1.0).contains(&v) {
                Ok(())
            } else {
                bail!("{name}: must be between 0 and 1, got {v}")
            }
        };
        positive(self.threshold_sigma as f64, "--threshold-sigma")?;
        o.threshold.k_sigma = self.threshold_sigma;
        if let Some(l) = self.threshold_level {
            if !(l.is_finite() && l > 0.0 && l < 1.0) {
                bail!("--threshold-level: must be between 0 and 1, got {l}");
            }
            o.threshold.level = Some(l);
        }
        if self.background_cell != 0 && !(4..=4096).contains(&self.background_cell) {
            bail!("--background-cell: must be 0 (automatic) or 4..4096 px");
        }
        o.background.cell_px = self.background_cell;
        if !(self.smooth.is_finite() && (0.0..=10.0).contains(&self.smooth)) {
            bail!("--smooth: must be 0..10 px, got {}", self.smooth);
        }
        o.hough.smooth_px = self.smooth;
        if !(self.fine_snr.is_finite() && self.fine_snr >= 0.0) {
            bail!("--fine-snr: must be 0 or more, got {}", self.fine_snr);
        }
        o.hough.fine_snr = self.fine_snr;
        positive(self.edge_sigma as f64, "--edge-sigma")?;
        o.hough.edge_k_sigma = self.edge_sigma;
        fraction(self.min_score, "--min-score")?;
        o.min_score = self.min_score;
        fraction(self.radius_tolerance, "--radius-tolerance")?;
        o.radius_tolerance = self.radius_tolerance;
        fraction(self.faint, "--faint")?;
        positive(self.max_rms, "--max-rms")?;
        o.max_rms_px = self.max_rms;
        if !(self.edge_systematic.is_finite() && self.edge_systematic >= 0.0) {
            bail!(
                "--edge-systematic: must be >= 0, got {}",
                self.edge_systematic
            );
        }
        o.systematic_px_r = self.edge_systematic;
        if !(self.shaded_max_r.is_finite() && self.shaded_max_r >= 0.0) {
            bail!(
                "--shaded-max-r: must be 0 or more pixels, got {}",
                self.shaded_max_r
            );
        }
        o.shaded_max_r_px = self.shaded_max_r;
        if !(self.coarse_r.is_finite() && (self.coarse_r == 0.0 || self.coarse_r >= 4.0)) {
            bail!(
                "--coarse-r: must be 0 (off) or at least 4 pixels, got {}",
                self.coarse_r
            );
        }
        o.coarse_r_px = self.coarse_r;
        o.one_radius = !self.sizes_differ;
        o.faint_fraction = self.faint;
        if self.max_candidates == 0 {
            bail!("--max-candidates: must be at least 1");
        }
        o.max_candidates = self.max_candidates;
        Ok(Detect {
            plate: self.plate.clone(),
            options: o,
            debug_dir: self.debug_dir.clone(),
        })
    }
}

/// Write `text` to the output file (atomically) or standard output.
fn emit(out: &OutArgs, text: &str) -> Result<()> {
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
fn detect(photo_path: &Path, detect: &Detect) -> Result<detect::SpotReport> {
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

fn write_debug(
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

fn spots_overlay(photo: &Path, report: &detect::SpotReport, out: &Path) -> Result<()> {
    use beadline::draw::overlay::{Canvas, GREEN, RED, YELLOW};
    let mut c = Canvas::open(photo)?;
    for (i, s) in report.spots.iter().enumerate() {
        c.circle(s.x_px, s.y_px, s.r_px, GREEN);
        c.cross(s.x_px, s.y_px, 3.0, GREEN);
        c.text(
            s.x_px + 3.0,
            s.y_px - s.r_px - 12.0,
            &i.to_string(),
            2,
            YELLOW,
        );
    }
    for s in &report.rejected {
        c.circle(s.x_px, s.y_px, s.r_px, RED);
    }
    c.save(out)?;
    Ok(())
}

/// Write a measurement: the document in the chosen format, and the pictures asked for.
fn write_measure(
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

/// Exit status 3 when a result lies outside an acceptance band, else 0.
fn verdict_status(doc: &beadline::pipeline::MeasureDoc) -> ExitCode {
    use beadline::physics::bands::Outcome;
    if doc
        .measurement
        .verdicts
        .iter()
        .any(|v| v.outcome == Outcome::Fail)
    {
        ExitCode::from(3)
    } else {
        ExitCode::SUCCESS
    }
}

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
            let doc = beadline::report::PathDoc::new(&photo.display().to_string(), &result);
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
        Command::Rig(r) => rig(*r),
    }
}

/// Parse `beadline rig ARGS...` (the profile's arguments, then those typed).
fn parse_rig<I, T>(args: I) -> std::result::Result<RigArgs, clap::Error>
where
    I: IntoIterator<Item = T>,
    T: Into<std::ffi::OsString> + Clone,
{
    let argv = ["beadline".into(), "rig".into()]
        .into_iter()
        .chain(args.into_iter().map(Into::into));
    match Args::try_parse_from(argv)?.command {
        Command::Rig(r) => Ok(*r),
        _ => unreachable!("parse_rig parses the rig subcommand"),
    }
}

/// The first line of a clap error, without its `error:` prefix.
fn clap_line(e: &clap::Error) -> String {
    let text = e.render().to_string();
    let line = text.lines().next().unwrap_or("").trim();
    line.strip_prefix("error: ").unwrap_or(line).to_string()
}

/// Merge the profile under the typed flags: the profile becomes the arguments it stands for,
/// placed before those typed, so a typed flag overrides it (`args_override_self`) and both go
/// through the same parsing and validation. The profile is first validated alone so an absurd
/// value is reported with its key and the profile file.
fn with_profile(args: RigArgs) -> Result<RigArgs> {
    use beadline::rig::{Profile, flags_to_keys};
    let Some(path) = args.profile.clone() else {
        return Ok(args);
    };
    let profile = Profile::load(&path)?;
    let named = |m: String| anyhow::anyhow!("{}: {}", path.display(), flags_to_keys(&m));
    let alone = parse_rig(profile.to_args(&[])).map_err(|e| named(clap_line(&e)))?;
    let d = alone.detect.validate().map_err(|e| named(one_line(&e)))?;
    alone
        .measure
        .validate(&d)
        .map_err(|e| named(one_line(&e)))?;
    let typed: Vec<std::ffi::OsString> = std::env::args_os()
        .skip_while(|a| a != "rig")
        .skip(1)
        .collect();
    let skip: &[&str] = if args.measure.accept.is_empty() {
        &[]
    } else {
        &["--accept"]
    };
    let merged: Vec<std::ffi::OsString> = profile
        .to_args(skip)
        .into_iter()
        .map(Into::into)
        .chain(typed)
        .collect();
    parse_rig(merged).map_err(|e| anyhow::anyhow!("{}", clap_line(&e)))
}

/// `beadline rig`.
fn rig(args: RigArgs) -> Result<ExitCode> {
    use beadline::rig::{self as r, PhotoResult, RigOptions, Status};
    use indicatif::{ProgressBar, ProgressStyle};
    use std::io::IsTerminal;
    let args = with_profile(args)?;
    let d = args.detect.validate()?;
    let settings = args.measure.validate(&d)?;
    if args.watch.is_some() != args.paths.is_empty() {
        bail!("rig: give either PATHs or --watch DIR");
    }
    if let Some(dir) = &args.overlay_dir {
        std::fs::create_dir_all(dir)
            .with_context(|| format!("{}: cannot create folder", dir.display()))?;
    }
    let options = RigOptions {
        settings,
        overlay_dir: args.overlay_dir.clone(),
        max_decoding: args.max_decoding.unwrap_or(0),
    };
    let sink = match &args.out {
        Some(p) => r::ResultSink::append(p)?,
        None => r::ResultSink::stdout(),
    };
    let bar = if !args.quiet && std::io::stderr().is_terminal() {
        let b = ProgressBar::new(0);
        b.set_style(
            ProgressStyle::with_template("{spinner} {pos}/{len} photos {elapsed} {wide_msg}")
                .unwrap_or_else(|_| ProgressStyle::default_bar()),
        );
        Some(b)
    } else {
        None
    };
    let quiet = args.quiet;
    let done = |res: &PhotoResult| -> beadline::Result<()> {
        if let (Status::Error, false, Some(e)) = (res.status, quiet, &res.error) {
            match &bar {
                Some(b) => b.println(format!("beadline: {e}")),
                None => eprintln!("beadline: {e}"),
            }
        }
        if let Some(b) = &bar {
            if args.watch.is_some() {
                b.inc_length(1);
            }
            b.inc(1);
        }
        Ok(())
    };
    let run = || -> Result<Vec<PhotoResult>> {
        if let Some(dir) = &args.watch {
            if !dir.is_dir() {
                bail!("{}: --watch needs a folder", dir.display());
            }
            let journal_path = args
                .journal
                .clone()
                .unwrap_or_else(|| dir.join(r::JOURNAL_NAME));
            let journal = r::Journal::open(&journal_path)?;
            if let Some(out) = &args.out {
                journal.reconcile(out)?;
            }
            let watch = r::WatchOptions {
                poll_interval_s: args.poll_interval,
                max_photos: args.max_photos,
                idle_exit_s: args.idle_exit,
            };
            if let Some(s) = args.idle_exit
                && !(s.is_finite() && s >= 0.0)
            {
                bail!("--idle-exit: must be a number of seconds >= 0, got {s}");
            }
            Ok(r::watch(dir, &options, &watch, &journal, &sink, &done)?)
        } else {
            let paths = r::expand_inputs(&args.paths)?;
            if let Some(b) = &bar {
                b.set_length(paths.len() as u64);
            }
            Ok(r::run_batch(&paths, &options, &sink, &done)?)
        }
    };
    let results = match args.jobs {
        Some(0) => bail!("--jobs: must be at least 1"),
        Some(n) => rayon::ThreadPoolBuilder::new()
            .num_threads(n)
            .build()
            .context("--jobs: cannot start the worker threads")?
            .install(run)?,
        None => run()?,
    };
    if let Some(b) = &bar {
        b.finish_and_clear();
    }
    if let Some(p) = &args.summary {
        beadline::core::output::write_text(p, &r::summary_csv(&results)?)?;
    }
    Ok(ExitCode::from(r::exit_status(&results)))
}

fn render_to(scene: &Scene, out: &Path, truth: Option<&Path>) -> Result<synth::Rendered> {
    let photo = synth::render(scene);
    photo.save(out)?;
    if let Some(t) = truth {
        beadline::core::output::write_json(t, &photo.truth)?;
    }
    Ok(photo)
}

fn demo(dir: &Path) -> Result<ExitCode> {
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
    beadline::core::output::write_json(&json, &m.doc)?;
    beadline::draw::overlay::measure_overlay(&photo_path, &m, &overlay)?;
    beadline::core::output::write_text(&plot, &beadline::draw::plot::svg(&m.doc))?;
    println!(
        "  measured {}, {}, {}",
        json.display(),
        overlay.display(),
        plot.display()
    );
    println!();
    print!("{}", m.doc.text());
    println!();
    println!(
        "  truth: launch {:.4} m/s at {:.2} deg, restitution {:.3}, gravity {} m/s^2, {} px/m",
        t.launch.speed_mps,
        t.launch.angle_deg,
        t.bounces.first().map_or(f64::NAN, |b| b.restitution),
        t.gravity_mps2,
        t.scale_px_per_m
    );
    Ok(ExitCode::SUCCESS)
}
