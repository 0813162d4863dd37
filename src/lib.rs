//! Beadline measures a ball from one multi-flash strobe photograph: it finds every image of the
//! ball with sub-pixel centres and honest uncertainties, orders them into a timed path, calibrates
//! pixels to metres, splits the path into rolling, flight and bounce phases and fits the physics.
//! It also renders synthetic strobe photos with exact ground truth.
//!
//! Stages, one module each:
//! - [`load`]: photo file -> grey f32 working image (EXIF orientation, decoding limits).
//! - [`background`]: background estimate or clean plate, polarity, noise level.
//! - [`threshold`]: regions that differ from the background (blobs).
//! - [`hough`]: sub-pixel edge points and the circular Hough transform.
//! - [`refine`]: joint geometric circle fits with uncertainties.
//! - [`spots`]: the detection pipeline end to end: photo -> ball images.
//! - [`measure`]: the main job, photo -> timed path -> physics (chains the stages).
//! - [`rig`]: many photos unattended on a test rig: profile, parallel runs, JSON lines, watch.
//! - [`plan`]: choose flash rate, count and exposure before the shot.
//! - [`path`]: spots -> the ball's path in time order with flash indices, and the strays.
//! - [`overlay`], [`plot`]: pictures a person checks at a glance.
//! - [`render`]: synthetic photos from a scene (physics, camera, exact disc coverage, noise).
//! - [`calibrate`]: pixels to world metres (uniform scale, plane homography by DLT, distortion).
//! - [`physics`]: timed path to phases, fits and physics numbers with 1-sigma uncertainties.
//!
//! # Examples
//! ```
//! use beadline::render::scene::Scene;
//! let scene = Scene::demo();
//! assert_eq!(scene.strobe.rate_hz, 25.0);
//! ```
#![deny(missing_docs)]

pub mod background;
pub mod calibrate;
pub mod error;
pub mod hough;
pub mod load;
pub mod measure;
pub mod output;
pub mod overlay;
pub mod path;
pub mod physics;
pub mod plan;
pub mod plot;
pub mod refine;
pub mod render;
pub mod report;
pub mod rig;
pub mod spots;
pub mod threshold;

pub use error::{Error, Result};
