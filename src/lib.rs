//! Beadline measures a ball from one multi-flash strobe photograph: it finds every image of the
//! ball with sub-pixel centres and honest uncertainties, orders them into a timed path, calibrates
//! pixels to metres, splits the path into rolling, flight and bounce phases and fits the physics.
//! It also renders synthetic strobe photos with exact ground truth.
//!
//! Stages, one folder each, over a shared [`core`]:
//! - [`image`]: photo file -> grey f32 working image, its background and the blobs that differ.
//! - [`detect`]: blobs -> ball images with sub-pixel centres (Hough transform, circle fits).
//! - [`track`]: ball images -> the ball's path in time order with flash indices, and the strays.
//! - [`calibrate`]: pixels to world metres (uniform scale, plane homography by DLT, distortion).
//! - [`physics`]: timed path to phases, fits and physics numbers with 1-sigma uncertainties.
//! - [`pipeline`]: the main job, photo -> timed path -> physics (chains the stages).
//! - [`report`]: the documents every command writes (JSON, text, CSV), one schema version.
//! - [`draw`]: pictures a person checks at a glance (overlay, plots).
//! - [`rig`]: many photos unattended on a test rig: profile, parallel runs, JSON lines, watch.
//! - [`synth`]: synthetic photos from a scene (physics, camera, exact disc coverage, noise) and
//!   shot planning; it uses the stages, they never use it.
//!
//! # Examples
//! ```
//! use beadline::synth::scene::Scene;
//! let scene = Scene::demo();
//! assert_eq!(scene.strobe.rate_hz, 25.0);
//! ```
#![deny(missing_docs)]

pub mod calibrate;
pub mod core;
pub mod detect;
pub mod draw;
pub mod error;
pub mod image;
pub mod physics;
pub mod pipeline;
pub mod report;
pub mod rig;
pub mod synth;
pub mod track;

pub use error::{Error, Result};
