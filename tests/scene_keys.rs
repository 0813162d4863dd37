//! Scene files' required keys: a scene holding only the keys the README lists as required
//! renders, and a scene missing one is refused with that key named in full, with its place.

use beadline::synth::scene::Scene;
use beadline::synth::{self};
use std::path::Path;

/// Every key the README's scene section lists as required, for a drop test, and nothing else.
const MINIMAL_DROP: &str = "\
[ball]
diameter_m = 0.05

[start]
x_m = 0.0
y_m = 0.9

[strobe]
rate_hz = 20.0
exposure_s = 0.4

[camera]
px_per_m = 900.0
width_px = 400
height_px = 1000
origin_x_px = 200.0
origin_y_px = 950.0
";

/// The same for an incline.
const MINIMAL_INCLINE: &str = "\
[ball]
diameter_m = 0.04

[incline]
length_m = 0.25
angle_deg = 20.0
bottom_height_m = 0.45

[strobe]
rate_hz = 25.0
exposure_s = 0.3

[camera]
px_per_m = 1000.0
width_px = 800
height_px = 900
origin_x_px = 300.0
origin_y_px = 820.0
";

fn refusal(text: &str) -> String {
    Scene::from_toml(text, Path::new("s.toml"))
        .expect_err("a required key is missing")
        .to_string()
}

#[test]
fn a_scene_with_only_the_required_keys_renders() {
    for text in [MINIMAL_DROP, MINIMAL_INCLINE] {
        let scene = Scene::from_toml(text, Path::new("min.toml")).expect("minimal scene");
        let rendered = synth::render(&scene);
        assert!(rendered.truth.flashes.len() >= 8, "too few flashes");
        assert!(
            rendered.pixels.iter().any(|p| p[0] > 0.5),
            "no bright ball drawn"
        );
    }
}

#[test]
fn a_missing_required_key_is_named_with_its_section_and_place() {
    let text = MINIMAL_DROP.replace("exposure_s = 0.4\n", "");
    let err = refusal(&text);
    assert!(err.contains("s.toml"), "{err}");
    assert!(err.contains("`strobe.exposure_s`"), "{err}");
    assert!(err.contains("line 8, column 1"), "{err}");
    let err = refusal(&MINIMAL_DROP.replace("origin_x_px = 200.0\n", ""));
    assert!(
        err.contains("`camera.origin_x_px`") && err.contains("line 12"),
        "{err}"
    );
    let err = refusal(&MINIMAL_DROP.replace("y_m = 0.9\n", ""));
    assert!(err.contains("`start.y_m`"), "{err}");
    let err = refusal(&MINIMAL_INCLINE.replace("bottom_height_m = 0.45\n", ""));
    assert!(err.contains("`incline.bottom_height_m`"), "{err}");
    let err = refusal(&MINIMAL_DROP.replace("diameter_m = 0.05\n", ""));
    assert!(err.contains("`ball.diameter_m`"), "{err}");
}

#[test]
fn a_missing_section_or_a_key_of_a_list_or_inline_section_is_named() {
    let no_strobe = MINIMAL_DROP.replace("[strobe]\nrate_hz = 20.0\nexposure_s = 0.4\n", "");
    let err = refusal(&no_strobe);
    assert!(err.contains("`strobe`") && !err.contains("line"), "{err}");
    let distractor = format!("{MINIMAL_DROP}\n[[distractors]]\nx_px = 3.0\nr_px = 5.0\n");
    let err = refusal(&distractor);
    assert!(err.contains("`distractors.y_px`"), "{err}");
    let without_strobe = MINIMAL_DROP.replace("[strobe]\nrate_hz = 20.0\nexposure_s = 0.4\n", "");
    let err = refusal(&format!("strobe = {{ rate_hz = 20.0 }}\n{without_strobe}"));
    assert!(err.contains("`strobe.exposure_s`"), "{err}");
}

#[test]
fn every_key_of_the_minimal_scenes_is_required_and_listed_in_the_readme_and_help() {
    let readme = include_str!("../README.md");
    let out = common_help();
    for text in [MINIMAL_DROP, MINIMAL_INCLINE] {
        let mut section = "";
        for line in text.lines() {
            if line.starts_with('[') {
                section = line.trim_matches(|c| c == '[' || c == ']');
                continue;
            }
            let Some((key, _)) = line.split_once(" = ") else {
                continue;
            };
            let err = refusal(&text.replace(&format!("{line}\n"), ""));
            assert!(err.contains(&format!("`{section}.{key}`")), "{err}");
            let row = readme
                .lines()
                .find(|l| l.starts_with("| ") && l.contains(&format!("`[{section}]`")))
                .unwrap_or_else(|| panic!("no README row for [{section}]"));
            assert!(
                row.contains(&format!("`{key}`")),
                "README row {row} lacks {key}"
            );
            assert!(out.contains(key), "render --help lacks {key}");
        }
    }
}

/// `beadline render --help`.
fn common_help() -> String {
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_beadline"))
        .args(["render", "--help"])
        .output()
        .unwrap();
    String::from_utf8_lossy(&out.stdout).into_owned()
}
