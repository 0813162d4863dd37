//! Ordering cost: `order_path` on long rendered paths (truth from the renderer's physics, no
//! photo), from 100 to 10,000 spots, in one run. Prints the time per ordering, the time per spot
//! (the cost curve) and whether the recovered order equals the truth order.
//!
//! `cargo bench --bench path_order`

use beadline::detect::{Spot, SpotSource};
use beadline::synth::scene::Scene;
use beadline::synth::sim::Motion;
use beadline::track::{PathOptions, order_path};
use std::time::Instant;

fn main() {
    println!("spots,paths,in_order,seconds,microseconds_per_spot");
    for &count in &[100usize, 1000, 10_000] {
        // A ball thrown along a long floor, bouncing with little loss, imaged every 2 diameters
        // (1 m/s at 25 Hz, 400 px/m, r = 4 px); pixels mapped directly (no photo is made).
        let text = format!(
            r#"
[ball]
diameter_m = 0.02
[start]
x_m = 0.05
y_m = 0.3
vx_mps = 1.0
[floor]
restitution = 0.97
[strobe]
rate_hz = 25.0
exposure_s = {exposure}
[camera]
px_per_m = 400.0
width_px = 800
height_px = 400
origin_x_px = 10.0
origin_y_px = 390.0
"#,
            exposure = (count as f64 - 0.5) / 25.0,
        );
        let scene = Scene::from_toml(&text, std::path::Path::new("bench.toml")).expect("valid");
        let times = scene.strobe.flash_times_s();
        let motion = Motion::simulate(&scene, times[times.len() - 1] + 1.0);
        let mut spots: Vec<Spot> = times
            .iter()
            .map(|&t| {
                let p = motion.at(t);
                Spot {
                    x_px: 10.0 + 400.0 * p.x_m,
                    y_px: 390.0 - 400.0 * p.y_m,
                    r_px: 4.0,
                    sigma_px: 0.05,
                    score: 1.0,
                    source: SpotSource::Detected,
                }
            })
            .collect();
        // Shuffle deterministically (reverse interleave) so the input order says nothing.
        let n = spots.len();
        spots = (0..n).map(|i| spots[(i * 7919) % n]).collect();
        let t0 = Instant::now();
        let result = order_path(&spots, &PathOptions::default());
        let secs = t0.elapsed().as_secs_f64();
        let in_order = result.paths.first().is_some_and(|p| {
            p.points.len() == n
                && p.points.windows(2).all(|w| {
                    let (a, b) = (&spots[w[0].spot_index], &spots[w[1].spot_index]);
                    // Truth order: x grows with time on this path.
                    b.x_px > a.x_px && w[1].n == w[0].n + 1
                })
        });
        println!(
            "{n},{},{in_order},{secs:.4},{:.2}",
            result.paths.len(),
            secs / n as f64 * 1e6
        );
    }
}
