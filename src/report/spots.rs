//! The document of `beadline spots`: the ball images found, the candidates rejected and the
//! settings used.

use super::{SCHEMA_VERSION, csv_rows};
use crate::core::light::Polarity;
use crate::core::numbers::cells;
use crate::detect::count::LightGroup;
use crate::detect::{Rejected, Spot, SpotOptions, SpotReport};
use serde::{Deserialize, Serialize};

/// The settings spot finding used, as they were resolved.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SpotSettings {
    /// Polarity used (detected or given).
    pub polarity: Polarity,
    /// Radius range searched, pixels.
    pub radius_min_px: f64,
    /// Radius range searched, pixels.
    pub radius_max_px: f64,
    /// Threshold in robust sigmas.
    pub threshold_sigma: f32,
    /// Threshold used, luma units.
    pub threshold_level: f32,
    /// Noise level around the background, luma units.
    pub noise_sigma: f32,
    /// Smoothing before the gradient, pixels.
    pub smooth_px: f32,
    /// Rims this strong (median edge / noise sigma) have their points placed unsmoothed.
    pub fine_snr: f64,
    /// Smallest rim coverage kept.
    pub min_score: f64,
    /// Radius tolerance around the common radius (fraction).
    pub radius_tolerance: f64,
    /// Faint fraction.
    pub faint_fraction: f64,
    /// A clean plate was used.
    pub clean_plate: bool,
    /// Largest RMS rim residual kept, pixels.
    pub max_rms_px: f64,
    /// All images were taken to share one radius.
    pub one_radius: bool,
    /// K of the systematic edge sigma K x max(1/r, 16/r^2) px, r the common radius in px
    /// (`--edge-systematic`).
    pub edge_systematic_px_r: f64,
    /// Largest common radius at which isolated images get the shaded-sphere fit, pixels.
    pub shaded_max_r_px: f64,
    /// How the photo's values were taken to encode light.
    pub tone: crate::core::light::Tone,
    /// Smallest radius kept on the decimated photo, pixels (0: full resolution throughout).
    #[serde(default)]
    pub coarse_r_px: f64,
    /// The blobs and the vote came from the photo averaged over blocks of this side, pixels.
    #[serde(default)]
    pub decimation: usize,
}

/// `beadline spots --format json`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SpotsDoc {
    /// Schema version.
    pub schema_version: u32,
    /// The photo.
    pub file: String,
    /// Width, pixels.
    pub width_px: usize,
    /// Height, pixels.
    pub height_px: usize,
    /// Common radius of the ball images, pixels.
    pub common_radius_px: Option<f64>,
    /// Systematic 1-sigma of every centre, common to all images (edge location on a lit sphere),
    /// pixels; add it in quadrature to `sigma_px` for the absolute position of one image.
    pub systematic_px: f64,
    /// Settings used.
    pub settings: SpotSettings,
    /// Ball images (x right, y down, pixel centres at integer coordinates).
    pub spots: Vec<Spot>,
    /// Candidates dropped, with the reason.
    pub rejected: Vec<Rejected>,
    /// The spots in groups of touching images, each with the number of images its light holds
    /// (light counting: a long exposure adds every flash's light).
    #[serde(default)]
    pub light_groups: Vec<LightGroup>,
}

impl SpotsDoc {
    /// Build the document from a report.
    pub fn new(file: &str, report: &SpotReport, options: &SpotOptions, plate: bool) -> SpotsDoc {
        SpotsDoc {
            schema_version: SCHEMA_VERSION,
            file: file.to_string(),
            width_px: report.width_px,
            height_px: report.height_px,
            common_radius_px: report.common_radius_px,
            systematic_px: report.systematic_px,
            settings: SpotSettings {
                polarity: report.polarity,
                radius_min_px: report.radius_range_px.0,
                radius_max_px: report.radius_range_px.1,
                threshold_sigma: options.threshold.k_sigma,
                threshold_level: report.threshold_level,
                noise_sigma: report.noise_sigma,
                smooth_px: options.hough.smooth_px,
                fine_snr: options.hough.fine_snr,
                min_score: options.min_score,
                radius_tolerance: options.radius_tolerance,
                faint_fraction: options.faint_fraction,
                clean_plate: plate,
                max_rms_px: options.max_rms_px,
                one_radius: options.one_radius,
                edge_systematic_px_r: options.systematic_px_r,
                shaded_max_r_px: options.shaded_max_r_px,
                tone: options.tone,
                coarse_r_px: options.coarse_r_px,
                decimation: report.decimation,
            },
            spots: report.spots.clone(),
            rejected: report.rejected.clone(),
            light_groups: report.light_groups.clone(),
        }
    }

    /// Text for a person.
    pub fn text(&self) -> String {
        let mut s = format!(
            "{}: {} x {} px, {} ball images",
            self.file,
            self.width_px,
            self.height_px,
            self.spots.len()
        );
        if let Some(r) = self.common_radius_px {
            s += &format!(", radius {r:.2} px");
        }
        s += &format!(
            ", {} rejected ({} ball, background noise {:.4} of full scale)\n",
            self.rejected.len(),
            crate::core::words::name(&self.settings.polarity),
            self.settings.noise_sigma
        );
        // Centres to the digits their sigma warrants (crate::core::numbers::cells).
        s += "    #       x_px       y_px    r_px  sigma_px  score\n";
        for (i, p) in self.spots.iter().enumerate() {
            let (x, sigma) = cells(p.x_px, p.sigma_px, 3);
            let (y, _) = cells(p.y_px, p.sigma_px, 3);
            s += &format!(
                "{i:5} {x:>10} {y:>10} {:7.3} {sigma:>9} {:6.2}\n",
                p.r_px, p.score
            );
        }
        for r in &self.rejected {
            s += &format!(
                "rejected {:9.3} {:9.3} {:7.3}  {}\n",
                r.x_px,
                r.y_px,
                r.r_px,
                crate::core::words::name(&r.reason)
            );
        }
        s += &self.light_text();
        s
    }

    /// The light count of every group of two or more spots, or whose light holds more images
    /// than it has spots.
    fn light_text(&self) -> String {
        let mut s = String::new();
        for g in &self.light_groups {
            let more = g.images.is_some_and(|n| n > g.spots.len());
            if g.spots.len() < 2 && !more {
                continue;
            }
            let spots = g
                .spots
                .iter()
                .map(|i| i.to_string())
                .collect::<Vec<_>>()
                .join(" ");
            let held = match (g.images_by_light, g.uncertain) {
                (Some(v), false) => format!("light of {v:.2} images"),
                (Some(v), true) => format!(
                    "light of {v:.2} images, uncertain (clipped, or light runs on past the group)"
                ),
                (None, _) => "light not counted (no isolated image to compare with)".into(),
            };
            s += &format!(
                "group at x {:.1}, y {:.1} px: spots {spots}; {held}\n",
                g.x_px, g.y_px
            );
        }
        s
    }

    /// CSV of the spots.
    pub fn csv(&self) -> std::io::Result<String> {
        csv_rows(&self.spots)
    }
}
