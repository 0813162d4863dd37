//! What the user typed: the clap definitions of every command and option, nothing else.

use beadline::core::units::STANDARD_GRAVITY_MPS2;
use beadline::detect;
use clap::{Args as ClapArgs, Parser, Subcommand, ValueEnum};
use std::path::PathBuf;

/// Beadline: measure a ball from one multi-flash strobe photograph.
#[derive(Debug, Parser)]
#[command(name = "beadline", version, about, long_about = None)]
pub struct Args {
    #[command(subcommand)]
    pub(crate) command: Command,
}

#[derive(Debug, Subcommand)]
pub(crate) enum Command {
    /// Render a synthetic strobe photo and its ground truth from a scene file.
    #[command(after_help = RENDER_HELP)]
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
    #[command(after_help = SPOTS_HELP)]
    Spots {
        /// The photo (JPEG, PNG or TIFF).
        photo: PathBuf,
        #[command(flatten)]
        out: OutArgs,
        // Last: its tuning knobs come after what a user commonly sets.
        #[command(flatten)]
        detect: Box<DetectArgs>,
    },
    /// Order the ball images of a strobe photo into the ball's timed path.
    #[command(after_help = PATH_HELP)]
    Path {
        /// The photo (JPEG, PNG or TIFF).
        photo: PathBuf,
        /// Start of the path near pixel X,Y (default: found automatically).
        #[arg(long, value_name = "X,Y")]
        start: Option<String>,
        #[command(flatten)]
        out: OutArgs,
        #[command(flatten)]
        detect: Box<DetectArgs>,
    },
    /// Measure the ball from a strobe photo: path, calibration, phases, fits, restitution.
    #[command(after_help = MEASURE_HELP)]
    Measure {
        /// The photo (JPEG, PNG or TIFF).
        photo: PathBuf,
        #[command(flatten)]
        measure: Box<MeasureArgs>,
        #[command(flatten)]
        out: OutArgs,
        /// Write plots (height against time, restitution against impact speed, each with its
        /// residuals) as SVG.
        #[arg(long, value_name = "SVG", value_parser = svg_path, help_heading = OUTPUT)]
        plot: Option<PathBuf>,
        /// Write a self-contained HTML report (summary, pictures, self-checks, settings, every
        /// number) to FILE; its folder must exist.
        #[arg(long, value_name = "HTML", value_parser = html_path, help_heading = OUTPUT)]
        report: Option<PathBuf>,
        #[command(flatten)]
        detect: Box<DetectArgs>,
    },
    /// Plan a shot: flash rate, number of flashes, exposure and delay, before taking the photo.
    #[command(after_help = PLAN_HELP)]
    Plan {
        /// Scene file (TOML) with [flash_unit] and [wishes].
        scene: PathBuf,
        /// Render the planned photo as PNG.
        #[arg(long, value_name = "PNG", value_parser = png_path)]
        preview: Option<PathBuf>,
        /// Output format (text or json).
        #[arg(long, value_enum, default_value = "text")]
        format: PlanFormat,
        /// Write the plan to FILE (atomically) instead of standard output.
        #[arg(short = 'o', long = "output", value_name = "FILE")]
        output: Option<PathBuf>,
    },
    /// Measure many photos unattended on a test rig: one JSON line per photo.
    #[command(args_override_self = true, after_help = RIG_HELP)]
    Rig(Box<RigArgs>),
    /// Render the built-in demo scene into a folder and measure it.
    #[command(after_help = DEMO_HELP)]
    Demo {
        /// Folder for the demo's files.
        #[arg(long, default_value = "beadline-demo")]
        dir: PathBuf,
    },
}

/// Help heading of the options that calibrate a measurement: the user's first choices.
pub(crate) const CALIBRATION: &str = "Calibration";
/// Help heading of the acceptance bands.
pub(crate) const ACCEPTANCE: &str = "Acceptance";
/// Help heading of the physics model and where the path starts.
pub(crate) const PHYSICS: &str = "Physics and path";
/// Help heading of where results and pictures go.
pub(crate) const OUTPUT: &str = "Output";
/// Help heading of the detection options a user commonly sets.
pub(crate) const DETECTION: &str = "Detection";
/// Help heading of the detector's tuning knobs (defaults suit most photos).
pub(crate) const TUNING: &str = "Detection tuning";
/// Help heading of rig watch mode.
pub(crate) const WATCH: &str = "Watching a folder";
/// Help heading of a rig run's threads and memory.
pub(crate) const RESOURCES: &str = "Threads and memory";

/// Help shown after the render options.
pub(crate) const RENDER_HELP: &str = "\
A scene to start from: the scene.toml that `beadline demo` writes. The keys without a
default: [ball] diameter_m; [strobe] rate_hz, exposure_s; [camera] px_per_m, width_px,
height_px, origin_x_px, origin_y_px; and [incline] length_m, angle_deg, bottom_height_m or
[start] x_m, y_m (the README's scene section describes every key).

Examples:
  beadline render scene.toml --out photo.png --truth truth.json
  beadline render scene.toml --out photo.jpg --plate plate.jpg";

/// Help shown after the spots options.
pub(crate) const SPOTS_HELP: &str = "\
Examples:
  beadline spots photo.jpg
  beadline spots photo.jpg --radius 12..20 --format json -o spots.json
  beadline spots dark.png --plate plate.png --overlay spots.png";

/// Help shown after the path options.
pub(crate) const PATH_HELP: &str = "\
Examples:
  beadline path photo.jpg
  beadline path photo.jpg --start 120,340 --format csv -o path.csv";

/// Help shown after the measure options.
pub(crate) const MEASURE_HELP: &str = "\
Exit status:
  0  measured, every self-check passed or warned, every acceptance band met
  1  error: the photo or a setting could not be used (one line on standard error)
  3  a result lies outside an acceptance band, or a band's quantity was not measured
  4  a self-check failed: the numbers are printed but not to be trusted (4 wins over 3)

Examples:
  beadline measure photo.jpg --rate 25 --ball-diameter 0.04
  beadline measure photo.jpg --rate 25 --scale 1000 --accept restitution=0.73..0.80
  beadline measure photo.jpg --rate 25 --plane plane.toml --format json -o result.json";

/// Help shown after the plan options.
pub(crate) const PLAN_HELP: &str = "\
Exit status:
  0  the plan meets every wish
  1  error, or no setting gives a photo that measure resolves (the reason on standard error)
  3  no setting meets every wish: the closest plan is given, and standard error names each
     wish to relax and how far

Examples:
  beadline plan scene.toml
  beadline plan scene.toml --preview planned.png --format json";

/// Help shown after the demo options.
pub(crate) const DEMO_HELP: &str = "\
Example:
  beadline demo --dir beadline-demo";

/// Help shown after the rig's options.
pub(crate) const RIG_HELP: &str = "\
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
  3  some results outside acceptance bands or not measured
  4  some results doubtful: a self-check failed (2 wins over 4, 4 over 3)

Examples:
  beadline rig 'shots/*.jpg' --profile rig.toml --out results.jsonl --summary summary.csv
  beadline rig --watch incoming/ --profile rig.toml --out results.jsonl";

/// `beadline rig` as typed.
#[derive(Debug, Clone, ClapArgs)]
pub(crate) struct RigArgs {
    /// Photos: files, folders (their photos) or glob patterns such as 'shots/*.jpg'.
    pub(crate) paths: Vec<String>,
    /// Rig profile (TOML) with the station's detection and measure settings.
    #[arg(long, value_name = "RIG.toml")]
    pub(crate) profile: Option<PathBuf>,
    #[command(flatten)]
    pub(crate) measure: Box<MeasureArgs>,
    /// Append the result lines (JSON, one per photo) to FILE instead of standard output.
    #[arg(long, value_name = "FILE", help_heading = OUTPUT)]
    pub(crate) out: Option<PathBuf>,
    /// Write a summary CSV, one row per photo, at the end of the run.
    #[arg(long, value_name = "FILE", help_heading = OUTPUT)]
    pub(crate) summary: Option<PathBuf>,
    /// Write an overlay per photo into DIR (NAME.overlay.png).
    #[arg(long, value_name = "DIR", help_heading = OUTPUT)]
    pub(crate) overlay_dir: Option<PathBuf>,
    /// Write an HTML report per photo into DIR (NAME.report.html); DIR must exist.
    #[arg(long, value_name = "DIR", help_heading = OUTPUT)]
    pub(crate) report_dir: Option<PathBuf>,
    /// No progress bar and no per-photo error lines on standard error.
    #[arg(long, help_heading = OUTPUT)]
    pub(crate) quiet: bool,
    /// Watch DIR and measure each new photo once it is completely written.
    #[arg(long, value_name = "DIR", help_heading = WATCH)]
    pub(crate) watch: Option<PathBuf>,
    /// Journal of the photos done in watch mode (default: DIR/.beadline-journal).
    #[arg(long, value_name = "FILE", help_heading = WATCH)]
    pub(crate) journal: Option<PathBuf>,
    /// Seconds between two looks at the watched folder.
    #[arg(long, value_name = "SECONDS", default_value_t = 0.5, help_heading = WATCH)]
    pub(crate) poll_interval: f64,
    /// Stop watching after N photos.
    #[arg(long, value_name = "N", help_heading = WATCH)]
    pub(crate) max_photos: Option<usize>,
    /// Stop watching after SECONDS without a new photo.
    #[arg(long, value_name = "SECONDS", help_heading = WATCH)]
    pub(crate) idle_exit: Option<f64>,
    /// Worker threads (default: one per core).
    #[arg(long, value_name = "N", help_heading = RESOURCES)]
    pub(crate) jobs: Option<usize>,
    /// Most photos decoded at once (default: the number of threads).
    #[arg(long, value_name = "N", help_heading = RESOURCES)]
    pub(crate) max_decoding: Option<usize>,
    #[command(flatten)]
    pub(crate) detect: Box<DetectArgs>,
}

/// Output format.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub(crate) enum Format {
    Text,
    Json,
    Csv,
}

/// Output format of a plan: a plan is no table, so there is no CSV.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub(crate) enum PlanFormat {
    Text,
    Json,
}

/// Ball polarity as typed.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub(crate) enum PolarityArg {
    Auto,
    Bright,
    Dark,
}

/// Tone curve as typed.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub(crate) enum ToneArg {
    Srgb,
    Linear,
}

/// A path for an image we write as `kind`: its name must say so, so that no viewer or script
/// takes it for another format.
pub(crate) fn typed_path(s: &str, kind: &str) -> std::result::Result<PathBuf, String> {
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
pub(crate) fn png_path(s: &str) -> std::result::Result<PathBuf, String> {
    typed_path(s, "png")
}

/// See [`typed_path`].
pub(crate) fn svg_path(s: &str) -> std::result::Result<PathBuf, String> {
    typed_path(s, "svg")
}

/// An HTML report's path: named .html or .htm, in a folder that exists (refused before any work).
pub(crate) fn html_path(s: &str) -> std::result::Result<PathBuf, String> {
    let p = PathBuf::from(s);
    if !matches!(
        p.extension()
            .and_then(|e| e.to_str())
            .map(str::to_ascii_lowercase)
            .as_deref(),
        Some("html" | "htm")
    ) {
        return Err(format!(
            "'{s}': the report is HTML, so its name must end in .html"
        ));
    }
    match p.parent().filter(|f| !f.as_os_str().is_empty()) {
        Some(folder) if !folder.is_dir() => Err(format!(
            "'{s}': the folder {} does not exist",
            folder.display()
        )),
        _ => Ok(p),
    }
}

/// Where and how results go.
#[derive(Debug, Clone, ClapArgs)]
pub(crate) struct OutArgs {
    /// Output format.
    #[arg(long, value_enum, default_value = "text", help_heading = OUTPUT)]
    pub(crate) format: Format,
    /// Write the result to FILE (atomically) instead of standard output.
    #[arg(short = 'o', long = "output", value_name = "FILE", help_heading = OUTPUT)]
    pub(crate) output: Option<PathBuf>,
    /// Draw what was found on the photo and write it as PNG.
    #[arg(long, value_name = "PNG", value_parser = png_path, help_heading = OUTPUT)]
    pub(crate) overlay: Option<PathBuf>,
}

/// Detection settings as typed; see `SpotOptions` for what each does.
#[derive(Debug, Clone, ClapArgs)]
pub(crate) struct DetectArgs {
    /// Clean plate: the same scene photographed without the ball.
    #[arg(long, value_name = "PHOTO", help_heading = DETECTION)]
    pub(crate) plate: Option<PathBuf>,
    /// Ball against background.
    #[arg(long, value_enum, default_value = "auto", help_heading = DETECTION)]
    pub(crate) polarity: PolarityArg,
    /// How the stored values encode light: srgb (camera JPEGs and PNGs, IEC 61966-2-1) or linear
    /// (a raw or scientific camera's 16-bit TIFF).
    #[arg(long, value_enum, default_value = "srgb", help_heading = DETECTION)]
    pub(crate) tone: ToneArg,
    /// Radius range of the ball images, pixels, as MIN..MAX (default: estimated).
    #[arg(long, value_name = "MIN..MAX", help_heading = DETECTION)]
    pub(crate) radius: Option<String>,
    /// Threshold in robust sigmas of the noise.
    #[arg(long, default_value_t = 4.5, help_heading = TUNING)]
    pub(crate) threshold_sigma: f32,
    /// Fixed threshold on the difference from the background, 0..1 (overrides --threshold-sigma).
    #[arg(long, help_heading = TUNING)]
    pub(crate) threshold_level: Option<f32>,
    /// Background grid cell, pixels (0 = automatic).
    #[arg(long, default_value_t = 0, help_heading = TUNING)]
    pub(crate) background_cell: usize,
    /// Gaussian smoothing before edges, pixels.
    #[arg(long, default_value_t = 0.7, help_heading = TUNING)]
    pub(crate) smooth: f32,
    /// Rims whose median edge is this many noise sigmas have their points placed on the
    /// unsmoothed gradient (0: all rims; a huge value: none).
    #[arg(long, default_value_t = 20.0, help_heading = TUNING)]
    pub(crate) fine_snr: f64,
    /// Edge points need a gradient above this many noise sigmas.
    #[arg(long, default_value_t = 4.0, help_heading = TUNING)]
    pub(crate) edge_sigma: f32,
    /// Smallest fraction of the rim with edge support for a ball image, 0..1.
    #[arg(long, default_value_t = 0.35, help_heading = TUNING)]
    pub(crate) min_score: f64,
    /// Ball images' radii may differ from the common radius by this fraction.
    #[arg(long, default_value_t = 0.12, help_heading = TUNING)]
    pub(crate) radius_tolerance: f64,
    /// The round objects differ in size (not images of one ball): no common radius.
    #[arg(long, help_heading = TUNING)]
    pub(crate) sizes_differ: bool,
    /// Isolated images of a ball up to this radius are refined by fitting a lit sphere's image to
    /// their pixels, pixels (0: edge fit only).
    #[arg(long, default_value_t = 40.0, help_heading = TUNING)]
    pub(crate) shaded_max_r: f64,
    /// Smallest radius of a ball on the decimated photo, pixels: with the smallest searched radius
    /// r_min, the photo is averaged over floor(r_min / this) pixels squared for the blobs and the
    /// vote, and the rims are fitted at full resolution (0: full resolution throughout).
    #[arg(long, default_value_t = detect::COARSE_R_PX, help_heading = TUNING)]
    pub(crate) coarse_r: f64,
    /// K: systematic centre sigma of a lit sphere's edge, K x max(1/r, 16/r^2) px for the photo's
    /// common ball radius r in px (K = 0.5: 0.0125 px at r = 40, 0.125 px at r = 8); common to
    /// all images, reported as systematic_px; 0 when the shaded fit corrects the images instead.
    #[arg(long, value_name = "K", default_value_t = 0.5, help_heading = TUNING)]
    pub(crate) edge_systematic: f64,
    /// Largest RMS distance of rim points from the fitted circle, pixels (or 2.5 x the median of
    /// the photo's well-covered images, when that is larger).
    #[arg(long, default_value_t = 0.5, help_heading = TUNING)]
    pub(crate) max_rms: f64,
    /// Images whose brightest rim quarter is fainter than this fraction of the median rim
    /// contrast are rejected as reflections.
    #[arg(long, default_value_t = 0.5, help_heading = TUNING)]
    pub(crate) faint: f64,
    /// Refuse photos with more candidate regions than this.
    #[arg(long, default_value_t = 5000, help_heading = TUNING)]
    pub(crate) max_candidates: usize,
    /// Write each stage's intermediate image into DIR.
    #[arg(long, value_name = "DIR", help_heading = TUNING)]
    pub(crate) debug_dir: Option<PathBuf>,
}

/// What to estimate from the flight arcs.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub(crate) enum EstimateArg {
    Gravity,
    Interval,
    Scale,
}

/// Calibration, time and physics settings as typed.
#[derive(Debug, Clone, ClapArgs)]
pub(crate) struct MeasureArgs {
    /// Flash rate, hertz.
    #[arg(long, value_name = "HZ", help_heading = CALIBRATION)]
    pub(crate) rate: Option<f64>,
    /// Ball diameter, metres (also the scale when no other is given).
    #[arg(long, value_name = "METRES", help_heading = CALIBRATION)]
    pub(crate) ball_diameter: Option<f64>,
    /// Scale in the plane of motion, pixels per metre.
    #[arg(long, value_name = "PX_PER_M", help_heading = CALIBRATION)]
    pub(crate) scale: Option<f64>,
    /// Two image points a known distance apart in the plane of motion: X1,Y1,X2,Y2,METRES.
    #[arg(long, value_name = "X1,Y1,X2,Y2,METRES", help_heading = CALIBRATION)]
    pub(crate) ruler: Option<String>,
    /// Plane file (TOML: [[points]] x_px, y_px, x_m, y_m; optional k1, k2, focal_px).
    #[arg(long, value_name = "FILE", help_heading = CALIBRATION)]
    pub(crate) plane: Option<PathBuf>,
    /// The camera's focal length in pixels (focal length / pixel pitch): gives the motion in
    /// depth in m/s.
    #[arg(long, value_name = "PIXELS", help_heading = CALIBRATION)]
    pub(crate) focal_px: Option<f64>,
    /// Gravity, m/s^2, when it is not the quantity estimated.
    #[arg(long, default_value_t = STANDARD_GRAVITY_MPS2, help_heading = CALIBRATION)]
    pub(crate) gravity: f64,
    /// The quantity estimated from the flight arcs (default: gravity when rate and scale are
    /// given; otherwise the missing one).
    #[arg(long, value_enum, help_heading = CALIBRATION)]
    pub(crate) estimate: Option<EstimateArg>,
    /// Acceptance band QUANTITY=MIN..MAX (repeatable), e.g. restitution=0.73..0.76.
    #[arg(long = "accept", value_name = "Q=MIN..MAX", help_heading = ACCEPTANCE)]
    pub(crate) accept: Vec<String>,
    /// Ball build: solid, shell, or thick:INNER_DIAMETER_M.
    #[arg(long, default_value = "solid", help_heading = PHYSICS)]
    pub(crate) ball: String,
    /// The camera is level: do not estimate and correct its roll.
    #[arg(long, help_heading = PHYSICS)]
    pub(crate) level: bool,
    /// Fit a quadratic air-drag term to the flight arcs.
    #[arg(long, help_heading = PHYSICS)]
    pub(crate) fit_drag: bool,
    /// Start of the path near pixel X,Y (default: found automatically).
    #[arg(long, value_name = "X,Y", help_heading = PHYSICS)]
    pub(crate) start: Option<String>,
}

#[cfg(test)]
mod tests {
    use super::*;
    use clap::Parser;

    #[test]
    fn every_example_in_the_help_parses() {
        let helps = [
            RENDER_HELP,
            SPOTS_HELP,
            PATH_HELP,
            MEASURE_HELP,
            PLAN_HELP,
            DEMO_HELP,
            RIG_HELP,
        ];
        for help in helps {
            let examples: Vec<&str> = help
                .lines()
                .filter_map(|l| l.trim().strip_prefix("beadline "))
                .collect();
            assert!(!examples.is_empty(), "no example in {help}");
            for e in examples {
                let words = std::iter::once("beadline")
                    .chain(e.split_whitespace().map(|w| w.trim_matches('\'')));
                if let Err(err) = Args::try_parse_from(words) {
                    panic!("{e}: {err}");
                }
            }
        }
    }
}
