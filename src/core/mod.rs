//! The shared core under every stage: atomic output, geometry, robust statistics, tone curves,
//! physical constants. It depends on no stage.

pub mod ball;
pub mod geometry;
pub mod light;
pub mod markup;
pub mod numbers;
pub mod output;
pub mod stats;
pub mod units;
pub mod vec2;
pub mod words;

/// Version of every JSON document Beadline writes (spots, path, measure, rig lines); raised when
/// a key changes meaning or goes.
pub const SCHEMA_VERSION: u32 = 1;
