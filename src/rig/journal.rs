//! The journal of photos done in watch mode, so a restart measures each photo exactly once.

use super::*;
use crate::error::{Error, Result};
use std::collections::HashSet;
use std::io::Write;
use std::path::{Path, PathBuf};
use std::sync::Mutex;

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

/// The name a photo is journalled under: its file name within the watched folder.
pub(crate) fn journal_name(p: &Path) -> String {
    p.file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| p.display().to_string())
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
}
