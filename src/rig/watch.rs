//! Watch mode: measure each new photo of a folder once it is completely written.

use super::*;
use crate::error::{Error, Result};
use std::collections::HashMap;
use std::path::{Path, PathBuf};
use std::time::{Duration, Instant, SystemTime};

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
            "poll_interval_s",
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
