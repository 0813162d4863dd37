//! Plots: height against time with the fitted arcs, and restitution against impact speed, as one
//! SVG file a person can open in any browser.
//!
//! Goes in: a [`MeasureDoc`]. Comes out: SVG text (written atomically by the caller).

use crate::physics::PhaseKind;
use crate::physics::fit::{FitOptions, polynomial_fit};
use crate::report::measure::MeasureDoc;
use std::fmt::Write;

const W: f64 = 900.0;
const H: f64 = 360.0;
const PAD: f64 = 50.0;

struct Axes {
    x0: f64,
    y0: f64,
    x_lo: f64,
    x_hi: f64,
    y_lo: f64,
    y_hi: f64,
    width: f64,
    height: f64,
}

impl Axes {
    fn new(x0: f64, y0: f64, width: f64, height: f64, xs: &[f64], ys: &[f64]) -> Axes {
        let range = |v: &[f64]| {
            let lo = v.iter().copied().fold(f64::INFINITY, f64::min);
            let hi = v.iter().copied().fold(f64::NEG_INFINITY, f64::max);
            if !lo.is_finite() || !hi.is_finite() {
                (0.0, 1.0)
            } else if hi - lo < 1e-9 {
                (lo - 0.5, hi + 0.5)
            } else {
                let m = 0.05 * (hi - lo);
                (lo - m, hi + m)
            }
        };
        let (x_lo, x_hi) = range(xs);
        let (y_lo, y_hi) = range(ys);
        Axes {
            x0,
            y0,
            x_lo,
            x_hi,
            y_lo,
            y_hi,
            width,
            height,
        }
    }
    fn px(&self, x: f64, y: f64) -> (f64, f64) {
        (
            self.x0 + (x - self.x_lo) / (self.x_hi - self.x_lo) * self.width,
            self.y0 + self.height - (y - self.y_lo) / (self.y_hi - self.y_lo) * self.height,
        )
    }
    fn frame(&self, svg: &mut String, x_label: &str, y_label: &str) {
        let _ = write!(
            svg,
            r##"<rect x="{:.1}" y="{:.1}" width="{:.1}" height="{:.1}" fill="none" stroke="#444"/>"##,
            self.x0, self.y0, self.width, self.height
        );
        let _ = write!(
            svg,
            r##"<text x="{:.1}" y="{:.1}" font-size="13" text-anchor="middle">{x_label}</text>"##,
            self.x0 + self.width / 2.0,
            self.y0 + self.height + 34.0
        );
        let _ = write!(
            svg,
            r##"<text x="{:.1}" y="{:.1}" font-size="13" transform="rotate(-90 {:.1} {:.1})" text-anchor="middle">{y_label}</text>"##,
            self.x0 - 36.0,
            self.y0 + self.height / 2.0,
            self.x0 - 36.0,
            self.y0 + self.height / 2.0
        );
        for k in 0..=4 {
            let fx = self.x_lo + (self.x_hi - self.x_lo) * k as f64 / 4.0;
            let fy = self.y_lo + (self.y_hi - self.y_lo) * k as f64 / 4.0;
            let (px, _) = self.px(fx, self.y_lo);
            let (_, py) = self.px(self.x_lo, fy);
            let _ = write!(
                svg,
                r##"<text x="{px:.1}" y="{:.1}" font-size="11" text-anchor="middle">{fx:.3}</text><text x="{:.1}" y="{:.1}" font-size="11" text-anchor="end">{fy:.3}</text>"##,
                self.y0 + self.height + 16.0,
                self.x0 - 4.0,
                py + 4.0
            );
        }
    }
}

/// The SVG of the measurement's plots.
pub fn svg(doc: &MeasureDoc) -> String {
    let mut s = format!(
        r##"<svg xmlns="http://www.w3.org/2000/svg" width="{W}" height="{}" font-family="sans-serif"><rect width="100%" height="100%" fill="white"/>"##,
        2.0 * H
    );
    let ts: Vec<f64> = doc.path.iter().map(|p| p.t_s).collect();
    let ys: Vec<f64> = doc.path.iter().map(|p| p.y_m).collect();
    let a = Axes::new(PAD + 20.0, 20.0, W - 2.0 * PAD - 20.0, H - 80.0, &ts, &ys);
    a.frame(&mut s, "time, s", "height, m");
    for ph in doc
        .measurement
        .phases
        .iter()
        .filter(|p| matches!(p.kind, PhaseKind::Flight | PhaseKind::Incline))
    {
        let (t, y): (Vec<f64>, Vec<f64>) = doc
            .path
            .iter()
            .filter(|p| p.n >= ph.first_n && p.n <= ph.last_n)
            .map(|p| (p.t_s, p.y_m))
            .unzip();
        if t.len() < 3 {
            continue;
        }
        if let Ok(fit) = polynomial_fit(&t, &y, None, 2, &FitOptions::default()) {
            let c = &fit.coefficients;
            let (t0, t1) = (t[0], t[t.len() - 1]);
            let pts: Vec<String> = (0..=40)
                .map(|i| {
                    let tt = t0 + (t1 - t0) * i as f64 / 40.0;
                    let (x, y) = a.px(tt, c[0] + c[1] * tt + c[2] * tt * tt);
                    format!("{x:.1},{y:.1}")
                })
                .collect();
            let _ = write!(
                s,
                r##"<polyline points="{}" fill="none" stroke="#1a8fd6" stroke-width="1.5"/>"##,
                pts.join(" ")
            );
        }
    }
    for p in &doc.path {
        let (x, y) = a.px(p.t_s, p.y_m);
        let _ = write!(
            s,
            r##"<circle cx="{x:.1}" cy="{y:.1}" r="2.5" fill="#d62d20"/>"##
        );
    }
    let bounces = &doc.measurement.bounces;
    let vs: Vec<f64> = bounces.iter().map(|b| b.impact_normal_speed_mps).collect();
    let es: Vec<f64> = bounces
        .iter()
        .flat_map(|b| {
            [
                b.restitution - b.restitution_sigma,
                b.restitution + b.restitution_sigma,
            ]
        })
        .collect();
    let b = Axes::new(
        PAD + 20.0,
        H + 20.0,
        W - 2.0 * PAD - 20.0,
        H - 80.0,
        &vs,
        &es,
    );
    b.frame(&mut s, "impact speed (normal), m/s", "restitution");
    for bo in bounces {
        let (x, y) = b.px(bo.impact_normal_speed_mps, bo.restitution);
        let (_, y1) = b.px(
            bo.impact_normal_speed_mps,
            bo.restitution - bo.restitution_sigma,
        );
        let (_, y2) = b.px(
            bo.impact_normal_speed_mps,
            bo.restitution + bo.restitution_sigma,
        );
        let _ = write!(
            s,
            r##"<line x1="{x:.1}" y1="{y1:.1}" x2="{x:.1}" y2="{y2:.1}" stroke="#333"/><circle cx="{x:.1}" cy="{y:.1}" r="4" fill="#2d9d3a"/>"##
        );
    }
    if let Some(t) = &doc.measurement.restitution_trend {
        let (v0, v1) = (b.x_lo, b.x_hi);
        let (x0, y0) = b.px(v0, t.intercept + t.slope_s_per_m * v0);
        let (x1, y1) = b.px(v1, t.intercept + t.slope_s_per_m * v1);
        let _ = write!(
            s,
            r##"<line x1="{x0:.1}" y1="{y0:.1}" x2="{x1:.1}" y2="{y1:.1}" stroke="#2d9d3a" stroke-dasharray="5,4"/>"##
        );
    }
    s += "</svg>\n";
    s
}
