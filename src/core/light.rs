//! How a photo shows the ball: its polarity against the backdrop and the tone curve that encodes
//! light in the stored values (sRGB, IEC 61966-2-1, or linear).

use serde::{Deserialize, Serialize};

/// Bright ball on a dark backdrop, or dark ball on a bright one.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, Default)]
#[serde(rename_all = "lowercase")]
pub enum Polarity {
    /// Bright ball, dark backdrop.
    #[default]
    Bright,
    /// Dark ball, bright backdrop.
    Dark,
}

impl Polarity {
    /// +1 for bright, -1 for dark: multiplies (photo - background) so the ball is positive.
    pub fn sign(self) -> f32 {
        match self {
            Polarity::Bright => 1.0,
            Polarity::Dark => -1.0,
        }
    }
}

/// Tone curve from linear sensor values to stored values.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, Default)]
#[serde(rename_all = "lowercase")]
pub enum Tone {
    /// The sRGB transfer curve, as a camera JPEG.
    #[default]
    Srgb,
    /// Linear, as a raw sensor read-out.
    Linear,
}

impl Tone {
    /// Linear light of a stored value 0..1 (the sRGB curve inverted, IEC 61966-2-1).
    #[inline]
    pub fn to_linear(self, v: f32) -> f64 {
        let v = v as f64;
        match self {
            Tone::Linear => v,
            Tone::Srgb if v <= 0.04045 => v / 12.92,
            Tone::Srgb => ((v + 0.055) / 1.055).powf(2.4),
        }
    }
}
