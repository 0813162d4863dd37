//! Report: the output documents of every command, in one place, so their layout is pinned.
//!
//! Goes in: stage results. Comes out: serde types (the JSON interface for rig pipelines, versioned
//! by [`SCHEMA_VERSION`]), text for a person and CSV rows.

use serde::Serialize;

pub mod html;
pub mod measure;
pub mod path;
pub mod spots;

pub use crate::core::SCHEMA_VERSION;

/// CSV text with a header and one row per item.
pub fn csv_rows<T: Serialize>(rows: &[T]) -> std::io::Result<String> {
    let mut w = csv::Writer::from_writer(Vec::new());
    for r in rows {
        w.serialize(r)?;
    }
    let bytes = w.into_inner().map_err(|e| e.into_error())?;
    Ok(String::from_utf8_lossy(&bytes).into_owned())
}
