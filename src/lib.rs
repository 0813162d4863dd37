//! Beadline measures a ball from one multi-flash strobe photograph: it finds every image of the
//! ball with sub-pixel centres and honest uncertainties, orders them into a timed path, calibrates
//! pixels to metres, splits the path into rolling, flight and bounce phases and fits the physics.
//! It also renders synthetic strobe photos with exact ground truth.
//!
//! Stages, one module each:
//! - [`path`]: spots -> the ball's path in time order with flash indices, and the strays.
//! - [`render`]: synthetic photos from a scene (physics, camera, exact disc coverage, noise).
//!
//! # Examples
//! ```
//! use beadline::render::scene::Scene;
//! let scene = Scene::demo();
//! assert_eq!(scene.strobe.rate_hz, 25.0);
//! ```
#![deny(missing_docs)]

pub mod error;
pub mod output;
pub mod path;
pub mod render;
pub mod spots;

pub use error::{Error, Result};
