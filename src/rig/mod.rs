//! Rig: measure many strobe photos unattended on a test rig.
//!
//! Goes in: photo paths (files, folders, globs) or a folder to watch, one [`MeasureSettings`]
//! (usually from a rig [`profile::Profile`] plus command-line flags) and [`RigOptions`]. Comes out:
//! one [`PhotoResult`] per photo, written as one whole JSON line each ([`ResultLine`]: `file` and
//! `status` first, `ok`, `out_of_band`, `doubtful` or `error` with an `error` message, then the
//! measure JSON), an optional summary CSV ([`summary::summary_csv`]), optional overlays, and in
//! watch mode a [`Journal`] of done photos so a restart processes each photo exactly once.
//!
//! Photos are measured in parallel; a counting [`Semaphore`] bounds how many are decoded and
//! measured at once so memory stays flat whatever the queue length. Bad photos never stop the
//! run: each gets an `error` result naming the file and the problem.

pub mod inputs;
pub mod journal;
pub mod profile;
pub mod semaphore;
pub mod sink;
pub mod summary;
pub mod watch;

use inputs::list_folder;
use journal::{Journal, journal_name};
use semaphore::Semaphore;
use sink::{ResultSink, Torn, open_append};

use crate::error::Result;
use crate::pipeline::MeasureSettings;
use crate::report::measure::MeasureDoc;
use rayon::prelude::*;
use serde::Serialize;
use std::path::{Path, PathBuf};

/// File extensions taken as photos when listing a folder.
pub const PHOTO_EXTENSIONS: &[&str] = &["jpg", "jpeg", "png", "tif", "tiff"];

/// Default journal file name inside a watched folder.
pub const JOURNAL_NAME: &str = ".beadline-journal";

/// How a rig run measures each photo.
#[derive(Debug, Clone, Default)]
pub struct RigOptions {
    /// Measurement settings, the same for every photo.
    pub settings: MeasureSettings,
    /// Write an overlay per photo into this folder (`NAME.overlay.png`).
    pub overlay_dir: Option<PathBuf>,
    /// Write an HTML report per photo into this folder (`NAME.report.html`, see
    /// [`crate::report::html`]).
    pub report_dir: Option<PathBuf>,
    /// Most photos decoded and measured at once (0: the number of threads).
    pub max_decoding: usize,
}

/// A photo's status.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Status {
    /// Measured, and every acceptance band passed or none was given.
    Ok,
    /// Measured, and a result lies outside an acceptance band (or a band's quantity was not
    /// measured).
    OutOfBand,
    /// Measured, but a self-check failed: the numbers are not to be trusted.
    Doubtful,
    /// The photo could not be read or measured.
    Error,
}

impl Status {
    /// The name written in the results.
    pub fn name(self) -> &'static str {
        match self {
            Status::Ok => "ok",
            Status::OutOfBand => "out_of_band",
            Status::Doubtful => "doubtful",
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

/// One result line, its keys in this order: `file`, `status`, `error` (status `error` only),
/// then the measure document's keys as `beadline measure --format json` writes them (less its
/// `file`): `width_px` ... `spin_note`, `schema_version` ... `checks` (see [`LineDoc`]).
#[derive(Debug, Serialize)]
pub struct ResultLine<'a> {
    /// The photo as listed.
    pub file: &'a str,
    /// `ok`, `out_of_band`, `doubtful` or `error`.
    pub status: &'static str,
    /// The one-line error message (status `error`; absent otherwise).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub error: Option<&'a str>,
    /// The measurement (absent for status `error`).
    #[serde(flatten, skip_serializing_if = "Option::is_none")]
    pub doc: Option<LineDoc<'a>>,
}

/// The measure document in a result line: every key of [`MeasureDoc`] in its order but `file`
/// (the line's own `file` comes first).
#[derive(Debug, Serialize)]
pub struct LineDoc<'a> {
    /// See [`MeasureDoc::width_px`].
    pub width_px: usize,
    /// See [`MeasureDoc::height_px`].
    pub height_px: usize,
    /// See [`MeasureDoc::spots_found`].
    pub spots_found: usize,
    /// See [`MeasureDoc::origin`].
    pub origin: &'a crate::report::measure::WorldOrigin,
    /// See [`MeasureDoc::path`].
    pub path: &'a [crate::report::measure::PathEntry],
    /// See [`MeasureDoc::missing`].
    pub missing: &'a [usize],
    /// See [`MeasureDoc::strays`].
    pub strays: &'a [crate::track::Stray],
    /// See [`MeasureDoc::depth`].
    pub depth: Option<&'a crate::report::measure::DepthDoc>,
    /// See [`MeasureDoc::spin`].
    pub spin: &'a [crate::report::measure::SpinPhase],
    /// See [`MeasureDoc::spin_bounces`].
    pub spin_bounces: &'a [crate::report::measure::SpinBounce],
    /// See [`MeasureDoc::spin_note`].
    pub spin_note: Option<&'a str>,
    /// See [`MeasureDoc::measurement`] (flattened: `schema_version` first).
    #[serde(flatten)]
    pub measurement: &'a crate::physics::Measurement,
}

impl<'a> LineDoc<'a> {
    /// The line's view of `doc`.
    pub fn of(doc: &'a MeasureDoc) -> LineDoc<'a> {
        LineDoc {
            width_px: doc.width_px,
            height_px: doc.height_px,
            spots_found: doc.spots_found,
            origin: &doc.origin,
            path: &doc.path,
            missing: &doc.missing,
            strays: &doc.strays,
            depth: doc.depth.as_ref(),
            spin: &doc.spin,
            spin_bounces: &doc.spin_bounces,
            spin_note: doc.spin_note.as_deref(),
            measurement: &doc.measurement,
        }
    }
}

impl PhotoResult {
    /// The result as one JSON line (with the trailing newline), keys in the order of
    /// [`ResultLine`].
    pub fn json_line(&self) -> String {
        let line = ResultLine {
            file: &self.file,
            status: self.status.name(),
            error: self.error.as_deref(),
            doc: self.doc.as_ref().map(LineDoc::of),
        };
        let mut text = serde_json::to_string(&line).unwrap_or_else(|e| {
            serde_json::json!({ "file": self.file, "status": "error",
                "error": format!("result not written: {e}") })
            .to_string()
        });
        text.push('\n');
        text
    }
}

/// Measure one photo (holding a decoding permit while it is in memory). Never fails: a photo
/// that cannot be read or measured gives an `error` result.
pub fn measure_one(path: &Path, options: &RigOptions, permits: &Semaphore) -> PhotoResult {
    let file = path.display().to_string();
    let _permit = permits.acquire();
    let name = path
        .file_stem()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_else(|| "photo".into());
    let outcome = crate::pipeline::measure_photo(path, &options.settings).and_then(|m| {
        if let Some(dir) = &options.overlay_dir {
            crate::draw::overlay::measure_overlay(
                path,
                &m,
                &dir.join(format!("{name}.overlay.png")),
            )?;
        }
        if let Some(dir) = &options.report_dir {
            crate::report::html::write(
                &dir.join(format!("{name}.report.html")),
                &m.doc,
                &crate::draw::pictures(path, &m)?,
                &crate::report::html::settings_rows(&options.settings),
            )?;
        }
        Ok(m)
    });
    match outcome {
        Ok(m) => {
            let status = if m.doc.measurement.doubtful() {
                Status::Doubtful
            } else if m.doc.measurement.out_of_band() {
                Status::OutOfBand
            } else {
                Status::Ok
            };
            PhotoResult {
                file,
                status,
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

/// The exit status of a run: 0 all measured and within bands, 2 some photo could not be read or
/// measured, 4 some photo doubtful (a self-check failed), 3 some result outside an acceptance
/// band (2 wins over 4, 4 over 3).
pub fn exit_status(results: &[PhotoResult]) -> u8 {
    if results.iter().any(|r| r.status == Status::Error) {
        2
    } else if results.iter().any(|r| r.status == Status::Doubtful) {
        4
    } else if results.iter().any(|r| r.status == Status::OutOfBand) {
        3
    } else {
        0
    }
}
