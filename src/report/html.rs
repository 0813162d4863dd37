//! The measurement as one self-contained HTML page a test engineer can read, file and print.
//!
//! Goes in: a [`MeasureDoc`], its pictures as bytes ([`Pictures`]: the overlay PNG and the plots'
//! SVG, made by the caller) and the settings as rows ([`settings_rows`]). Comes out: the page's
//! text ([`page`]), or the page written atomically ([`write()`]). The page needs no network and no
//! script: the pictures are embedded as base64 `data:` URIs, the style sheet is inline and has
//! print rules (A4, the pictures side by side). It holds the summary with uncertainties, the
//! pictures, the self-checks with their outcomes, the settings, the versions (crate and JSON
//! schema) and every number of the measure JSON, each written by [`number_text`]. All text is
//! escaped ([`escape`]), file names included.

use crate::core::markup::escape;
use crate::error::Result;
use crate::physics::checks::CheckOutcome;
use crate::pipeline::{MeasureSettings, ScaleSource};
use crate::report::SCHEMA_VERSION;
use crate::report::measure::MeasureDoc;
use base64::Engine;
use base64::engine::general_purpose::STANDARD;
use serde_json::Value;
use std::fmt::Write;
use std::path::Path;

/// The pictures embedded in the page.
#[derive(Debug, Clone, Default)]
pub struct Pictures {
    /// The overlay, PNG bytes (none: no overlay shown).
    pub overlay_png: Option<Vec<u8>>,
    /// The plots, SVG text (none: no plots shown).
    pub plots_svg: Option<String>,
}

/// The style sheet: compact on screen, A4 in print with the pictures side by side.
const STYLE: &str = "body{font-family:sans-serif;font-size:10pt;margin:1.5em;color:#222}\
h1{font-size:15pt;margin:0 0 .3em}h2{font-size:12pt;margin:1em 0 .3em;border-bottom:1px solid #aaa}\
h3{font-size:10pt;margin:.8em 0 .2em}pre{font-size:8.5pt;background:#f6f6f6;padding:.5em;\
white-space:pre-wrap}table{border-collapse:collapse;font-size:8pt;margin-bottom:.5em}\
td,th{border:1px solid #ccc;padding:1px 4px;text-align:left;vertical-align:top}\
th{background:#eee}.pictures{display:flex;gap:1em;align-items:flex-start}\
.pictures figure{margin:0;flex:1}.pictures img{width:100%;border:1px solid #ccc}\
figcaption{font-size:8pt;color:#555}.pass{color:#176f2c}.warn{color:#9a6a00;font-weight:bold}\
.fail{color:#b3261e;font-weight:bold}.verdict{font-size:11pt;font-weight:bold}\
@media print{@page{size:A4;margin:10mm}body{margin:0;font-size:8pt}\
pre{font-size:7pt}table{font-size:6.5pt}h2{break-after:avoid}\
.pictures{break-inside:avoid}.numbers{break-before:page}}";

/// A number of the JSON as the page writes it: integers whole; other numbers with 6 significant
/// digits, plainly between 0.0001 and 10^7 (trailing zeros dropped), else as `1.23457e-14`.
///
/// # Examples
/// ```
/// use beadline::report::html::number_text;
/// assert_eq!(number_text(&serde_json::json!(0.7800206358316509)), "0.780021");
/// assert_eq!(number_text(&serde_json::json!(-1.514760539222948e-14)), "-1.51476e-14");
/// assert_eq!(number_text(&serde_json::json!(37)), "37");
/// assert_eq!(number_text(&serde_json::json!(0.04)), "0.04");
/// ```
pub fn number_text(n: &Value) -> String {
    if let Some(i) = n.as_i64() {
        return i.to_string();
    }
    if let Some(u) = n.as_u64() {
        return u.to_string();
    }
    let v = n.as_f64().unwrap_or(f64::NAN);
    if v == 0.0 {
        return "0".into();
    }
    if !v.is_finite() {
        return v.to_string();
    }
    let size = v.abs();
    if !(1e-4..1e7).contains(&size) {
        let s = format!("{v:.5e}");
        let (mantissa, exponent) = s.split_once('e').unwrap_or((&s, "0"));
        let mantissa = mantissa.trim_end_matches('0').trim_end_matches('.');
        return format!("{mantissa}e{exponent}");
    }
    let decimals = (5 - size.log10().floor() as i64).max(0) as usize;
    let s = format!("{v:.decimals$}");
    let s = if s.contains('.') {
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        s
    };
    if s == "-0" { "0".into() } else { s }
}

/// A JSON value on one line: numbers by [`number_text`], objects as `key=value; ...`, arrays
/// as `[a, b]` (not escaped).
fn inline(v: &Value) -> String {
    match v {
        Value::Null => "null".into(),
        Value::Bool(b) => b.to_string(),
        Value::Number(_) => number_text(v),
        Value::String(s) => s.clone(),
        Value::Array(items) => {
            let parts: Vec<String> = items.iter().map(inline).collect();
            format!("[{}]", parts.join(", "))
        }
        Value::Object(map) => {
            let parts: Vec<String> = map
                .iter()
                .map(|(k, v)| format!("{k}={}", inline(v)))
                .collect();
            parts.join("; ")
        }
    }
}

/// A table cell of a JSON value; an `outcome` is coloured by its word.
fn cell(key: &str, v: &Value) -> String {
    match (key, v) {
        ("outcome", Value::String(s)) => {
            format!(r#"<td class="{0}">{0}</td>"#, escape(s))
        }
        _ => format!("<td>{}</td>", escape(&inline(v))),
    }
}

/// An array of objects as one table: a column per key (in the order first seen).
fn object_table(html: &mut String, items: &[Value]) {
    let mut keys: Vec<&String> = Vec::new();
    for item in items {
        if let Value::Object(map) = item {
            for k in map.keys() {
                if !keys.contains(&k) {
                    keys.push(k);
                }
            }
        }
    }
    html.push_str("<table><tr>");
    for k in &keys {
        let _ = write!(html, "<th>{}</th>", escape(k));
    }
    html.push_str("</tr>");
    for item in items {
        html.push_str("<tr>");
        for k in &keys {
            html.push_str(&cell(k, item.get(k.as_str()).unwrap_or(&Value::Null)));
        }
        html.push_str("</tr>");
    }
    html.push_str("</table>");
}

/// Every value of the JSON document: the top level's plain values in one table, each object or
/// list under its own heading (a list of objects as a table).
fn every_number(html: &mut String, doc: &Value) {
    let Value::Object(top) = doc else {
        return;
    };
    html.push_str(r#"<section class="numbers"><h2>Every value of the measure JSON</h2>"#);
    html.push_str("<table>");
    for (k, v) in top.iter().filter(|(_, v)| !v.is_object() && !v.is_array()) {
        let _ = write!(html, "<tr><th>{}</th>{}</tr>", escape(k), cell(k, v));
    }
    html.push_str("</table>");
    for (k, v) in top.iter().filter(|(_, v)| v.is_object() || v.is_array()) {
        let _ = write!(html, "<h3>{}</h3>", escape(k));
        match v {
            Value::Array(items) if items.iter().all(Value::is_object) && !items.is_empty() => {
                object_table(html, items);
            }
            Value::Object(map) => {
                html.push_str("<table>");
                for (kk, vv) in map {
                    let _ = write!(html, "<tr><th>{}</th>{}</tr>", escape(kk), cell(kk, vv));
                }
                html.push_str("</table>");
            }
            other => {
                let _ = write!(html, "<p>{}</p>", escape(&inline(other)));
            }
        }
    }
    html.push_str("</section>");
}

/// The settings of a measurement as (name, value) rows, in the words of the JSON.
pub fn settings_rows(s: &MeasureSettings) -> Vec<(String, String)> {
    let or_none = |v: Option<String>| v.unwrap_or_else(|| "not given".into());
    let scale = match &s.scale {
        None => "estimated from the flight arcs".to_string(),
        Some(ScaleSource::PxPerM(v)) => format!("{v} px/m"),
        Some(ScaleSource::Ruler {
            a_px,
            b_px,
            distance_m,
        }) => format!(
            "ruler from ({}, {}) to ({}, {}) px, {distance_m} m",
            a_px[0], a_px[1], b_px[0], b_px[1]
        ),
        Some(ScaleSource::BallDiameter) => "the ball's diameter (its images' radius)".into(),
        Some(ScaleSource::Plane(file)) => format!("plane file {}", file.display()),
    };
    let bands: Vec<String> = s
        .physics
        .bands
        .iter()
        .map(|b| format!("{}={}..{}", b.quantity, b.min, b.max))
        .collect();
    vec![
        (
            "flash rate, Hz".into(),
            or_none(s.rate_hz.map(|v| v.to_string())),
        ),
        (
            "ball diameter, m".into(),
            or_none(s.ball_diameter_m.map(|v| v.to_string())),
        ),
        ("scale".into(), scale),
        ("estimated".into(), s.physics.unknown.name().to_string()),
        (
            "gravity, m/s^2".into(),
            format!("{} ({})", s.physics.gravity.value, s.physics.gravity.source),
        ),
        ("ball build".into(), format!("{:?}", s.physics.build)),
        ("camera level".into(), s.physics.camera_level.to_string()),
        ("drag fitted".into(), s.physics.fit_drag.to_string()),
        ("acceptance bands".into(), bands.join(", ")),
        (
            "clean plate".into(),
            or_none(s.plate.as_ref().map(|p| p.display().to_string())),
        ),
        ("spot options".into(), format!("{:?}", s.spots)),
    ]
}

/// One line on whether the numbers can be trusted.
fn verdict(doc: &MeasureDoc) -> (&'static str, String) {
    let m = &doc.measurement;
    let checks = m.checks.len();
    let (class, words) = match crate::physics::checks::worst(&m.checks) {
        CheckOutcome::Fail => (
            "fail",
            format!(
                "A self-check FAILED ({} of {checks}): the numbers are not to be trusted.",
                m.checks_with(CheckOutcome::Fail)
            ),
        ),
        CheckOutcome::Warn => (
            "warn",
            format!(
                "{} of {checks} self-checks warn: read the numbers they name with care.",
                m.checks_with(CheckOutcome::Warn)
            ),
        ),
        CheckOutcome::Pass => ("pass", format!("All {checks} self-checks passed.")),
    };
    let bands = if m.verdicts.is_empty() {
        String::new()
    } else if m.out_of_band() {
        " An acceptance band was not met (or its quantity not measured).".into()
    } else {
        " Every acceptance band was met.".into()
    };
    (class, format!("{words}{bands}"))
}

fn pictures_html(html: &mut String, name: &str, pictures: &Pictures) {
    if pictures.overlay_png.is_none() && pictures.plots_svg.is_none() {
        return;
    }
    html.push_str(r#"<h2>Pictures</h2><div class="pictures">"#);
    if let Some(png) = &pictures.overlay_png {
        let _ = write!(
            html,
            concat!(
                r#"<figure><img src="data:image/png;base64,{}" alt="overlay of {}"/>"#,
                "<figcaption>The photo with what was found: images numbered by flash (green), ",
                "missing flashes (dashed), strays (red circles), rejected candidates (red x), ",
                "the floor and each bounce's restitution.</figcaption></figure>"
            ),
            STANDARD.encode(png),
            escape(name)
        );
    }
    if let Some(svg) = &pictures.plots_svg {
        let _ = write!(
            html,
            concat!(
                r#"<figure><img src="data:image/svg+xml;base64,{}" alt="plots of {}"/>"#,
                "<figcaption>Height against time and restitution against impact speed, each ",
                "with the residuals of its fit.</figcaption></figure>"
            ),
            STANDARD.encode(svg.as_bytes()),
            escape(name)
        );
    }
    html.push_str("</div>");
}

fn checks_html(html: &mut String, doc: &MeasureDoc) {
    html.push_str("<h2>Self-checks</h2><table><tr><th>check</th><th>outcome</th><th>value</th>");
    html.push_str("<th>expected</th><th>detail</th></tr>");
    let checks = serde_json::to_value(&doc.measurement.checks).unwrap_or(Value::Null);
    for c in checks.as_array().into_iter().flatten() {
        html.push_str("<tr>");
        for key in ["check", "outcome", "value", "expected", "detail"] {
            html.push_str(&cell(key, c.get(key).unwrap_or(&Value::Null)));
        }
        html.push_str("</tr>");
    }
    html.push_str("</table>");
}

/// The page of a measurement.
pub fn page(doc: &MeasureDoc, pictures: &Pictures, settings: &[(String, String)]) -> String {
    let name = Path::new(&doc.file)
        .file_name()
        .map_or(doc.file.clone(), |n| n.to_string_lossy().into_owned());
    let (class, words) = verdict(doc);
    let mut html = String::from("<!DOCTYPE html>\n");
    let _ = write!(
        html,
        concat!(
            r#"<html lang="en"><head><meta charset="utf-8"/>"#,
            "<title>Beadline report: {0}</title><style>{STYLE}</style></head><body>",
            "<h1>Beadline report: {0}</h1><p>Photo <code>{1}</code>, {2} x {3} px.</p>",
            r#"<p class="verdict {class}">{4}</p>"#
        ),
        escape(&name),
        escape(&doc.file),
        doc.width_px,
        doc.height_px,
        escape(&words),
        STYLE = STYLE,
        class = class,
    );
    let _ = write!(
        html,
        "<h2>Summary</h2><pre>{}</pre>",
        escape(doc.text().trim_end())
    );
    pictures_html(&mut html, &name, pictures);
    checks_html(&mut html, doc);
    html.push_str("<h2>Settings</h2><table>");
    for (k, v) in settings {
        let _ = write!(
            html,
            "<tr><th>{}</th><td>{}</td></tr>",
            escape(k),
            escape(v)
        );
    }
    let _ = write!(
        html,
        "</table><h2>Versions</h2><table><tr><th>beadline</th><td>{}</td></tr><tr><th>JSON \
         schema</th><td>{SCHEMA_VERSION}</td></tr></table>",
        env!("CARGO_PKG_VERSION")
    );
    every_number(&mut html, &serde_json::to_value(doc).unwrap_or(Value::Null));
    html.push_str("</body></html>\n");
    html
}

/// Write the page to `out`, atomically (a temporary file renamed over it when whole).
pub fn write(
    out: &Path,
    doc: &MeasureDoc,
    pictures: &Pictures,
    settings: &[(String, String)],
) -> Result<()> {
    crate::core::output::write_text(out, &page(doc, pictures, settings))
}
