//! Fuzz the rig profile parser on arbitrary text: a profile or a typed error naming the file,
//! never a panic; a parsed profile always turns into command-line arguments.
#![no_main]

use beadline::rig::{Profile, flags_to_keys};
use libfuzzer_sys::fuzz_target;
use std::path::Path;

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    match Profile::parse(text, Path::new("rig.toml")) {
        Ok(p) => {
            for a in p.to_args(&[]) {
                assert!(a.starts_with("--"), "{a}");
                let _ = flags_to_keys(&a);
            }
        }
        Err(e) => assert!(e.to_string().starts_with("rig.toml: ")),
    }
    let _ = flags_to_keys(text);
});
