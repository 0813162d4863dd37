//! One typed error for the library: which file, what went wrong, in words a user can act on.
//!
//! Library code returns [`Error`]; the binary adds context with `anyhow` at its edge and prints a
//! single line.

use std::path::{Path, PathBuf};

/// Everything that can go wrong in Beadline's library code.
#[derive(Debug, thiserror::Error)]
pub enum Error {
    /// A file could not be read or written.
    #[error("{path}: {source}")]
    Io {
        /// The file concerned.
        path: PathBuf,
        /// The underlying error.
        source: std::io::Error,
    },
    /// An image could not be decoded (corrupt, truncated, unsupported, or over the limits).
    #[error("{path}: cannot decode image: {message}")]
    Decode {
        /// The file concerned.
        path: PathBuf,
        /// What the decoder said.
        message: String,
    },
    /// A scene, profile or plane file is malformed or holds an absurd value.
    #[error("{path}: {message}")]
    Config {
        /// The file concerned (or `<command line>`).
        path: PathBuf,
        /// Which key is wrong and why.
        message: String,
    },
    /// A value given on the command line or in a settings struct is out of range.
    #[error("invalid setting {name}: {message}")]
    Setting {
        /// The option or field name.
        name: String,
        /// Why it is refused.
        message: String,
    },
    /// The photo was read but the measurement cannot be made from it.
    #[error("{path}: {message}")]
    Measure {
        /// The photo concerned.
        path: PathBuf,
        /// Why the measurement failed.
        message: String,
    },
}

impl Error {
    /// An I/O error on `path`.
    pub fn io(path: &Path, source: std::io::Error) -> Self {
        Error::Io {
            path: path.to_path_buf(),
            source,
        }
    }

    /// A configuration error in `path`.
    pub fn config(path: &Path, message: impl Into<String>) -> Self {
        Error::Config {
            path: path.to_path_buf(),
            message: message.into(),
        }
    }

    /// A refused setting.
    pub fn setting(name: &str, message: impl Into<String>) -> Self {
        Error::Setting {
            name: name.to_string(),
            message: message.into(),
        }
    }

    /// A measurement that cannot be made from `path`.
    pub fn measure(path: &Path, message: impl Into<String>) -> Self {
        Error::Measure {
            path: path.to_path_buf(),
            message: message.into(),
        }
    }
}

/// `Ok` when `v` is finite and above 0, else the setting `name` refused.
pub(crate) fn positive(v: f64, name: &str) -> Result<()> {
    if v.is_finite() && v > 0.0 {
        Ok(())
    } else {
        Err(Error::setting(
            name,
            format!("must be a positive number, got {v}"),
        ))
    }
}

/// Result type of the library.
pub type Result<T> = std::result::Result<T, Error>;
