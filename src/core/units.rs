//! Physical constants with their sources.

/// Standard acceleration of gravity, m/s^2 (3rd CGPM, 1901; ISO 80000-3).
pub const STANDARD_GRAVITY_MPS2: f64 = 9.80665;
