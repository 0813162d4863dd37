//! The fuzz targets' inputs replayed without the fuzzer: every committed seed (and every saved
//! crashing input under bench/fuzz/regressions/) goes through the same calls as the targets in
//! bench/fuzz/fuzz_targets and must give a result or a typed error naming the file, never a panic.
//! This is CI's smoke run of the fuzz targets; the fuzzer itself runs with bench/fuzz/smoke.sh.

use beadline::detect::{SpotOptions, find_spots};
use beadline::image::load::{LoadOptions, load_bytes};
use beadline::rig::profile::Profile;
use beadline::synth::scene::Scene;
use std::path::{Path, PathBuf};

/// Every file under bench/fuzz/seeds/TARGET and bench/fuzz/regressions/TARGET.
fn inputs(target: &str) -> Vec<PathBuf> {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("bench/fuzz");
    let mut files = Vec::new();
    for dir in ["seeds", "regressions"] {
        if let Ok(entries) = std::fs::read_dir(root.join(dir).join(target)) {
            files.extend(entries.flatten().map(|e| e.path()));
        }
    }
    files.sort();
    files
}

#[test]
fn loader_and_spot_finder_take_every_seed() {
    let files = inputs("load_spots");
    assert!(files.len() >= 5, "seeds missing: {files:?}");
    // The target's tight limits (bench/fuzz/fuzz_targets/load_spots.rs).
    let options = LoadOptions {
        max_side_px: 4096,
        max_megapixels: 4.0,
        max_alloc_bytes: 64 << 20,
    };
    for f in files {
        let data = std::fs::read(&f).unwrap();
        match load_bytes(Path::new("fuzz.img"), &data, &options) {
            Ok(photo) => {
                if let Err(e) = find_spots(&photo, None, &SpotOptions::default(), None) {
                    assert!(
                        e.to_string().starts_with("fuzz.img"),
                        "{}: {e}",
                        f.display()
                    );
                }
            }
            Err(e) => assert!(
                e.to_string().starts_with("fuzz.img"),
                "{}: {e}",
                f.display()
            ),
        }
    }
}

#[test]
fn profile_and_scene_readers_take_every_seed() {
    for (target, name) in [("profile", "rig.toml"), ("scene", "scene.toml")] {
        let files = inputs(target);
        assert!(files.len() >= 4, "seeds missing: {files:?}");
        for f in files {
            let Ok(text) = String::from_utf8(std::fs::read(&f).unwrap()) else {
                continue;
            };
            let err = match target {
                "profile" => Profile::parse(&text, Path::new(name)).err(),
                _ => Scene::from_toml(&text, Path::new(name)).err(),
            };
            if let Some(e) = err {
                assert!(e.to_string().starts_with(name), "{}: {e}", f.display());
            }
        }
    }
}
