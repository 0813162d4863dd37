//! The photo as numbers: decoding, the backdrop behind the ball, and the regions that differ from
//! it.
//!
//! Goes in: a photo file (and an optional clean plate). Comes out: a grey working image, its
//! background with polarity and noise level, and the blobs above the threshold.

pub mod background;
pub mod load;
pub mod threshold;
