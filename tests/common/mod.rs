//! Helpers shared by the integration tests: scene builders, rendering to files, running the
//! `beadline` binary with a deadline, and hand-made file headers.
//!
//! Each test file that says `mod common;` compiles its own copy, and not every file uses every
//! helper.
#![allow(dead_code)]

use beadline::image::load::{LoadOptions, Photo, load};
use beadline::pipeline::{MeasureSettings, ScaleSource};
use beadline::report::measure::MeasureDoc;
use beadline::synth::{self, FlashTruth, Truth, scene::Scene};
use std::io::{BufRead, BufReader, Read};
use std::path::{Path, PathBuf};
use std::process::{Child, ChildStdout, Command, ExitStatus, Output, Stdio};
use std::time::{Duration, Instant};

/// How long a test waits for a process or a result before it fails instead of hanging.
pub const DEADLINE: Duration = Duration::from_secs(60);

/// A fresh temporary folder, removed when dropped.
pub fn tempdir() -> tempfile::TempDir {
    tempfile::tempdir().expect("a temporary folder")
}

/// The settings of `beadline measure PHOTO --rate R --ball-diameter D` (the scale from the
/// ball's diameter).
pub fn ball_settings(rate_hz: f64, diameter_m: f64) -> MeasureSettings {
    MeasureSettings {
        rate_hz: Some(rate_hz),
        scale: Some(ScaleSource::BallDiameter),
        ball_diameter_m: Some(diameter_m),
        ..Default::default()
    }
}

/// Relative difference of `a` from `b`.
pub fn rel(a: f64, b: f64) -> f64 {
    (a - b).abs() / b.abs()
}

// ---------------------------------------------------------------------------------------------
// Scenes

/// A ball let go above the floor (from rest or drifting sideways) that bounces: the scene the
/// drop tests share. Keys left `None` are not written, so the scene's defaults apply; `extra` is
/// appended as it is (further tables such as `[photo]` or `[flash_unit]`).
#[derive(Debug, Clone)]
pub struct DropScene {
    pub seed: Option<u64>,
    pub diameter_m: f64,
    pub build: Option<&'static str>,
    pub x_m: f64,
    /// Height of the ball's centre at the start.
    pub y_m: f64,
    pub vx_mps: Option<f64>,
    pub restitution: f64,
    pub rate_hz: f64,
    pub first_flash_s: Option<f64>,
    pub exposure_s: f64,
    pub px_per_m: f64,
    pub width_px: u32,
    pub height_px: u32,
    pub origin_x_px: f64,
    pub origin_y_px: f64,
    pub extra: String,
}

impl DropScene {
    /// A tennis-style drop test: the ball's bottom starts `drop_height_m` above the floor, a
    /// hollow (shell) ball drifting 0.25 m/s sideways, 30 Hz, a 600 x 900 view at 290 px/m.
    pub fn tennis(restitution: f64, drop_height_m: f64, diameter_m: f64) -> DropScene {
        DropScene {
            seed: Some(5),
            diameter_m,
            build: Some("shell"),
            x_m: 0.3,
            y_m: drop_height_m + diameter_m / 2.0,
            vx_mps: Some(0.25),
            restitution,
            rate_hz: 30.0,
            first_flash_s: Some(0.06),
            exposure_s: 2.2,
            px_per_m: 290.0,
            width_px: 600,
            height_px: 900,
            origin_x_px: 60.0,
            origin_y_px: 860.0,
            extra: String::new(),
        }
    }

    /// A 40 mm ball from 0.8 m with a slow sideways drift (the arcs come down close to where
    /// they went up), 25 Hz, no sensor noise.
    pub fn drifting() -> DropScene {
        DropScene {
            seed: Some(11),
            diameter_m: 0.04,
            build: None,
            x_m: 0.1,
            y_m: 0.8,
            vx_mps: Some(0.3),
            restitution: 0.8,
            rate_hz: 25.0,
            first_flash_s: Some(0.15),
            exposure_s: 1.45,
            px_per_m: 800.0,
            width_px: 1000,
            height_px: 900,
            origin_x_px: 200.0,
            origin_y_px: 850.0,
            extra: "[photo]\nnoise = false\n".to_string(),
        }
    }

    /// A 65 mm ball whose bottom starts `height_m` above the floor, drifting 0.05 m/s, in a
    /// 1600 x 1000 view.
    pub fn wide(height_m: f64, restitution: f64, rate_hz: f64, px_per_m: f64) -> DropScene {
        DropScene {
            seed: None,
            diameter_m: 0.065,
            build: None,
            x_m: 0.3,
            y_m: height_m + 0.0325,
            vx_mps: Some(0.05),
            restitution,
            rate_hz,
            first_flash_s: Some(0.02),
            exposure_s: 2.5,
            px_per_m,
            width_px: 1600,
            height_px: 1000,
            origin_x_px: 300.0,
            origin_y_px: 950.0,
            extra: String::new(),
        }
    }

    /// A 40 mm ball let go 1 m (bottom) above the floor, drifting 0.5 m/s sideways (a straight
    /// drop piles its images up at every apex, which measure cannot separate), for shot
    /// planning: a flash unit with one power level of `max_flashes` flashes at up to
    /// `max_rate_hz`, and `wishes` (lines of the `[wishes]` table); a 1200 x 900 view.
    pub fn planned(max_flashes: usize, max_rate_hz: f64, wishes: &str) -> DropScene {
        DropScene {
            seed: None,
            diameter_m: 0.04,
            build: None,
            x_m: 0.2,
            y_m: 1.02,
            vx_mps: Some(0.5),
            restitution: 0.8,
            rate_hz: 20.0,
            first_flash_s: None,
            exposure_s: 1.0,
            px_per_m: 700.0,
            width_px: 1200,
            height_px: 900,
            origin_x_px: 160.0,
            origin_y_px: 880.0,
            extra: format!(
                "[[flash_unit.levels]]\nname = \"full\"\nmax_rate_hz = {max_rate_hz:?}\n\
                 max_flashes = {max_flashes}\nflash_duration_s = 0.00005\n[wishes]\n{wishes}\n"
            ),
        }
    }

    /// The scene file's text.
    pub fn toml(&self) -> String {
        let mut t = String::new();
        if let Some(seed) = self.seed {
            t += &format!("seed = {seed}\n");
        }
        t += &format!("[ball]\ndiameter_m = {:?}\n", self.diameter_m);
        if let Some(build) = self.build {
            t += &format!("build = \"{build}\"\n");
        }
        t += &format!("[start]\nx_m = {:?}\ny_m = {:?}\n", self.x_m, self.y_m);
        if let Some(vx) = self.vx_mps {
            t += &format!("vx_mps = {vx:?}\n");
        }
        t += &format!("[floor]\nrestitution = {:?}\n", self.restitution);
        t += &format!("[strobe]\nrate_hz = {:?}\n", self.rate_hz);
        if let Some(first) = self.first_flash_s {
            t += &format!("first_flash_s = {first:?}\n");
        }
        t += &format!("exposure_s = {:?}\n", self.exposure_s);
        t += &format!(
            "[camera]\npx_per_m = {:?}\nwidth_px = {}\nheight_px = {}\norigin_x_px = {:?}\n\
             origin_y_px = {:?}\n",
            self.px_per_m, self.width_px, self.height_px, self.origin_x_px, self.origin_y_px
        );
        t += &self.extra;
        t
    }

    /// The scene, parsed and validated as a scene file named `drop.toml`.
    pub fn scene(&self) -> Scene {
        Scene::from_toml(&self.toml(), Path::new("drop.toml")).expect("a valid drop scene")
    }
}

/// The demo scene, reduced (800 x 450 at 500 px/m) so tests of the command stay quick.
pub fn small_scene() -> Scene {
    let mut s = Scene::demo();
    s.camera.width_px = 800;
    s.camera.height_px = 450;
    s.camera.px_per_m = 500.0;
    s.camera.origin_x_px = 150.0;
    s.camera.origin_y_px = 410.0;
    s
}

// ---------------------------------------------------------------------------------------------
// Rendering

/// Render `scene` into `path` (format from the extension) and return the renderer's truth.
pub fn render_to(scene: &Scene, path: &Path) -> Truth {
    let photo = synth::render(scene);
    photo.save(path).expect("save the rendered photo");
    photo.truth
}

/// Render `scene` into `dir/name`; the photo's path and the truth.
pub fn shoot(scene: &Scene, dir: &Path, name: &str) -> (PathBuf, Truth) {
    let path = dir.join(name);
    let truth = render_to(scene, &path);
    (path, truth)
}

/// Render `scene` into `path` and load it back with the default limits.
pub fn render_and_load(scene: &Scene, path: &Path) -> (Photo, Truth) {
    let truth = render_to(scene, path);
    (
        load(path, &LoadOptions::default()).expect("load the rendered photo"),
        truth,
    )
}

// ---------------------------------------------------------------------------------------------
// Measured against the truth

/// The truth of the flash whose image is centred nearest the pixel (`x_px`, `y_px`).
pub fn flash_at(truth: &Truth, x_px: f64, y_px: f64) -> &FlashTruth {
    truth
        .flashes
        .iter()
        .min_by(|a, b| {
            let da = (a.x_px - x_px).hypot(a.y_px - y_px);
            let db = (b.x_px - x_px).hypot(b.y_px - y_px);
            da.total_cmp(&db)
        })
        .expect("the truth has flashes")
}

/// Every path entry of `doc` against its flash's truth position less `origin_m` (a point of
/// the truth's world, which has the floor at y = 0): within 3 sigma + 1 mm, sigma the entry's own
/// (its pixel sigma at the truth's scale) and `origin_sigma_m` (the measured origin's) in
/// quadrature. Every entry must be an image of a flash (within half a radius). Returns the
/// largest offset, metres.
pub fn assert_path_in_truth_frame(
    doc: &MeasureDoc,
    truth: &Truth,
    origin_m: [f64; 2],
    origin_sigma_m: f64,
) -> f64 {
    assert!(!doc.path.is_empty());
    let mut worst: f64 = 0.0;
    for p in &doc.path {
        let f = flash_at(truth, p.x_px, p.y_px);
        assert!(
            (f.x_px - p.x_px).hypot(f.y_px - p.y_px) < 0.5 * f.r_px,
            "path entry n = {} at ({:.1}, {:.1}) px is no flash's image",
            p.n,
            p.x_px,
            p.y_px
        );
        let sigma = (p.sigma_px / truth.scale_px_per_m).hypot(origin_sigma_m);
        let tol = 3.0 * sigma + 1e-3;
        let (dx, dy) = (p.x_m - (f.x_m - origin_m[0]), p.y_m - (f.y_m - origin_m[1]));
        assert!(
            dx.abs() <= tol && dy.abs() <= tol,
            "path entry n = {} (flash {}): ({:.5}, {:.5}) m, truth ({:.5}, {:.5}) m less the \
             origin ({:.5}, {:.5}), tolerance {:.5} m",
            p.n,
            f.n,
            p.x_m,
            p.y_m,
            f.x_m,
            f.y_m,
            origin_m[0],
            origin_m[1],
            tol
        );
        worst = worst.max(dx.abs()).max(dy.abs());
    }
    worst
}

// ---------------------------------------------------------------------------------------------
// Hand-made files

/// The start of a PNG whose header claims `w` x `h` pixels of 8 bits and `colour_type` (0 grey,
/// 2 RGB), with no pixel data after it. With `crc` the header's CRC-32 is the right one, else 0.
pub fn png_header(w: u32, h: u32, colour_type: u8, crc: bool) -> Vec<u8> {
    let mut ihdr = b"IHDR".to_vec();
    ihdr.extend(w.to_be_bytes());
    ihdr.extend(h.to_be_bytes());
    ihdr.extend([8, colour_type, 0, 0, 0]); // depth, colour, compression, filter, no interlace
    let mut v = vec![0x89, b'P', b'N', b'G', 0x0D, 0x0A, 0x1A, 0x0A];
    v.extend(13u32.to_be_bytes());
    v.extend(&ihdr);
    v.extend((if crc { crc32(&ihdr) } else { 0 }).to_be_bytes());
    v
}

/// CRC-32 (ISO 3309, polynomial 0xEDB88320) as the PNG specification defines it.
pub fn crc32(bytes: &[u8]) -> u32 {
    let mut c = 0xFFFF_FFFFu32;
    for &b in bytes {
        c ^= b as u32;
        for _ in 0..8 {
            c = if c & 1 != 0 {
                0xEDB8_8320 ^ (c >> 1)
            } else {
                c >> 1
            };
        }
    }
    !c
}

// ---------------------------------------------------------------------------------------------
// Running the binary

/// Run `beadline args` in `dir` (no standard input) to its end within [`DEADLINE`].
pub fn beadline(args: &[&str], dir: &Path) -> Output {
    let mut cmd = Command::new(env!("CARGO_BIN_EXE_beadline"));
    cmd.args(args).current_dir(dir);
    output_within(&mut cmd, &format!("beadline {}", args.join(" ")))
}

/// Run `cmd` with no standard input and its outputs captured, as `Command::output` does, but
/// fail (after killing it) if it has not ended within [`DEADLINE`]. `what` names it.
pub fn output_within(cmd: &mut Command, what: &str) -> Output {
    let mut child = cmd
        .stdin(Stdio::null())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap_or_else(|e| panic!("{what}: cannot start: {e}"));
    let drain = |mut r: Box<dyn Read + Send>| {
        std::thread::spawn(move || {
            let mut v = Vec::new();
            let _ = r.read_to_end(&mut v);
            v
        })
    };
    let out = drain(Box::new(child.stdout.take().unwrap()));
    let err = drain(Box::new(child.stderr.take().unwrap()));
    let status = wait_until(&mut child, Instant::now() + DEADLINE, what);
    Output {
        status,
        stdout: out.join().unwrap(),
        stderr: err.join().unwrap(),
    }
}

/// Wait for `child` to end; past `deadline` kill it and fail with a message naming `what`.
pub fn wait_until(child: &mut Child, deadline: Instant, what: &str) -> ExitStatus {
    loop {
        if let Some(status) = child.try_wait().expect("look at the child") {
            return status;
        }
        if Instant::now() >= deadline {
            let _ = child.kill();
            let _ = child.wait();
            panic!("{what}: still running at the deadline ({DEADLINE:?}); killed");
        }
        std::thread::sleep(Duration::from_millis(10));
    }
}

/// The first line `child` writes on `stdout`; past `deadline` kill the child and fail.
pub fn first_line_until(
    child: &mut Child,
    stdout: ChildStdout,
    deadline: Instant,
    what: &str,
) -> String {
    let (tx, rx) = std::sync::mpsc::channel();
    std::thread::spawn(move || {
        let mut line = String::new();
        let _ = BufReader::new(stdout).read_line(&mut line);
        let _ = tx.send(line);
    });
    let left = deadline.saturating_duration_since(Instant::now());
    rx.recv_timeout(left).unwrap_or_else(|_| {
        let _ = child.kill();
        let _ = child.wait();
        panic!("{what}: no line on stdout by the deadline ({DEADLINE:?}); killed")
    })
}

/// A 40 x 20 grey JPEG, bright in its 8 left columns, stored with EXIF Orientation 6 (EXIF 2.32,
/// CIPA DC-008-2019, tag 0x0112: the stored image must be turned 90 degrees clockwise to be
/// upright).
pub fn turned_jpeg(dir: &std::path::Path) -> std::path::PathBuf {
    let img = image::GrayImage::from_fn(40, 20, |x, _| image::Luma([if x < 8 { 250 } else { 10 }]));
    let plain = dir.join("plain.jpg");
    img.save(&plain).unwrap();
    let bytes = std::fs::read(&plain).unwrap();
    // APP1 "Exif": a big-endian TIFF header and one IFD entry (Orientation, SHORT, 1, value 6).
    let mut tiff = b"MM\0\x2a\0\0\0\x08".to_vec();
    tiff.extend_from_slice(&[
        0, 1, 0x01, 0x12, 0, 3, 0, 0, 0, 1, 0, 6, 0, 0, 0, 0, 0, 0, 0, 0,
    ]);
    let mut app1 = b"Exif\0\0".to_vec();
    app1.extend_from_slice(&tiff);
    let mut out = bytes[..2].to_vec();
    out.extend_from_slice(&[0xFF, 0xE1]);
    out.extend_from_slice(&((app1.len() + 2) as u16).to_be_bytes());
    out.extend_from_slice(&app1);
    out.extend_from_slice(&bytes[2..]);
    let turned = dir.join("turned.jpg");
    std::fs::write(&turned, &out).unwrap();
    turned
}
