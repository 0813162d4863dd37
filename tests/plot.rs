//! The plots of a measured photo: every fit has its residuals panel, the ticks are distinct,
//! round and enclose the data, and the SVG carries them (read back with an XML parser).

mod common;

use beadline::draw::plot::{Plan, plan, svg_of};
use beadline::physics::PhaseKind;
use beadline::pipeline::measure_photo;
use beadline::report::measure::MeasureDoc;
use common::{ball_settings, shoot, small_scene};
use quick_xml::events::Event;

fn measured_small_demo() -> MeasureDoc {
    let dir = common::tempdir();
    let (photo, _) = shoot(&small_scene(), dir.path(), "small <demo> & co.png");
    measure_photo(&photo, &ball_settings(25.0, 0.04))
        .unwrap()
        .doc
}

/// Every `<text>` of the SVG, parsed strictly (a malformed SVG fails the test).
fn svg_texts(svg: &str) -> Vec<String> {
    let mut reader = quick_xml::Reader::from_str(svg);
    reader.config_mut().check_end_names = true;
    let (mut texts, mut inside) = (Vec::new(), false);
    loop {
        match reader.read_event().expect("well-formed SVG") {
            Event::Start(e) if e.name().as_ref() == b"text" => inside = true,
            Event::End(e) if e.name().as_ref() == b"text" => inside = false,
            Event::Text(t) if inside => texts.push(t.unescape().unwrap().into_owned()),
            Event::Eof => break,
            _ => {}
        }
    }
    texts
}

fn residual_count(doc: &MeasureDoc) -> usize {
    doc.measurement
        .phases
        .iter()
        .filter(|p| matches!(p.kind, PhaseKind::Flight | PhaseKind::Incline))
        .map(|p| {
            doc.path
                .iter()
                .filter(|e| e.n >= p.first_n && e.n <= p.last_n)
                .count()
        })
        .filter(|&n| n >= 3)
        .sum()
}

#[test]
fn each_fit_has_a_residuals_panel_and_every_axis_distinct_round_ticks() {
    let doc = measured_small_demo();
    assert!(doc.measurement.bounces.len() >= 2);
    let Plan { title, panels } = plan(&doc);
    assert!(title.contains("small <demo> & co.png"), "{title}");
    let kinds: Vec<bool> = panels.iter().map(|p| p.residuals).collect();
    assert_eq!(kinds, [false, true, false, true]);
    // Height residuals: one per image of a fitted phase, in mm, small for a rendered photo.
    let height_residuals = &panels[1].marks;
    assert_eq!(height_residuals.len(), residual_count(&doc));
    assert!(
        height_residuals.iter().all(|m| m.y.abs() < 0.5),
        "{height_residuals:?}"
    );
    assert!(panels[1].y_label.contains("mm"));
    // Restitution residuals from the trend line: one per bounce.
    assert_eq!(panels[3].marks.len(), doc.measurement.bounces.len());
    for p in &panels {
        for t in [&p.x_ticks, &p.y_ticks] {
            let labels = t.labels();
            let mut unique = labels.clone();
            unique.sort();
            unique.dedup();
            assert_eq!(unique.len(), labels.len(), "{}: {labels:?}", p.title);
        }
        for m in &p.marks {
            assert!(
                p.x_ticks.lo <= m.x && m.x <= p.x_ticks.hi,
                "{}: {m:?}",
                p.title
            );
            assert!(
                p.y_ticks.lo <= m.y && m.y <= p.y_ticks.hi,
                "{}: {m:?}",
                p.title
            );
        }
    }
    // Time starts at the first image: the axis starts at 0, not below.
    assert_eq!(panels[0].x_ticks.lo, 0.0);
}

#[test]
fn the_svg_shows_the_title_every_tick_label_legend_and_axis_label() {
    let doc = measured_small_demo();
    let plan = plan(&doc);
    let texts = svg_texts(&svg_of(&plan));
    assert!(texts.contains(&plan.title), "{texts:?}");
    for p in &plan.panels {
        for label in p.x_ticks.labels().iter().chain(&p.y_ticks.labels()) {
            assert!(texts.contains(label), "{}: tick {label} not drawn", p.title);
        }
        for (_, _, words) in &p.legend {
            assert!(texts.contains(words), "legend {words} not drawn");
        }
        assert!(texts.contains(&p.x_label) && texts.contains(&p.y_label));
    }
    assert!(texts.iter().any(|t| t == "height, m"));
    assert!(texts.iter().any(|t| t == "impact speed (normal), m/s"));
}
