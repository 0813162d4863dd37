//! Stage timing of spot finding on given photos, side by side with decoding alone, in one run.
//!
//! `cargo bench --bench stages -- PHOTO...` prints, per photo, the median of 3 runs of: decoding
//! the file alone (the image crate, as `load` uses it), `load` (decode + grey conversion), and the
//! whole `find_spots`, and their ratios. Used by bench/run_spots.sh for the speed table.

use beadline::detect::{SpotOptions, find_spots};
use beadline::image::load::{LoadOptions, load};
use std::time::Instant;

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

fn main() {
    let files: Vec<String> = std::env::args()
        .skip(1)
        .filter(|a| !a.starts_with('-'))
        .collect();
    if files.is_empty() {
        eprintln!("usage: cargo bench --bench stages -- PHOTO...");
        return;
    }
    println!("file,megapixels,decode_s,load_s,spots_s,spots_over_decode,spots_found");
    for f in files {
        let (mut dec, mut ld, mut sp) = (Vec::new(), Vec::new(), Vec::new());
        let mut found = 0;
        let mut mp = 0.0;
        for _ in 0..3 {
            let t = Instant::now();
            let img = image::ImageReader::open(&f)
                .and_then(|r| r.with_guessed_format())
                .map_err(|e| e.to_string())
                .and_then(|r| r.decode().map_err(|e| e.to_string()));
            dec.push(t.elapsed().as_secs_f64());
            if let Err(e) = img {
                eprintln!("{f}: {e}");
                break;
            }
            let t = Instant::now();
            let photo = match load(std::path::Path::new(&f), &LoadOptions::default()) {
                Ok(p) => p,
                Err(e) => {
                    eprintln!("{e}");
                    break;
                }
            };
            ld.push(t.elapsed().as_secs_f64());
            mp = (photo.width * photo.height) as f64 / 1e6;
            let t = Instant::now();
            let report = find_spots(&photo, None, &SpotOptions::default(), None);
            let detect = t.elapsed().as_secs_f64();
            sp.push(ld.last().copied().unwrap_or(0.0) + detect);
            found = report.map(|r| r.spots.len()).unwrap_or(0);
        }
        if dec.len() < 3 || sp.len() < 3 {
            continue;
        }
        let (d, l, s) = (median(dec), median(ld), median(sp));
        println!("{f},{mp:.1},{d:.3},{l:.3},{s:.3},{:.2},{found}", s / d);
    }
}
