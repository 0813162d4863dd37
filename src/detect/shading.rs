//! Shaded-sphere refinement of a photo's spots: the isolated images refitted by their pixels,
//! the images lit from elsewhere rejected, and the others corrected by the pull measured.
//!
//! Goes in: the photo, its background, its [`Tone`] and the edge-fitted spots of a
//! [`SpotReport`]. Comes out: the same report with the isolated spots replaced by shaded fits
//! ([`crate::detect::shaded::shaded_fit`], a Lambertian sphere by variable projection), spots
//! lit by another light rejected as [`Reason::OtherLight`], the edge fits of the others
//! corrected by the median lit-limb pull (robust sigma 1.4826 x MAD of the pulls joins theirs)
//! and the photo's systematic set accordingly. On a printed ball whose lone images the shaded
//! model describes, the images that overlap a neighbour are then refitted by their pixels too,
//! their neighbours held in place ([`crate::detect::shaded::shaded_fit_held`]), and candidates
//! rejected as weak rims between them are taken back where such a fit finds an image, and a
//! crowded spot whose pixels are explained better without it is rejected as
//! [`Reason::Surplus`].

use crate::core::light::Tone;
use crate::core::stats::{MAD_TO_SIGMA, upper_median};
use crate::detect::circle::Circle;
use crate::detect::joint::DUPLICATE_FRACTION;
use crate::detect::shaded::{
    ShadedFit, WindowPixel, held_start, held_terms, light_evidence, light_evidence_without_marks,
    shaded_fit_held, shaded_fit_held_with_evidence, shaded_fit_of,
};
use crate::detect::{Reason, Rejected, Spot, SpotReport, SpotSource};
use crate::image::background::Background;
use crate::image::load::Photo;
use rayon::prelude::*;

/// Refine the spots of `report` by their shading (see the module's doc); `printed`: the photo's
/// balls carry printed marks ([`crate::detect::shaded::shaded_fit_of`]).
pub fn refine_spots(
    photo: &Photo,
    bg: &Background,
    tone: Tone,
    report: &mut SpotReport,
    printed: bool,
) {
    let shaded = shade_spots(
        photo,
        bg,
        tone,
        (&mut report.spots, printed),
        report.systematic_px,
    );
    let shaded = drop_other_lights(photo, bg, tone, (report, printed), shaded);
    let light_uv = correct_edge_fits(report, &shaded);
    if let Some(light_uv) = light_uv.filter(|_| printed) {
        let noise = upper_median(shaded.iter().flatten().map(|f| f.rms).collect());
        let shaded = rescue_rejected(photo, bg, tone, report, (light_uv, noise), shaded);
        let held = refine_overlapping(photo, bg, tone, (report, &shaded), (light_uv, noise));
        drop_surplus(photo, bg, tone, (report, held), (light_uv, noise));
    }
}

/// The pixels around spot `s` in linear light, from 0.65 radius (or 6 px) inside its rim to
/// 2.5 px outside. Alone (`held` None): without those a neighbouring image may reach, and None
/// when a neighbour overlaps it or takes half of the window. With the photo's light `held`: every
/// pixel, the neighbours held in place in [`WindowPixel::others`].
fn shade_window(
    photo: &Photo,
    bg: &Background,
    tone: Tone,
    (spots, s): (&[Spot], &Spot),
    held: Option<[f64; 2]>,
) -> Option<Vec<WindowPixel>> {
    let outer = s.r_px + SHADED_OUTSIDE_PX;
    // An overlapping neighbour leaves this image no clean rim; one that is near keeps the
    // pixels it may reach (within 2 px of its rim) out of the window.
    let mut neighbours = Vec::new();
    for o in spots {
        let d = (o.x_px - s.x_px).hypot(o.y_px - s.y_px);
        if d > 0.3 * s.r_px && d < o.r_px + s.r_px && held.is_none() {
            return None;
        }
        if d > 0.3 * s.r_px && d < o.r_px + outer + 2.0 {
            neighbours.push(o);
        }
    }
    let inner = (0.65 * s.r_px).max(s.r_px - 6.0);
    let x0 = (s.x_px - outer).floor().max(0.0) as usize;
    let y0 = (s.y_px - outer).floor().max(0.0) as usize;
    let x1 = ((s.x_px + outer).ceil().max(0.0) as usize).min(photo.width - 1);
    let y1 = ((s.y_px + outer).ceil().max(0.0) as usize).min(photo.height - 1);
    let mut window = Vec::new();
    let mut annulus = 0usize;
    for y in y0..=y1 {
        for x in x0..=x1 {
            let (xf, yf) = (x as f64, y as f64);
            let d = (xf - s.x_px).hypot(yf - s.y_px);
            if d < inner || d > outer {
                continue;
            }
            annulus += 1;
            if held.is_none()
                && neighbours
                    .iter()
                    .any(|o| (xf - o.x_px).hypot(yf - o.y_px) < o.r_px + 2.0)
            {
                continue;
            }
            window.push(WindowPixel {
                x_px: xf,
                y_px: yf,
                value: tone.to_linear(photo.at(x, y)) - tone.to_linear(bg.at(x, y)),
                backdrop: bg.smooth_at(x, y, |v| tone.to_linear(v)),
                weight: 1.0,
                others: [0.0; 3],
            });
        }
    }
    if window.is_empty() || 2 * window.len() < annulus {
        return None;
    }
    let mean = window.iter().map(|q| q.backdrop).sum::<f64>() / window.len() as f64;
    for q in &mut window {
        q.backdrop -= mean;
        if let Some(light_uv) = held {
            q.others = neighbours.iter().fold([0.0; 3], |sum, o| {
                let t = held_terms(q, circle_of(o), light_uv);
                [sum[0] + t[0], sum[1] + t[1], sum[2] + t[2]]
            });
        }
    }
    // On a large image, every few pixels away from the rim say as much about the shading as all
    // of them: keep the rim's band and thin the rest to the pixel budget.
    if window.len() > SHADED_BUDGET {
        let rim =
            |q: &WindowPixel| ((q.x_px - s.x_px).hypot(q.y_px - s.y_px) - s.r_px).abs() <= 1.5;
        let n_rim = window.iter().filter(|q| rim(q)).count();
        let rest = window.len() - n_rim;
        let stride_rim = n_rim.div_ceil(SHADED_BUDGET * 2 / 3).max(1);
        let stride_rest = rest.div_ceil(SHADED_BUDGET / 3).max(1);
        let (mut i_rim, mut i_rest) = (0usize, 0usize);
        window.retain(|q| {
            let (i, stride) = if rim(q) {
                i_rim += 1;
                (i_rim, stride_rim)
            } else {
                i_rest += 1;
                (i_rest, stride_rest)
            };
            i % stride == 0
        });
    }
    Some(window)
}

/// What the shaded fit of one spot found.
#[derive(Debug, Clone, Copy)]
struct Shaded {
    /// Shaded fit minus edge fit: x, y, r, pixels.
    shift: [f64; 3],
    /// The edge fit it replaced: x, y, r and its sigma, pixels.
    edge: [f64; 4],
    /// 1-sigma of the shift per axis: the two fits' sigmas in quadrature, pixels.
    shift_sigma_px: f64,
    /// Light direction (u, v, 1) and the 1-sigma of u and v.
    light_uv: [f64; 2],
    light_sigma: [f64; 2],
    /// Fitted as a uniform disc: the ball's shading was below the noise.
    flat: bool,
    /// RMS residual of the fit, linear light units.
    rms: f64,
}

/// Fewest shaded fits that give the photo's light for the others.
const LIGHT_MIN_FITS: usize = 5;

/// A spot whose light is this far from the photo's, degrees (and 4 of its sigmas), was lit from
/// elsewhere. The light of one photo's images agrees within a few degrees; a
/// mirror image in the floor, lit by the mirrored light, is 42 degrees off under the default
/// light 27 degrees off the lens axis.
const OTHER_LIGHT_DEG: f64 = 20.0;

/// The photo's images agree on their light when their median angle from it is at most this,
/// degrees.
const LIGHT_AGREE_DEG: f64 = 5.0;

/// Spots whose shading shows another light than the photo's (the median of its shaded fits'
/// light directions, when they agree on it) are rejected as `OtherLight`; the shaded fits of the
/// rest are returned. On a printed ball (`printed`) the pixels' evidence for a light is read
/// without the marks ([`light_evidence_without_marks`]).
fn drop_other_lights(
    photo: &Photo,
    bg: &Background,
    tone: Tone,
    (report, printed): (&mut SpotReport, bool),
    shaded: Vec<Option<Shaded>>,
) -> Vec<Option<Shaded>> {
    let lights: Vec<&Shaded> = shaded.iter().flatten().collect();
    if lights.len() < LIGHT_MIN_FITS {
        return shaded;
    }
    let u = upper_median(lights.iter().map(|f| f.light_uv[0]).collect());
    let v = upper_median(lights.iter().map(|f| f.light_uv[1]).collect());
    let unit = |u: f64, v: f64| {
        let n = (u * u + v * v + 1.0).sqrt();
        [u / n, v / n, 1.0 / n]
    };
    let photo_light = unit(u, v);
    let angle_deg = |f: &Shaded| {
        let l = unit(f.light_uv[0], f.light_uv[1]);
        let cos: f64 = (0..3).map(|i| l[i] * photo_light[i]).sum();
        cos.clamp(-1.0, 1.0).acos().to_degrees()
    };
    // Only a light that the photo's images agree on tells one apart (a faint dark ball against
    // its plate shows too little shading for that).
    if upper_median(lights.iter().map(|f| angle_deg(f)).collect()) > LIGHT_AGREE_DEG {
        return shaded;
    }
    let spots = std::mem::take(&mut report.spots);
    let mut kept = Vec::with_capacity(shaded.len());
    for (s, f) in spots.iter().zip(shaded) {
        let s = *s;
        if let Some(f) = &f {
            let angle_deg = angle_deg(f);
            // The direction turns by about d(u, v) / (1 + u^2 + v^2) radians.
            let [a, b] = f.light_uv;
            let sigma_deg =
                (f.light_sigma[0].hypot(f.light_sigma[1]) / (1.0 + a * a + b * b)).to_degrees();
            let other = angle_deg > OTHER_LIGHT_DEG
                && angle_deg > 4.0 * sigma_deg
                && lit_otherwise(photo, bg, tone, (&spots, &s, printed), f.light_uv, [u, v]);
            if other {
                report.rejected.push(rejected(&s, Reason::OtherLight));
                continue;
            }
        }
        report.spots.push(s);
        kept.push(f);
    }
    kept
}

/// The pixels of spot `s` tell its fitted light `fit_uv` apart from the photo's `photo_uv`
/// ([`light_evidence`] positive). A small image's shading is mostly blur: its fitted light may
/// wander far from the photo's while the photo's light explains its pixels as well; such an
/// image is not lit from elsewhere.
fn lit_otherwise(
    photo: &Photo,
    bg: &Background,
    tone: Tone,
    (spots, s, printed): (&[Spot], &Spot, bool),
    fit_uv: [f64; 2],
    photo_uv: [f64; 2],
) -> bool {
    let evidence = if printed {
        light_evidence_without_marks
    } else {
        light_evidence
    };
    shade_window(photo, bg, tone, (spots, s), None)
        .and_then(|window| evidence(&window, circle_of(s), fit_uv, photo_uv))
        .is_none_or(|evidence| evidence > 0.0)
}

/// Fewest shaded fits that measure the photo's edge bias for the others.
const EDGE_BIAS_MIN_FITS: usize = 3;

/// The edge fits beside shaded fits. When the shaded fits disagree with the edge fits beyond their
/// sigmas (`MODEL_DISAGREES`), the shaded model does not fit this ball: every spot keeps its edge
/// fit (`keep_edge_fits`). Otherwise: the lit limb pulls every edge fit of a photo alike (one
/// light, one ball), so the shaded fits, which it does not pull, measure that pull: the median of
/// (shaded - edge) over the refined images corrects the others (images overlapping a neighbour),
/// and the scatter of those differences (1.4826 x their median absolute deviation, the larger axis)
/// joins their sigma. Nothing common is left, so the photo's systematic becomes 0. With one or two
/// shaded fits the pull is not measured: the edge fits keep their centres and the systematic joins
/// their sigma (it is now a difference between images, not common to all). When most shaded fits
/// are uniform discs (a dark ball against its plate), there is no lit limb to pull the edge fits:
/// they keep their centres and sigmas, and the systematic is 0 (the differences would be the two
/// fits' noise, and correcting by them adds error rather than removing it).
fn correct_edge_fits(report: &mut SpotReport, shaded: &[Option<Shaded>]) -> Option<[f64; 2]> {
    let fits: Vec<&Shaded> = shaded.iter().flatten().collect();
    if fits.is_empty() {
        return None;
    }
    if 2 * fits.iter().filter(|f| f.flat).count() > fits.len() {
        report.systematic_px = 0.0;
        return None;
    }
    let lit: Vec<&Shaded> = fits.iter().copied().filter(|f| !f.flat).collect();
    let measured = if lit.len() >= EDGE_BIAS_MIN_FITS {
        let Some(measured) = edge_bias(&lit) else {
            keep_edge_fits(report, shaded);
            return None;
        };
        Some(measured)
    } else {
        None
    };
    let (bias, scatter_px) = measured.unwrap_or(([0.0; 3], report.systematic_px));
    for (s, shift) in report.spots.iter_mut().zip(shaded) {
        if shift.is_none() {
            s.x_px += bias[0];
            s.y_px += bias[1];
            s.r_px += bias[2];
            s.sigma_px = s.sigma_px.hypot(scatter_px);
        }
    }
    report.systematic_px = 0.0;
    measured
        .map(|_| std::array::from_fn(|k| upper_median(lit.iter().map(|f| f.light_uv[k]).collect())))
}

/// The lit limb's pull on the edge fits as the shaded fits `lit` (at least
/// [`EDGE_BIAS_MIN_FITS`]) measure it: the median of their shifts and the scatter about it
/// (1.4826 x the median absolute deviation, the larger axis). None when the shaded model does
/// not describe this ball: that scatter exceeds [`MODEL_DISAGREES`] times the shifts' typical
/// sigma, or one fit in [`OUTLYING_ONE_IN`] or more lies off the median by more than
/// [`MODEL_DISAGREES`] times their own sigma (of a few fits the median absolute deviation is
/// left to chance: of three, one difference is the median's own zero).
fn edge_bias(lit: &[&Shaded]) -> Option<([f64; 3], f64)> {
    let bias: [f64; 3] =
        std::array::from_fn(|k| upper_median(lit.iter().map(|f| f.shift[k]).collect()));
    let mad = |k: usize| {
        MAD_TO_SIGMA * upper_median(lit.iter().map(|f| (f.shift[k] - bias[k]).abs()).collect())
    };
    let scatter_px = mad(0).max(mad(1));
    let typical = upper_median(lit.iter().map(|f| f.shift_sigma_px).collect());
    let outlying = lit
        .iter()
        .filter(|f| {
            (0..2).any(|k| (f.shift[k] - bias[k]).abs() > MODEL_DISAGREES * f.shift_sigma_px)
        })
        .count();
    let disagree =
        scatter_px > MODEL_DISAGREES * typical || outlying * OUTLYING_ONE_IN >= lit.len();
    (!disagree).then_some((bias, scatter_px))
}

/// One shaded fit in this many off the median shift beyond its sigmas (see [`edge_bias`]) says
/// the shaded model does not describe the ball. On the real photo in testimages/ and its
/// copies (moved, cropped, mirrored, saved again, darker, noisy) 1 to 3 of 3 to 6 fits lie
/// 1.4-2 px off with sigmas near 0.2 px, and the median absolute deviation let 5 of 7 copies
/// correct every overlapping image by a pull those fits do not agree on.
const OUTLYING_ONE_IN: usize = 3;

/// The shaded fits disagree with the edge fits beyond their sigmas when the scatter of their
/// differences about the median exceeds this many times the differences' typical sigma: the
/// shaded sphere does not describe this ball (a real ball's surface, blur or seams the fit
/// cannot leave out), and its fits are not used. On the spots and real-balls benches' rendered
/// photos the ratio is 0.5-2.4 (markings, side light, JPEG 85 included); on the real photo in
/// testimages/ it is 5.6, and 1.4-8.4 on copies of it (see [`OUTLYING_ONE_IN`]).
const MODEL_DISAGREES: f64 = 4.0;

/// Every shaded fit undone: the edge fits keep their centres, radii and sigmas, and the photo's
/// systematic (the lit limb's pull on every edge fit) stays as it was.
fn keep_edge_fits(report: &mut SpotReport, shaded: &[Option<Shaded>]) {
    for (s, f) in report.spots.iter_mut().zip(shaded) {
        if let Some(f) = f {
            [s.x_px, s.y_px, s.r_px, s.sigma_px] = f.edge;
        }
    }
}

/// Spot `s` as a candidate rejected for `reason`.
fn rejected(s: &Spot, reason: Reason) -> Rejected {
    Rejected {
        x_px: s.x_px,
        y_px: s.y_px,
        r_px: s.r_px,
        score: s.score,
        sigma_px: s.sigma_px,
        reason,
    }
}

/// The circle of spot `s`.
fn circle_of(s: &Spot) -> Circle {
    Circle {
        x_px: s.x_px,
        y_px: s.y_px,
        r_px: s.r_px,
    }
}

/// Rounds of the overlapping images' shaded fits, each against its neighbours where the round
/// before left them.
const OVERLAP_ROUNDS: usize = 3;

/// Refit the spots that overlap a neighbour (those without a shaded fit of their own, `shaded`
/// None) by their pixels, the neighbours held in place and the light held at the photo's
/// `light_uv` ([`shaded_fit_held`]), all of them at once, [`OVERLAP_ROUNDS`] times (block
/// coordinate descent). A fit replaces the corrected edge fit under the rule of [`shade_spots`];
/// otherwise the edge fit stands. Gives, for each spot, whether it is one of the crowd whose
/// held fit the last round did not take.
fn refine_overlapping(
    photo: &Photo,
    bg: &Background,
    tone: Tone,
    (report, shaded): (&mut SpotReport, &[Option<Shaded>]),
    (light_uv, noise): ([f64; 2], f64),
) -> Vec<bool> {
    let edge = report.spots.clone();
    let overlaps = |i: usize| {
        let s = &edge[i];
        edge.iter().any(|o| {
            let d = (o.x_px - s.x_px).hypot(o.y_px - s.y_px);
            d > 0.3 * s.r_px && d < o.r_px + s.r_px
        })
    };
    let crowd: Vec<usize> = (0..edge.len())
        .filter(|&i| shaded[i].is_none() && overlaps(i))
        .collect();
    let mut failed = vec![false; edge.len()];
    for _ in 0..OVERLAP_ROUNDS {
        let spots = &report.spots;
        let fits: Vec<Option<ShadedFit>> = crowd
            .par_iter()
            .map(|&i| held_fit(photo, bg, tone, (spots, &spots[i]), (light_uv, noise)))
            .collect();
        for (&i, fit) in crowd.iter().zip(fits) {
            let taken = fit.filter(|fit| replaces(&edge[i], fit, 0.0));
            failed[i] = taken.is_none();
            report.spots[i] = taken.map_or(edge[i], |fit| held_spot(&edge[i], &fit));
        }
    }
    failed
}

/// A held fit further than this many of its and the edge fit's sigmas, combined, from the edge
/// fit takes the sigma that brings it within this many.
const HELD_DISAGREES: f64 = 3.0;

/// Spot `s`, an edge fit, placed by the held fit `fit`. When the two lie further apart than
/// [`HELD_DISAGREES`] of their sigmas combined, one of them is off beyond its sigma: on a
/// printed ball most often the edge fit (pulled by the marks' edges), but also the held fit
/// when an image its window holds is missing from the spots (its light, unmodelled, pulls the
/// fit). The held fit is kept with the sigma that puts the two [`HELD_DISAGREES`] combined
/// sigmas apart. On the
/// real-balls bench (both with the truth's radius range and without) one held fit in 1,300 was
/// such a case (0.52 px off with a sigma of 0.04 px, 7.9 sigmas from its edge fit: a crowded
/// start without the spot of a merged image); 69 others lay 3-6 sigmas from theirs, each within
/// 3.2 of its own sigmas of the truth.
fn held_spot(s: &Spot, fit: &ShadedFit) -> Spot {
    let shift = (fit.circle.x_px - s.x_px).hypot(fit.circle.y_px - s.y_px);
    Spot {
        x_px: fit.circle.x_px,
        y_px: fit.circle.y_px,
        r_px: fit.circle.r_px,
        sigma_px: fit.sigma_px.max(
            ((shift / HELD_DISAGREES).powi(2) - s.sigma_px.powi(2))
                .max(0.0)
                .sqrt(),
        ),
        ..*s
    }
}

/// Two crowded spots whose held fits both failed are tried against each other when they lie
/// within this many radii: nearer than images a flash apart that the detector keeps apart.
const SURPLUS_NEAR: f64 = 1.0;

/// Spots whose held fit failed (`failed`) beside another that failed too, within
/// [`SURPLUS_NEAR`] radius, are tried out: the spot goes (rejected as [`Reason::Surplus`]) when,
/// without it, every such neighbour's held fit is taken (under the rule of [`replaces`]) and a
/// held fit of the spot among the neighbours so placed finds no image (no fit, evidence under
/// [`RESCUE_EVIDENCE`], or a sigma over [`RESCUE_SIGMA`] radius): the pixels are explained
/// better without it. A true image whose neighbour the detector missed fails its held fit too,
/// but without it its neighbours' fits lose its light and fail as well.
fn drop_surplus(
    photo: &Photo,
    bg: &Background,
    tone: Tone,
    (report, mut failed): (&mut SpotReport, Vec<bool>),
    light: ([f64; 2], f64),
) {
    let mut i = 0;
    while i < report.spots.len() {
        let s = report.spots[i];
        let near: Vec<usize> = (0..report.spots.len())
            .filter(|&j| j != i && failed[i] && failed[j])
            .filter(|&j| {
                let o = &report.spots[j];
                (o.x_px - s.x_px).hypot(o.y_px - s.y_px) < SURPLUS_NEAR * s.r_px
            })
            .collect();
        if near.is_empty() {
            i += 1;
            continue;
        }
        let mut without = report.spots.clone();
        without.remove(i);
        let placed = near
            .iter()
            .map(|&j| {
                let j = if j > i { j - 1 } else { j };
                let o = without[j];
                let fit = held_fit(photo, bg, tone, (&without, &o), light)?;
                replaces(&o, &fit, 0.0).then(|| (j, held_spot(&o, &fit)))
            })
            .collect::<Option<Vec<(usize, Spot)>>>();
        let Some(placed) = placed else {
            i += 1;
            continue;
        };
        for &(j, o) in &placed {
            without[j] = o;
        }
        if rescue(photo, bg, tone, (&without, &s), light).is_some() {
            i += 1;
            continue;
        }
        report.rejected.push(rejected(&s, Reason::Surplus));
        failed.remove(i);
        for &(j, _) in &placed {
            failed[j] = false;
        }
        report.spots = without;
    }
}

/// The held fit of spot `s` among `spots` ([`shaded_fit_held`]) under the photo's light and the
/// lone fits' residual RMS (`light`).
fn held_fit(
    photo: &Photo,
    bg: &Background,
    tone: Tone,
    (spots, s): (&[Spot], &Spot),
    light: ([f64; 2], f64),
) -> Option<ShadedFit> {
    let window = shade_window(photo, bg, tone, (spots, s), Some(light.0))?;
    shaded_fit_held(&window, circle_of(s), light, &held_neighbours(spots, s))
}

/// The spots of `spots` held in place in the window of `s` ([`shade_window`]), each with its
/// sigma.
fn held_neighbours(spots: &[Spot], s: &Spot) -> Vec<(Circle, f64)> {
    let reach = s.r_px + SHADED_OUTSIDE_PX + 2.0;
    spots
        .iter()
        .filter(|o| {
            let d = (o.x_px - s.x_px).hypot(o.y_px - s.y_px);
            d > 0.3 * s.r_px && d < o.r_px + reach
        })
        .map(|o| (circle_of(o), o.sigma_px))
        .collect()
}

/// Least evidence ([`shaded_fit_held_with_evidence`]) for a rejected candidate to be a ball
/// image: as the crowded start's count asks of an image (`pipeline::crowded`), what a
/// five-sigma detection would give.
const RESCUE_EVIDENCE: f64 = 25.0;

/// Largest sigma of a rescued image, in radii. On the real-balls bench the images rescued
/// between two others are placed to 0.0004-0.0006 radius; a circle straddling the incline's bar
/// below an image and the image itself, fitted because the disc explains some of the bar's
/// light, to 0.009 radius or worse.
const RESCUE_SIGMA: f64 = 0.002;

/// Largest difference of a rescued image's radius from the photo's, in radii (rescued images
/// on the real-balls bench: within 0.001).
const RESCUE_RADIUS: f64 = 0.02;

/// A rescued image lies within this many radii of the candidate it started from.
const RESCUE_REACH: f64 = 0.5;

/// Candidates rejected as weak rims or faint that overlap a spot, taken back as spots when a held
/// shaded fit from them ([`shaded_fit_held_with_evidence`]) finds a ball image: its pixels
/// hold it by [`RESCUE_EVIDENCE`] or more, its sigma is at most [`RESCUE_SIGMA`] radius, its
/// radius within [`RESCUE_RADIUS`] of the photo's, it lies within [`RESCUE_REACH`] radius of
/// the candidate and at least
/// [`crate::detect::joint::DUPLICATE_FRACTION`] radius from every spot. On a printed ball the
/// marks' edges can pull the circle fit of an image between two others off it (5 px, a quarter
/// radius, on the real-balls bench), and its rim is then too weak to keep. The held fit starts
/// from the candidate's best point on a grid ([`held_start`]) in a window round that point: from
/// the candidate itself, a window reaching over the incline's bar held too little of the image.
/// The candidates are tried one by one, each against the spots taken so far; `shaded` gains a
/// None per spot taken.
fn rescue_rejected(
    photo: &Photo,
    bg: &Background,
    tone: Tone,
    report: &mut SpotReport,
    light: ([f64; 2], f64),
    mut shaded: Vec<Option<Shaded>>,
) -> Vec<Option<Shaded>> {
    let Some(common) = report.common_radius_px else {
        return shaded;
    };
    let candidates = std::mem::take(&mut report.rejected);
    for c in candidates {
        let start = Spot {
            x_px: c.x_px,
            y_px: c.y_px,
            r_px: common,
            sigma_px: c.sigma_px,
            score: c.score,
            source: SpotSource::Detected,
        };
        let apart = |s: &Spot| (s.x_px - c.x_px).hypot(s.y_px - c.y_px);
        let rescued = matches!(c.reason, Reason::WeakRim | Reason::Faint)
            && report.spots.iter().any(|s| apart(s) < s.r_px + common)
            && report
                .spots
                .iter()
                .all(|s| apart(s) >= DUPLICATE_FRACTION * common)
            && rescue(photo, bg, tone, (&report.spots, &start), light).is_some_and(|fit| {
                report.spots.push(Spot {
                    x_px: fit.circle.x_px,
                    y_px: fit.circle.y_px,
                    r_px: fit.circle.r_px,
                    sigma_px: fit.sigma_px,
                    ..start
                });
                true
            });
        if rescued {
            shaded.push(None);
        } else {
            report.rejected.push(c);
        }
    }
    shaded
}

/// The held fit of the candidate `start` among `spots` when it finds a ball image (see
/// [`rescue_rejected`]).
fn rescue(
    photo: &Photo,
    bg: &Background,
    tone: Tone,
    (spots, start): (&[Spot], &Spot),
    light: ([f64; 2], f64),
) -> Option<ShadedFit> {
    let window = shade_window(photo, bg, tone, (spots, start), Some(light.0))?;
    let from = held_start(&window, circle_of(start), light.0, RESCUE_REACH)?;
    let moved = Spot {
        x_px: from.x_px,
        y_px: from.y_px,
        ..*start
    };
    let window = shade_window(photo, bg, tone, (spots, &moved), Some(light.0))?;
    let neighbours = held_neighbours(spots, &moved);
    let (fit, evidence) = shaded_fit_held_with_evidence(&window, from, light, &neighbours)?;
    let r = start.r_px;
    let c = fit.circle;
    let apart = spots
        .iter()
        .all(|s| (s.x_px - c.x_px).hypot(s.y_px - c.y_px) >= DUPLICATE_FRACTION * r);
    (evidence >= RESCUE_EVIDENCE
        && fit.sigma_px <= RESCUE_SIGMA * r
        && (c.r_px - r).abs() <= RESCUE_RADIUS * r
        && (c.x_px - start.x_px).hypot(c.y_px - start.y_px) <= RESCUE_REACH * r
        && apart)
        .then_some(fit)
}

/// A shaded fit replaces the edge fit of spot `s` when it lands near it (a window holding
/// something else than one ball image does not) and is surer than the edge fit with the photo's
/// systematic `systematic_px` (a window that lost much of the rim to an incline's edge may not
/// be).
fn replaces(s: &Spot, fit: &ShadedFit, systematic_px: f64) -> bool {
    let shift = (fit.circle.x_px - s.x_px).hypot(fit.circle.y_px - s.y_px);
    shift <= 0.05 * s.r_px + 3.0 * s.sigma_px + 0.1
        && (fit.circle.r_px - s.r_px).abs() <= 0.05 * s.r_px + 0.3
        && fit.sigma_px < s.sigma_px.hypot(systematic_px)
}

/// Largest number of pixels in a shaded fit's window.
const SHADED_BUDGET: usize = 1500;

/// How far outside the rim a shaded fit's window reaches, pixels.
const SHADED_OUTSIDE_PX: f64 = 2.5;

/// Replace the edge fits of the isolated spots by shaded-sphere fits of their pixels. A fit
/// replaces the edge fit only when it lands near it (a window holding something else than one
/// ball image does not) and is surer than the edge fit with its lit-limb systematic (a window
/// that lost much of the rim to an incline's edge may not be). Gives, for each spot it refined,
/// the shaded fit minus the edge fit (x, y, r).
fn shade_spots(
    photo: &Photo,
    bg: &Background,
    tone: Tone,
    (spots, printed): (&mut [Spot], bool),
    systematic_px: f64,
) -> Vec<Option<Shaded>> {
    let fits: Vec<Option<ShadedFit>> = spots
        .par_iter()
        .map(|s| {
            let window = shade_window(photo, bg, tone, (spots, s), None)?;
            shaded_fit_of(&window, circle_of(s), printed)
        })
        .collect();
    let mut shaded = vec![None; spots.len()];
    for ((s, fit), done) in spots.iter_mut().zip(fits).zip(shaded.iter_mut()) {
        let Some(fit) = fit else {
            continue;
        };
        if replaces(s, &fit, systematic_px) {
            *done = Some(Shaded {
                shift: [
                    fit.circle.x_px - s.x_px,
                    fit.circle.y_px - s.y_px,
                    fit.circle.r_px - s.r_px,
                ],
                edge: [s.x_px, s.y_px, s.r_px, s.sigma_px],
                shift_sigma_px: fit.sigma_px.hypot(s.sigma_px),
                light_uv: fit.light_uv,
                light_sigma: fit.light_sigma,
                flat: fit.flat,
                rms: fit.rms,
            });
            s.x_px = fit.circle.x_px;
            s.y_px = fit.circle.y_px;
            s.r_px = fit.circle.r_px;
            s.sigma_px = fit.sigma_px;
        }
    }
    shaded
}

#[cfg(test)]
mod tests {
    use super::*;

    fn lit(dx: f64, dy: f64) -> Shaded {
        Shaded {
            shift: [dx, dy, 0.0],
            edge: [0.0; 4],
            shift_sigma_px: 0.16,
            light_uv: [0.0; 2],
            light_sigma: [0.0; 2],
            flat: false,
            rms: 0.0,
        }
    }

    #[test]
    fn a_held_fit_far_from_its_edge_fit_takes_the_sigma_of_the_disagreement() {
        // The case of the real-balls bench: an edge fit with a sigma of 0.053 px, the held fit
        // 0.517 px from it with 0.039 px. Three combined sigmas apart needs sqrt((0.517 / 3)^2
        // - 0.053^2) = 0.164 px. A held fit 0.1 px off keeps its own sigma.
        let edge = Spot {
            x_px: 157.42,
            y_px: 286.17,
            r_px: 30.0,
            sigma_px: 0.053,
            score: 0.7,
            source: SpotSource::Detected,
        };
        let fit_at = |dx: f64| ShadedFit {
            circle: Circle {
                x_px: edge.x_px + dx,
                y_px: edge.y_px,
                r_px: 30.0,
            },
            sigma_px: 0.039,
            light_uv: [0.0; 2],
            light_sigma: [0.0; 2],
            rms: 0.01,
            kept: 0.5,
            flat: false,
        };
        let far = held_spot(&edge, &fit_at(-0.517));
        assert!((far.sigma_px - 0.1640).abs() < 5e-4, "{}", far.sigma_px);
        assert!((far.x_px - (edge.x_px - 0.517)).abs() < 1e-12);
        let near = held_spot(&edge, &fit_at(0.1));
        assert_eq!(near.sigma_px, 0.039);
    }

    #[test]
    fn one_shaded_fit_in_three_far_off_the_others_refuses_the_pull() {
        // The shifts of a saved-again copy of the real photo in testimages/ (rounded): two fits
        // agree, the third lies 1.6 px off, ten of its sigmas. The scatter by their median
        // absolute deviation, 0.22 px, within four sigmas (0.64 px), called the model good, and
        // every overlapping image was moved by the median pull with 0.22 px more sigma.
        let copy = [lit(-0.28, -0.15), lit(-0.33, 0.0), lit(0.56, 1.57)];
        assert!(edge_bias(&copy.iter().collect::<Vec<_>>()).is_none());
        // Rendered balls: shifts that scatter within their sigmas give the pull and its scatter.
        let rendered = [
            lit(0.10, 0.02),
            lit(0.14, -0.05),
            lit(0.05, 0.08),
            lit(0.12, 0.0),
        ];
        let (bias, scatter_px) = edge_bias(&rendered.iter().collect::<Vec<_>>()).unwrap();
        assert_eq!((bias[0], bias[1]), (0.12, 0.02));
        assert!(scatter_px < 0.16, "{scatter_px}");
    }
}
