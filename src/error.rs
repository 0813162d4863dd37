//! The library's errors: which file, which stage, what went wrong, in words a user can act on.
//! Each stage has its own kind ([`DetectError`], [`TrackError`], [`PhysicsError`]) as the
//! `source`, so a caller can tell a photo with no path from a fit that failed.
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
    /// An image that decodes but cannot hold a measurement (a few pixels across).
    #[error("{path}: {message}")]
    Unusable {
        /// The file concerned.
        path: PathBuf,
        /// Why it cannot be used.
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
    /// Spot finding refused the photo.
    #[error("{path}: {source}")]
    Detect {
        /// The photo (or plate) concerned.
        path: PathBuf,
        /// Why.
        #[source]
        source: DetectError,
    },
    /// The ball images could not be ordered into a timed path.
    #[error("{path}: {source}")]
    Track {
        /// The photo concerned.
        path: PathBuf,
        /// Why.
        #[source]
        source: TrackError,
    },
    /// A fit failed, or the physics cannot be measured from the path.
    #[error("{path}: {source}")]
    Physics {
        /// The photo concerned (`<fit>` inside a fit, before the caller names the data).
        path: PathBuf,
        /// Why.
        #[source]
        source: PhysicsError,
    },
}

/// Why spot finding refused a photo.
#[derive(Debug, thiserror::Error)]
pub enum DetectError {
    /// More candidate regions than the limit: noise or texture.
    #[error(
        "{count} candidate regions, over the limit of {limit}: this looks like noise or texture, \
         not a strobe photo (raise the limit, the threshold, or give the radius range)"
    )]
    TooManyCandidates {
        /// Regions found.
        count: usize,
        /// The limit.
        limit: usize,
    },
    /// The clean plate's size differs from the photo's.
    #[error("clean plate is {plate_w_px} x {plate_h_px} px but the photo is {w_px} x {h_px} px")]
    PlateSize {
        /// Plate width, pixels.
        plate_w_px: usize,
        /// Plate height, pixels.
        plate_h_px: usize,
        /// Photo width, pixels.
        w_px: usize,
        /// Photo height, pixels.
        h_px: usize,
    },
}

/// Why no timed path could be made.
#[derive(Debug, thiserror::Error)]
pub enum TrackError {
    /// Fewer than two ball images.
    #[error("{} found: a measurement needs a path of images", crate::core::words::count(*found, "ball image", "ball images"))]
    TooFewImages {
        /// Ball images found.
        found: usize,
    },
    /// No chain of images could be ordered.
    #[error("no path could be ordered from the {found} ball images")]
    NoPath {
        /// Ball images found.
        found: usize,
    },
}

/// Why the physics could not be measured.
#[derive(Debug, thiserror::Error)]
pub enum PhysicsError {
    /// Too few points on the path.
    #[error("a measurement needs at least 6 points, got {0}")]
    TooFewPoints(usize),
    /// A point of the path is unusable.
    #[error("point {index}: {problem}")]
    BadPoint {
        /// Its index.
        index: usize,
        /// What is wrong with it.
        problem: &'static str,
    },
    /// No flight arc long enough to fit.
    #[error("no flight arc with 4 or more points: nothing to measure")]
    NoFlightArc,
    /// The level correction left no flight arc.
    #[error("no flight arc after the level correction")]
    NoFlightArcLevelled,
    /// The fitted flight arcs curve upwards.
    #[error("the flight arcs do not fall")]
    ArcsDoNotFall,
    /// A least-squares fit could not be made (too few points, a singular system...).
    #[error("{0}")]
    Fit(String),
    /// A stage of the measurement failed.
    #[error("{stage}: {source}")]
    Stage {
        /// The stage (`incline`, `drag fit`...).
        stage: &'static str,
        /// Why.
        #[source]
        source: Box<PhysicsError>,
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

    /// A TOML file that does not parse or does not fit its layout: the file, then the line, the
    /// column and the key (`section.key`, from the text at the error's position) before the
    /// parser's message. A missing required key is named in full (`strobe.exposure_s`) with the
    /// place of the section that lacks it; a missing top-level section has no place.
    pub fn toml(path: &Path, text: &str, e: &toml::de::Error) -> Self {
        if let Some((key, span)) = missing_key(text, e) {
            let message = if span.is_empty() {
                format!("the required key `{key}` is missing (it has no default)")
            } else {
                let (line, column) = line_column(text, span.start);
                format!(
                    "line {line}, column {column}: the required key `{key}` is missing from the \
                     section that starts here (it has no default)"
                )
            };
            return Error::config(path, message);
        }
        let mut place = String::new();
        if let Some(span) = e.span() {
            let (line, column) = line_column(text, span.start);
            place = format!("line {line}, column {column}");
            if let Some(key) = toml_key_at(text, line) {
                place.push_str(&format!(", key {key}"));
            }
            place.push_str(": ");
        }
        Error::config(path, format!("{place}{}", e.message().trim()))
    }

    /// A refused setting.
    pub fn setting(name: &str, message: impl Into<String>) -> Self {
        Error::Setting {
            name: name.to_string(),
            message: message.into(),
        }
    }

    /// A photo spot finding refuses.
    pub fn detect(path: &Path, source: DetectError) -> Self {
        Error::Detect {
            path: path.to_path_buf(),
            source,
        }
    }

    /// Ball images of `path` that make no timed path.
    pub fn track(path: &Path, source: TrackError) -> Self {
        Error::Track {
            path: path.to_path_buf(),
            source,
        }
    }

    /// Physics that cannot be measured from the path of `path`.
    pub fn physics(path: &Path, source: PhysicsError) -> Self {
        Error::Physics {
            path: path.to_path_buf(),
            source,
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

/// The 1-based line and column of byte `offset` of `text`.
fn line_column(text: &str, offset: usize) -> (usize, usize) {
    let before = &text[..offset.min(text.len())];
    let line = before.matches('\n').count() + 1;
    (
        line,
        before.len() - before.rfind('\n').map_or(0, |i| i + 1) + 1,
    )
}

/// For a "missing field" error: the missing key with its section (`camera.origin_x_px`) and the
/// span the parser gave (empty for a key missing at the top level). None for other errors, or
/// when the section cannot be read off the text.
fn missing_key(text: &str, e: &toml::de::Error) -> Option<(String, std::ops::Range<usize>)> {
    let field = e
        .message()
        .trim()
        .strip_prefix("missing field `")?
        .strip_suffix('`')?;
    let span = e.span()?;
    if span.is_empty() {
        return Some((field.to_string(), span));
    }
    let (start, end) = (span.start.min(text.len()), span.end.min(text.len()));
    let line_start = text[..start].rfind('\n').map_or(0, |i| i + 1);
    let head = text.get(line_start..end)?.trim();
    let section = if head.starts_with('[') {
        // `[camera]`, `[[distractors]]`, or the `a` of `[a.b]` (a section made by a sub-section).
        head.trim_matches(|c| c == '[' || c == ']')
            .trim()
            .to_string()
    } else if text.get(start..end)?.starts_with('{') {
        // An inline table: the key it is written to.
        toml_key_at(text, line_column(text, start).0)?
    } else {
        return None;
    };
    Some((format!("{section}.{field}"), span))
}

/// The key written on `line` (1-based) of a TOML text, with the table it sits in
/// (`ball.markings`); None when that line holds no `key =`.
fn toml_key_at(text: &str, line: usize) -> Option<String> {
    let lines: Vec<&str> = text.lines().collect();
    let here = lines.get(line.checked_sub(1)?)?;
    let key = here.split_once('=')?.0.trim();
    if key.is_empty() || key.starts_with('[') || key.starts_with('#') {
        return None;
    }
    let table = lines[..line - 1]
        .iter()
        .rev()
        .map(|l| l.trim())
        .find(|l| l.starts_with('['))
        .map(|l| l.trim_matches(|c| c == '[' || c == ']').trim().to_string());
    Some(match table {
        Some(t) if !t.is_empty() => format!("{t}.{key}"),
        _ => key.to_string(),
    })
}
