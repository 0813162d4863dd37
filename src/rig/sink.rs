//! Where result lines go: standard output or a file appended to, one whole line per photo.

use super::*;
use crate::error::{Error, Result};
use std::io::{Read, Write};
use std::path::{Path, PathBuf};
use std::sync::Mutex;

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
pub(crate) enum Torn {
    /// Cut it off (result lines: the file then holds whole lines only).
    Cut,
    /// End it with a newline (journal: the torn line is ignored when read).
    End,
}

/// Open `path` for appending so that the next line written stands whole.
pub(crate) fn open_append(path: &Path, torn: Torn) -> Result<std::fs::File> {
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
