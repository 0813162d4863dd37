//! `beadline rig`: bad inputs, exit statuses, profile precedence, parseable outputs, and the
//! watch journal's exactly-once behaviour across a kill. Every photo is generated here.

mod common;

use common::{DEADLINE, beadline, output_within, render_to, small_scene};
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::Instant;

/// The demo's measure settings: 25 Hz strobe, 40 mm ball.
const DEMO: &[&str] = &["--rate", "25", "--ball-diameter", "0.04"];

fn lines(text: &[u8]) -> Vec<serde_json::Value> {
    String::from_utf8_lossy(text)
        .lines()
        .map(|l| serde_json::from_str(l).unwrap_or_else(|e| panic!("not a JSON line ({e}): {l}")))
        .collect()
}

/// The keys of a JSON object's text in the order they are written (a `serde_json::Value` sorts
/// them).
fn keys_in_order(line: &str) -> Vec<String> {
    struct Keys(Vec<String>);
    impl<'de> serde::Deserialize<'de> for Keys {
        fn deserialize<D: serde::Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
            struct Visit;
            impl<'de> serde::de::Visitor<'de> for Visit {
                type Value = Keys;
                fn expecting(&self, f: &mut std::fmt::Formatter) -> std::fmt::Result {
                    f.write_str("a JSON object")
                }
                fn visit_map<A: serde::de::MapAccess<'de>>(
                    self,
                    mut m: A,
                ) -> Result<Keys, A::Error> {
                    let mut keys = Vec::new();
                    while let Some(k) = m.next_key::<String>()? {
                        m.next_value::<serde::de::IgnoredAny>()?;
                        keys.push(k);
                    }
                    Ok(Keys(keys))
                }
            }
            d.deserialize_map(Visit)
        }
    }
    serde_json::from_str::<Keys>(line)
        .unwrap_or_else(|e| panic!("not a JSON object ({e}): {line}"))
        .0
}

fn status_of<'a>(results: &'a [serde_json::Value], file: &str) -> &'a str {
    let hits: Vec<_> = results
        .iter()
        .filter(|v| v["file"].as_str().is_some_and(|f| f.ends_with(file)))
        .collect();
    assert_eq!(hits.len(), 1, "{file} appears once in {results:?}");
    hits[0]["status"].as_str().expect("a status")
}

/// A grey image with `discs` (x, y, radius) drawn white, saved as PNG.
fn draw(path: &Path, w: u32, h: u32, discs: &[(f64, f64, f64)]) {
    let img = image::GrayImage::from_fn(w, h, |x, y| {
        let inside = discs.iter().any(|&(cx, cy, r)| {
            let (dx, dy) = (x as f64 - cx, y as f64 - cy);
            dx * dx + dy * dy <= r * r
        });
        // A little deterministic texture so the noise estimate is not zero.
        let t = ((x * 7 + y * 13) % 5) as u8;
        image::Luma([if inside { 230 } else { 40 + t }])
    });
    img.save(path).expect("save drawn image");
}

#[test]
fn every_bad_input_gets_an_error_result_and_the_run_goes_on() {
    let dir = common::tempdir();
    let d = dir.path();
    let scene = small_scene();
    render_to(&scene, &d.join("good.png"));
    render_to(&scene, &d.join("good.jpg"));
    let jpeg = std::fs::read(d.join("good.jpg")).unwrap();
    std::fs::write(d.join("zero.jpg"), b"").unwrap();
    std::fs::write(d.join("truncated.jpg"), &jpeg[..jpeg.len() / 2]).unwrap();
    std::fs::write(d.join("text.jpg"), b"this is not a photo\n").unwrap();
    image::GrayImage::from_pixel(1, 1, image::Luma([128]))
        .save(d.join("one_px.png"))
        .unwrap();
    std::fs::write(
        d.join("huge.png"),
        common::png_header(100_000, 100_000, 0, true),
    )
    .unwrap();
    // The image crate cannot encode CMYK JPEGs; CMYK decoding is delegated to it. Check only
    // that a JPEG whose frame header claims four (CMYK) components does not panic the run.
    let mut cmyk = jpeg.clone();
    let sof = cmyk
        .windows(2)
        .position(|w| w == [0xFF, 0xC0])
        .expect("baseline frame header");
    cmyk[sof + 9] = 4; // component count
    std::fs::write(d.join("cmyk_corrupt.jpg"), &cmyk).unwrap();
    let mut deep = small_scene();
    deep.photo.bit_depth = 16;
    render_to(&deep, &d.join("deep16.tif"));
    draw(&d.join("no_ball.png"), 800, 450, &[]);
    draw(&d.join("one_ball.png"), 800, 450, &[(400.0, 200.0, 10.0)]);
    // Thousands of separate blobs (9600): 4 px dots every 10 px, on a faint texture.
    let noise = image::GrayImage::from_fn(1200, 800, |x, y| {
        let t = ((x * 7 + y * 13) % 5) as u8;
        image::Luma([if x % 10 < 4 && y % 10 < 4 {
            220
        } else {
            30 + t
        }])
    });
    noise.save(d.join("noise.png")).unwrap();
    render_to(&scene, &d.join("locked.png"));
    let locked = d.join("locked.png");
    use std::os::unix::fs::PermissionsExt;
    std::fs::set_permissions(&locked, std::fs::Permissions::from_mode(0o000)).unwrap();
    // As root, chmod 000 does not stop reading: then this case cannot be made, so skip it.
    let locked_readable = std::fs::read(&locked).is_ok();
    render_to(&scene, &d.join("deleted.png"));
    std::fs::remove_file(d.join("deleted.png")).unwrap(); // listed below, gone when processed

    let files = [
        "good.png",
        "zero.jpg",
        "truncated.jpg",
        "text.jpg",
        "one_px.png",
        "huge.png",
        "cmyk_corrupt.jpg",
        "deep16.tif",
        "no_ball.png",
        "one_ball.png",
        "noise.png",
        "locked.png",
        "deleted.png",
    ];
    let mut args = vec!["rig"];
    args.extend(files);
    args.extend(DEMO);
    let out = beadline(&args, d);
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{stderr}");
    let results = lines(&out.stdout);
    assert_eq!(results.len(), files.len());
    for line in String::from_utf8_lossy(&out.stdout).lines() {
        let keys = keys_in_order(line);
        assert_eq!(keys[..2], ["file", "status"], "{line}");
        if line.contains(r#""status":"error""#) {
            assert_eq!(keys, ["file", "status", "error"], "{line}");
        }
    }
    assert_eq!(status_of(&results, "good.png"), "ok");
    assert_eq!(
        status_of(&results, "deep16.tif"),
        "ok",
        "16-bit TIFF measures"
    );
    let errors = [
        "zero.jpg",
        "truncated.jpg",
        "text.jpg",
        "one_px.png",
        "huge.png",
        "no_ball.png",
        "one_ball.png",
        "noise.png",
        "deleted.png",
    ];
    for f in errors {
        assert_eq!(status_of(&results, f), "error", "{f}");
        let line = stderr
            .lines()
            .find(|l| l.contains(f))
            .unwrap_or_else(|| panic!("a stderr line names {f}: {stderr}"));
        assert!(line.starts_with("beadline: "), "{line}");
        let r = results
            .iter()
            .find(|v| v["file"].as_str().is_some_and(|x| x.ends_with(f)))
            .unwrap();
        assert!(r["error"].as_str().is_some_and(|e| e.contains(f)), "{r}");
    }
    // The CMYK header case must only not panic: any status is fine, the line is there.
    status_of(&results, "cmyk_corrupt.jpg");
    if !locked_readable {
        assert_eq!(status_of(&results, "locked.png"), "error");
    }
    let noise_err = results.iter().find(|v| v["file"] == "noise.png").unwrap()["error"]
        .as_str()
        .unwrap()
        .to_string();
    assert!(noise_err.contains("candidate regions"), "{noise_err}");
    let huge_err = stderr.lines().find(|l| l.contains("huge.png")).unwrap();
    assert!(
        huge_err.contains("image of 100000 x 100000 px is larger than the limit"),
        "{huge_err}"
    );
    assert!(!stderr.contains("panicked"), "{stderr}");

    // --quiet: the same results, nothing on stderr.
    let mut quiet = args.clone();
    quiet.push("--quiet");
    let out = beadline(&quiet, d);
    assert_eq!(out.status.code(), Some(2));
    assert!(
        out.stderr.is_empty(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert_eq!(lines(&out.stdout).len(), files.len());
}

#[test]
fn exit_statuses_and_parseable_outputs() {
    let dir = common::tempdir();
    let d = dir.path();
    std::fs::create_dir(d.join("shots")).unwrap();
    render_to(&small_scene(), &d.join("shots/a.png"));
    std::fs::copy(d.join("shots/a.png"), d.join("shots/b.png")).unwrap();

    // 0: a folder and a glob, every photo within its band; summary and overlays.
    let mut args = vec![
        "rig",
        "shots",
        "shots/*.png",
        "--accept",
        "restitution=0.7..0.85",
        "--out",
        "results.jsonl",
        "--summary",
        "summary.csv",
        "--overlay-dir",
        "overlays",
    ];
    args.extend(DEMO);
    let out = beadline(&args, d);
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(out.stdout.is_empty(), "results go to --out only");
    let results = lines(&std::fs::read(d.join("results.jsonl")).unwrap());
    assert_eq!(
        results.len(),
        2,
        "the folder and the glob name the same two photos"
    );
    for r in &results {
        assert_eq!(r["status"], "ok");
        assert_eq!(r["verdicts"][0]["outcome"], "pass");
        assert!(r["bounces"][0]["restitution"].as_f64().is_some());
    }
    let mut csv = csv::Reader::from_path(d.join("summary.csv")).unwrap();
    let headers = csv.headers().unwrap().clone();
    for h in [
        "file",
        "status",
        "restitution",
        "launch_speed_mps",
        "gravity_mps2",
    ] {
        assert!(headers.iter().any(|x| x == h), "{h} in {headers:?}");
    }
    let rows: Vec<csv::StringRecord> = csv.records().map(|r| r.unwrap()).collect();
    assert_eq!(rows.len(), 2);
    let col = |name: &str| headers.iter().position(|h| h == name).unwrap();
    for row in &rows {
        assert_eq!(&row[col("status")], "ok");
        assert_eq!(&row[col("verdict")], "pass");
        assert_eq!(
            &row[col("checks")],
            "",
            "a right measurement passes every check"
        );
        let e: f64 = row[col("restitution")].parse().unwrap();
        assert!((0.7..0.85).contains(&e), "{e}");
        let dt: f64 = row[col("flash_interval_s")].parse().unwrap();
        assert_eq!(dt, 0.04, "1 / 25 Hz, given");
    }
    assert!(d.join("overlays/a.overlay.png").is_file());
    assert!(d.join("overlays/b.overlay.png").is_file());
    // Each line: file and status, then the measure document's keys in its own order.
    let settings = common::ball_settings(25.0, 0.04);
    let m = beadline::pipeline::measure_photo(&d.join("shots/a.png"), &settings).unwrap();
    let doc_keys = keys_in_order(&serde_json::to_string(&m.doc).unwrap());
    assert_eq!(doc_keys[0], "file");
    for line in std::fs::read_to_string(d.join("results.jsonl"))
        .unwrap()
        .lines()
    {
        let keys = keys_in_order(line);
        assert_eq!(keys[..2], ["file", "status"], "{line}");
        assert_eq!(keys[2..], doc_keys[1..], "{line}");
    }

    // 3: outside the band.
    let mut args = vec!["rig", "shots/a.png", "--accept", "restitution=0.1..0.2"];
    args.extend(DEMO);
    let out = beadline(&args, d);
    assert_eq!(out.status.code(), Some(3));
    assert_eq!(lines(&out.stdout)[0]["status"], "out_of_band");

    // 2 wins over 3.
    std::fs::write(d.join("bad.jpg"), b"not a photo").unwrap();
    let mut args2 = args.clone();
    args2.push("bad.jpg");
    assert_eq!(beadline(&args2, d).status.code(), Some(2));

    // 1: the run itself cannot go (unwritable output path, bad flag).
    let mut args1 = args.clone();
    args1.extend(["--out", "no/such/folder/results.jsonl"]);
    let out = beadline(&args1, d);
    assert_eq!(out.status.code(), Some(1));
    assert!(String::from_utf8_lossy(&out.stderr).contains("no/such/folder"));
    let out = beadline(&["rig", "shots/a.png", "--rate", "-5"], d);
    assert_eq!(out.status.code(), Some(1));
}

#[test]
fn profile_settings_with_typed_flags_overriding() {
    let dir = common::tempdir();
    let d = dir.path();
    render_to(&small_scene(), &d.join("a.png"));
    std::fs::write(
        d.join("rig.toml"),
        "rate_hz = 50.0\nball_diameter_m = 0.04\npolarity = \"auto\"\nthreshold_sigma = 4.5\n\
         accept = [\"restitution=0.1..0.2\"]\n",
    )
    .unwrap();
    // The profile alone: its band fails.
    let out = beadline(
        &["rig", "a.png", "--profile", "rig.toml", "--rate", "25"],
        d,
    );
    assert_eq!(
        out.status.code(),
        Some(3),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let r = &lines(&out.stdout)[0];
    assert_eq!(r["flash_interval_s"]["value"], 0.04, "typed --rate 25 wins");
    // A typed --accept replaces the profile's bands.
    let out = beadline(
        &[
            "rig",
            "a.png",
            "--profile",
            "rig.toml",
            "--rate",
            "25",
            "--accept",
            "restitution=0.7..0.85",
        ],
        d,
    );
    assert_eq!(out.status.code(), Some(0));
    let r = &lines(&out.stdout)[0];
    assert_eq!(r["verdicts"].as_array().map(|v| v.len()), Some(1));
    // Without the typed rate, the profile's 50 Hz is used.
    let out = beadline(&["rig", "a.png", "--profile", "rig.toml"], d);
    let r = &lines(&out.stdout)[0];
    assert_eq!(r["flash_interval_s"]["value"], 0.02, "profile rate_hz = 50");

    // Refused profiles name the file and the key.
    for (text, key) in [
        ("rate = 25\n", "rate"),
        ("rate_hz = -25\n", "rate_hz"),
        ("rate_hz = nan\n", "rate_hz"),
        ("radius_px = [9, 3]\n", "radius_px"),
        ("ball_diameter_m = -0.04\n", "ball_diameter_m"),
        ("threshold_sigma = \"high\"\n", "threshold_sigma"),
        ("accept = [\"bounciness=0..1\"]\n", "accept"),
    ] {
        std::fs::write(d.join("bad.toml"), text).unwrap();
        let out = beadline(&["rig", "a.png", "--profile", "bad.toml"], d);
        let err = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(1), "{text}: {err}");
        assert!(
            err.contains("bad.toml") && err.contains(key),
            "{text}: {err}"
        );
        assert_eq!(err.lines().count(), 1, "one line: {err}");
        assert!(out.stdout.is_empty());
    }
}

/// Watch mode: kill the process after its first result, restart it, and every photo appears
/// exactly once across both runs; the results file holds whole JSON lines only.
#[test]
fn watch_journal_is_exactly_once_across_a_kill() {
    let dir = common::tempdir();
    let d = dir.path();
    let inbox = d.join("inbox");
    std::fs::create_dir(&inbox).unwrap();
    render_to(&small_scene(), &inbox.join("p00.png"));
    let names: Vec<String> = (0..6).map(|i| format!("p{i:02}.png")).collect();
    for n in &names[1..] {
        std::fs::copy(inbox.join("p00.png"), inbox.join(n)).unwrap();
    }
    let results = d.join("results.jsonl");
    let watch_args = |extra: &[&str]| -> Vec<String> {
        let mut v: Vec<String> = [
            "rig",
            "--watch",
            inbox.to_str().unwrap(),
            "--poll-interval",
            "0.05",
            "--jobs",
            "1",
            "--quiet",
            "--out",
            results.to_str().unwrap(),
        ]
        .iter()
        .map(|s| s.to_string())
        .collect();
        v.extend(DEMO.iter().map(|s| s.to_string()));
        v.extend(extra.iter().map(|s| s.to_string()));
        v
    };
    let mut child = Command::new(env!("CARGO_BIN_EXE_beadline"))
        .args(watch_args(&[]))
        .stdin(Stdio::null())
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .spawn()
        .unwrap();
    // Wait for the first whole result line (at most DEADLINE), then kill.
    let deadline = Instant::now() + DEADLINE;
    loop {
        let text = std::fs::read(&results).unwrap_or_default();
        if text.contains(&b'\n') {
            break;
        }
        if Instant::now() >= deadline {
            child.kill().unwrap();
            child.wait().unwrap();
            panic!("watch wrote no whole result line within {DEADLINE:?}");
        }
        assert!(child.try_wait().unwrap().is_none(), "watch exited early");
        std::thread::sleep(std::time::Duration::from_millis(10));
    }
    child.kill().unwrap();
    child.wait().unwrap();
    let first_run = std::fs::read(&results).unwrap();
    let journal = std::fs::read(inbox.join(".beadline-journal")).unwrap_or_default();
    // Simulate a kill while the journal was being written: a torn last line.
    let mut torn = journal.clone();
    torn.extend(b"\"p9");
    std::fs::write(inbox.join(".beadline-journal"), &torn).unwrap();

    let out = output_within(
        Command::new(env!("CARGO_BIN_EXE_beadline")).args(watch_args(&["--idle-exit", "1"])),
        "the restarted watch (--idle-exit 1)",
    );
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let all = std::fs::read(&results).unwrap();
    assert!(all.ends_with(b"\n"));
    let whole = |bytes: &[u8]| -> Vec<String> {
        String::from_utf8_lossy(bytes)
            .lines()
            .map(|l| {
                let v: serde_json::Value =
                    serde_json::from_str(l).unwrap_or_else(|e| panic!("half line ({e}): {l}"));
                assert_eq!(v["status"], "ok");
                let f = PathBuf::from(v["file"].as_str().unwrap());
                f.file_name().unwrap().to_string_lossy().into_owned()
            })
            .collect()
    };
    // The first run's lines (a torn tail, if the kill hit mid-line, was cut on restart).
    let kept = first_run
        .iter()
        .rposition(|&b| b == b'\n')
        .map_or(0, |i| i + 1);
    let run1 = whole(&first_run[..kept]);
    let run2 = whole(&all[kept..]);
    assert!(!run1.is_empty());
    let mut seen: Vec<String> = run1.iter().chain(&run2).cloned().collect();
    seen.sort();
    assert_eq!(
        seen, names,
        "each photo exactly once: run 1 {run1:?}, run 2 {run2:?}"
    );

    // A third run finds nothing new.
    let out = output_within(
        Command::new(env!("CARGO_BIN_EXE_beadline")).args(watch_args(&["--idle-exit", "0.2"])),
        "the third watch (--idle-exit 0.2)",
    );
    assert_eq!(out.status.code(), Some(0));
    assert_eq!(std::fs::read(&results).unwrap(), all);
}

/// A photo still being written (size changing) is not taken; once complete it is.
#[test]
fn watch_waits_for_a_photo_to_be_complete_and_stops_at_max_photos() {
    let dir = common::tempdir();
    let d = dir.path();
    render_to(&small_scene(), &d.join("src.png"));
    let bytes = std::fs::read(d.join("src.png")).unwrap();
    let inbox = d.join("inbox");
    std::fs::create_dir(&inbox).unwrap();
    std::fs::write(inbox.join("late.png"), &bytes[..bytes.len() / 3]).unwrap();
    let mut args: Vec<&str> = vec![
        "rig",
        "--watch",
        "inbox",
        "--poll-interval",
        "0.5",
        "--max-photos",
        "1",
        "--journal",
        "journal.txt",
    ];
    args.extend(DEMO);
    let mut child = Command::new(env!("CARGO_BIN_EXE_beadline"))
        .args(&args)
        .current_dir(d)
        .stdout(Stdio::piped())
        .stderr(Stdio::null())
        .spawn()
        .unwrap();
    // Keep the file growing, far faster than the watcher looks (every 0.5 s), then complete it.
    for k in 0..150 {
        let n = bytes.len() / 3 + k * 16;
        std::fs::write(inbox.join("late.png"), &bytes[..n.min(bytes.len())]).unwrap();
        std::thread::sleep(std::time::Duration::from_millis(10));
    }
    std::fs::write(inbox.join("late.png"), &bytes).unwrap();
    // The first result line and the exit (--max-photos 1), each by the deadline.
    let deadline = Instant::now() + DEADLINE;
    let stdout = child.stdout.take().unwrap();
    let line = common::first_line_until(&mut child, stdout, deadline, "watch --max-photos 1");
    let status = common::wait_until(&mut child, deadline, "watch --max-photos 1");
    let v: serde_json::Value = serde_json::from_str(&line).unwrap();
    // A photo caught half written would be a truncated PNG: an error, not ok.
    assert_eq!(v["status"], "ok", "{line}");
    assert_eq!(status.code(), Some(0));
    let journal = std::fs::read_to_string(d.join("journal.txt")).unwrap();
    assert_eq!(journal, "\"late.png\"\n");
}

#[test]
fn outputs_and_limits_are_checked_before_any_photo_is_measured() {
    // `--summary` into a missing folder used to fail only after every photo was measured, and
    // `--max-decoding 0` was accepted while `--jobs 0` was refused.
    let dir = common::tempdir();
    let photo = Path::new(env!("CARGO_MANIFEST_DIR")).join("testimages/coins.png");
    let photo = photo.to_str().unwrap();
    let missing = dir.path().join("nowhere/summary.csv");
    for (extra, says) in [
        (
            vec!["--max-decoding", "0"],
            "--max-decoding: must be at least 1",
        ),
        (
            vec!["--summary", missing.to_str().unwrap()],
            "--summary: the folder",
        ),
    ] {
        let mut args = vec!["rig", photo, "--rate", "25"];
        args.extend(extra);
        let out = common::beadline(&args, dir.path());
        let err = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(1), "{args:?}: {err}");
        assert!(err.contains(says), "{args:?}: {err}");
        assert!(out.stdout.is_empty(), "{args:?}: a photo was measured");
    }
}
