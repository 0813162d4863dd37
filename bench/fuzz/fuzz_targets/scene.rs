//! Fuzz the scene file reader on arbitrary text: parsing and validation give a scene or a typed
//! error naming the file, never a panic.
#![no_main]

use beadline::synth::scene::Scene;
use libfuzzer_sys::fuzz_target;
use std::path::Path;

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    if let Err(e) = Scene::from_toml(text, Path::new("scene.toml")) {
        assert!(e.to_string().starts_with("scene.toml: "), "{e}");
    }
});
