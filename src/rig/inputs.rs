//! The photos a run takes: files, folders and glob patterns.

use super::*;
use crate::error::{Error, Result};
use std::collections::HashSet;
use std::path::{Path, PathBuf};

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
