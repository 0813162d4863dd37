//! The frame of the results: where the positions of a [`Measurement`] lie relative to the points
//! it was measured from.
//!
//! Goes in: a [`Measurement`] and the [`MeasureOptions`] it was made with. Comes out: a
//! [`ResultFrame`], the similarity that [`super::measure`] applied to its input points before it
//! fitted them: the turn by the camera roll when it was corrected (as the level correction
//! turns the path) and, when the scale is the estimated quantity, the factor that rescales every
//! length (nominal scale / estimated scale). Both are about the input's origin, so a shift of the
//! input points by `o` shifts every position of the results by `from_input(o)` and leaves every
//! speed, acceleration and restitution as it was.

use super::{MeasureOptions, Measurement, TimedPoint, Unknown, calibration};

/// Input frame -> result frame: p_result = length_factor * R(roll) p_input.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ResultFrame {
    /// The roll the path was turned by, radians (0 when it was not corrected).
    pub roll_rad: f64,
    /// The factor every length was multiplied by (1 unless the scale was estimated).
    pub length_factor: f64,
}

impl ResultFrame {
    /// The frame of `m`, measured with `options`.
    pub fn of(m: &Measurement, options: &MeasureOptions) -> ResultFrame {
        let roll_rad = match (m.level.corrected, m.level.roll_deg) {
            (true, Some(r)) => r.to_radians(),
            _ => 0.0,
        };
        let length_factor = match (options.unknown, &options.scale) {
            (Unknown::Scale, Some(nominal)) => nominal.value / m.scale_px_per_m.value,
            _ => 1.0,
        };
        let length_factor = if length_factor.is_finite() && length_factor > 0.0 {
            length_factor
        } else {
            1.0
        };
        ResultFrame {
            roll_rad,
            length_factor,
        }
    }

    /// A position of the input frame in the result frame.
    pub fn from_input(&self, p: [f64; 2]) -> [f64; 2] {
        let mut q = [TimedPoint {
            n: 0,
            t_s: 0.0,
            x_m: p[0],
            y_m: p[1],
            sigma_m: 1.0,
        }];
        calibration::level(&mut q, self.roll_rad);
        [q[0].x_m * self.length_factor, q[0].y_m * self.length_factor]
    }

    /// A position of the result frame in the input frame.
    pub fn to_input(&self, p: [f64; 2]) -> [f64; 2] {
        let back = ResultFrame {
            roll_rad: -self.roll_rad,
            length_factor: 1.0 / self.length_factor,
        };
        back.from_input(p)
    }
}
