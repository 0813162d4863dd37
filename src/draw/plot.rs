//! Plots: height against time with the fitted arcs, and restitution against impact speed, each
//! with a panel of residuals below it, as one SVG file a person can open in any browser.
//!
//! Goes in: a [`MeasureDoc`]. Comes out: the panels with the ticks chosen for them ([`plan`]) and
//! their SVG text ([`svg`], written atomically by the caller). Ticks are "nice numbers"
//! ([`nice_ticks`]): steps of 1, 2 or 5 times a power of ten.

use crate::core::markup::escape;
use crate::physics::PhaseKind;
use crate::physics::fit::{FitOptions, polynomial_fit};
use crate::report::measure::MeasureDoc;
use std::fmt::Write;

/// Width of the SVG, pixels.
const WIDTH_PX: f64 = 900.0;
/// Left edge of every panel's frame, pixels (room for the tick labels and the axis label).
const LEFT_PX: f64 = 90.0;
/// Right margin, pixels.
const RIGHT_PX: f64 = 20.0;
/// Height of a data panel's frame, pixels.
const DATA_HEIGHT_PX: f64 = 250.0;
/// Height of a residuals panel's frame, pixels.
const RESIDUAL_HEIGHT_PX: f64 = 100.0;
/// Room above a frame (its title and legend), pixels.
const ABOVE_PX: f64 = 34.0;
/// Room below a frame (its tick labels and axis label), pixels.
const BELOW_PX: f64 = 46.0;
/// Room for the title of the whole figure, pixels.
const TITLE_PX: f64 = 36.0;

const RED: &str = "#d62d20";
const BLUE: &str = "#1a8fd6";
const GREEN: &str = "#2d9d3a";
const GREY: &str = "#777";

/// Tick marks of one axis: the axis runs from `lo` to `hi`, both multiples of `step`.
#[derive(Debug, Clone, PartialEq)]
pub struct Ticks {
    /// Start of the axis (the first tick).
    pub lo: f64,
    /// End of the axis (the last tick).
    pub hi: f64,
    /// Distance between ticks: 1, 2 or 5 times a power of ten.
    pub step: f64,
    /// Decimals shown in the labels (enough to tell every tick apart).
    pub decimals: usize,
    /// The tick values from `lo` to `hi`.
    pub values: Vec<f64>,
}

impl Ticks {
    /// The tick labels as drawn.
    pub fn labels(&self) -> Vec<String> {
        self.values.iter().map(|&v| self.label(v)).collect()
    }

    fn label(&self, v: f64) -> String {
        let s = format!("{v:.*}", self.decimals);
        if s.starts_with('-') && s[1..].chars().all(|c| c == '0' || c == '.') {
            s[1..].to_string()
        } else {
            s
        }
    }
}

/// The nice number near `x` (> 0): 1, 2, 5 or 10 times a power of ten; rounded to the nearest
/// when `round`, else the smallest not below `x` (Heckbert, "Nice numbers for graph labels",
/// Graphics Gems, 1990).
fn nice_number(x: f64, round: bool) -> f64 {
    let power = 10f64.powf(x.log10().floor());
    let f = x / power;
    let nice = if round {
        match f {
            f if f < 1.5 => 1.0,
            f if f < 3.0 => 2.0,
            f if f < 7.0 => 5.0,
            _ => 10.0,
        }
    } else {
        match f {
            f if f <= 1.0 => 1.0,
            f if f <= 2.0 => 2.0,
            f if f <= 5.0 => 5.0,
            _ => 10.0,
        }
    };
    nice * power
}

/// Ticks for data from `lo` to `hi`, about `count` of them: Heckbert's loose labelling (Graphics
/// Gems, 1990), so the first and last ticks enclose the data and every tick is a multiple of a
/// 1-2-5 step. Values (nearly) equal get a range of 1 % of their size around them (1 around 0),
/// so the ticks stay distinct; a non-finite end gives the axis 0..1.
pub fn nice_ticks(lo: f64, hi: f64, count: usize) -> Ticks {
    let (mut lo, mut hi) = if lo.is_finite() && hi.is_finite() {
        (lo.min(hi), lo.max(hi))
    } else {
        (0.0, 1.0)
    };
    let size = lo.abs().max(hi.abs());
    if hi - lo <= size * 1e-9 {
        let mid = 0.5 * (lo + hi);
        let half = if size > 0.0 { 0.01 * size } else { 1.0 };
        (lo, hi) = (mid - half, mid + half);
    }
    let range = nice_number(hi - lo, false);
    let step = nice_number(range / (count.max(2) - 1) as f64, true);
    let first = (lo / step).floor();
    let last = (hi / step).ceil();
    let values: Vec<f64> = (0..=(last - first) as i64)
        .map(|k| (first + k as f64) * step)
        .collect();
    Ticks {
        lo: first * step,
        hi: last * step,
        step,
        decimals: (-step.log10().floor()).max(0.0) as usize,
        values,
    }
}

/// The smallest and largest finite value, or `None`.
fn span(values: impl IntoIterator<Item = f64>) -> Option<(f64, f64)> {
    values
        .into_iter()
        .filter(|v| v.is_finite())
        .fold(None, |acc, v| match acc {
            None => Some((v, v)),
            Some((lo, hi)) => Some((lo.min(v), hi.max(v))),
        })
}

/// Ticks for the finite values of `values` (0..1 when there are none).
fn ticks_for(values: impl IntoIterator<Item = f64>, count: usize) -> Ticks {
    let (lo, hi) = span(values).unwrap_or((0.0, 1.0));
    nice_ticks(lo, hi, count)
}

/// A point of a panel, in its data units, with an optional error bar (1-sigma in y).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Mark {
    /// x, data units.
    pub x: f64,
    /// y, data units.
    pub y: f64,
    /// 1-sigma of y, data units (no bar when `None`).
    pub sigma_y: Option<f64>,
}

/// A line through points in a panel's data units.
#[derive(Debug, Clone, PartialEq)]
pub struct Curve {
    /// The points (x, y), data units.
    pub points: Vec<[f64; 2]>,
    /// Drawn dashed.
    pub dashed: bool,
}

/// One panel of the figure: a frame with ticks, marks and lines, its title and legend.
#[derive(Debug, Clone, PartialEq)]
pub struct Panel {
    /// Title shown above the frame.
    pub title: String,
    /// Axis label under the frame, with its unit.
    pub x_label: String,
    /// Axis label beside the frame, with its unit.
    pub y_label: String,
    /// Ticks of x.
    pub x_ticks: Ticks,
    /// Ticks of y.
    pub y_ticks: Ticks,
    /// A panel of residuals (a zero line drawn, a shorter frame).
    pub residuals: bool,
    /// The measured points.
    pub marks: Vec<Mark>,
    /// Colour of the marks (SVG colour).
    pub mark_colour: &'static str,
    /// The fitted lines.
    pub curves: Vec<Curve>,
    /// Colour of the lines (SVG colour).
    pub curve_colour: &'static str,
    /// Legend entries: (colour, drawn as a line rather than a dot, words).
    pub legend: Vec<(&'static str, bool, String)>,
    /// A note written inside the frame when there is nothing to plot.
    pub note: Option<String>,
}

/// The whole figure: a title and its panels from top to bottom.
#[derive(Debug, Clone, PartialEq)]
pub struct Plan {
    /// Title of the figure, naming the photo.
    pub title: String,
    /// The panels, each data panel followed by its residuals.
    pub panels: Vec<Panel>,
}

/// A quadratic in time fitted to the height of each flight or incline phase: the curve points
/// and every point's residual (flash time, residual in millimetres).
struct ArcFits {
    curves: Vec<Curve>,
    residuals_mm: Vec<Mark>,
}

fn fit_arcs(doc: &MeasureDoc) -> ArcFits {
    let mut fits = ArcFits {
        curves: Vec::new(),
        residuals_mm: Vec::new(),
    };
    let fitted = doc
        .measurement
        .phases
        .iter()
        .filter(|p| matches!(p.kind, PhaseKind::Flight | PhaseKind::Incline));
    for ph in fitted {
        let (t, y): (Vec<f64>, Vec<f64>) = doc
            .path
            .iter()
            .filter(|p| p.n >= ph.first_n && p.n <= ph.last_n)
            .map(|p| (p.t_s, p.y_m))
            .unzip();
        if t.len() < 3 {
            continue;
        }
        let Ok(fit) = polynomial_fit(&t, &y, None, 2, &FitOptions::default()) else {
            continue;
        };
        let c = &fit.coefficients;
        let at = |tt: f64| c[0] + c[1] * tt + c[2] * tt * tt;
        let (t0_s, t1_s) = (t[0], t[t.len() - 1]);
        let points = (0..=40)
            .map(|i| {
                let tt = t0_s + (t1_s - t0_s) * i as f64 / 40.0;
                [tt, at(tt)]
            })
            .collect();
        fits.curves.push(Curve {
            points,
            dashed: false,
        });
        fits.residuals_mm
            .extend(t.iter().zip(&y).map(|(&tt, &yy)| Mark {
                x: tt,
                y: (yy - at(tt)) * 1000.0,
                sigma_y: None,
            }));
    }
    fits
}

/// The residuals panel of a data panel: the same x ticks, a zero line.
fn residual_panel(over: &Panel, y_label: &str, marks: Vec<Mark>, legend: &str) -> Panel {
    let y_ticks = ticks_for(
        marks
            .iter()
            .flat_map(|m| {
                [
                    m.y - m.sigma_y.unwrap_or(0.0),
                    m.y + m.sigma_y.unwrap_or(0.0),
                ]
            })
            .chain([0.0]),
        3,
    );
    Panel {
        title: format!("Residuals: {}", over.title.to_lowercase()),
        x_label: over.x_label.clone(),
        y_label: y_label.into(),
        x_ticks: over.x_ticks.clone(),
        y_ticks,
        residuals: true,
        marks,
        mark_colour: over.mark_colour,
        curves: Vec::new(),
        curve_colour: GREY,
        legend: vec![(over.mark_colour, false, legend.into())],
        note: None,
    }
}

fn height_panels(doc: &MeasureDoc) -> [Panel; 2] {
    let fits = fit_arcs(doc);
    let marks: Vec<Mark> = doc
        .path
        .iter()
        .map(|p| Mark {
            x: p.t_s,
            y: p.y_m,
            sigma_y: None,
        })
        .collect();
    let height = Panel {
        title: "Height against time".into(),
        x_label: "time since the first image, s".into(),
        y_label: "height, m".into(),
        x_ticks: ticks_for(marks.iter().map(|m| m.x), 8),
        y_ticks: ticks_for(marks.iter().map(|m| m.y), 5),
        residuals: false,
        marks,
        mark_colour: RED,
        curves: fits.curves,
        curve_colour: BLUE,
        legend: vec![
            (RED, false, "ball image (one per flash)".into()),
            (
                BLUE,
                true,
                "quadratic fitted to each flight or incline".into(),
            ),
        ],
        note: doc.path.is_empty().then(|| "no path".into()),
    };
    let residuals = residual_panel(
        &height,
        "residual, mm",
        fits.residuals_mm,
        "height minus its fitted quadratic",
    );
    [height, residuals]
}

fn restitution_panels(doc: &MeasureDoc) -> [Panel; 2] {
    let bounces = &doc.measurement.bounces;
    let marks: Vec<Mark> = bounces
        .iter()
        .map(|b| Mark {
            x: b.impact_normal_speed_mps,
            y: b.restitution,
            sigma_y: Some(b.restitution_sigma),
        })
        .collect();
    let x_ticks = ticks_for(marks.iter().map(|m| m.x), 6);
    let y_ticks = ticks_for(
        marks.iter().flat_map(|m| {
            [
                m.y - m.sigma_y.unwrap_or(0.0),
                m.y + m.sigma_y.unwrap_or(0.0),
            ]
        }),
        5,
    );
    let trend = doc.measurement.restitution_trend.as_ref();
    let mean = marks.iter().map(|m| m.y).sum::<f64>() / marks.len().max(1) as f64;
    let reference = |v: f64| trend.map_or(mean, |t| t.intercept + t.slope_s_per_m * v);
    let curves = trend
        .map(|_| Curve {
            points: vec![
                [x_ticks.lo, reference(x_ticks.lo)],
                [x_ticks.hi, reference(x_ticks.hi)],
            ],
            dashed: true,
        })
        .into_iter()
        .collect();
    let residual_marks: Vec<Mark> = marks
        .iter()
        .map(|m| Mark {
            y: m.y - reference(m.x),
            ..*m
        })
        .collect();
    let panel = Panel {
        title: "Restitution against impact speed".into(),
        x_label: "impact speed (normal), m/s".into(),
        y_label: "restitution".into(),
        x_ticks,
        y_ticks,
        residuals: false,
        marks,
        mark_colour: GREEN,
        curves,
        curve_colour: GREEN,
        legend: vec![
            (GREEN, false, "bounce, bar = 1 sigma".into()),
            (GREEN, true, "straight line fitted (trend)".into()),
        ],
        note: bounces.is_empty().then(|| "no bounce measured".into()),
    };
    let (label, words) = if trend.is_some() {
        ("residual", "restitution minus the trend")
    } else {
        ("residual", "restitution minus the mean")
    };
    let residuals = residual_panel(&panel, label, residual_marks, words);
    [panel, residuals]
}

/// The figure's panels and the ticks chosen for them.
pub fn plan(doc: &MeasureDoc) -> Plan {
    let name = std::path::Path::new(&doc.file)
        .file_name()
        .map_or(doc.file.clone(), |n| n.to_string_lossy().into_owned());
    let mut panels = Vec::new();
    panels.extend(height_panels(doc));
    panels.extend(restitution_panels(doc));
    Plan {
        title: format!("Beadline measurement of {name}"),
        panels,
    }
}

/// A panel's frame on the page: top-left corner and size, pixels.
struct Frame<'a> {
    panel: &'a Panel,
    left_px: f64,
    top_px: f64,
    width_px: f64,
    height_px: f64,
}

impl Frame<'_> {
    fn px(&self, x: f64, y: f64) -> (f64, f64) {
        let (xt, yt) = (&self.panel.x_ticks, &self.panel.y_ticks);
        (
            self.left_px + (x - xt.lo) / (xt.hi - xt.lo) * self.width_px,
            self.top_px + self.height_px - (y - yt.lo) / (yt.hi - yt.lo) * self.height_px,
        )
    }

    fn axes(&self, svg: &mut String) {
        let (l, t, w, h) = (self.left_px, self.top_px, self.width_px, self.height_px);
        let p = self.panel;
        let _ = write!(
            svg,
            concat!(
                r##"<rect x="{l:.1}" y="{t:.1}" width="{w:.1}" height="{h:.1}" fill="none""##,
                r##" stroke="#444"/>"##
            ),
            l = l,
            t = t,
            w = w,
            h = h,
        );
        for (v, label) in p.x_ticks.values.iter().zip(p.x_ticks.labels()) {
            let (x, _) = self.px(*v, p.y_ticks.lo);
            let _ = write!(
                svg,
                concat!(
                    r##"<line x1="{x:.1}" y1="{t:.1}" x2="{x:.1}" y2="{:.1}" stroke="#e4e4e4"/>"##,
                    r##"<text x="{x:.1}" y="{:.1}" font-size="11" text-anchor="middle">"##,
                    r##"{label}</text>"##
                ),
                t + h,
                t + h + 15.0,
                x = x,
                t = t,
                label = label,
            );
        }
        for (v, label) in p.y_ticks.values.iter().zip(p.y_ticks.labels()) {
            let (_, y) = self.px(p.x_ticks.lo, *v);
            let _ = write!(
                svg,
                concat!(
                    r##"<line x1="{l:.1}" y1="{y:.1}" x2="{:.1}" y2="{y:.1}" stroke="#e4e4e4"/>"##,
                    r##"<text x="{:.1}" y="{:.1}" font-size="11" text-anchor="end">"##,
                    r##"{label}</text>"##
                ),
                l + w,
                l - 5.0,
                y + 4.0,
                l = l,
                y = y,
                label = label,
            );
        }
        let (cx, cy) = (l - 62.0, t + h / 2.0);
        let _ = write!(
            svg,
            concat!(
                r##"<text x="{:.1}" y="{:.1}" font-size="12" text-anchor="middle">{}</text><text"##,
                r##" x="{cx:.1}" y="{cy:.1}" font-size="12" text-anchor="middle""##,
                r##" transform="rotate(-90 {cx:.1} {cy:.1})">{}</text>"##
            ),
            l + w / 2.0,
            t + h + 32.0,
            escape(&p.x_label),
            escape(&p.y_label),
            cx = cx,
            cy = cy,
        );
    }

    fn title_and_legend(&self, svg: &mut String) {
        let p = self.panel;
        let y = self.top_px - 10.0;
        let _ = write!(
            svg,
            r##"<text x="{:.1}" y="{y:.1}" font-size="13" font-weight="bold">{}</text>"##,
            self.left_px,
            escape(&p.title)
        );
        let mut x = self.left_px + self.width_px;
        for (colour, line, words) in p.legend.iter().rev() {
            x -= 6.5 * words.chars().count() as f64 + 8.0;
            let _ = write!(
                svg,
                r##"<text x="{x:.1}" y="{y:.1}" font-size="11">{}</text>"##,
                escape(words)
            );
            x -= 22.0;
            let _ = if *line {
                write!(
                    svg,
                    concat!(
                        r##"<line x1="{x:.1}" y1="{:.1}" x2="{:.1}" y2="{:.1}" stroke="{colour}""##,
                        r##" stroke-width="2"/>"##
                    ),
                    y - 4.0,
                    x + 16.0,
                    y - 4.0,
                    x = x,
                    colour = colour,
                )
            } else {
                write!(
                    svg,
                    r##"<circle cx="{:.1}" cy="{:.1}" r="3.5" fill="{colour}"/>"##,
                    x + 8.0,
                    y - 4.0
                )
            };
            x -= 14.0;
        }
    }

    fn contents(&self, svg: &mut String) {
        let p = self.panel;
        if p.residuals {
            let (x0, y0) = self.px(p.x_ticks.lo, 0.0);
            let (x1, _) = self.px(p.x_ticks.hi, 0.0);
            let _ = write!(
                svg,
                concat!(
                    r##"<line x1="{x0:.1}" y1="{y0:.1}" x2="{x1:.1}" y2="{y0:.1}""##,
                    r##" stroke="{GREY}" stroke-dasharray="4,3"/>"##
                ),
                x0 = x0,
                y0 = y0,
                x1 = x1,
                GREY = GREY,
            );
        }
        for c in &p.curves {
            let pts: Vec<String> = c
                .points
                .iter()
                .map(|q| {
                    let (x, y) = self.px(q[0], q[1]);
                    format!("{x:.1},{y:.1}")
                })
                .collect();
            let dash = if c.dashed {
                r#" stroke-dasharray="6,4""#
            } else {
                ""
            };
            let _ = write!(
                svg,
                r##"<polyline points="{}" fill="none" stroke="{}" stroke-width="1.5"{dash}/>"##,
                pts.join(" "),
                p.curve_colour
            );
        }
        for m in &p.marks {
            let (x, y) = self.px(m.x, m.y);
            if let Some(s) = m.sigma_y {
                let (_, y1) = self.px(m.x, m.y - s);
                let (_, y2) = self.px(m.x, m.y + s);
                let _ = write!(
                    svg,
                    r##"<line x1="{x:.1}" y1="{y1:.1}" x2="{x:.1}" y2="{y2:.1}" stroke="#333"/>"##
                );
            }
            let _ = write!(
                svg,
                r##"<circle cx="{x:.1}" cy="{y:.1}" r="3" fill="{}"/>"##,
                p.mark_colour
            );
        }
        if let Some(note) = &p.note {
            let _ = write!(
                svg,
                concat!(
                    r##"<text x="{:.1}" y="{:.1}" font-size="13" text-anchor="middle""##,
                    r##" fill="{GREY}">{}</text>"##
                ),
                self.left_px + self.width_px / 2.0,
                self.top_px + self.height_px / 2.0,
                escape(note),
                GREY = GREY,
            );
        }
    }
}

/// The SVG of a figure.
pub fn svg_of(plan: &Plan) -> String {
    let height_px: f64 = TITLE_PX
        + plan
            .panels
            .iter()
            .map(|p| panel_height_px(p) + ABOVE_PX + BELOW_PX)
            .sum::<f64>();
    let mut s = format!(
        concat!(
            r##"<svg xmlns="http://www.w3.org/2000/svg" width="{WIDTH_PX}" height="{height_px}""##,
            r##" viewBox="0 0 {WIDTH_PX} {height_px}" font-family="sans-serif"><rect"##,
            r##" width="100%" height="100%" fill="white"/><text x="{:.1}" y="24" font-size="16""##,
            r##" font-weight="bold" text-anchor="middle">{}</text>"##
        ),
        WIDTH_PX / 2.0,
        escape(&plan.title),
        WIDTH_PX = WIDTH_PX,
        height_px = height_px,
    );
    let mut top_px = TITLE_PX;
    for panel in &plan.panels {
        let frame = Frame {
            panel,
            left_px: LEFT_PX,
            top_px: top_px + ABOVE_PX,
            width_px: WIDTH_PX - LEFT_PX - RIGHT_PX,
            height_px: panel_height_px(panel),
        };
        frame.axes(&mut s);
        frame.contents(&mut s);
        frame.title_and_legend(&mut s);
        top_px += ABOVE_PX + frame.height_px + BELOW_PX;
    }
    s += "</svg>\n";
    s
}

fn panel_height_px(p: &Panel) -> f64 {
    if p.residuals {
        RESIDUAL_HEIGHT_PX
    } else {
        DATA_HEIGHT_PX
    }
}

/// The SVG of the measurement's plots.
pub fn svg(doc: &MeasureDoc) -> String {
    svg_of(&plan(doc))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The step is 1, 2 or 5 times a power of ten and every tick a whole multiple of it.
    fn assert_round(t: &Ticks) {
        let mantissa = t.step / 10f64.powf(t.step.log10().floor());
        assert!(
            [1.0, 2.0, 5.0, 10.0]
                .iter()
                .any(|m| (mantissa - m).abs() < 1e-9),
            "step {}",
            t.step
        );
        for v in &t.values {
            let k = v / t.step;
            assert!(
                (k - k.round()).abs() < 1e-6,
                "{v} is no multiple of {}",
                t.step
            );
        }
    }

    fn assert_distinct(t: &Ticks) {
        let labels = t.labels();
        let mut unique = labels.clone();
        unique.dedup();
        assert_eq!(unique, labels, "labels repeat");
        assert!(labels.len() >= 2, "{labels:?}");
    }

    #[test]
    fn ticks_are_round_distinct_and_cover_the_data() {
        for (lo, hi) in [
            (0.0, 1.44),
            (-0.072, 1.512),
            (0.016, 0.57),
            (2.3, 3.023),
            (-3.7e-6, 2.1e-6),
            (120.0, 5400.0),
        ] {
            let t = nice_ticks(lo, hi, 5);
            assert_round(&t);
            assert_distinct(&t);
            assert!(t.lo <= lo && t.hi >= hi, "{t:?} does not cover {lo}..{hi}");
            assert!(t.values.len() <= 11, "{t:?}");
        }
    }

    #[test]
    fn the_time_axis_starts_at_zero_not_below() {
        // Path time starts at the first image (t = 0): loose labels start on 0.
        let t = nice_ticks(0.0, 1.44, 8);
        assert_eq!(t.values[0], 0.0);
        assert_eq!(t.labels()[0], "0.0");
        assert_eq!(t.step, 0.2);
    }

    #[test]
    fn nearly_equal_values_get_distinct_round_ticks() {
        // The demo's two restitutions with their sigmas: 0.7800 +- 0.0008 and 0.7801 +- 0.0008.
        let t = nice_ticks(0.7792, 0.7809, 5);
        assert_round(&t);
        assert_distinct(&t);
        assert_eq!(
            t.labels(),
            ["0.7790", "0.7795", "0.7800", "0.7805", "0.7810"]
        );
        // Exactly equal values: a range around them, still distinct.
        for v in [0.78, 0.0, -2.5, 1e-7] {
            let t = nice_ticks(v, v, 5);
            assert_round(&t);
            assert_distinct(&t);
            assert!(t.lo < v && t.hi > v, "{t:?}");
        }
    }

    #[test]
    fn labels_of_zero_carry_no_sign() {
        let t = nice_ticks(-1.0, 1.0, 5);
        assert!(t.labels().contains(&"0.0".to_string()), "{:?}", t.labels());
    }

    #[test]
    fn nothing_finite_gives_the_unit_axis() {
        let t = nice_ticks(f64::NAN, 3.0, 5);
        assert_eq!((t.lo, t.hi), (0.0, 1.0));
    }
}
