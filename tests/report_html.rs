//! The HTML report read back as a reader's program would: parsed strictly as XML (so it must be
//! well-formed), its pictures decoded from their data URIs, nothing fetched from the network, and
//! every number of the measure JSON found in it, written as the report writes numbers.

mod common;

use base64::Engine;
use base64::engine::general_purpose::STANDARD;
use beadline::report::html::number_text;
use common::{beadline, render_to, small_scene};
use quick_xml::events::{BytesStart, Event};
use serde_json::Value;
use std::path::Path;

/// What the test reads from a page: its text nodes, its table rows (cell texts), the elements
/// seen and every `src` and `href` attribute.
#[derive(Default)]
struct Page {
    texts: Vec<String>,
    rows: Vec<Vec<String>>,
    elements: Vec<String>,
    links: Vec<String>,
}

fn attributes(e: &BytesStart, page: &mut Page) {
    for a in e.attributes() {
        let a = a.expect("well-formed attribute");
        if matches!(a.key.as_ref(), b"src" | b"href") {
            page.links
                .push(a.unescape_value().expect("escaped attribute").into_owned());
        }
    }
}

/// Parse `html` strictly (end tags must match): a malformed page fails the test.
fn parse(html: &str) -> Page {
    let mut reader = quick_xml::Reader::from_str(html);
    reader.config_mut().check_end_names = true;
    let (mut page, mut open): (Page, Vec<String>) = (Page::default(), Vec::new());
    loop {
        match reader.read_event().expect("well-formed HTML") {
            Event::Start(e) => {
                let name = String::from_utf8_lossy(e.name().as_ref()).into_owned();
                attributes(&e, &mut page);
                if name == "tr" {
                    page.rows.push(Vec::new());
                }
                if name == "td" || name == "th" {
                    page.rows
                        .last_mut()
                        .expect("a cell in a row")
                        .push(String::new());
                }
                page.elements.push(name.clone());
                open.push(name);
            }
            Event::Empty(e) => {
                page.elements
                    .push(String::from_utf8_lossy(e.name().as_ref()).into_owned());
                attributes(&e, &mut page);
            }
            Event::End(_) => {
                open.pop();
            }
            Event::Text(t) => {
                let text = t.unescape().expect("escaped text").into_owned();
                if open.iter().any(|n| n == "td" || n == "th")
                    && let Some(cell) = page.rows.last_mut().and_then(|r| r.last_mut())
                {
                    cell.push_str(&text);
                }
                page.texts.push(text);
            }
            Event::Eof => break,
            _ => {}
        }
    }
    assert!(open.is_empty(), "unclosed elements {open:?}");
    page
}

/// Every number of a JSON value.
fn numbers(v: &Value, out: &mut Vec<Value>) {
    match v {
        Value::Number(_) => out.push(v.clone()),
        Value::Array(items) => items.iter().for_each(|i| numbers(i, out)),
        Value::Object(map) => map.values().for_each(|i| numbers(i, out)),
        _ => {}
    }
}

/// The words of the page's text, split where a number cannot go on.
fn tokens(page: &Page) -> std::collections::HashSet<String> {
    page.texts
        .iter()
        .flat_map(|t| {
            t.split(|c: char| c.is_whitespace() || ",;[]=()".contains(c))
                .map(str::to_string)
                .collect::<Vec<_>>()
        })
        .collect()
}

/// The page's pictures: each must be a base64 data URI; PNGs decode as images.
fn assert_pictures(page: &Page) -> usize {
    let mut pngs = 0;
    for link in &page.links {
        let lower = link.to_ascii_lowercase();
        assert!(lower.starts_with("data:"), "a link out of the page: {link}");
        if let Some(b64) = link.strip_prefix("data:image/png;base64,") {
            let bytes = STANDARD.decode(b64).expect("base64");
            assert!(bytes.starts_with(b"\x89PNG\r\n\x1a\n"));
            assert!(image::load_from_memory(&bytes).is_ok());
            pngs += 1;
        } else if let Some(b64) = link.strip_prefix("data:image/svg+xml;base64,") {
            let svg = String::from_utf8(STANDARD.decode(b64).expect("base64")).unwrap();
            assert!(
                parse(&svg)
                    .texts
                    .iter()
                    .any(|t| t.contains("Height against time"))
            );
        } else {
            panic!("an unexpected data URI: {}", &link[..link.len().min(40)]);
        }
    }
    pngs
}

fn read(path: &Path) -> String {
    std::fs::read_to_string(path).unwrap_or_else(|e| panic!("{}: {e}", path.display()))
}

#[test]
fn the_measure_report_is_self_contained_well_formed_and_holds_every_number() {
    let dir = common::tempdir();
    let d = dir.path();
    let name = "shot <1> & 'co'.png";
    render_to(&small_scene(), &d.join(name));
    let out = beadline(
        &[
            "measure",
            name,
            "--rate",
            "25",
            "--ball-diameter",
            "0.04",
            "--format",
            "json",
            "-o",
            "m.json",
            "--report",
            "r.html",
        ],
        d,
    );
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let json: Value = serde_json::from_str(&read(&d.join("m.json"))).unwrap();
    let html = read(&d.join("r.html"));
    let page = parse(&html);
    // Nothing to run and nothing to fetch: no script, no linked style, no network address.
    for e in ["script", "link", "iframe", "object"] {
        assert!(!page.elements.iter().any(|x| x == e), "a <{e}> in the page");
    }
    assert_eq!(assert_pictures(&page), 1, "the overlay, once");
    assert!(
        page.links
            .iter()
            .any(|l| l.starts_with("data:image/svg+xml;base64,"))
    );
    // The file name, escaped in the markup and read back whole.
    assert!(
        page.texts
            .iter()
            .any(|t| t == &format!("Beadline report: {name}"))
    );
    assert!(html.contains("shot &lt;1&gt; &amp; &#39;co&#39;.png"));
    // Every number of the JSON, written as the report writes numbers.
    let words = tokens(&page);
    let mut all = Vec::new();
    numbers(&json, &mut all);
    assert!(all.len() > 300, "{} numbers", all.len());
    let absent: Vec<String> = all
        .iter()
        .map(number_text)
        .filter(|t| !words.contains(t))
        .collect();
    assert!(absent.is_empty(), "numbers not in the page: {absent:?}");
    // Each self-check in a row with its outcome; the versions.
    for c in json["checks"].as_array().unwrap() {
        let (check, outcome) = (c["check"].as_str().unwrap(), c["outcome"].as_str().unwrap());
        assert!(
            page.rows
                .iter()
                .any(|r| r.len() >= 2 && r[0] == check && r[1] == outcome),
            "check {check} {outcome} not in a row"
        );
    }
    let row = |k: &str| page.rows.iter().find(|r| r[0] == k).map(|r| r[1].clone());
    assert_eq!(row("beadline").as_deref(), Some(env!("CARGO_PKG_VERSION")));
    assert_eq!(
        row("JSON schema"),
        Some(beadline::report::SCHEMA_VERSION.to_string())
    );
    assert_eq!(row("flash rate, Hz").as_deref(), Some("25"));
    // Print rules are there.
    assert!(html.contains("@media print"));
}

#[test]
fn a_report_into_a_missing_folder_is_refused_before_measuring() {
    let dir = common::tempdir();
    let d = dir.path();
    render_to(&small_scene(), &d.join("p.png"));
    let out = beadline(
        &[
            "measure",
            "p.png",
            "--rate",
            "25",
            "--ball-diameter",
            "0.04",
            "--report",
            "nothere/r.html",
            "-o",
            "m.txt",
        ],
        d,
    );
    assert!(!out.status.success());
    assert!(String::from_utf8_lossy(&out.stderr).contains("does not exist"));
    assert!(!d.join("m.txt").exists(), "measured before refusing");
    let out = beadline(
        &[
            "rig",
            "p.png",
            "--rate",
            "25",
            "--ball-diameter",
            "0.04",
            "--report-dir",
            "nothere",
        ],
        d,
    );
    assert!(!out.status.success());
    assert!(String::from_utf8_lossy(&out.stderr).contains("does not exist"));
}

#[test]
fn the_rig_writes_one_report_per_photo_named_after_it() {
    let dir = common::tempdir();
    let d = dir.path();
    std::fs::create_dir(d.join("shots")).unwrap();
    render_to(&small_scene(), &d.join("shots/a&b.png"));
    render_to(&small_scene(), &d.join("shots/c.png"));
    std::fs::create_dir(d.join("reports")).unwrap();
    let out = beadline(
        &[
            "rig",
            "shots",
            "--rate",
            "25",
            "--ball-diameter",
            "0.04",
            "--report-dir",
            "reports",
            "--out",
            "lines.jsonl",
            "--quiet",
        ],
        d,
    );
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let mut names: Vec<String> = std::fs::read_dir(d.join("reports"))
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    names.sort();
    assert_eq!(names, ["a&b.report.html", "c.report.html"]);
    let page = parse(&read(&d.join("reports/a&b.report.html")));
    assert!(page.texts.iter().any(|t| t == "Beadline report: a&b.png"));
    assert_eq!(assert_pictures(&page), 1);
}
