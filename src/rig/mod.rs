//! Rig: measure many strobe photos unattended on a test rig.
//!
//! Goes in: photo paths (files, folders, globs) or a folder to watch, one [`MeasureSettings`]
//! (usually from a rig [`Profile`] plus command-line flags) and [`RigOptions`]. Comes out: one
//! [`PhotoResult`] per photo, written as one whole JSON line each (the measure JSON plus `file`
//! and `status`: `ok`, `out_of_band` or `error` with an `error` message), an optional summary
//! CSV ([`summary_csv`]), optional overlays, and in watch mode a [`Journal`] of done photos so a
//! restart processes each photo exactly once.
//!
//! Photos are measured in parallel; a counting [`Semaphore`] bounds how many are decoded and
//! measured at once so memory stays flat whatever the queue length. Bad photos never stop the
//! run: each gets an `error` result naming the file and the problem.

use crate::error::{Error, Result};
use crate::physics::bands::Outcome;
use crate::pipeline::MeasureSettings;
use crate::report::measure::MeasureDoc;
use rayon::prelude::*;
use serde::{Deserialize, Serialize};
use std::collections::{HashMap, HashSet};
use std::io::{Read, Write};
use std::path::{Path, PathBuf};
use std::sync::{Condvar, Mutex};
use std::time::{Duration, Instant, SystemTime};

/// File extensions taken as photos when listing a folder.
pub const PHOTO_EXTENSIONS: &[&str] = &["jpg", "jpeg", "png", "tif", "tiff"];

/// Default journal file name inside a watched folder.
pub const JOURNAL_NAME: &str = ".beadline-journal";

// ---------------------------------------------------------------------------------------------
// Profile
// ---------------------------------------------------------------------------------------------

/// A rig profile (TOML): every measure and detection setting of a station, keyed by the setting's
/// snake_case name with its unit. Unknown keys are refused. The values are checked where every
/// setting is, by `SpotOptions::validate` and `MeasureSettings::validate`.
#[derive(Debug, Clone, Default, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Profile {
    /// Clean plate photo: the scene without the ball (relative to the profile's folder).
    pub plate: Option<PathBuf>,
    /// Ball against background: auto, bright or dark.
    pub polarity: Option<String>,
    /// How the stored values encode light: srgb or linear.
    pub tone: Option<String>,
    /// [min, max] radius of the ball images, pixels (default: estimated).
    pub radius_px: Option<[f64; 2]>,
    /// Threshold in robust sigmas of the noise.
    pub threshold_sigma: Option<f64>,
    /// Fixed threshold on the difference from the background, 0..1 (overrides threshold_sigma).
    pub threshold_level: Option<f64>,
    /// Background grid cell, pixels (0 = automatic).
    pub background_cell_px: Option<i64>,
    /// Gaussian smoothing before edges, pixels.
    pub smooth_px: Option<f64>,
    /// Rims whose median edge is this many noise sigmas get points from the unsmoothed gradient.
    pub fine_snr: Option<f64>,
    /// Isolated images up to this radius get the shaded-sphere fit, pixels (0: edge fit only).
    pub shaded_max_r_px: Option<f64>,
    /// Smallest radius of a ball on the decimated photo, pixels (0: full resolution throughout).
    pub coarse_r_px: Option<f64>,
    /// Edge points need a gradient above this many noise sigmas.
    pub edge_sigma: Option<f64>,
    /// Smallest fraction of the rim with edge support for a ball image, 0..1.
    pub min_score: Option<f64>,
    /// Ball images' radii may differ from the common radius by this fraction.
    pub radius_tolerance: Option<f64>,
    /// The round objects differ in size (not images of one ball): no common radius.
    pub sizes_differ: Option<bool>,
    /// Largest RMS distance of rim points from the fitted circle, pixels.
    pub max_rms_px: Option<f64>,
    /// Images fainter than this fraction of the median rim contrast are rejected as reflections.
    pub faint: Option<f64>,
    /// Refuse photos with more candidate regions than this.
    pub max_candidates: Option<i64>,
    /// Flash rate, hertz.
    pub rate_hz: Option<f64>,
    /// Scale in the plane of motion, pixels per metre.
    pub scale_px_per_m: Option<f64>,
    /// Two image points a known distance apart: [x1, y1, x2, y2, metres].
    pub ruler: Option<[f64; 5]>,
    /// Ball diameter, metres (also the scale when no other is given).
    pub ball_diameter_m: Option<f64>,
    /// Plane file (relative to the profile's folder).
    pub plane: Option<PathBuf>,
    /// Gravity, m/s^2, when it is not the quantity estimated.
    pub gravity_mps2: Option<f64>,
    /// The quantity estimated from the flight arcs: gravity, interval or scale.
    pub estimate: Option<String>,
    /// Ball build: solid, shell or thick:INNER_DIAMETER_M.
    pub ball: Option<String>,
    /// The camera is level: do not estimate and correct its roll.
    pub level: Option<bool>,
    /// Fit a quadratic air-drag term to the flight arcs.
    pub fit_drag: Option<bool>,
    /// Acceptance bands, e.g. ["restitution=0.73..0.76"].
    pub accept: Option<Vec<String>>,
    /// Start of the path near pixel [x, y] (default: found automatically).
    pub start_px: Option<[f64; 2]>,
}

impl Profile {
    /// Parse profile text; `path` names the file in errors.
    pub fn parse(text: &str, path: &Path) -> Result<Profile> {
        toml::from_str(text).map_err(|e| {
            Error::config(
                path,
                e.to_string().trim().replace('\n', " ").replace("  ", " "),
            )
        })
    }

    /// Read and parse a profile file. Relative `plate` and `plane` paths are taken from the
    /// profile's folder.
    pub fn load(path: &Path) -> Result<Profile> {
        let text = std::fs::read_to_string(path).map_err(|e| Error::io(path, e))?;
        let mut p = Profile::parse(&text, path)?;
        let base = path.parent().unwrap_or(Path::new(""));
        for f in [&mut p.plate, &mut p.plane].into_iter().flatten() {
            if f.is_relative() {
                *f = base.join(&*f);
            }
        }
        Ok(p)
    }
}

// ---------------------------------------------------------------------------------------------
// Inputs
// ---------------------------------------------------------------------------------------------

/// Whether `path` has a photo extension (case-insensitive) and is not hidden (journals and
/// temporary `.part` files start with a dot).
pub fn is_photo_name(path: &Path) -> bool {
    let hidden = path
        .file_name()
        .and_then(|n| n.to_str())
        .is_some_and(|n| n.starts_with('.'));
    let ext = path
        .extension()
        .and_then(|e| e.to_str())
        .map(|e| e.to_ascii_lowercase());
    !hidden && ext.is_some_and(|e| PHOTO_EXTENSIONS.contains(&e.as_str()))
}

/// Photos directly inside a folder, sorted by name.
pub fn list_folder(dir: &Path) -> Result<Vec<PathBuf>> {
    let mut v = Vec::new();
    for entry in std::fs::read_dir(dir).map_err(|e| Error::io(dir, e))? {
        let entry = entry.map_err(|e| Error::io(dir, e))?;
        let p = entry.path();
        if is_photo_name(&p) && !p.is_dir() {
            v.push(p);
        }
    }
    v.sort();
    Ok(v)
}

/// Expand the inputs: a folder gives its photos, a pattern with `*`, `?` or `[` gives its
/// matches (sorted), anything else is kept as a file; a missing file is kept too and gets an
/// `error` result when its turn comes. Only a malformed pattern or an unreadable folder is an
/// error of the run itself. A photo named more than once is kept once, at its first place.
pub fn expand_inputs(inputs: &[String]) -> Result<Vec<PathBuf>> {
    let mut out = Vec::new();
    for input in inputs {
        let p = Path::new(input);
        if p.is_dir() {
            out.extend(list_folder(p)?);
        } else if !p.exists() && input.contains(['*', '?', '[']) {
            let paths = glob::glob(input).map_err(|e| {
                Error::setting("PATH", format!("'{input}' is not a valid pattern: {e}"))
            })?;
            let mut found: Vec<PathBuf> = paths
                .filter_map(|r| r.ok())
                .filter(|p| !p.is_dir())
                .collect();
            found.sort();
            out.extend(found);
        } else {
            out.push(p.to_path_buf());
        }
    }
    // A photo named twice (a folder and a glob over it) is measured once.
    let mut seen = HashSet::new();
    out.retain(|p| seen.insert(p.clone()));
    Ok(out)
}

// ---------------------------------------------------------------------------------------------
// Bounded parallel measurement
// ---------------------------------------------------------------------------------------------

/// A counting semaphore (std `Mutex` + `Condvar`): at most `permits` holders at once.
#[derive(Debug)]
pub struct Semaphore {
    free: Mutex<usize>,
    freed: Condvar,
}

/// A held permit, given back when dropped.
#[derive(Debug)]
pub struct Permit<'a>(&'a Semaphore);

impl Semaphore {
    /// A semaphore with `permits` permits (at least one).
    pub fn new(permits: usize) -> Semaphore {
        Semaphore {
            free: Mutex::new(permits.max(1)),
            freed: Condvar::new(),
        }
    }

    /// Wait for a permit.
    pub fn acquire(&self) -> Permit<'_> {
        let mut free = self.free.lock().unwrap_or_else(|p| p.into_inner());
        while *free == 0 {
            free = self.freed.wait(free).unwrap_or_else(|p| p.into_inner());
        }
        *free -= 1;
        Permit(self)
    }
}

impl Drop for Permit<'_> {
    fn drop(&mut self) {
        let mut free = self.0.free.lock().unwrap_or_else(|p| p.into_inner());
        *free += 1;
        self.0.freed.notify_one();
    }
}

/// How a rig run measures each photo.
#[derive(Debug, Clone, Default)]
pub struct RigOptions {
    /// Measurement settings, the same for every photo.
    pub settings: MeasureSettings,
    /// Write an overlay per photo into this folder (`NAME.overlay.png`).
    pub overlay_dir: Option<PathBuf>,
    /// Most photos decoded and measured at once (0: the number of threads).
    pub max_decoding: usize,
}

/// A photo's status.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Status {
    /// Measured, and every acceptance band passed or none was given.
    Ok,
    /// Measured, and a result lies outside an acceptance band.
    OutOfBand,
    /// The photo could not be read or measured.
    Error,
}

impl Status {
    /// The name written in the results.
    pub fn name(self) -> &'static str {
        match self {
            Status::Ok => "ok",
            Status::OutOfBand => "out_of_band",
            Status::Error => "error",
        }
    }
}

/// One photo's result.
#[derive(Debug, Clone)]
pub struct PhotoResult {
    /// The photo as listed.
    pub file: String,
    /// Its status.
    pub status: Status,
    /// The one-line error message (status `error`).
    pub error: Option<String>,
    /// The measurement (status `ok` or `out_of_band`).
    pub doc: Option<MeasureDoc>,
}

impl PhotoResult {
    /// The result as one JSON line (with the trailing newline).
    pub fn json_line(&self) -> String {
        let mut v = match &self.doc {
            Some(doc) => serde_json::to_value(doc)
                .unwrap_or_else(|e| serde_json::json!({ "serialise_error": e.to_string() })),
            None => serde_json::Value::Object(Default::default()),
        };
        if let serde_json::Value::Object(map) = &mut v {
            map.insert("file".into(), self.file.clone().into());
            map.insert("status".into(), self.status.name().into());
            if let Some(e) = &self.error {
                map.insert("error".into(), e.clone().into());
            }
        }
        let mut line = v.to_string();
        line.push('\n');
        line
    }
}

/// Measure one photo (holding a decoding permit while it is in memory). Never fails: a photo
/// that cannot be read or measured gives an `error` result.
pub fn measure_one(path: &Path, options: &RigOptions, permits: &Semaphore) -> PhotoResult {
    let file = path.display().to_string();
    let _permit = permits.acquire();
    let outcome = crate::pipeline::measure_photo(path, &options.settings).and_then(|m| {
        if let Some(dir) = &options.overlay_dir {
            let name = path
                .file_stem()
                .map(|s| s.to_string_lossy().into_owned())
                .unwrap_or_else(|| "photo".into());
            crate::draw::overlay::measure_overlay(
                path,
                &m,
                &dir.join(format!("{name}.overlay.png")),
            )?;
        }
        Ok(m)
    });
    match outcome {
        Ok(m) => {
            let failed = m
                .doc
                .measurement
                .verdicts
                .iter()
                .any(|v| v.outcome == Outcome::Fail);
            PhotoResult {
                file,
                status: if failed {
                    Status::OutOfBand
                } else {
                    Status::Ok
                },
                error: None,
                doc: Some(m.doc),
            }
        }
        Err(e) => {
            let mut msg = e.to_string().replace('\n', " ");
            if !msg.contains(&file) {
                msg = format!("{file}: {msg}");
            }
            PhotoResult {
                file,
                status: Status::Error,
                error: Some(msg),
                doc: None,
            }
        }
    }
}

/// Where result lines go: each line is written whole with one `write_all` and flushed.
pub struct ResultSink {
    out: Mutex<Box<dyn Write + Send>>,
    name: PathBuf,
}

impl ResultSink {
    /// Results to standard output.
    pub fn stdout() -> ResultSink {
        ResultSink {
            out: Mutex::new(Box::new(std::io::stdout())),
            name: PathBuf::from("<standard output>"),
        }
    }

    /// Results appended to a file (created when missing). A torn last line (a kill while it
    /// was written) is cut off, so the file holds whole lines only; that photo had not been
    /// journalled and is measured again.
    pub fn append(path: &Path) -> Result<ResultSink> {
        let mut f = open_append(path, Torn::Cut)?;
        f.flush().map_err(|e| Error::io(path, e))?;
        Ok(ResultSink {
            out: Mutex::new(Box::new(f)),
            name: path.to_path_buf(),
        })
    }

    /// Write one result line and flush it.
    pub fn write(&self, r: &PhotoResult) -> Result<()> {
        let line = r.json_line();
        let mut out = self.out.lock().unwrap_or_else(|p| p.into_inner());
        out.write_all(line.as_bytes())
            .and_then(|_| out.flush())
            .map_err(|e| Error::io(&self.name, e))
    }
}

/// What to do with a torn last line when opening a file for appending.
#[derive(Clone, Copy, PartialEq)]
enum Torn {
    /// Cut it off (result lines: the file then holds whole lines only).
    Cut,
    /// End it with a newline (journal: the torn line is ignored when read).
    End,
}

/// Open `path` for appending so that the next line written stands whole.
fn open_append(path: &Path, torn: Torn) -> Result<std::fs::File> {
    let io = |e| Error::io(path, e);
    let mut f = std::fs::OpenOptions::new()
        .create(true)
        .append(true)
        .read(true)
        .open(path)
        .map_err(io)?;
    let mut bytes = Vec::new();
    f.read_to_end(&mut bytes).map_err(io)?;
    if bytes.last().is_some_and(|&b| b != b'\n') {
        match torn {
            Torn::Cut => {
                let keep = bytes.iter().rposition(|&b| b == b'\n').map_or(0, |i| i + 1);
                f.set_len(keep as u64).map_err(io)?;
            }
            Torn::End => f.write_all(b"\n").map_err(io)?,
        }
    }
    Ok(f)
}

/// Measure `paths` in parallel (rayon), writing each result to `sink` as soon as it is done and
/// calling `done` after. Results come back in the order of `paths`. Only a failure to write a
/// result is an error of the run.
pub fn run_batch(
    paths: &[PathBuf],
    options: &RigOptions,
    sink: &ResultSink,
    done: &(dyn Fn(&PhotoResult) -> Result<()> + Sync),
) -> Result<Vec<PhotoResult>> {
    let permits = Semaphore::new(if options.max_decoding == 0 {
        rayon::current_num_threads()
    } else {
        options.max_decoding
    });
    paths
        .par_iter()
        .map(|p| {
            let r = measure_one(p, options, &permits);
            sink.write(&r)?;
            done(&r)?;
            Ok(r)
        })
        .collect()
}

// ---------------------------------------------------------------------------------------------
// Journal and watch mode
// ---------------------------------------------------------------------------------------------

/// The journal of a watched folder: one line per photo done (its file name as a JSON string),
/// appended and synced after the photo's result line is written. A torn last line (a kill while
/// it was written) is ignored.
pub struct Journal {
    path: PathBuf,
    file: Mutex<std::fs::File>,
    done: Mutex<HashSet<String>>,
}

impl Journal {
    /// Open (or create) a journal and read the photos already done.
    pub fn open(path: &Path) -> Result<Journal> {
        let done = match std::fs::read(path) {
            Ok(bytes) => Journal::parse(&bytes),
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => HashSet::new(),
            Err(e) => return Err(Error::io(path, e)),
        };
        let file = open_append(path, Torn::End)?;
        Ok(Journal {
            path: path.to_path_buf(),
            file: Mutex::new(file),
            done: Mutex::new(done),
        })
    }

    /// The names in journal bytes: whole lines only, each a JSON string.
    pub fn parse(bytes: &[u8]) -> HashSet<String> {
        let whole = match bytes.iter().rposition(|&b| b == b'\n') {
            Some(i) => &bytes[..=i],
            None => &[][..],
        };
        String::from_utf8_lossy(whole)
            .lines()
            .filter_map(|l| serde_json::from_str::<String>(l).ok())
            .collect()
    }

    /// Journal every photo that already has a whole result line in `results` (a kill between
    /// writing a result and journalling it), so a restart with the same results file measures
    /// each photo exactly once. Returns how many were added.
    pub fn reconcile(&self, results: &Path) -> Result<usize> {
        let bytes = match std::fs::read(results) {
            Ok(b) => b,
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(0),
            Err(e) => return Err(Error::io(results, e)),
        };
        let mut added = 0;
        for line in String::from_utf8_lossy(&bytes).lines() {
            let Ok(v) = serde_json::from_str::<serde_json::Value>(line) else {
                continue;
            };
            if let Some(file) = v.get("file").and_then(|f| f.as_str()) {
                let name = journal_name(Path::new(file));
                if !self.is_done(&name) {
                    self.record(&name)?;
                    added += 1;
                }
            }
        }
        Ok(added)
    }

    /// Whether `name` is done.
    pub fn is_done(&self, name: &str) -> bool {
        self.done
            .lock()
            .unwrap_or_else(|p| p.into_inner())
            .contains(name)
    }

    /// Record `name` as done: append its line and sync it to disk.
    pub fn record(&self, name: &str) -> Result<()> {
        let mut line = serde_json::to_string(name).unwrap_or_else(|_| "\"\"".into());
        line.push('\n');
        {
            let mut f = self.file.lock().unwrap_or_else(|p| p.into_inner());
            f.write_all(line.as_bytes())
                .and_then(|_| f.sync_data())
                .map_err(|e| Error::io(&self.path, e))?;
        }
        self.done
            .lock()
            .unwrap_or_else(|p| p.into_inner())
            .insert(name.to_string());
        Ok(())
    }
}

/// When watch mode stops.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct WatchOptions {
    /// Time between two looks at the folder, seconds. A photo is taken when its size and
    /// modification time are unchanged between two looks.
    pub poll_interval_s: f64,
    /// Stop after this many photos measured in this run.
    pub max_photos: Option<usize>,
    /// Stop after this many seconds without a new photo.
    pub idle_exit_s: Option<f64>,
}

impl Default for WatchOptions {
    fn default() -> Self {
        WatchOptions {
            poll_interval_s: 0.5,
            max_photos: None,
            idle_exit_s: None,
        }
    }
}

/// Watch `dir`: measure each new photo once it is completely written, exactly once across
/// restarts (through `journal`). Zero-byte files are waited for (a writer may not have started).
/// Runs until `max_photos` or `idle_exit_s` says stop (forever when neither is given).
pub fn watch(
    dir: &Path,
    options: &RigOptions,
    watch: &WatchOptions,
    journal: &Journal,
    sink: &ResultSink,
    done: &(dyn Fn(&PhotoResult) -> Result<()> + Sync),
) -> Result<Vec<PhotoResult>> {
    if !(watch.poll_interval_s.is_finite() && watch.poll_interval_s > 0.0) {
        return Err(Error::setting(
            "--poll-interval",
            format!(
                "must be a positive number of seconds, got {}",
                watch.poll_interval_s
            ),
        ));
    }
    let poll = Duration::from_secs_f64(watch.poll_interval_s.min(3600.0));
    let mut seen: HashMap<PathBuf, (u64, Option<SystemTime>)> = HashMap::new();
    let mut results = Vec::new();
    let mut last_new = Instant::now();
    loop {
        let mut ready = Vec::new();
        for p in list_folder(dir)? {
            let name = journal_name(&p);
            if journal.is_done(&name) {
                continue;
            }
            // A file deleted between listing and looking is simply not there any more.
            let Ok(meta) = std::fs::metadata(&p) else {
                seen.remove(&p);
                continue;
            };
            let now = (meta.len(), meta.modified().ok());
            if now.0 > 0 && seen.get(&p) == Some(&now) {
                ready.push(p.clone());
            }
            seen.insert(p, now);
        }
        if let Some(max) = watch.max_photos {
            ready.truncate(max.saturating_sub(results.len()));
        }
        if !ready.is_empty() {
            last_new = Instant::now();
            let record = |r: &PhotoResult| -> Result<()> {
                journal.record(&journal_name(Path::new(&r.file)))?;
                done(r)
            };
            let batch = run_batch(&ready, options, sink, &record)?;
            for p in &ready {
                seen.remove(p);
            }
            results.extend(batch);
        }
        if watch.max_photos.is_some_and(|m| results.len() >= m) {
            return Ok(results);
        }
        if let Some(idle) = watch.idle_exit_s
            && last_new.elapsed().as_secs_f64() >= idle
        {
            return Ok(results);
        }
        std::thread::sleep(poll);
    }
}

/// The name a photo is journalled under: its file name within the watched folder.
fn journal_name(p: &Path) -> String {
    p.file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| p.display().to_string())
}

// ---------------------------------------------------------------------------------------------
// Summary and exit status
// ---------------------------------------------------------------------------------------------

/// One row of the summary CSV.
#[derive(Debug, Clone, Serialize)]
pub struct SummaryRow {
    /// The photo.
    pub file: String,
    /// ok, out_of_band or error.
    pub status: &'static str,
    /// Restitution of the first bounce.
    pub restitution: Option<f64>,
    /// Restitution of every bounce, separated by `;`.
    pub restitution_each: String,
    /// Launch speed off the incline, m/s.
    pub launch_speed_mps: Option<f64>,
    /// Gravity, m/s^2, when it is not the quantity estimated.
    pub gravity_mps2: Option<f64>,
    /// Flash interval, seconds.
    pub flash_interval_s: Option<f64>,
    /// Acceptance verdict: pass, fail, not_measured, or empty without bands.
    pub verdict: &'static str,
    /// The error message (status error).
    pub error: String,
}

impl SummaryRow {
    /// The summary row of a result.
    pub fn of(r: &PhotoResult) -> SummaryRow {
        let finite = |v: f64| v.is_finite().then_some(v);
        let m = r.doc.as_ref().map(|d| &d.measurement);
        let verdict = m.map_or("", |m| {
            if m.verdicts.is_empty() {
                ""
            } else if m.verdicts.iter().any(|v| v.outcome == Outcome::Fail) {
                "fail"
            } else if m.verdicts.iter().any(|v| v.outcome == Outcome::NotMeasured) {
                "not_measured"
            } else {
                "pass"
            }
        });
        SummaryRow {
            file: r.file.clone(),
            status: r.status.name(),
            restitution: m.and_then(|m| m.bounces.first()).map(|b| b.restitution),
            restitution_each: m.map_or(String::new(), |m| {
                m.bounces
                    .iter()
                    .map(|b| format!("{:.6}", b.restitution))
                    .collect::<Vec<_>>()
                    .join(";")
            }),
            launch_speed_mps: m.and_then(|m| m.launch.as_ref()).map(|l| l.speed_mps),
            gravity_mps2: m.and_then(|m| finite(m.gravity_mps2.value)),
            flash_interval_s: m.and_then(|m| finite(m.flash_interval_s.value)),
            verdict,
            error: r.error.clone().unwrap_or_default(),
        }
    }
}

/// The summary CSV of a run, one row per photo.
pub fn summary_csv(results: &[PhotoResult]) -> Result<String> {
    let mut w = csv::Writer::from_writer(Vec::new());
    let err = |e: csv::Error| Error::setting("--summary", e.to_string());
    for r in results {
        w.serialize(SummaryRow::of(r)).map_err(err)?;
    }
    if results.is_empty() {
        w.write_record([
            "file",
            "status",
            "restitution",
            "restitution_each",
            "launch_speed_mps",
            "gravity_mps2",
            "flash_interval_s",
            "verdict",
            "error",
        ])
        .map_err(err)?;
    }
    let bytes = w
        .into_inner()
        .map_err(|e| Error::setting("--summary", e.to_string()))?;
    Ok(String::from_utf8_lossy(&bytes).into_owned())
}

/// The exit status of a run: 0 all measured and within bands, 2 some photo could not be read or
/// measured, 3 some result outside an acceptance band (2 wins over 3).
pub fn exit_status(results: &[PhotoResult]) -> u8 {
    if results.iter().any(|r| r.status == Status::Error) {
        2
    } else if results.iter().any(|r| r.status == Status::OutOfBand) {
        3
    } else {
        0
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn journal_ignores_a_torn_last_line() {
        let done = Journal::parse(b"\"a.png\"\n\"b.png\"\n\"c.p");
        assert_eq!(done.len(), 2);
        assert!(done.contains("b.png") && !done.contains("c.p"));
    }

    #[test]
    fn profile_refuses_unknown_keys() {
        let p = Path::new("rig.toml");
        let err = Profile::parse("rate = 25", p).unwrap_err().to_string();
        assert!(err.contains("rig.toml") && err.contains("rate"), "{err}");
    }
}
