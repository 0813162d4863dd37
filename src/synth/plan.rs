//! Plan a shot: the flash rate, the number of flashes, the exposure and the first-flash delay that
//! give a usable strobe photo, before taking it.
//!
//! Goes in: a [`Scene`] with its `[flash_unit]` limits and `[wishes]`. Comes out: a [`Plan`] that
//! says what each choice buys (images per arc, closest images, motion blur, what is left of the
//! path after the last image) or which wish to drop when no setting meets them all.
//!
//! Method: the motion is simulated from physics ([`crate::synth::sim`]); every power level and
//! every flash rate on a 0.25 Hz grid up to the level's limit is tried; the first flash waits until
//! consecutive images are at least one radius apart. A setting must first give a photo that
//! `measure` resolves ([`Resolvable`]): ball images of at least 10 px radius, consecutive images
//! at least one radius apart everywhere (closer chains bias or lose centres: the demo at 67 Hz,
//! images 0.72 radius apart on the incline, measured its launch speed 6 % fast), 4 or more images
//! on every flight arc covered (each side of every bounce) and on the incline. When no setting
//! does, the plan is refused with the reason. Among the settings that do, the one that misses the
//! fewest wishes and then has the most images on its poorest arc wins (ties: the lower rate,
//! which needs fewer flashes).

use crate::synth::camera::Projection;
use crate::synth::scene::{PowerLevel, Scene, Wishes};
use crate::synth::sim::Motion;
use serde::{Deserialize, Serialize};

/// Rates from about 3 to 60 Hz are the band most likely to trigger photosensitive seizures
/// (common practice in lighting safety guidance, no single source).
pub const CAUTION_BAND_HZ: (f64, f64) = (3.0, 60.0);

/// The caution printed with every plan whose rate lies in [`CAUTION_BAND_HZ`].
pub const CAUTION: &str = "CAUTION: a strobe flashing at a few to tens of hertz can trigger \
seizures in people with photosensitive epilepsy. Warn everyone in the room before it runs, keep it \
out of view of corridors and windows, and follow your local lab safety rules.";

/// A recommended setting and what it buys.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Plan {
    /// Power level chosen (its name).
    pub power_level: String,
    /// Flash rate, hertz.
    pub rate_hz: f64,
    /// Number of flashes.
    pub flashes: usize,
    /// Exposure length from the first flash, seconds.
    pub exposure_s: f64,
    /// Delay of the first flash after release, seconds.
    pub first_flash_s: f64,
    /// Flash duration at that power, seconds.
    pub flash_duration_s: f64,
    /// Images on each flight arc covered (arc 0 from launch to the first bounce).
    pub images_per_arc: Vec<usize>,
    /// Closest consecutive images anywhere on the covered path after the first flash, whatever
    /// the flashes' phase, in ball diameters (below 1 they overlap).
    pub closest_spacing_diameters: f64,
    /// Consecutive images where the ball is fastest, in ball diameters.
    pub fast_spacing_diameters: f64,
    /// Motion blur within one flash where the ball is fastest, pixels.
    pub blur_px: f64,
    /// Path left between the last image and the end of the wanted coverage, metres.
    pub uncovered_path_m: f64,
    /// Every wish is met.
    pub meets_wishes: bool,
    /// The wishes no setting meets, each with how far to relax it (empty: every wish is met).
    pub unmet_wishes: Vec<UnmetWish>,
    /// What the plan could not cover (the ball bounces fewer times, leaves the frame).
    pub warnings: Vec<String>,
    /// Safety caution for the rate, when it applies.
    pub caution: Option<String>,
}

/// A wish no setting of the flash unit meets, and how to relax it.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct UnmetWish {
    /// Its key in the scene's `[wishes]` table, e.g. `min_images_per_arc`.
    pub wish: String,
    /// What the closest setting gives and the value it would need, in words.
    pub advice: String,
}

/// What `measure` resolves, which every recommended shot must give (see the README's spots
/// section: chains of images under one radius apart lose or bias centres, and an 8 px ball on
/// an incline is not followed; the physics fits a flight arc from 4 images).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Resolvable {
    /// Smallest ball radius in the photo, pixels.
    pub min_radius_px: f64,
    /// Smallest distance between consecutive images, ball diameters.
    pub min_spacing_diameters: f64,
    /// Fewest images on every flight arc covered and on the incline.
    pub min_images_per_arc: usize,
}

/// The limits of today's `measure`.
pub const RESOLVABLE: Resolvable = Resolvable {
    min_radius_px: 10.0,
    min_spacing_diameters: 0.5,
    min_images_per_arc: 4,
};

/// Why a plan cannot be made at all.
#[derive(Debug, Clone, PartialEq)]
pub enum PlanError {
    /// The scene has no `[flash_unit]`.
    NoFlashUnit,
    /// No setting of the flash unit gives a photo that `measure` resolves: the reason.
    Unmeasurable(String),
    /// Settings give a photo `measure` resolves, but none meets every wish: how to relax each
    /// wish missed by the closest one ([`Plan::unmet`]).
    WishesUnmet(Vec<String>),
}

impl std::fmt::Display for PlanError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            PlanError::NoFlashUnit => {
                write!(f, "the scene has no [flash_unit] section to plan with")
            }
            PlanError::Unmeasurable(why) => write!(
                f,
                "refused: no setting of the flash unit gives a photo that measure can resolve: \
                 {why}"
            ),
            PlanError::WishesUnmet(advice) => write!(
                f,
                "no setting of the flash unit meets every wish: {}; the plan given is the \
                 closest",
                advice.join("; ")
            ),
        }
    }
}

/// The motion and what the wishes cover of it.
struct Coverage {
    motion: Motion,
    /// Start and end time of each wanted arc.
    arcs: Vec<(f64, f64)>,
    t_end_s: f64,
    radius_m: f64,
    warnings: Vec<String>,
}

fn coverage(scene: &Scene, wishes: &Wishes) -> Coverage {
    let motion = Motion::simulate(scene, 60.0);
    let proj = Projection::new(&scene.camera);
    let mut edges = vec![motion.launch.t_s];
    edges.extend(motion.bounces.iter().map(|b| b.t_s));
    let mut warnings = Vec::new();
    let wanted = wishes.bounces + 1;
    if edges.len() < wanted + 1 {
        warnings.push(format!(
            "the ball bounces only {} times before it rolls: covering those",
            motion.bounces.len()
        ));
    }
    let mut arcs: Vec<(f64, f64)> = edges
        .windows(2)
        .take(wanted)
        .map(|w| (w[0], w[1]))
        .collect();
    if arcs.is_empty() {
        arcs.push((motion.launch.t_s, motion.launch.t_s + 1.0));
    }
    let mut t_end = arcs.last().map(|a| a.1).unwrap_or(1.0);
    // Stay inside the frame.
    let (w, h) = (scene.camera.width_px as f64, scene.camera.height_px as f64);
    let r_m = scene.ball.radius_m();
    let step = 1e-3;
    let mut t = 0.0;
    while t < t_end {
        let p = motion.at(t);
        let c = proj.to_pixel(p.x_m, p.y_m);
        let r = r_m * proj.scale_px_per_m(p.x_m, p.y_m);
        let outside = c[0] - r < 0.0 || c[1] - r < 0.0 || c[0] + r > w || c[1] + r > h;
        if outside && t > motion.launch.t_s {
            warnings.push(format!(
                "the ball leaves the frame at t = {t:.3} s: the plan covers the path up to there"
            ));
            t_end = t;
            arcs.retain(|a| a.0 < t_end);
            if let Some(last) = arcs.last_mut() {
                last.1 = last.1.min(t_end);
            }
            break;
        }
        t += step;
    }
    Coverage {
        motion,
        arcs,
        t_end_s: t_end,
        radius_m: r_m,
        warnings,
    }
}

/// What one setting gives.
struct Trial {
    level: usize,
    rate_hz: f64,
    t0: f64,
    flashes: usize,
    images_per_arc: Vec<usize>,
    closest_d: f64,
    /// Time of the first of the two closest images, seconds.
    closest_t_s: f64,
    /// Images on the incline (None without one).
    incline_images: Option<usize>,
    fast_d: f64,
    blur_px: f64,
    uncovered_m: f64,
}

fn speed_at(m: &Motion, t: f64) -> f64 {
    let p = m.at(t);
    p.vx_mps.hypot(p.vy_mps)
}

fn try_setting(
    covered: &Coverage,
    scene: &Scene,
    level: usize,
    l: &PowerLevel,
    rate: f64,
) -> Trial {
    let m = &covered.motion;
    let dt = 1.0 / rate;
    let gap = |t: f64| {
        let (a, b) = (m.at(t), m.at(t + dt));
        (b.x_m - a.x_m).hypot(b.y_m - a.y_m)
    };
    // First flash: once consecutive images are far enough apart to resolve (or at release).
    let spacing_m = RESOLVABLE.min_spacing_diameters * 2.0 * covered.radius_m;
    let mut t0 = 0.0;
    while t0 < covered.t_end_s && gap(t0) < spacing_m {
        t0 += 1e-3;
    }
    let n_needed = ((covered.t_end_s - t0) * rate).floor() as usize + 1;
    let flashes = n_needed.min(l.max_flashes);
    let times: Vec<f64> = (0..flashes).map(|i| t0 + i as f64 * dt).collect();
    let images_per_arc = covered
        .arcs
        .iter()
        .map(|(a, b)| times.iter().filter(|&&t| t > *a && t < *b).count())
        .collect();
    let d = 2.0 * covered.radius_m;
    // The closest consecutive images whatever the flashes' phase: the gap over one interval
    // from every millisecond of the covered path (an apex or a bounce falls between two flashes
    // at any phase in the photo: a phase that happens to straddle it is no plan).
    let mut closest = f64::INFINITY;
    let mut closest_t = t0;
    let mut t = t0;
    while t + dt <= covered.t_end_s.max(t0 + dt) {
        let g = gap(t);
        if g < closest {
            closest = g;
            closest_t = t;
        }
        t += 1e-3;
    }
    let (mut v_max, mut fast_gap) = (0.0, f64::INFINITY);
    for w in times.windows(2) {
        let (a, b) = (m.at(w[0]), m.at(w[1]));
        let g = (b.x_m - a.x_m).hypot(b.y_m - a.y_m);
        closest = closest.min(g);
        let v = speed_at(m, w[0]);
        if v > v_max {
            v_max = v;
            fast_gap = g;
        }
    }
    let t_last = times.last().copied().unwrap_or(t0);
    let mut uncovered = 0.0;
    let mut t = t_last;
    while t < covered.t_end_s {
        uncovered += speed_at(m, t) * 1e-3;
        t += 1e-3;
    }
    Trial {
        level,
        rate_hz: rate,
        t0,
        flashes,
        images_per_arc,
        closest_d: closest / d,
        closest_t_s: closest_t,
        incline_images: scene
            .incline
            .as_ref()
            .map(|_| times.iter().filter(|&&t| t < m.launch.t_s).count()),
        fast_d: fast_gap / d,
        blur_px: v_max * l.flash_duration_s * scene.camera.px_per_m,
        uncovered_m: uncovered,
    }
}

/// Why `measure` could not resolve the photo of a trial: images too close (a faster rate makes
/// it worse), and too few images on an arc or the incline (a slower rate makes it worse). Both
/// empty: it can.
fn unresolvable(t: &Trial) -> (Vec<String>, Vec<String>) {
    let r = RESOLVABLE;
    let mut close = Vec::new();
    let mut out = Vec::new();
    if t.closest_d < r.min_spacing_diameters {
        close.push(format!(
            "consecutive images {:.2} diameters apart at t = {:.3} s (measure separates them from \
             {} diameters; where the ball turns at an apex, give it a sideways speed)",
            t.closest_d, t.closest_t_s, r.min_spacing_diameters
        ));
    }
    if let Some((k, n)) = t
        .images_per_arc
        .iter()
        .enumerate()
        .find(|(_, n)| **n < r.min_images_per_arc)
    {
        out.push(format!(
            "{} on flight arc {k} (measure fits an arc, each side of a bounce, from {})",
            crate::core::words::count(*n, "image", "images"),
            r.min_images_per_arc
        ));
    }
    if let Some(n) = t.incline_images.filter(|n| *n < r.min_images_per_arc) {
        out.push(format!(
            "{} on the incline (the launch needs {} there)",
            crate::core::words::count(n, "image", "images"),
            r.min_images_per_arc
        ));
    }
    (close, out)
}

/// Which wishes a trial misses.
fn misses(t: &Trial, w: &Wishes, covered: &Coverage, max_flashes: usize) -> Vec<&'static str> {
    let mut out = Vec::new();
    if t.images_per_arc.iter().any(|&n| n < w.min_images_per_arc) {
        out.push("min_images_per_arc");
    }
    if t.fast_d < w.min_separation_diameters {
        out.push("min_separation_diameters");
    }
    if t.blur_px > w.max_blur_px {
        out.push("max_blur_px");
    }
    let needed = ((covered.t_end_s - t.t0) * t.rate_hz).floor() as usize + 1;
    if needed > max_flashes {
        out.push("bounces");
    }
    out
}

/// How to relax the wish `wish` (a name from [`misses`]) so that trial `t` meets it.
fn relax(wish: &str, t: &Trial, wishes: &Wishes, l: &PowerLevel) -> String {
    // Two decimals, rounded toward what the trial gives (so the relaxed wish is met).
    let down = |v: f64| (v * 100.0).floor() / 100.0;
    let up = |v: f64| (v * 100.0).ceil() / 100.0;
    match wish {
        "min_images_per_arc" => format!(
            "the closest gives {:?} images per arc, not {} on each: lower \
             wishes.min_images_per_arc to {}",
            t.images_per_arc,
            wishes.min_images_per_arc,
            t.images_per_arc.iter().copied().min().unwrap_or(0)
        ),
        "min_separation_diameters" => format!(
            "fast images are only {:.2} diameters apart: lower wishes.min_separation_diameters \
             to {}",
            t.fast_d,
            down(t.fast_d)
        ),
        "max_blur_px" => format!(
            "motion blur is {:.2} px: raise wishes.max_blur_px to {}, or use a shorter flash",
            t.blur_px,
            up(t.blur_px)
        ),
        _ => format!(
            "{} at {} cannot cover the path to bounce {}: lower wishes.bounces",
            crate::core::words::count(l.max_flashes, "flash", "flashes"),
            l.name,
            wishes.bounces
        ),
    }
}

/// Plan the shot for `scene`.
pub fn plan(scene: &Scene) -> Result<Plan, PlanError> {
    let unit = scene.flash_unit.as_ref().ok_or(PlanError::NoFlashUnit)?;
    let wishes = scene.wishes.clone().unwrap_or(Wishes {
        min_images_per_arc: 5,
        min_separation_diameters: 1.0,
        bounces: 2,
        max_blur_px: 0.5,
    });
    let covered = coverage(scene, &wishes);
    let radius_px = covered.radius_m * scene.camera.px_per_m;
    if radius_px < RESOLVABLE.min_radius_px {
        return Err(PlanError::Unmeasurable(format!(
            "the ball's images are {radius_px:.1} px in radius and measure needs {} px: bring \
             the camera closer, use a longer lens or more pixels",
            RESOLVABLE.min_radius_px
        )));
    }
    let mut best: Option<(Trial, Vec<&'static str>)> = None;
    // For the refusal: the fastest rate with too few images, the slowest with images too close.
    let mut too_few: Option<(f64, Vec<String>)> = None;
    let mut too_close: Option<(f64, Vec<String>)> = None;
    for (li, l) in unit.levels.iter().enumerate() {
        let steps = (l.max_rate_hz / 0.25).floor() as usize;
        for s in 1..=steps.min(40_000) {
            let rate = s as f64 * 0.25;
            let t = try_setting(&covered, scene, li, l, rate);
            let (close, few) = unresolvable(&t);
            if !few.is_empty() && too_few.as_ref().is_none_or(|f| rate > f.0) {
                too_few = Some((rate, few.clone()));
            }
            if !close.is_empty() && too_close.as_ref().is_none_or(|c| rate < c.0) {
                too_close = Some((rate, close.clone()));
            }
            if !(close.is_empty() && few.is_empty()) {
                continue;
            }
            let miss = misses(&t, &wishes, &covered, l.max_flashes);
            let poorest = t.images_per_arc.iter().copied().min().unwrap_or(0);
            let better = match &best {
                None => true,
                Some((b, bm)) => {
                    let bp = b.images_per_arc.iter().copied().min().unwrap_or(0);
                    (miss.len(), std::cmp::Reverse(poorest)) < (bm.len(), std::cmp::Reverse(bp))
                }
            };
            if better {
                best = Some((t, miss));
            }
        }
    }
    let Some(best) = best else {
        let why: Vec<String> = [too_few, too_close]
            .into_iter()
            .flatten()
            .map(|(rate, why)| format!("at {rate} Hz {}", why.join(" and ")))
            .collect();
        return Err(PlanError::Unmeasurable(why.join("; ")));
    };
    let (t, miss) = best;
    let l = &unit.levels[t.level];
    let unmet_wishes = miss
        .iter()
        .map(|m| UnmetWish {
            wish: m.to_string(),
            advice: relax(m, &t, &wishes, l),
        })
        .collect();
    let in_band = t.rate_hz >= CAUTION_BAND_HZ.0 && t.rate_hz <= CAUTION_BAND_HZ.1;
    Ok(Plan {
        power_level: l.name.clone(),
        rate_hz: t.rate_hz,
        flashes: t.flashes,
        exposure_s: (t.flashes as f64 - 0.5) / t.rate_hz,
        first_flash_s: t.t0,
        flash_duration_s: l.flash_duration_s,
        images_per_arc: t.images_per_arc,
        closest_spacing_diameters: t.closest_d,
        fast_spacing_diameters: t.fast_d,
        blur_px: t.blur_px,
        uncovered_path_m: t.uncovered_m,
        meets_wishes: miss.is_empty(),
        unmet_wishes,
        warnings: covered.warnings,
        caution: in_band.then(|| CAUTION.to_string()),
    })
}

impl Plan {
    /// The scene with this plan's strobe settings, for a preview render.
    pub fn apply(&self, scene: &Scene) -> Scene {
        let mut s = scene.clone();
        s.strobe.rate_hz = self.rate_hz;
        s.strobe.first_flash_s = self.first_flash_s;
        s.strobe.exposure_s = self.exposure_s;
        s.strobe.flash_duration_s = self.flash_duration_s;
        s.strobe.max_flashes = Some(self.flashes);
        s
    }

    /// The wishes this plan misses, as the error a caller reports (None: it meets them all).
    pub fn unmet(&self) -> Option<PlanError> {
        (!self.unmet_wishes.is_empty()).then(|| {
            PlanError::WishesUnmet(self.unmet_wishes.iter().map(|u| u.advice.clone()).collect())
        })
    }

    /// Text for a person.
    pub fn text(&self) -> String {
        let mut s = format!(
            "Plan: {} at {:.2} Hz (power {}), first flash {:.3} s after release, exposure {:.3} s\n",
            crate::core::words::count(self.flashes, "flash", "flashes"),
            self.rate_hz,
            self.power_level,
            self.first_flash_s,
            self.exposure_s
        );
        s += &format!("  images per arc        {:?}\n", self.images_per_arc);
        s += &format!(
            "  closest images        {:.2} diameters apart\n",
            self.closest_spacing_diameters
        );
        s += &format!(
            "  where fastest         {:.2} diameters apart, blur {:.2} px in a {:.0} us flash\n",
            self.fast_spacing_diameters,
            self.blur_px,
            self.flash_duration_s * 1e6
        );
        s += &format!("  path after last image {:.3} m\n", self.uncovered_path_m);
        if self.unmet_wishes.is_empty() {
            s += "  meets every wish\n";
        } else {
            s += "  no setting meets every wish: this is the closest; relax\n";
            for u in &self.unmet_wishes {
                s += &format!("    {}: {}\n", u.wish, u.advice);
            }
        }
        for w in &self.warnings {
            s += &format!("  warning: {w}\n");
        }
        if let Some(c) = &self.caution {
            s += &format!("\n{c}\n");
        }
        s
    }
}
