//! Atomic output: every file Beadline writes goes to a temporary file beside the target and is
//! renamed into place only when complete, so a crash or an error never leaves a half-written file.
//! A symbolic link is written through (the file it names is replaced, the link stays), and a target
//! that is not a regular file (`/dev/null`, `/dev/stdout`, a named pipe) is written straight into:
//! renaming over it would put a regular file in the device's place for every later program.

use crate::error::{Error, Result};
use std::io::Write;
use std::path::{Path, PathBuf};

/// The temporary path used while `path` is being written.
fn temp_path(path: &Path) -> PathBuf {
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| "output".to_string());
    // Unique per process and per call, so threads writing beside each other never share one.
    static NEXT: std::sync::atomic::AtomicU64 = std::sync::atomic::AtomicU64::new(0);
    let k = NEXT.fetch_add(1, std::sync::atomic::Ordering::Relaxed);
    path.with_file_name(format!(".{name}.{}.{k}.part", std::process::id()))
}

/// Write `path` atomically with the bytes produced by `fill`.
///
/// The closure writes into a buffered temporary file; on success the file is flushed, synced and
/// renamed over `path` (over the file a link at `path` names). On any error the temporary file is
/// removed and `path` is untouched. A `path` that exists and is not a regular file or a directory
/// (a device, a named pipe) is opened and written directly, with nothing to roll back.
pub fn write_atomic<F>(path: &Path, fill: F) -> Result<()>
where
    F: FnOnce(&mut dyn Write) -> std::io::Result<()>,
{
    // Where the bytes finally go: through any links, when the target exists already.
    let dest = std::fs::canonicalize(path).unwrap_or_else(|_| path.to_path_buf());
    // `/dev/stdout` redirected to a file resolves to that file: it too is written in place, so the
    // bytes land where the shell's redirection expects them.
    let special_name = path.starts_with("/dev") || path.starts_with("/proc");
    if let Ok(meta) = std::fs::metadata(&dest)
        && (special_name || (!meta.is_file() && !meta.is_dir()))
    {
        return write_special(&dest, fill).map_err(|e| Error::io(path, e));
    }
    let tmp = temp_path(&dest);
    let result = (|| -> std::io::Result<()> {
        let file = std::fs::File::create(&tmp)?;
        let mut writer = std::io::BufWriter::new(file);
        fill(&mut writer)?;
        let file = writer.into_inner().map_err(|e| e.into_error())?;
        file.sync_all()?;
        std::fs::rename(&tmp, &dest)
    })();
    result.map_err(|e| {
        let _ = std::fs::remove_file(&tmp);
        Error::io(path, e)
    })
}

/// Write into an existing special file (device, named pipe) in place, after what it holds.
fn write_special<F>(dest: &Path, fill: F) -> std::io::Result<()>
where
    F: FnOnce(&mut dyn Write) -> std::io::Result<()>,
{
    let file = std::fs::OpenOptions::new().append(true).open(dest)?;
    let mut writer = std::io::BufWriter::new(file);
    fill(&mut writer)?;
    writer.flush()
}

/// Write a string atomically.
pub fn write_text(path: &Path, text: &str) -> Result<()> {
    write_atomic(path, |w| w.write_all(text.as_bytes()))
}

/// Write a value as pretty JSON atomically.
pub fn write_json<T: serde::Serialize>(path: &Path, value: &T) -> Result<()> {
    write_atomic(path, |w| {
        serde_json::to_writer_pretty(&mut *w, value).map_err(std::io::Error::other)?;
        w.write_all(b"\n")
    })
}
