//! Rig: measure many strobe photos unattended on a test rig.
//!
//! Goes in: photo paths (files, folders, globs) or a folder to watch, one [`MeasureSettings`]
//! (usually from a rig [`profile::Profile`] plus command-line flags) and [`RigOptions`]. Comes out: one
//! [`PhotoResult`] per photo, written as one whole JSON line each (the measure JSON plus `file`
//! and `status`: `ok`, `out_of_band` or `error` with an `error` message), an optional summary
//! CSV ([`summary::summary_csv`]), optional overlays, and in watch mode a [`Journal`] of done photos so a
//! restart processes each photo exactly once.
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
