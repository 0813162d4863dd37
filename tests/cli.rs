//! The `beadline` command end to end: outputs a rig pipeline can read back, and one-line errors.

mod common;

use beadline::report::spots::SpotsDoc;
use common::beadline;

#[test]
fn render_then_spots_json_reads_back_with_the_schema_types() {
    let dir = common::tempdir();
    std::fs::write(
        dir.path().join("scene.toml"),
        beadline::synth::scene::DEMO_SCENE,
    )
    .unwrap();
    let out = beadline(
        &[
            "render",
            "scene.toml",
            "--out",
            "p.png",
            "--truth",
            "t.json",
        ],
        dir.path(),
    );
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let out = beadline(
        &[
            "spots",
            "p.png",
            "--format",
            "json",
            "-o",
            "s.json",
            "--overlay",
            "o.png",
        ],
        dir.path(),
    );
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let doc: SpotsDoc =
        serde_json::from_str(&std::fs::read_to_string(dir.path().join("s.json")).unwrap()).unwrap();
    assert_eq!(doc.schema_version, beadline::report::SCHEMA_VERSION);
    assert_eq!((doc.width_px, doc.height_px), (1600, 900));
    let truth: beadline::synth::Truth =
        serde_json::from_str(&std::fs::read_to_string(dir.path().join("t.json")).unwrap()).unwrap();
    assert!(doc.spots.len() + 1 >= truth.flashes.len());
    assert!(image::open(dir.path().join("o.png")).is_ok());
    // CSV has a header and one row per spot.
    let out = beadline(&["spots", "p.png", "--format", "csv"], dir.path());
    let csv = String::from_utf8(out.stdout).unwrap();
    assert!(csv.starts_with("x_px,y_px,r_px,sigma_px,score"));
    assert_eq!(csv.lines().count(), doc.spots.len() + 1);
    // `-o /dev/stdout` writes into the pipe the caller reads (no file renamed over the device).
    let out = beadline(
        &["spots", "p.png", "--format", "json", "-o", "/dev/stdout"],
        dir.path(),
    );
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let piped: SpotsDoc = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(piped.spots.len(), doc.spots.len());
}

#[test]
fn bad_input_gives_one_line_naming_the_file_and_a_failing_status() {
    let dir = common::tempdir();
    std::fs::write(dir.path().join("bad.jpg"), b"not a photo").unwrap();
    let out = beadline(&["spots", "bad.jpg", "-o", "s.json"], dir.path());
    assert!(!out.status.success());
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(err.trim().lines().count(), 1, "{err}");
    assert!(err.contains("bad.jpg"), "{err}");
    assert!(!dir.path().join("s.json").exists(), "nothing half-written");
    let out = beadline(&["spots", "bad.jpg", "--radius", "30..10"], dir.path());
    assert!(!out.status.success());
    assert!(String::from_utf8_lossy(&out.stderr).contains("--radius"));
    let out = beadline(&["spots", "bad.jpg", "--min-score", "NaN"], dir.path());
    assert!(!out.status.success());
    // The overlay is PNG: a name that says otherwise is refused before any work.
    let out = beadline(&["spots", "bad.jpg", "--overlay", "o.jpg"], dir.path());
    assert!(!out.status.success());
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("o.jpg") && err.contains(".png"), "{err}");
    assert!(!dir.path().join("o.jpg").exists());
    std::fs::write(dir.path().join("s.toml"), "[ball]\ndiameter_m = -1\n").unwrap();
    let out = beadline(&["render", "s.toml", "--out", "x.png"], dir.path());
    assert!(!out.status.success());
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("s.toml"), "{err}");
    assert!(!dir.path().join("x.png").exists());
}

#[test]
fn a_negative_number_is_refused_by_its_rule_not_taken_for_a_flag() {
    // `--rate -25` used to answer "unexpected argument '-2'" with a tip about `--`.
    let root = std::path::Path::new(env!("CARGO_MANIFEST_DIR"));
    for (args, rule) in [
        (
            vec!["measure", "testimages/coins.png", "--rate", "-25"],
            "--rate: must be between 0 and 100000 Hz, got -25",
        ),
        (
            vec!["measure", "testimages/coins.png", "--scale", "-1000"],
            "--scale: must be a positive number, got -1000",
        ),
        (
            vec!["spots", "testimages/coins.png", "--radius", "-5..10"],
            "--radius: ball images must be 2..2000 px in radius, got -5..10",
        ),
    ] {
        let out = beadline(&args, root);
        let err = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(1), "{args:?}: {err}");
        assert!(
            err.contains(rule) && !err.contains("unexpected argument"),
            "{args:?}: {err}"
        );
    }
}

#[test]
fn a_rig_run_with_no_photo_to_measure_is_an_error() {
    // An empty folder or a pattern that matches nothing used to exit 0 with no output.
    let dir = common::tempdir();
    let empty = dir.path().join("empty");
    std::fs::create_dir(&empty).unwrap();
    let pattern = dir.path().join("nomatch/*.jpg");
    for input in [empty.to_str().unwrap(), pattern.to_str().unwrap()] {
        let out = beadline(&["rig", input, "--rate", "25"], dir.path());
        let err = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(1), "{input}: {err}");
        assert!(err.contains("no photos matched"), "{input}: {err}");
        assert!(out.stdout.is_empty());
    }
}

#[test]
fn a_one_pixel_photo_is_too_small_not_undecodable() {
    // A 1 x 1 PNG decodes; the error used to say "cannot decode image".
    let dir = common::tempdir();
    let path = dir.path().join("dot.png");
    image::GrayImage::new(1, 1).save(&path).unwrap();
    let out = beadline(&["spots", path.to_str().unwrap()], dir.path());
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(1), "{err}");
    assert!(
        err.contains("dot.png") && err.contains("too small to hold a ball"),
        "{err}"
    );
    assert!(!err.contains("cannot decode"), "{err}");
    assert_eq!(err.lines().count(), 1, "{err}");
}

#[test]
fn render_writes_the_photo_and_its_truth_or_neither() {
    // The photo used to be written even when writing the truth then failed.
    let dir = common::tempdir();
    let scene = dir.path().join("scene.toml");
    std::fs::write(&scene, common::DropScene::tennis(0.8, 0.5, 0.05).toml()).unwrap();
    let scene = scene.to_str().unwrap();
    let photo = dir.path().join("photo.png");
    let truth = dir.path().join("truth.json");
    let nowhere = dir.path().join("nowhere");
    let cases = [
        (photo.clone(), nowhere.join("truth.json")),
        (nowhere.join("photo.png"), truth.clone()),
    ];
    for (out, t) in cases {
        let args = [
            "render",
            scene,
            "--out",
            out.to_str().unwrap(),
            "--truth",
            t.to_str().unwrap(),
        ];
        let res = beadline(&args, dir.path());
        assert_eq!(res.status.code(), Some(1), "{res:?}");
        assert!(
            !photo.exists() && !truth.exists(),
            "a file was left: {args:?}"
        );
    }
}

#[test]
fn text_outputs_name_values_as_the_json_does() {
    // Verdicts read "Fail" and spots "(Bright ball, ...)", "Faint": Rust names in prose.
    let dir = common::tempdir();
    let (photo, _) = common::shoot(
        &beadline::synth::scene::Scene::demo(),
        dir.path(),
        "demo.png",
    );
    let photo = photo.to_str().unwrap();
    let args = [
        "measure",
        photo,
        "--rate",
        "25",
        "--ball-diameter",
        "0.04",
        "--accept",
        "restitution=0.10..0.20",
    ];
    let out = beadline(&args, dir.path());
    let text = String::from_utf8_lossy(&out.stdout);
    // The verdict shows each bounce's value with its sigma and its own outcome.
    let verdict = text
        .lines()
        .find(|l| l.contains("restitution band 0.1..0.2: fail — bounce 1 "))
        .unwrap_or_else(|| panic!("no verdict line in {text}"));
    assert!(
        verdict.contains(" ± ") && verdict.contains("bounce 2 "),
        "{verdict}"
    );
    assert!(verdict.ends_with(" fail"), "{verdict}");
    let out = beadline(&["spots", photo], dir.path());
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(text.contains("(bright ball"), "{text}");
    // The table's centres to the decimal place of their sigma's second significant digit.
    let mut rows = 0;
    let numbered = |l: &&str| {
        let first = l.split_whitespace().next();
        first.is_some_and(|w| w.parse::<usize>().is_ok())
    };
    for line in text.lines().filter(numbered) {
        let cells: Vec<&str> = line.split_whitespace().collect();
        let (x, y, sigma) = (cells[1], cells[2], cells[4]);
        let digits = sigma.trim_start_matches(['0', '.']).replace('.', "");
        assert_eq!(digits.len(), 2, "sigma {sigma} in {line:?}");
        assert_eq!(decimals(x), decimals(sigma), "{line:?}");
        assert_eq!(decimals(y), decimals(sigma), "{line:?}");
        rows += 1;
    }
    assert!(rows >= 30, "{rows} rows in {text}");
    for rust in [
        "Fail",
        "Pass",
        "NotMeasured",
        "Bright",
        "Dark",
        "Faint",
        "Radius",
    ] {
        assert!(!text.contains(rust), "{rust} in {text}");
    }
}

/// The decimals of a number's text ("0.0120" has 4, "12" and "1.2e3" none counted here).
fn decimals(number: &str) -> Option<usize> {
    let (_, fraction) = number.split_once('.')?;
    Some(fraction.len())
}

#[test]
fn the_demo_prints_each_value_with_the_digits_its_sigma_warrants() {
    let dir = common::tempdir();
    let out = beadline(&["demo", "--dir", "d"], dir.path());
    assert!(out.status.success(), "{out:?}");
    let text = String::from_utf8_lossy(&out.stdout);
    for line in text.lines() {
        assert_eq!(line, line.trim_end(), "trailing space in {line:?}");
        for bad in ["NaN", "inf", "+-"] {
            assert!(!line.contains(bad), "{bad} in {line:?}");
        }
        for word in line.split_whitespace() {
            let negative_zero = word
                .trim_end_matches([',', ')'])
                .strip_prefix('-')
                .is_some_and(|rest| !rest.is_empty() && rest.chars().all(|c| "0.".contains(c)));
            assert!(!negative_zero, "negative zero {word:?} in {line:?}");
        }
    }
    // Every "value ± sigma" in fixed notation: the sigma has two significant digits and the
    // value its decimal place.
    let mut pairs = 0;
    for line in text.lines() {
        let words: Vec<&str> = line.split_whitespace().collect();
        for w in words.windows(3).filter(|w| w[1] == "±") {
            let (value, sigma) = (w[0], w[2].trim_end_matches(','));
            if sigma.contains('e') {
                continue;
            }
            let digits = sigma.trim_start_matches(['0', '.']).replace('.', "");
            assert_eq!(digits.len(), 2, "{sigma:?} in {line:?}");
            assert_eq!(
                decimals(value),
                decimals(sigma),
                "{value} ± {sigma} in {line:?}"
            );
            pairs += 1;
        }
    }
    assert!(pairs >= 8, "{pairs} values with a sigma in {text}");
}

#[test]
fn edge_systematic_does_what_its_help_and_the_readme_say() {
    // The help once said "pixels x radius" and the README "K x max(1/r, 16/r^2)": both now give
    // the formula the detector uses, checked here on the spots JSON (no shaded fit).
    let formula = "K x max(1/r, 16/r^2) px";
    let dir = common::tempdir();
    let help = beadline(&["spots", "--help"], dir.path());
    let help = String::from_utf8_lossy(&help.stdout)
        .split_whitespace()
        .collect::<Vec<_>>()
        .join(" ");
    assert!(help.contains("--edge-systematic <K> K: "), "{help}");
    assert!(help.contains(formula), "{help}");
    let readme =
        std::fs::read_to_string(concat!(env!("CARGO_MANIFEST_DIR"), "/README.md")).unwrap();
    let row = readme
        .lines()
        .find(|l| l.starts_with("| `--edge-systematic K`"))
        .expect("a README row");
    assert!(row.contains(formula), "{row}");
    let (photo, _) = common::shoot(
        &beadline::synth::scene::Scene::demo(),
        dir.path(),
        "demo.png",
    );
    let photo = photo.to_str().unwrap();
    for k in [0.5, 2.0] {
        let k_text = k.to_string();
        let args = [
            "spots",
            photo,
            "--format",
            "json",
            "--shaded-max-r",
            "0",
            "--edge-systematic",
            &k_text,
        ];
        let out = beadline(&args, dir.path());
        assert!(out.status.success(), "{out:?}");
        let doc: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
        let r = doc["common_radius_px"].as_f64().unwrap();
        let expected = k * (1.0 / r).max(16.0 / (r * r));
        let got = doc["systematic_px"].as_f64().unwrap();
        assert!(
            (got - expected).abs() < 1e-12,
            "K = {k}: {got} vs {expected}"
        );
    }
}

#[test]
fn help_lists_the_options_a_user_needs_first_under_headings() {
    // `measure --help` listed forty options in one block, the detector's tuning knobs before
    // --rate. Now: calibration, acceptance, output, then detection and its tuning.
    let dir = common::tempdir();
    for (command, headings) in [
        (
            "measure",
            &[
                "Calibration:",
                "Acceptance:",
                "Output:",
                "Detection:",
                "Detection tuning:",
            ][..],
        ),
        (
            "rig",
            &[
                "Calibration:",
                "Acceptance:",
                "Output:",
                "Watching a folder:",
                "Detection tuning:",
            ][..],
        ),
        ("spots", &["Output:", "Detection:", "Detection tuning:"][..]),
    ] {
        let out = beadline(&[command, "--help"], dir.path());
        let help = String::from_utf8_lossy(&out.stdout);
        let lines: Vec<&str> = help.lines().collect();
        let at = |heading: &str| {
            lines
                .iter()
                .position(|l| *l == heading)
                .unwrap_or_else(|| panic!("{command}: no {heading} in {help}"))
        };
        let places: Vec<usize> = headings.iter().map(|h| at(h)).collect();
        assert!(places.is_sorted(), "{command}: {headings:?} at {places:?}");
        // Each option under its heading: the next heading comes after it.
        let under = |option: &str, heading: &str| {
            let line = lines
                .iter()
                .position(|l| l.trim_start().starts_with(option))
                .unwrap_or_else(|| panic!("{command}: no {option}"));
            let start = at(heading);
            let next = lines[start + 1..]
                .iter()
                .position(|l| l.ends_with(':') && !l.starts_with(' '))
                .map_or(lines.len(), |i| start + 1 + i);
            assert!(
                (start..next).contains(&line),
                "{command}: {option} not under {heading}"
            );
        };
        if command != "spots" {
            for option in ["--rate", "--ball-diameter", "--scale", "--plane"] {
                under(option, "Calibration:");
            }
            under("--accept", "Acceptance:");
        }
        under("--threshold-sigma", "Detection tuning:");
        under(
            if command == "rig" {
                "--out"
            } else {
                "--format"
            },
            "Output:",
        );
    }
}
