//! Small 2-D vector helpers on `[f64; 2]` (pixels or metres): sum, difference, scaling, dot
//! product and Euclidean norm. Plain component arithmetic, in the order written.

/// `a + b`.
pub fn add(a: [f64; 2], b: [f64; 2]) -> [f64; 2] {
    [a[0] + b[0], a[1] + b[1]]
}

/// `a - b`.
pub fn sub(a: [f64; 2], b: [f64; 2]) -> [f64; 2] {
    [a[0] - b[0], a[1] - b[1]]
}

/// `a * s`.
pub fn scale(a: [f64; 2], s: f64) -> [f64; 2] {
    [a[0] * s, a[1] * s]
}

/// Dot product.
pub fn dot(a: [f64; 2], b: [f64; 2]) -> f64 {
    a[0] * b[0] + a[1] * b[1]
}

/// Euclidean length (`hypot`).
pub fn norm(a: [f64; 2]) -> f64 {
    a[0].hypot(a[1])
}
