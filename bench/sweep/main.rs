//! The sweep bench of issue 16: random shots across the whole shot space, each rendered with
//! exact truth, measured as a user would and scored, in one run.
//!
//! `cargo bench --bench sweep -- [--count 300] [--seed S] [--out bench/SWEEP_RESULTS.md]
//! [--keep DIR] [--csv FILE] [--small]`: draws `count` shots from seeds S, S+1, ... ([`shots`]), renders and
//! measures them in parallel (rayon) and scores every value ([`score`]); writes the report
//! (settings, per quantity right / flagged / silently wrong / refused / missed, coverage of the
//! 2-sigma intervals, false warnings, the list of wrong values, run time and machine). `--keep`
//! keeps each shot's photo, plate, plane file, scene, truth and measurement in `DIR/SEED/`; `--csv`
//! writes one row per scored value.

mod score;
mod shots;

use rayon::prelude::*;
use score::{Class, Quantity, Scored};
use shots::Shot;
use std::fmt::Write as _;
use std::path::{Path, PathBuf};
use std::time::Instant;

struct Args {
    count: u64,
    seed: u64,
    out: PathBuf,
    keep: Option<PathBuf>,
    csv: Option<PathBuf>,
    small: bool,
}

fn parse_args() -> Result<Args, String> {
    let mut a = Args {
        count: 300,
        seed: 1,
        out: PathBuf::from("bench/SWEEP_RESULTS.md"),
        keep: None,
        csv: None,
        small: false,
    };
    let mut it = std::env::args().skip(1);
    while let Some(flag) = it.next() {
        let mut value = || it.next().ok_or(format!("{flag}: a value is needed"));
        match flag.as_str() {
            "--count" => a.count = value()?.parse().map_err(|e| format!("--count: {e}"))?,
            "--seed" => a.seed = value()?.parse().map_err(|e| format!("--seed: {e}"))?,
            "--out" => a.out = PathBuf::from(value()?),
            "--keep" => a.keep = Some(PathBuf::from(value()?)),
            "--csv" => a.csv = Some(PathBuf::from(value()?)),
            "--small" => a.small = true,
            "--bench" => {}
            other => return Err(format!("unknown argument {other}")),
        }
    }
    Ok(a)
}

/// Draw, render, measure and score one seed; a failure of the bench itself (a file it cannot
/// write) is reported as the error.
fn one(seed: u64, args: &Args) -> Result<Scored, String> {
    let shot = Shot::draw(seed, args.small);
    match &args.keep {
        Some(root) => {
            let dir = root.join(seed.to_string());
            std::fs::create_dir_all(&dir).map_err(|e| e.to_string())?;
            score::run(&shot, &dir, true)
        }
        None => {
            let dir = tempfile::tempdir().map_err(|e| e.to_string())?;
            score::run(&shot, dir.path(), false)
        }
    }
}

fn main() {
    let args = match parse_args() {
        Ok(a) => a,
        Err(e) => {
            eprintln!(
                "{e}\nusage: cargo bench --bench sweep -- [--count N] [--seed S] [--out FILE] [--keep DIR] [--csv FILE] [--small]"
            );
            std::process::exit(2);
        }
    };
    let t0 = Instant::now();
    let done = std::sync::atomic::AtomicUsize::new(0);
    let results: Vec<(u64, Result<Scored, String>)> = (args.seed..args.seed + args.count)
        .into_par_iter()
        .map(|seed| {
            let r = one(seed, &args);
            let k = done.fetch_add(1, std::sync::atomic::Ordering::Relaxed) + 1;
            if k.is_multiple_of(25) {
                eprintln!("{k} / {} shots", args.count);
            }
            (seed, r)
        })
        .collect();
    let seconds = t0.elapsed().as_secs_f64();
    let mut scored = Vec::new();
    for (seed, r) in results {
        match r {
            Ok(s) => scored.push(s),
            Err(e) => eprintln!("seed {seed}: the bench failed: {e}"),
        }
    }
    let text = report(&scored, &args, seconds);
    print!("{text}");
    let csv = args.csv.as_ref().map(|p| (p, values_csv(&scored)));
    for (path, text) in std::iter::once((&args.out, text)).chain(csv) {
        if let Err(e) = write(path, &text) {
            eprintln!("{e}");
            std::process::exit(1);
        }
    }
}

/// One row per scored value: seed, shot, quantity, label, truth, measured, sigma, class, the
/// photo's worst check and its refusal.
fn values_csv(scored: &[Scored]) -> String {
    let mut s = String::from("seed,shot,quantity,label,truth,measured,sigma,class,worst,error\n");
    let quote = |t: &str| format!("\"{}\"", t.replace('"', "'"));
    for p in scored {
        for v in &p.values {
            let _ = writeln!(
                s,
                "{},{},{},{},{},{},{},{:?},{},{}",
                p.seed,
                quote(&p.description),
                quote(v.quantity.name()),
                quote(&v.label),
                v.truth,
                v.measured,
                v.sigma,
                v.class,
                p.worst.name(),
                quote(p.error.as_deref().unwrap_or("")),
            );
        }
    }
    s
}

fn write(path: &Path, text: &str) -> Result<(), String> {
    beadline::core::output::write_atomic(path, |w| w.write_all(text.as_bytes()))
        .map_err(|e| e.to_string())
}

fn machine() -> String {
    let cores = std::thread::available_parallelism().map_or(1, |n| n.get());
    let cpu = std::fs::read_to_string("/proc/cpuinfo")
        .ok()
        .and_then(|t| {
            t.lines()
                .find(|l| l.starts_with("model name"))
                .and_then(|l| l.split(':').nth(1))
                .map(|s| s.trim().to_string())
        })
        .unwrap_or_else(|| "unknown CPU".into());
    format!("{cores} cores ({cpu})")
}

/// Counts of one quantity.
#[derive(Default)]
struct Tally {
    right: usize,
    flagged: usize,
    silent: usize,
    refused: usize,
    missed: usize,
    unseen: usize,
    covered: usize,
    measured: usize,
}

impl Tally {
    fn add(&mut self, v: &score::Value) {
        match v.class {
            Class::Right => self.right += 1,
            Class::Flagged => self.flagged += 1,
            Class::Silent => self.silent += 1,
            Class::Refused => self.refused += 1,
            Class::Missed => self.missed += 1,
            Class::Unseen => self.unseen += 1,
        }
        if let Some(c) = v.covered() {
            self.measured += 1;
            self.covered += usize::from(c);
        }
    }

    fn total(&self) -> usize {
        self.right + self.flagged + self.silent + self.refused + self.missed
    }

    fn row(&self, name: &str) -> String {
        let pct = |a: usize, b: usize| {
            if b == 0 {
                "-".to_string()
            } else {
                format!("{:.1} %", 100.0 * a as f64 / b as f64)
            }
        };
        format!(
            "| {name} | {} | {} ({}) | {} | {} | {} | {} | {} ({} of {}) | {} |\n",
            self.total(),
            self.right,
            pct(self.right, self.total()),
            self.flagged,
            self.silent,
            self.refused,
            self.missed,
            pct(self.covered, self.measured),
            self.covered,
            self.measured,
            self.unseen
        )
    }
}

fn report(scored: &[Scored], args: &Args, seconds: f64) -> String {
    let mut s = String::new();
    let _ = writeln!(s, "# Sweep: never silently wrong (issue 16, point 5)\n");
    let _ = writeln!(
        s,
        "Command: `cargo bench --bench sweep -- --count {} --seed {}{}`; {} shots scored; run time \
         {:.0} s ({:.1} s per shot per core); machine: {}.\n",
        args.count,
        args.seed,
        if args.small { " --small" } else { "" },
        scored.len(),
        seconds,
        seconds * std::thread::available_parallelism().map_or(1.0, |n| n.get() as f64)
            / scored.len().max(1) as f64,
        machine()
    );
    s.push_str(SETTINGS_TEXT);
    let mut all = Tally::default();
    let mut rows = String::new();
    for q in Quantity::ALL {
        let mut t = Tally::default();
        for v in scored
            .iter()
            .flat_map(|x| &x.values)
            .filter(|v| v.quantity == q)
        {
            t.add(v);
            all.add(v);
        }
        rows.push_str(&t.row(q.name()));
    }
    s.push_str(
        "\n## Values\n\n| quantity | values | right | flagged | silently wrong | refused | missed | \
         truth within 2 sigma | not shown |\n|---|---|---|---|---|---|---|---|---|\n",
    );
    s.push_str(&rows);
    s.push_str(&all.row("**all**"));
    photo_summary(&mut s, scored);
    wrong_list(&mut s, scored, Class::Silent, "Silently wrong values");
    wrong_list(&mut s, scored, Class::Flagged, "Flagged values");
    refused_list(&mut s, scored);
    s
}

fn photo_summary(s: &mut String, scored: &[Scored]) {
    let refused = scored.iter().filter(|x| x.error.is_some()).count();
    let warned = scored
        .iter()
        .filter(|x| x.error.is_none() && x.worst != beadline::physics::checks::CheckOutcome::Pass)
        .count();
    let false_warnings: Vec<u64> = scored
        .iter()
        .filter(|x| x.false_warning())
        .map(|x| x.seed)
        .collect();
    let cropped = scored.iter().filter(|x| x.out_of_frame > 0).count();
    let flashes: usize = scored.iter().map(|x| x.flashes).sum();
    let outside: usize = scored.iter().map(|x| x.out_of_frame).sum();
    let oos: usize = scored.iter().map(|x| x.bounces_out_of_scope).sum();
    let silent_photos = scored
        .iter()
        .filter(|x| x.values.iter().any(|v| v.class == Class::Silent))
        .count();
    let _ = writeln!(
        s,
        "\n## Photos\n\n- {} photos; {} refused by `measure`; {} with a check that warned or \
         failed; {} with at least one silently wrong value.\n- False warnings (every value \
         right and none missed, yet a check warned or failed): {}{}.\n- {} photos with part of \
         the path out of the frame ({} of {} images not wholly inside); {} truth bounces inside the \
         exposure left out of scope (under 3 resolvable images on a side).\n- Second pass from \
         the physics and from the pixels along the motion: {} images confirmed on {} photos, {} \
         of them within half a radius of their own truth flash{}.\n- Flash index: every path image on the truth flash its `n` \
         names (one constant offset) on {} of {} measured photos{}.",
        scored.len(),
        refused,
        warned,
        silent_photos,
        false_warnings.len(),
        if false_warnings.is_empty() {
            String::new()
        } else {
            format!(" (seeds {:?})", false_warnings)
        },
        cropped,
        outside,
        flashes,
        oos,
        scored.iter().map(|x| x.confirmed).sum::<usize>(),
        scored.iter().filter(|x| x.confirmed > 0).count(),
        scored.iter().map(|x| x.confirmed_true).sum::<usize>(),
        {
            let off: Vec<u64> = scored
                .iter()
                .filter(|x| x.confirmed_true < x.confirmed)
                .map(|x| x.seed)
                .collect();
            if off.is_empty() {
                String::new()
            } else {
                format!(" (not all on seeds {off:?})")
            }
        },
        scored
            .iter()
            .filter(|x| x.index_consistent == Some(true))
            .count(),
        scored
            .iter()
            .filter(|x| x.index_consistent.is_some())
            .count(),
        {
            let off: Vec<u64> = scored
                .iter()
                .filter(|x| x.index_consistent == Some(false))
                .map(|x| x.seed)
                .collect();
            if off.is_empty() {
                String::new()
            } else {
                format!(" (not on seeds {off:?})")
            }
        },
    );
}

fn fmt_value(v: f64) -> String {
    if v.is_nan() {
        "-".into()
    } else {
        format!("{v:.5}")
    }
}

fn wrong_list(s: &mut String, scored: &[Scored], class: Class, title: &str) {
    let _ = writeln!(
        s,
        "\n## {title}\n\n| seed | shot | value | measured | truth | sigma | (m - t) / sigma | \
         checks not passed |\n|---|---|---|---|---|---|---|---|"
    );
    let mut n = 0;
    for x in scored {
        for v in x.values.iter().filter(|v| v.class == class) {
            n += 1;
            let z = (v.measured - v.truth) / v.sigma;
            let _ = writeln!(
                s,
                "| {} | {} | {} {} | {} | {} | {} | {} | {} |",
                x.seed,
                x.description,
                v.quantity.name(),
                v.label,
                fmt_value(v.measured),
                fmt_value(v.truth),
                fmt_value(v.sigma),
                if z.is_finite() {
                    format!("{z:.1}")
                } else {
                    "-".into()
                },
                if x.warnings.is_empty() {
                    "none".to_string()
                } else {
                    x.warnings.join("; ")
                }
            );
        }
    }
    if n == 0 {
        let _ = writeln!(s, "| none | | | | | | | |");
    }
}

fn refused_list(s: &mut String, scored: &[Scored]) {
    let _ = writeln!(
        s,
        "\n## Refused photos\n\n| seed | shot | error |\n|---|---|---|"
    );
    for x in scored {
        if let Some(e) = &x.error {
            let _ = writeln!(
                s,
                "| {} | {} | {} |",
                x.seed,
                x.description,
                e.replace('|', "/")
            );
        }
    }
}

const SETTINGS_TEXT: &str = "## What is drawn and how it is measured\n\n\
Each seed draws one shot (`bench/sweep/shots.rs`): a drop (from rest, vx = 0), a throw (vx, vy) or \
an incline of 10-60 deg (solid or shell ball, rolling resistance 30 % of the time), a thirds each; \
flash rate 5-120 Hz (log-uniform); restitution 0.3-0.95 at the first impact, half the time with a \
speed trend (restitution_slope_s_per_m); the motion sized so that the first rebound arc holds about \
5-16 images (the fall at most 1 s); 1-3 bounces in the exposure; ball image radius 6-80 px \
(log-uniform), the scale fitted to a frame of at most 1600 x 1200 px and the ball's diameter \
following; JPEG quality 60-100 (40 %), PNG 8 bit (35 %), PNG 16 bit (25 %, half of them linear \
tone); a dark ball 25 % of the time, always with a clean plate (a dark ball without a plate is out \
of the detector's scope, so it is not drawn); a tilted camera (tilt 5-30 deg, roll 0-3 deg) with a \
plane file 35 % of the time, a rolled camera (0.5-3 deg) 20 %; a glossy floor 20 %; 1-3 round \
distractors 20 %; air drag 0.005-0.1 /m 25 %; 10 % of the frames cropped so that part of the path \
leaves the frame.\n\n\
Measured in-process with `pipeline::measure_photo` and the settings a user types: `--rate`, \
`--ball-diameter`, `--ball solid|shell`; the scale by `--scale PX_PER_M` (60 % of the square or \
rolled cameras), by the ball's diameter alone (40 %) or `--plane FILE` (tilted camera: the \
renderer's projection of six world points); `--plate` for a dark ball; `--tone linear` for a \
linear 16-bit photo; `--fit-drag` when drag reaches 1 % of gravity at the fastest image (a user \
who knows the ball is light fits drag; weaker drag is measured as vacuum, as a user would). \
With `--fit-drag` the camera is level or has a plane file, as the README asks. Gravity is estimated \
(rate and scale given); the scored gravity is the headline `gravity_mps2`.\n\n\
Scoring (`bench/sweep/score.rs`): right = |measured - truth| <= max(3 sigma, 1 % of truth); \
flagged = wrong but a check of the photo warned or failed; silently wrong = wrong and every check \
passed; refused = `measure` returned an error (every value of the photo in scope); missed = in \
scope but not reported. In scope: a bounce with at least 3 resolvable images on each side, the \
incline acceleration with 3 resolvable images on the incline, the launch also with 3 in the first \
arc, gravity with 4 in some arc. Resolvable: wholly in the frame and no other image of the \
exposure (any phase: a drop's rise passes over its fall) within the planner's spacing limit of \
0.5 diameter (`synth::plan::RESOLVABLE`): nearer images merge into one blob, which is issue 17's \
work. A value out of scope and not reported is counted apart (\"not shown\") and not in the \
totals; a value out of scope that is reported is scored like any other. Bounces are matched to the truth by time (the path laid on the truth flashes \
by pixel position); a measured bounce with no truth bounce is wrong, and so is an incline found in \
a scene without one. Coverage: the truth within measured +- 2 sigma, over the measured values.\n";
