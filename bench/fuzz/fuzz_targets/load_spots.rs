//! Fuzz the loader and the spot finder on arbitrary bytes: any input gives a photo or a typed
//! error, never a panic, and the decoding limits keep memory bounded.
#![no_main]

use beadline::detect::{SpotOptions, find_spots};
use beadline::image::load::{LoadOptions, load_bytes};
use libfuzzer_sys::fuzz_target;
use std::path::Path;

fuzz_target!(|data: &[u8]| {
    // Tight limits keep each run small; the checks are the same as for the defaults.
    let options = LoadOptions {
        max_side_px: 4096,
        max_megapixels: 4.0,
        max_alloc_bytes: 64 << 20,
    };
    if let Ok(photo) = load_bytes(Path::new("fuzz.img"), data, &options) {
        let _ = find_spots(&photo, None, &SpotOptions::default(), None);
    }
});
