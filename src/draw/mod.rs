//! Pictures a person checks at a glance: the annotated photo and the SVG plots.

pub mod overlay;
pub mod plot;
