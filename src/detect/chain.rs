//! Images the detector could not separate, counted and placed by the pixels along a known
//! motion: the crowded start of a roll, where images 0.02 to 0.8 radius apart make one bright
//! sausage that no circle detector splits, and the missing flashes inside a phase.
//!
//! Goes in: a region of the photo's colour pixels ([`Pixels`], with the clean plate's), the
//! photo's own image of the ball ([`Template`]) and a [`Stretch`]: images already found with
//! their flash offsets, the offsets the path predicts (in the order to try them), the other
//! images near by, and the map from the plane of motion to the photo. Comes out: a [`ChainFit`]:
//! how many of the predicted images the pixels hold, and their centres with a 1-sigma.
//!
//! Method: a long exposure adds the light of every flash, so in each colour channel the pixels
//! are the backdrop plus one image of the ball per flash, up to where the channel clips. The
//! image is the photo's own: its isolated images shifted onto their fitted centres and averaged
//! on a half-pixel grid, per channel (an effective point-spread function, Anderson & King, PASP
//! 112, 2000), so any shading, highlight or blur is in it; in a photo with no isolated image,
//! the parts of its images that no other image reaches. The images sit at
//! c(m) = c0 + v m + a m^2 / 2 in the plane of motion for flash offset m (constant acceleration,
//! equal flash intervals; a stretch from rest holds the ball at the motion's turning point for
//! the flashes before it, as a ball released from rest or held before its release); their
//! common brightness and a constant are solved linearly at every step, per channel (variable
//! projection, Golub & Pereyra, SIAM J. Numer. Anal. 10, 1973), the motion by
//! Levenberg-Marquardt with a forward-difference Jacobian. Clipped samples are left
//! out: a coloured ball's stack of images clips its strongest channel first, and the others
//! still add the images up (a white ball's stack clips in all three and tells little). The
//! count is the number of least misfit, less the last images that do not each lower it by a
//! clear margin against one image fewer, `n ln(RSS_without / RSS_with) >= 25`, n the samples
//! over the correlation factor of their residuals: "no ball here" must lose by what a
//! five-sigma detection would. An added centre's
//! sigma holds the fit's covariance (scaled by the misfit), the move of the centres with one
//! image more or fewer, the RMS miss of the found images (placed by their own fits), and the
//! distance to where the image sits when fitted alone.

use crate::core::light::Tone;
use crate::core::stats::MAD_TO_SIGMA;
use crate::detect::shaded::{WindowPixel, pixel_correlation_factor};
use crate::image::load::ColourPhoto;
use nalgebra::{SMatrix, SVector};
use rayon::prelude::*;

/// A photo's colour pixels, with its clean plate's when there is one.
pub struct Pixels<'a> {
    /// The photo in colour.
    pub rgb: &'a ColourPhoto,
    /// The clean plate in colour.
    pub plate: Option<&'a ColourPhoto>,
    /// The photo's tone curve.
    pub tone: Tone,
}

impl Pixels<'_> {
    /// The stored value of channel `c` at the photo's pixel (x, y), 0..1.
    fn stored(&self, x: usize, y: usize, c: usize) -> f32 {
        self.rgb.at(x, y, c)
    }

    /// Linear light of channel `c` at (x, y), less the plate's.
    fn excess(&self, x: usize, y: usize, c: usize) -> f64 {
        let plate = self
            .plate
            .map_or(0.0, |p| self.tone.to_linear(p.at(x, y, c)));
        self.tone.to_linear(self.stored(x, y, c)) - plate
    }

    /// The first and last columns and rows of the photo.
    fn bounds(&self) -> [f64; 4] {
        let (w, h) = self.rgb.size();
        [0.0, 0.0, w as f64 - 1.0, h as f64 - 1.0]
    }
}

/// One image of the ball: its light over the backdrop around its centre, per colour channel, on
/// a grid of half-pixel steps; None for a channel the isolated images clip.
#[derive(Debug, Clone)]
pub struct Template {
    /// Half the side of the grid, in steps.
    half: i64,
    /// Row-major values per channel, side 2 half + 1.
    values: [Option<Vec<f64>>; 3],
}

/// Grid step of a [`Template`], pixels.
const TEMPLATE_STEP: f64 = 0.5;

/// Fewest isolated images a template is learned from.
const TEMPLATE_MIN_IMAGES: usize = 5;

/// Largest share of a template's nodes inside the disc with no sample of an image apart from the
/// others within a node (they are filled from their neighbours).
const TEMPLATE_MAX_UNREACHED: f64 = 0.05;

/// A channel whose isolated images clip in more than this fraction of their samples is not used.
const TEMPLATE_MAX_CLIPPED: f64 = 0.002;

impl Template {
    /// The photo's image of the ball, learned from the images at `centres` (fitted centres of
    /// isolated images, radius `r_px`): every sample within r + 3 of a centre, less the median of
    /// the image's ring r + 3 .. r + 6 (the backdrop there), goes to the grid node nearest its
    /// offset, and each node is the mean of its samples (a node no sample reached takes the mean
    /// of its neighbours). None with fewer than five images inside the frame or when every
    /// channel clips.
    pub fn learn(pixels: &Pixels, centres: &[[f64; 2]], r_px: f64) -> Option<Template> {
        Template::learn_apart(pixels, centres, &[], r_px)
    }

    /// [`Template::learn`] from images that overlap others: the samples within r + 1 of any of
    /// `apart` (the other images' centres; their discs and blur) are left out, and a grid node
    /// must be reached by a sample of some image (none is filled from its neighbours inside the
    /// disc's reach). For a photo with no isolated image.
    pub fn learn_apart(
        pixels: &Pixels,
        centres: &[[f64; 2]],
        apart: &[[f64; 2]],
        r_px: f64,
    ) -> Option<Template> {
        let reach = r_px + OUTSIDE_PX;
        let ring = reach + OUTSIDE_PX;
        let half = (reach / TEMPLATE_STEP).ceil() as i64;
        let [x0, y0, x1, y1] = pixels.bounds();
        let inside: Vec<&[f64; 2]> = centres
            .iter()
            .filter(|c| c[0] - ring >= x0 && c[1] - ring >= y0)
            .filter(|c| c[0] + ring <= x1 && c[1] + ring <= y1)
            .collect();
        if inside.len() < TEMPLATE_MIN_IMAGES {
            return None;
        }
        let values = [0, 1, 2].map(|ch| learn_channel(pixels, (&inside, apart), ch, half, reach));
        values
            .iter()
            .any(Option::is_some)
            .then_some(Template { half, values })
    }

    /// The largest light (or deficit) of one image in channel `c`; 0 for a channel not held.
    fn peak(&self, c: usize) -> f64 {
        self.values[c]
            .as_ref()
            .map_or(0.0, |v| v.iter().fold(0.0f64, |m, x| m.max(x.abs())))
    }

    /// Light of images at `centres` at (x, y) in channel `c`: bilinear between the grid's
    /// nodes, 0 off the grid.
    fn light_of(&self, c: usize, centres: &[[f64; 2]], x: f64, y: f64) -> f64 {
        let Some(values) = &self.values[c] else {
            return 0.0;
        };
        let side = 2 * self.half + 1;
        let s = side as usize;
        let g = |a: usize, b: usize| values[b * s + a];
        let mut sum = 0.0;
        for p in centres {
            let u = (x - p[0]) / TEMPLATE_STEP + self.half as f64;
            let v = (y - p[1]) / TEMPLATE_STEP + self.half as f64;
            if !(u >= 0.0 && v >= 0.0 && u < (side - 1) as f64 && v < (side - 1) as f64) {
                continue;
            }
            let (i, j) = (u as usize, v as usize);
            let (fu, fv) = (u - i as f64, v - j as f64);
            sum += (1.0 - fv) * ((1.0 - fu) * g(i, j) + fu * g(i + 1, j))
                + fv * ((1.0 - fu) * g(i, j + 1) + fu * g(i + 1, j + 1));
        }
        sum
    }
}

/// One channel of a [`Template`] (see [`Template::learn`]); None when it clips.
fn learn_channel(
    pixels: &Pixels,
    (inside, apart): (&[&[f64; 2]], &[[f64; 2]]),
    ch: usize,
    half: i64,
    reach: f64,
) -> Option<Vec<f64>> {
    let side = (2 * half + 1) as usize;
    let mut sum = vec![0.0; side * side];
    let mut count = vec![0usize; side * side];
    let (mut clipped, mut total) = (0usize, 0usize);
    for c in inside {
        let ring = reach + OUTSIDE_PX;
        let (x0, y0) = ((c[0] - ring).ceil() as usize, (c[1] - ring).ceil() as usize);
        let (x1, y1) = (
            (c[0] + ring).floor() as usize,
            (c[1] + ring).floor() as usize,
        );
        let mut backdrop = Vec::new();
        let mut disc = Vec::new();
        let reach_other = reach - OUTSIDE_PX + 1.0;
        let others: Vec<&[f64; 2]> = apart
            .iter()
            .filter(|o| (o[0] - c[0]).hypot(o[1] - c[1]) > 0.5)
            .collect();
        for y in y0..=y1 {
            for x in x0..=x1 {
                let d = (x as f64 - c[0]).hypot(y as f64 - c[1]);
                let (xf, yf) = (x as f64, y as f64);
                if others
                    .iter()
                    .any(|o| (xf - o[0]).hypot(yf - o[1]) <= reach_other)
                {
                    continue;
                }
                if d > reach && d <= ring {
                    backdrop.push(pixels.excess(x, y, ch));
                } else if d <= reach {
                    total += 1;
                    clipped += usize::from(pixels.stored(x, y, ch) >= CLIPPED);
                    disc.push((x, y, pixels.excess(x, y, ch)));
                }
            }
        }
        if backdrop.is_empty() {
            continue;
        }
        backdrop.sort_by(f64::total_cmp);
        let level = backdrop[backdrop.len() / 2];
        for (x, y, v) in disc {
            let i = ((x as f64 - c[0]) / TEMPLATE_STEP).round() as i64 + half;
            let j = ((y as f64 - c[1]) / TEMPLATE_STEP).round() as i64 + half;
            if (0..side as i64).contains(&i) && (0..side as i64).contains(&j) {
                let k = j as usize * side + i as usize;
                sum[k] += v - level;
                count[k] += 1;
            }
        }
    }
    if clipped as f64 > TEMPLATE_MAX_CLIPPED * total as f64 {
        return None;
    }
    let mut values: Vec<f64> = sum
        .iter()
        .zip(&count)
        .map(|(s, &n)| if n > 0 { s / n as f64 } else { f64::NAN })
        .collect();
    let (unreached, disc) = (0..side * side).fold((0usize, 0usize), |(u, n), k| {
        let (i, j) = ((k % side) as f64, (k / side) as f64);
        let d = (i - half as f64).hypot(j - half as f64) * TEMPLATE_STEP;
        let inner = d <= reach - OUTSIDE_PX;
        // A node's pixel-sized neighbourhood (a photo's pixel reaches one node in four).
        let near = |di: i64, dj: i64| {
            let (a, b) = (i as i64 + di, j as i64 + dj);
            (0..side as i64).contains(&a)
                && (0..side as i64).contains(&b)
                && count[b as usize * side + a as usize] > 0
        };
        let reached = (-1..=1).any(|di| (-1..=1).any(|dj| near(di, dj)));
        (u + usize::from(inner && !reached), n + usize::from(inner))
    });
    let unreached = unreached as f64 > TEMPLATE_MAX_UNREACHED * disc as f64;
    if !apart.is_empty() && unreached {
        return None;
    }
    fill_gaps(&mut values, side);
    values.iter().all(|v| v.is_finite()).then_some(values)
}

/// Nodes that are NaN take the mean of their finite neighbours, repeatedly, until none is left
/// (or none can be filled).
fn fill_gaps(values: &mut [f64], side: usize) {
    loop {
        let holes: Vec<usize> = (0..values.len()).filter(|&k| values[k].is_nan()).collect();
        if holes.is_empty() {
            return;
        }
        let mut filled = 0;
        let before = values.to_vec();
        for k in holes {
            let (i, j) = ((k % side) as i64, (k / side) as i64);
            let (mut s, mut n) = (0.0, 0);
            for (di, dj) in [(-1, 0), (1, 0), (0, -1), (0, 1)] {
                let (a, b) = (i + di, j + dj);
                if a >= 0 && b >= 0 && a < side as i64 && b < side as i64 {
                    let v = before[b as usize * side + a as usize];
                    if v.is_finite() {
                        s += v;
                        n += 1;
                    }
                }
            }
            if n > 0 {
                values[k] = s / n as f64;
                filled += 1;
            }
        }
        if filled == 0 {
            return;
        }
    }
}

/// A stretch's motion in pixels: the centre at flash offset m is c0 + v m + a m^2 / 2.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Motion {
    /// Centre at offset 0, pixels.
    pub c0_px: [f64; 2],
    /// Displacement per flash at offset 0, pixels.
    pub v_px: [f64; 2],
    /// Change of the displacement per flash, pixels per flash squared.
    pub a_px: [f64; 2],
}

impl Motion {
    /// The centre at flash offset `m`.
    pub fn at(&self, m: f64) -> [f64; 2] {
        [0, 1].map(|i| self.c0_px[i] + self.v_px[i] * m + 0.5 * self.a_px[i] * m * m)
    }

    /// The centre at flash offset `m` of a ball that, `from_rest`, rests where the motion turns
    /// until it moves off: a flash before the turn finds it at the turning point (a roll from
    /// rest, the ball held before its release). Without `from_rest`, [`Motion::at`].
    pub fn placed(&self, m: f64, from_rest: bool) -> [f64; 2] {
        self.at(if from_rest { m.max(self.turn()) } else { m })
    }

    /// The offset of least speed (where a roll from rest began); minus infinity for a motion
    /// with no acceleration.
    pub fn turn(&self) -> f64 {
        let (v, a) = (self.v_px, self.a_px);
        let aa = a[0] * a[0] + a[1] * a[1];
        if aa > 1e-12 {
            -(v[0] * a[0] + v[1] * a[1]) / aa
        } else {
            f64::NEG_INFINITY
        }
    }

    /// The displacement per flash at offset `m`.
    pub fn velocity(&self, m: f64) -> [f64; 2] {
        [0, 1].map(|i| self.v_px[i] + self.a_px[i] * m)
    }

    /// The least-squares motion through `points` (flash offset, centre); None with fewer than
    /// three distinct offsets.
    pub fn through(points: &[(i64, [f64; 2])]) -> Option<Motion> {
        let mut ata = SMatrix::<f64, 3, 3>::zeros();
        let mut atb = [SVector::<f64, 3>::zeros(); 2];
        for &(m, c) in points {
            let m = m as f64;
            let row = SVector::<f64, 3>::new(1.0, m, 0.5 * m * m);
            ata += row * row.transpose();
            for i in 0..2 {
                atb[i] += row * c[i];
            }
        }
        let lu = ata.lu();
        let [x, y] = [0, 1].map(|i| lu.solve(&atb[i]));
        let (x, y) = (x?, y?);
        let m = Motion {
            c0_px: [x[0], y[0]],
            v_px: [x[1], y[1]],
            a_px: [x[2], y[2]],
        };
        m.params().iter().all(|v| v.is_finite()).then_some(m)
    }

    fn params(&self) -> [f64; 6] {
        let (c, v, a) = (self.c0_px, self.v_px, self.a_px);
        [c[0], c[1], v[0], v[1], a[0], a[1]]
    }

    fn from_params(p: &[f64]) -> Motion {
        Motion {
            c0_px: [p[0], p[1]],
            v_px: [p[2], p[3]],
            a_px: [p[4], p[5]],
        }
    }
}

/// What the pixels said about a stretch (in the plane of motion).
#[derive(Debug, Clone, PartialEq)]
pub struct ChainFit {
    /// The predicted images the pixels hold: flash offset, centre, 1-sigma per axis (pixels), in
    /// the order they were tried.
    pub added: Vec<(i64, [f64; 2], f64)>,
    /// The motion fitted to the pixels.
    pub motion: Motion,
}

/// A predicted image is kept when it lowers `n ln RSS` by at least this.
const MARGIN: f64 = 25.0;

/// Samples farther than this beyond a rim do not enter the window, pixels.
const OUTSIDE_PX: f64 = 3.0;

/// Largest number of pixels fitted (a larger window is thinned on a regular grid).
const BUDGET: usize = 6000;

/// Stored values at or above this (of full scale) are clipped.
const CLIPPED: f32 = 0.995;

/// Parameters: the motion.
const NP: usize = 6;

/// Linear terms per channel: the images' brightness and a constant.
const NL: usize = 2;

/// Residuals beyond this many robust sigmas are outliers.
const OUTLIER_SIGMAS: f64 = 4.0;

/// Least ratio of an image's peak light to the fit's RMS misfit (per sample, in the best
/// channel) for images to be added. Sweep shot 103 (a dark 6 px ball under heavy noise, peak
/// 2.5 x the misfit) had its fitted images lag their truth by up to 2.5 px with sigmas of 0.3 px;
/// the photos whose images came out within their sigmas had 4.4 (a tilted JPEG) to 38.
const MIN_SNR: f64 = 4.0;

/// Rounds of counting and fitting.
const ROUNDS: usize = 4;

/// Levenberg-Marquardt steps per fit.
const STEPS: usize = 25;

/// One sample of the window: a pixel's light over the backdrop in one colour channel.
#[derive(Debug, Clone, Copy)]
struct Sample {
    x_px: f64,
    y_px: f64,
    channel: usize,
    value: f64,
}

/// Where a point of the plane of motion appears in the photo, pixels.
pub type ToPixel<'a> = &'a (dyn Fn([f64; 2]) -> [f64; 2] + Sync);

/// A stretch of a path to try predicted images on. Its motion and centres are in the plane of
/// motion (any units near a pixel's size: the ball's acceleration is constant there, not in a
/// tilted camera's pixels); `to_px` takes them to the photo.
pub struct Stretch<'a> {
    /// Its found images: flash offset, centre in the plane.
    pub found: &'a [(i64, [f64; 2])],
    /// The offsets that hold an image on the motion, found or not: the found ones and any
    /// between them the caller knows to hold one.
    pub base: Vec<i64>,
    /// Predicted offsets to try, in order.
    pub trials: &'a [i64],
    /// Images of the photo near the stretch that are not on it (held where they are).
    pub others: &'a [[f64; 2]],
    /// The stretch begins at rest: a trial before the motion's turning point sits at it
    /// ([`Motion::placed`]: a roll from rest; a flight's apex is no turn of this kind).
    pub from_rest: bool,
    /// The plane of motion to the photo.
    pub to_px: ToPixel<'a>,
    /// The motion to start from when the found images are fewer than three (none on the
    /// motion: it was found by other means).
    pub seed: Option<Motion>,
}

/// Fit the motion of `stretch` with the first k of its trials, for k = 0, 1, ..., all on the
/// same samples (a stretch from rest puts the trials before the motion's turn at the turning
/// point). The pixels hold the k of least misfit, as far as the last of them lowered the misfit
/// by the margin of the module's doc. `one` is the photo's image of the ball, `r_px` its radius.
/// None when the stretch cannot be fitted (fewer than three found images and no seed motion,
/// too few samples) or its fit moves a found image by more than a quarter of a radius.
pub fn fit_chain(
    pixels: &Pixels,
    one: &Template,
    stretch: &Stretch,
    r_px: f64,
) -> Option<ChainFit> {
    let Stretch {
        found,
        base,
        trials,
        others,
        from_rest,
        to_px,
        seed,
    } = stretch;
    let start = Motion::through(found).or(*seed)?;
    let mut centres: Vec<[f64; 2]> = found.iter().map(|f| to_px(f.1)).collect();
    centres.extend(
        trials
            .iter()
            .map(|&m| to_px(start.placed(m as f64, *from_rest))),
    );
    let window = window(pixels, one, &centres, r_px + OUTSIDE_PX);
    if window.len() < 30 {
        return None;
    }
    let spanned = base.len();
    let model = Model {
        window: &window,
        offsets: Vec::new(),
        others,
        one,
        to_px: *to_px,
        from_rest: *from_rest,
    };
    let counting = Counting { base, trials };
    // Fitted once on every sample, and again without the outliers of that fit (an edge of the
    // backdrop the fit has no term for: the track under a rolling ball).
    let (first, _) = counting.count_and_fit(&model, start.params())?;
    let motion = Motion::from_params(&first.p);
    let mut lit: Vec<[f64; 2]> = base
        .iter()
        .chain(trials.iter())
        .map(|&m| to_px(motion.placed(m as f64, *from_rest)))
        .collect();
    lit.extend_from_slice(others);
    let window = without_outliers(&window, &first.res, |s| {
        lit.iter()
            .all(|c| (s.x_px - c[0]).hypot(s.y_px - c[1]) > r_px + 0.5)
    });
    let model = Model {
        window: &window,
        ..model
    };
    let (best, offsets) = counting.count_and_fit(&model, first.p)?;
    // The fit that holds the predicted images keeps the found ones where they were found.
    let motion = Motion::from_params(&best.p);
    let moved = found.iter().any(|&(o, c)| {
        let at = motion.placed(o as f64, *from_rest);
        (at[0] - c[0]).hypot(at[1] - c[1]) > 0.25 * r_px
    });
    if moved {
        return None;
    }
    let kept = &offsets[spanned..];
    if kept.is_empty() {
        return Some(ChainFit {
            added: Vec::new(),
            motion,
        });
    }
    let mut added = best.centres(kept, &window, *from_rest);
    // The count is a model choice: the fit with one image more (or one fewer) moves the
    // centres by what that choice is worth, and their sigma holds it.
    let k = kept.len();
    let alternative = if k < trials.len() { k + 1 } else { k - 1 };
    let alt = Model {
        offsets: [&offsets[..spanned], &trials[..alternative]].concat(),
        ..model
    };
    let other = Motion::from_params(&alt.lm(best.p)?.p);
    // The found images' places come from their own fits, not from this one: where the motion
    // puts them says how far the model misses an image's place (per axis, RMS).
    let missed = (found
        .iter()
        .map(|&(o, c)| {
            let at = motion.placed(o as f64, *from_rest);
            (at[0] - c[0]).powi(2) + (at[1] - c[1]).powi(2)
        })
        .sum::<f64>()
        / (2.0 * found.len().max(1) as f64))
        .sqrt();
    let fitted = Model {
        offsets: offsets.clone(),
        ..model
    };
    // Below MIN_SNR the pixels are too faint to place an image the detector could not.
    let snr = peak_over_misfit(one, &window, &best.res);
    if snr.is_nan() || snr < MIN_SNR {
        return None;
    }
    for (m, c, sigma) in &mut added {
        let o = other.placed(*m as f64, *from_rest);
        let shift = (c[0] - o[0]).hypot(c[1] - o[1]);
        // Fitted alone, the others held, the image may sit elsewhere than the motion puts it:
        // that disagreement (in the plane's units) is part of its uncertainty too.
        let at = to_px(*c);
        let alone = fitted.alone(&best.p, *m).unwrap_or([f64::INFINITY; 2]);
        let unit = {
            let q = to_px([c[0] + 1.0, c[1]]);
            (q[0] - at[0]).hypot(q[1] - at[1]).max(1e-9)
        };
        let apart = (alone[0] - at[0]).hypot(alone[1] - at[1]) / unit;
        *sigma = sigma.hypot(shift).hypot(missed).hypot(apart);
    }
    Some(ChainFit { added, motion })
}

/// The image's peak light over the fit's RMS misfit `res` on `window`, in the best channel.
fn peak_over_misfit(one: &Template, window: &[Sample], res: &[f64]) -> f64 {
    (0..3)
        .map(|c| {
            let (n, sum) = window
                .iter()
                .zip(res)
                .filter(|(q, _)| q.channel == c)
                .fold((0usize, 0.0), |(n, s), (_, r)| (n + 1, s + r * r));
            let rms = (sum / n.max(1) as f64).sqrt();
            one.peak(c) / rms
        })
        .fold(0.0, f64::max)
}

/// The misfit per sample of images of the ball at each of `images` (in the photo) to the pixels
/// within a radius and 3 px of any of `around`, their brightness and a constant
/// solved per channel: two accounts of the same pixels compared on the same samples. None with
/// too few samples.
pub fn misfit(
    pixels: &Pixels,
    one: &Template,
    (images, around): (&[[f64; 2]], &[[f64; 2]]),
    r_px: f64,
) -> Option<f64> {
    let window = window(pixels, one, around, r_px + OUTSIDE_PX);
    if window.len() < 30 {
        return None;
    }
    let model = Model {
        window: &window,
        offsets: Vec::new(),
        others: images,
        one,
        to_px: &|u| u,
        from_rest: false,
    };
    Some(model.residuals_at(images, &mut Vec::new())? / window.len() as f64)
}

/// What is counted: the offsets always on the motion and the trials in order.
struct Counting<'a> {
    base: &'a [i64],
    trials: &'a [i64],
}

impl Counting<'_> {
    /// The base offsets and the first `k` trials.
    fn with(&self, k: usize) -> Vec<i64> {
        [self.base, &self.trials[..k]].concat()
    }

    /// Count the trials the pixels of `model`'s window hold with the motion held at `p`, fit the
    /// motion to that many images, and count again with the motion fitted, until the count
    /// holds ([`ROUNDS`] at most); then one image more or fewer, each with its own motion
    /// fitted, while the pixels prefer it by the margin (the count with the motion held favours
    /// the motion it was held at). The fit and its offsets.
    fn count_and_fit(&self, model: &Model, mut p: [f64; NP]) -> Option<(Fitted, Vec<i64>)> {
        let at = |k: usize| Model {
            offsets: self.with(k),
            ..*model
        };
        let mut k = usize::MAX;
        let mut fitted = None;
        for round in 0..ROUNDS {
            let (least, counted) = self.count(model, &p)?;
            // The motion it was held at may be off by a fraction of a radius: the first fit
            // takes the count of least misfit, each image's share of it is judged after.
            let counted = if round == 0 { least } else { counted };
            if counted == k {
                break;
            }
            k = counted;
            let f = at(k).lm(p)?;
            p = f.p;
            fitted = Some(f);
        }
        let mut fitted = fitted?;
        let n_eff = model.window.len() as f64 / correlation_factor(model.window, &fitted.res);
        let gain = |a: &Fitted, b: &Fitted| n_eff * (a.rss / b.rss).ln();
        while k < self.trials.len() {
            match at(k + 1).lm(fitted.p) {
                Some(more) if gain(&fitted, &more) >= MARGIN => (fitted, k) = (more, k + 1),
                _ => break,
            }
        }
        while k > 0 {
            match at(k - 1).lm(fitted.p) {
                Some(fewer) if gain(&fewer, &fitted) < MARGIN => (fitted, k) = (fewer, k - 1),
                _ => break,
            }
        }
        Some((fitted, self.with(k)))
    }

    /// How many trials the pixels of `model`'s window hold with the motion held at `p`: the
    /// number of least misfit, and that number less the last images each of which did not lower
    /// the misfit by the margin against one image fewer (judged against the best count's
    /// misfit: judged from none upwards, the light of the images not yet counted swamps each
    /// gain, and the 12 px start of the bench's `overlap_r12` counted none of its 9 images).
    fn count(&self, model: &Model, p: &[f64; NP]) -> Option<(usize, usize)> {
        let tried = self.trials.len();
        let mut res = Vec::new();
        let mut rss = Vec::with_capacity(tried + 1);
        for k in 0..=tried {
            let m = Model {
                offsets: self.with(k),
                ..*model
            };
            rss.push(m.residuals(p, &mut res)?);
        }
        let k_best = (0..rss.len()).min_by(|&a, &b| rss[a].total_cmp(&rss[b]))?;
        Model {
            offsets: self.with(k_best),
            ..*model
        }
        .residuals(p, &mut res)?;
        let n_eff = model.window.len() as f64 / correlation_factor(model.window, &res);
        let mut counted = k_best;
        while counted > 0 && n_eff * (rss[counted - 1] / rss[counted]).ln() < MARGIN {
            counted -= 1;
        }
        Some((k_best, counted))
    }
}

/// The samples of `window` less those `outside` takes (off every image) whose residual `res`
/// is beyond [`OUTLIER_SIGMAS`] robust sigmas (1.4826 MAD) from zero, per channel: light the
/// images do not explain inside them may be an image not counted yet.
fn without_outliers(
    window: &[Sample],
    res: &[f64],
    outside: impl Fn(&Sample) -> bool,
) -> Vec<Sample> {
    let cut = [0, 1, 2].map(|c| {
        let mut abs: Vec<f64> = window
            .iter()
            .zip(res)
            .filter(|(s, _)| s.channel == c)
            .map(|(_, r)| r.abs())
            .collect();
        if abs.is_empty() {
            return f64::INFINITY;
        }
        let mid = abs.len() / 2;
        let mad = *abs.select_nth_unstable_by(mid, f64::total_cmp).1;
        OUTLIER_SIGMAS * MAD_TO_SIGMA * mad
    });
    window
        .iter()
        .zip(res)
        .filter(|(s, r)| r.abs() <= cut[s.channel] || !outside(s))
        .map(|(s, _)| *s)
        .collect()
}

/// The samples within `reach` of any of `centres` in the channels `one` holds, their light over
/// the backdrop (linear); clipped samples are left out, and a large window is thinned on a
/// regular grid to [`BUDGET`] pixels.
fn window(pixels: &Pixels, one: &Template, centres: &[[f64; 2]], reach: f64) -> Vec<Sample> {
    let bounds = pixels.bounds();
    let lo = |i: usize| centres.iter().map(|c| c[i]).fold(f64::INFINITY, f64::min) - reach;
    let hi = |i: usize| {
        centres
            .iter()
            .map(|c| c[i])
            .fold(f64::NEG_INFINITY, f64::max)
            + reach
    };
    let (x0, y0) = (lo(0).floor().max(bounds[0]), lo(1).floor().max(bounds[1]));
    let (x1, y1) = (hi(0).ceil().min(bounds[2]), hi(1).ceil().min(bounds[3]));
    if !(x0 <= x1 && y0 <= y1) {
        return Vec::new();
    }
    let inside = |x: usize, y: usize| {
        centres
            .iter()
            .any(|c| (x as f64 - c[0]).hypot(y as f64 - c[1]) <= reach)
    };
    let grid = |stride: usize| {
        (y0 as usize..=y1 as usize)
            .step_by(stride)
            .flat_map(move |y| {
                (x0 as usize..=x1 as usize)
                    .step_by(stride)
                    .map(move |x| (x, y))
            })
    };
    let mut stride = 1;
    while grid(stride).filter(|&(x, y)| inside(x, y)).count() > BUDGET {
        stride += 1;
    }
    let channels: Vec<usize> = (0..3).filter(|&c| one.values[c].is_some()).collect();
    grid(stride)
        .filter(|&(x, y)| inside(x, y))
        .flat_map(|(x, y)| channels.iter().map(move |&c| (x, y, c)))
        .filter(|&(x, y, c)| pixels.stored(x, y, c) < CLIPPED)
        .map(|(x, y, c)| Sample {
            x_px: x as f64,
            y_px: y as f64,
            channel: c,
            value: pixels.excess(x, y, c),
        })
        .collect()
}

/// Variance inflation of correlated residuals: [`pixel_correlation_factor`] of the channel with
/// the most samples.
fn correlation_factor(window: &[Sample], res: &[f64]) -> f64 {
    let busiest = (0..3)
        .max_by_key(|&c| window.iter().filter(|s| s.channel == c).count())
        .unwrap_or(0);
    let (pixels, res): (Vec<WindowPixel>, Vec<f64>) = window
        .iter()
        .zip(res)
        .filter(|(s, _)| s.channel == busiest)
        .map(|(s, r)| {
            let q = WindowPixel {
                x_px: s.x_px,
                y_px: s.y_px,
                value: s.value,
                backdrop: 0.0,
                weight: 1.0,
                others: [0.0; 3],
            };
            (q, *r)
        })
        .unzip();
    pixel_correlation_factor(&pixels, &res)
}

/// The images of a stretch at the flash offsets `offsets` (taken to the photo by `to_px`) plus
/// the `others` held in place, all the photo's image `one`, against the samples of `window`.
struct Model<'a> {
    window: &'a [Sample],
    offsets: Vec<i64>,
    others: &'a [[f64; 2]],
    one: &'a Template,
    to_px: ToPixel<'a>,
    /// The stretch begins at rest ([`Motion::placed`]).
    from_rest: bool,
}

/// Where a fit ended: parameters, residual sum of squares, residuals, normal matrix.
struct Fitted {
    p: [f64; NP],
    rss: f64,
    res: Vec<f64>,
    jtj: SMatrix<f64, NP, NP>,
}

impl Fitted {
    /// The centres at `offsets` and their 1-sigma per axis from the fit's covariance (the
    /// Gauss-Newton one scaled by the residual variance and the samples' correlation factor).
    fn centres(
        &self,
        offsets: &[i64],
        window: &[Sample],
        from_rest: bool,
    ) -> Vec<(i64, [f64; 2], f64)> {
        let dof = window.len().saturating_sub(NP + 3 * NL).max(1) as f64;
        let scale = self.rss / dof * correlation_factor(window, &self.res);
        let cov = self
            .jtj
            .try_inverse()
            .map(|c| c * scale)
            .unwrap_or_else(|| SMatrix::<f64, NP, NP>::from_element(f64::NAN));
        let motion = Motion::from_params(&self.p);
        offsets
            .iter()
            .map(|&m| {
                let mf = if from_rest {
                    (m as f64).max(motion.turn())
                } else {
                    m as f64
                };
                let var = |axis: usize| {
                    let mut g = SVector::<f64, NP>::zeros();
                    g[axis] = 1.0;
                    g[2 + axis] = mf;
                    g[4 + axis] = 0.5 * mf * mf;
                    (g.transpose() * cov * g)[(0, 0)]
                };
                let sigma = (0.5 * (var(0) + var(1))).max(0.0).sqrt();
                (m, motion.at(mf), sigma)
            })
            .collect()
    }
}

impl Model<'_> {
    /// Residuals of the best brightness and constant per channel at parameters `p` into `out`;
    /// their sum of squares.
    fn residuals(&self, p: &[f64; NP], out: &mut Vec<f64>) -> Option<f64> {
        self.residuals_at(&self.centres(p, None), out)
    }

    /// The images' centres in the photo at parameters `p` (less the one at offset `without`)
    /// and the others'.
    fn centres(&self, p: &[f64; NP], without: Option<i64>) -> Vec<[f64; 2]> {
        let motion = Motion::from_params(p);
        let mut centres: Vec<[f64; 2]> = self
            .offsets
            .iter()
            .filter(|&&m| Some(m) != without)
            .map(|&m| (self.to_px)(motion.placed(m as f64, self.from_rest)))
            .collect();
        centres.extend_from_slice(self.others);
        centres
    }

    /// The centre of the image at offset `m` fitted alone, in the photo: the others held where
    /// `p` puts them, Gauss-Newton with Marquardt's damping on its two coordinates.
    fn alone(&self, p: &[f64; NP], m: i64) -> Option<[f64; 2]> {
        let mut centres = self.centres(p, Some(m));
        let mut q = (self.to_px)(Motion::from_params(p).placed(m as f64, self.from_rest));
        let mut res = Vec::new();
        let mut rss_at = |q: [f64; 2], res: &mut Vec<f64>| {
            centres.push(q);
            let rss = self.residuals_at(&centres, res);
            centres.pop();
            rss
        };
        let mut rss = rss_at(q, &mut res)?;
        let mut lambda = 1e-3;
        for _ in 0..STEPS {
            let mut cols = [Vec::new(), Vec::new()];
            for (k, col) in cols.iter_mut().enumerate() {
                let mut d = q;
                d[k] += 1e-3;
                let mut r = Vec::new();
                rss_at(d, &mut r)?;
                *col = r
                    .iter()
                    .zip(&res)
                    .map(|(a, b)| (a - b) / 1e-3)
                    .collect::<Vec<f64>>();
            }
            let dot = |a: &[f64], b: &[f64]| a.iter().zip(b).map(|(x, y)| x * y).sum::<f64>();
            let (a, b, c) = (
                dot(&cols[0], &cols[0]),
                dot(&cols[0], &cols[1]),
                dot(&cols[1], &cols[1]),
            );
            let (g0, g1) = (dot(&cols[0], &res), dot(&cols[1], &res));
            let mut improved = false;
            while lambda < 1e9 {
                let (a2, c2) = (a * (1.0 + lambda), c * (1.0 + lambda));
                let det = a2 * c2 - b * b;
                if det.is_nan() || det == 0.0 {
                    return None;
                }
                let step = [-(c2 * g0 - b * g1) / det, -(a2 * g1 - b * g0) / det];
                let trial = [q[0] + step[0], q[1] + step[1]];
                let mut r = Vec::new();
                match rss_at(trial, &mut r) {
                    Some(f) if f <= rss => {
                        let done = step[0].hypot(step[1]) < 1e-3;
                        (q, rss, res) = (trial, f, r);
                        lambda = (lambda * 0.3).max(1e-9);
                        improved = !done;
                        break;
                    }
                    _ => lambda *= 10.0,
                }
            }
            if !improved {
                break;
            }
        }
        Some(q)
    }

    /// Residuals of the best brightness and constant per channel with images at `centres` (in
    /// the photo) into `out`; their sum of squares.
    fn residuals_at(&self, centres: &[[f64; 2]], out: &mut Vec<f64>) -> Option<f64> {
        let light: Vec<f64> = self
            .window
            .iter()
            .map(|q| self.one.light_of(q.channel, centres, q.x_px, q.y_px))
            .collect();
        let mut ata = [SMatrix::<f64, NL, NL>::zeros(); 3];
        let mut atb = [SVector::<f64, NL>::zeros(); 3];
        for (l, q) in light.iter().zip(self.window) {
            let v = SVector::<f64, NL>::new(*l, 1.0);
            ata[q.channel] += v * v.transpose();
            atb[q.channel] += v * q.value;
        }
        let mut coef = [SVector::<f64, NL>::zeros(); 3];
        for c in 0..3 {
            if ata[c][(1, 1)] > 0.0 {
                coef[c] = ata[c].cholesky()?.solve(&atb[c]);
            }
        }
        out.clear();
        out.extend(
            light
                .iter()
                .zip(self.window)
                .map(|(l, q)| q.value - coef[q.channel][0] * l - coef[q.channel][1]),
        );
        Some(out.iter().map(|r| r * r).sum())
    }

    /// The normal equations at `p` (residuals `base`), the Jacobian by forward differences.
    fn normal(
        &self,
        p: &[f64; NP],
        base: &[f64],
    ) -> Option<(SMatrix<f64, NP, NP>, SVector<f64, NP>)> {
        let cols: Vec<Vec<f64>> = (0..NP)
            .into_par_iter()
            .map(|k| {
                let h = 1e-3 * (1.0 + p[k].abs());
                let mut q = *p;
                q[k] += h;
                let mut r = Vec::with_capacity(base.len());
                self.residuals(&q, &mut r)?;
                Some(r.iter().zip(base).map(|(a, b)| (a - b) / h).collect())
            })
            .collect::<Option<_>>()?;
        let mut jtj = SMatrix::<f64, NP, NP>::zeros();
        let mut jtr = SVector::<f64, NP>::zeros();
        for a in 0..NP {
            jtr[a] = cols[a].iter().zip(base).map(|(j, r)| j * r).sum();
            for b in a..NP {
                let v: f64 = cols[a].iter().zip(&cols[b]).map(|(x, y)| x * y).sum();
                jtj[(a, b)] = v;
                jtj[(b, a)] = v;
            }
        }
        Some((jtj, jtr))
    }

    /// Levenberg-Marquardt from `p`.
    fn lm(&self, mut p: [f64; NP]) -> Option<Fitted> {
        let mut res = Vec::with_capacity(self.window.len());
        let mut rss = self.residuals(&p, &mut res)?;
        let (mut jtj, mut jtr) = self.normal(&p, &res)?;
        let mut lambda = 1e-3;
        let mut trial_res = Vec::with_capacity(res.len());
        let mut steps = 0;
        while steps < STEPS && lambda < 1e9 {
            let mut a = jtj;
            for i in 0..NP {
                a[(i, i)] += lambda * jtj[(i, i)].max(1e-12);
            }
            let Some(step) = a.lu().solve(&(-jtr)) else {
                break;
            };
            let mut trial = p;
            for k in 0..NP {
                trial[k] += step[k];
            }
            match self.residuals(&trial, &mut trial_res) {
                Some(f) if f <= rss && trial.iter().all(|v| v.is_finite()) => {
                    let done = rss - f <= 1e-7 * rss;
                    p = trial;
                    rss = f;
                    std::mem::swap(&mut res, &mut trial_res);
                    lambda = (lambda * 0.3).max(1e-9);
                    steps += 1;
                    (jtj, jtr) = self.normal(&p, &res)?;
                    if done {
                        break;
                    }
                }
                _ => lambda *= 10.0,
            }
        }
        Some(Fitted { p, rss, res, jtj })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_motion_through_points_on_a_parabola_is_that_parabola() {
        let truth = Motion {
            c0_px: [100.0, 50.0],
            v_px: [8.0, -3.0],
            a_px: [1.5, 0.25],
        };
        let points: Vec<(i64, [f64; 2])> = (0..5).map(|m| (m, truth.at(m as f64))).collect();
        let fitted = Motion::through(&points).expect("five points");
        for (a, b) in fitted.params().iter().zip(truth.params()) {
            assert!((a - b).abs() < 1e-9, "{a} vs {b}");
        }
        let v = fitted.velocity(-2.0);
        assert!(
            (v[0] - 5.0).abs() < 1e-9 && (v[1] + 3.5).abs() < 1e-9,
            "{v:?}"
        );
        assert!(Motion::through(&points[..2]).is_none());
    }

    #[test]
    fn a_ball_released_from_rest_sits_at_its_release_point_before_it() {
        // Exact kinematics: released at rest from (40, 20) at flash offset -6.5 with an
        // acceleration of (0.8, 0.3) per flash squared, c(m) = (40, 20) + a (m + 6.5)^2 / 2.
        let (m0, a) = (-6.5, [0.8, 0.3]);
        let rest = [40.0, 20.0];
        let motion = Motion {
            c0_px: [0, 1].map(|i| rest[i] + 0.5 * a[i] * m0 * m0),
            v_px: [0, 1].map(|i| -a[i] * m0),
            a_px: a,
        };
        assert!((motion.turn() - m0).abs() < 1e-12, "{}", motion.turn());
        for m in [-20.0, -7.0, -6.5] {
            let p = motion.placed(m, true);
            assert!(
                (p[0] - 40.0).abs() < 1e-9 && (p[1] - 20.0).abs() < 1e-9,
                "{m}: {p:?}"
            );
        }
        // After the release, and without `from_rest`, the motion itself.
        let after = motion.placed(-2.0, true);
        assert!(
            (after[0] - (40.0 + 0.4 * 4.5 * 4.5)).abs() < 1e-9,
            "{after:?}"
        );
        assert_eq!(motion.placed(-9.0, false), motion.at(-9.0));
        // No acceleration: no turn.
        let steady = Motion {
            a_px: [0.0, 0.0],
            ..motion
        };
        assert_eq!(steady.placed(-9.0, true), steady.at(-9.0));
    }
}
