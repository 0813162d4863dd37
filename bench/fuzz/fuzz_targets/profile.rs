//! Fuzz the rig profile parser on arbitrary text: a profile or a typed error naming the file,
//! never a panic.
#![no_main]

use beadline::rig::profile::Profile;
use libfuzzer_sys::fuzz_target;
use std::path::Path;

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    if let Err(e) = Profile::parse(text, Path::new("rig.toml")) {
        assert!(e.to_string().starts_with("rig.toml: "), "{e}");
    }
});
