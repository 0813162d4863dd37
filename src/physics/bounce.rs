//! Bounces: the arcs before and after each bounce extrapolated to the contact.
//!
//! Method: the contact centre height of a bounce is where its two fitted parabolas cross (the ball
//! is on both at contact); the floor line is the weighted mean contact height minus the radius
//! (unless given). The contact level is floor + radius; the pre-bounce arc reaches it descending
//! at t_in and the post-bounce arc leaves it ascending at t_out. The normal restitution is
//! e = -v_out_y(t_out) / v_in_y(t_in) (Newton's experimental law), the tangential ratio
//! vx_out / vx_in; 1-sigma by first-order propagation of both arcs' covariances and the floor
//! sigma. Cross-checks from the same arcs: apex heights above the contact level,
//! e ~ sqrt(h_after / h_before) (h = v^2 / 2g), and flight times between the two crossings of the
//! contact level by each parabola, e ~ T_after / T_before (T = 2 v / g); both hold exactly in
//! vacuum.

use super::fit::{block_diagonal, gradient, poly_slope, poly_value, propagate_sigma};
use super::flight::ArcFit;
use serde::Serialize;

/// One bounce on the floor.
#[derive(Debug, Clone, Serialize)]
pub struct Bounce {
    /// Contact time (mean of the two arcs' contact times), seconds (path time).
    pub t_s: f64,
    /// Centre x at contact, metres.
    pub x_m: f64,
    /// Normal coefficient of restitution -v_out_y / v_in_y.
    pub restitution: f64,
    /// Its 1-sigma.
    pub restitution_sigma: f64,
    /// Speed just before contact, m/s.
    pub impact_speed_mps: f64,
    /// Speed just after contact, m/s.
    pub rebound_speed_mps: f64,
    /// Normal (vertical) impact speed |v_in_y|, m/s.
    pub impact_normal_speed_mps: f64,
    /// Its 1-sigma, m/s.
    pub impact_normal_speed_sigma_mps: f64,
    /// Velocity (x, y) just before contact, m/s.
    pub impact_velocity_mps: [f64; 2],
    /// Velocity (x, y) just after contact, m/s.
    pub rebound_velocity_mps: [f64; 2],
    /// Horizontal velocity after / before (None when the ball barely moves sideways).
    pub tangential_ratio: Option<f64>,
    /// Its 1-sigma.
    pub tangential_ratio_sigma: Option<f64>,
    /// Apex of the arc before, above the contact level, metres (vertex of its parabola).
    pub apex_before_m: f64,
    /// Apex of the arc after, above the contact level, metres.
    pub apex_after_m: f64,
    /// Cross-check sqrt(apex_after / apex_before).
    pub restitution_from_apex: Option<f64>,
    /// Time between the two crossings of the contact level by the arc before, seconds.
    pub flight_time_before_s: f64,
    /// The same for the arc after, seconds.
    pub flight_time_after_s: f64,
    /// Cross-check flight_time_after / flight_time_before.
    pub restitution_from_flight_times: Option<f64>,
    /// `restitution_from_apex - restitution` in 1-sigmas of that difference (both from the same
    /// two arcs, so their correlation is propagated).
    pub apex_check_z: Option<f64>,
    /// `restitution_from_flight_times - restitution` in 1-sigmas of that difference.
    pub flight_time_check_z: Option<f64>,
    /// Time the arc after leaves the contact level minus the time the arc before reaches it,
    /// seconds: zero for an instant bounce, a flash interval or more when a flash was miscounted.
    pub contact_gap_s: f64,
    /// Its 1-sigma, seconds.
    pub contact_gap_sigma_s: f64,
    /// When drag is fitted: the bounce comes from the drag model (velocities where each arc's
    /// model trajectory reaches the contact level), and this is that model's fit over the two
    /// arcs. The apex and flight-time cross-checks, which hold in vacuum only, are then left
    /// out. Absent for a vacuum bounce.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub drag_model: Option<ModelFit>,
}

/// The chi-square of a model over the centres it was fitted to.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct ModelFit {
    /// Sum of squared weighted residuals.
    pub chi_square: f64,
    /// Degrees of freedom.
    pub dof: usize,
}

/// Roots of c0 + c1 t + c2 t^2 = level (discriminant clamped at zero), smaller first.
fn crossings(c: &[f64], level: f64) -> (f64, f64) {
    let (a, b, k) = (c[2], c[1], c[0] - level);
    if a == 0.0 {
        let t = -k / b;
        return (t, t);
    }
    let disc = (b * b - 4.0 * a * k).max(0.0).sqrt();
    let q = -0.5 * (b + b.signum() * disc);
    let (r1, r2) = if q == 0.0 {
        (-b / (2.0 * a), -b / (2.0 * a))
    } else {
        (q / a, k / q)
    };
    (r1.min(r2), r1.max(r2))
}

/// Parameter vector [pre x (2), pre y (3), post x (2), post y (3)] and its covariance.
fn parameters(pre: &ArcFit, post: &ArcFit) -> (Vec<f64>, nalgebra::DMatrix<f64>) {
    let mut p = Vec::with_capacity(10);
    for f in [&pre.x, &pre.y, &post.x, &post.y] {
        p.extend_from_slice(&f.coefficients);
    }
    let covariance = block_diagonal(&[
        &pre.x.covariance,
        &pre.y.covariance,
        &post.x.covariance,
        &post.y.covariance,
    ]);
    (p, covariance)
}

/// Where two arcs cross near the gap between them: the contact of a bounce.
pub(crate) struct Contact {
    /// Centre x at the crossing, metres (the arc before's).
    pub x_m: f64,
    /// Centre height at the crossing, metres.
    pub y_m: f64,
    /// Gradient of the height with respect to the arc before's y coefficients.
    pub d_pre_y: nalgebra::DVector<f64>,
    /// Gradient of the height with respect to the arc after's y coefficients.
    pub d_post_y: nalgebra::DVector<f64>,
    /// The arc after's y covariance.
    pub post_covariance: nalgebra::DMatrix<f64>,
}

/// Where the two arcs cross near the gap `t_gap` between them (None when they do not cross
/// there).
pub(crate) fn contact_height(pre: &ArcFit, post: &ArcFit, t_gap: (f64, f64)) -> Option<Contact> {
    let mid = 0.5 * (t_gap.0 + t_gap.1);
    // p = [pre y (3), post y (3)]
    let cross = move |p: &[f64]| {
        let d = [p[0] - p[3], p[1] - p[4], p[2] - p[5]];
        let (r1, r2) = crossings(&d, 0.0);
        let t = if (r1 - mid).abs() < (r2 - mid).abs() {
            r1
        } else {
            r2
        };
        (t, poly_value(&p[0..3], t))
    };
    let mut p = pre.y.coefficients.clone();
    p.extend_from_slice(&post.y.coefficients);
    let covariance = block_diagonal(&[&pre.y.covariance, &post.y.covariance]);
    let (t, y) = cross(&p);
    let window = (t_gap.1 - t_gap.0).abs() + 1e-9;
    if !(t.is_finite() && y.is_finite() && (t - mid).abs() <= window) {
        return None;
    }
    let g = gradient(|p| cross(p).1, &p, &covariance);
    Some(Contact {
        x_m: pre.x.value(t),
        y_m: y,
        d_pre_y: g.rows(0, 3).into_owned(),
        d_post_y: g.rows(3, 3).into_owned(),
        post_covariance: post.y.covariance.clone(),
    })
}

/// Measure the bounce between `pre` and `post` for a contact level `level_m` (floor + radius)
/// with 1-sigma `level_sigma_m`.
pub(crate) fn measure_bounce(
    pre: &ArcFit,
    post: &ArcFit,
    level_m: f64,
    level_sigma_m: f64,
) -> Bounce {
    let (mut p, arcs_covariance) = parameters(pre, post);
    p.push(level_m);
    let mut extra = nalgebra::DMatrix::zeros(1, 1);
    extra[(0, 0)] = level_sigma_m * level_sigma_m;
    let covariance = block_diagonal(&[&arcs_covariance, &extra]);
    let state = |p: &[f64]| {
        let t_in = crossings(&p[2..5], p[10]).1;
        let t_out = crossings(&p[7..10], p[10]).0;
        let v_in = [p[1], poly_slope(&p[2..5], t_in)];
        let v_out = [p[6], poly_slope(&p[7..10], t_out)];
        (t_in, t_out, v_in, v_out)
    };
    let (t_in, t_out, v_in, v_out) = state(&p);
    let e = |p: &[f64]| {
        let (_, _, vi, vo) = state(p);
        -vo[1] / vi[1]
    };
    let apex = |c: &[f64]| c[0] - c[1] * c[1] / (4.0 * c[2]) - level_m;
    let duration = |c: &[f64]| {
        let (a, b) = crossings(c, level_m);
        b - a
    };
    let (h_before, h_after) = (apex(&pre.y.coefficients), apex(&post.y.coefficients));
    let (t_before, t_after) = (
        duration(&pre.y.coefficients),
        duration(&post.y.coefficients),
    );
    let ratio = |p: &[f64]| p[6] / p[1];
    let level = |p: &[f64]| p[10];
    let apex_e = |p: &[f64]| {
        let h = |c: &[f64]| c[0] - c[1] * c[1] / (4.0 * c[2]) - level(p);
        (h(&p[7..10]) / h(&p[2..5])).sqrt()
    };
    let times_e = |p: &[f64]| {
        let d = |c: &[f64]| {
            let (a, b) = crossings(c, level(p));
            b - a
        };
        d(&p[7..10]) / d(&p[2..5])
    };
    let z = |check: &dyn Fn(&[f64]) -> f64| {
        let diff = |p: &[f64]| check(p) - e(p);
        let sigma = propagate_sigma(diff, &p, &covariance);
        let z = diff(&p) / sigma;
        z.is_finite().then_some(z)
    };
    let gap = |p: &[f64]| {
        let (t_in, t_out, _, _) = state(p);
        t_out - t_in
    };
    let sideways = v_in[0].abs() > 1e-3 * v_in[1].abs().max(1e-9);
    Bounce {
        t_s: 0.5 * (t_in + t_out),
        x_m: poly_value(&p[0..2], t_in),
        restitution: e(&p),
        restitution_sigma: propagate_sigma(e, &p, &covariance),
        impact_speed_mps: v_in[0].hypot(v_in[1]),
        rebound_speed_mps: v_out[0].hypot(v_out[1]),
        impact_normal_speed_mps: v_in[1].abs(),
        impact_normal_speed_sigma_mps: propagate_sigma(|p| state(p).2[1].abs(), &p, &covariance),
        impact_velocity_mps: v_in,
        rebound_velocity_mps: v_out,
        tangential_ratio: sideways.then(|| ratio(&p)),
        tangential_ratio_sigma: sideways.then(|| propagate_sigma(ratio, &p, &covariance)),
        apex_before_m: h_before,
        apex_after_m: h_after,
        restitution_from_apex: (h_before > 0.0 && h_after > 0.0)
            .then(|| (h_after / h_before).sqrt()),
        flight_time_before_s: t_before,
        flight_time_after_s: t_after,
        restitution_from_flight_times: (t_before > 0.0).then(|| t_after / t_before),
        apex_check_z: (h_before > 0.0 && h_after > 0.0)
            .then(|| z(&apex_e))
            .flatten(),
        flight_time_check_z: (t_before > 0.0).then(|| z(&times_e)).flatten(),
        contact_gap_s: t_out - t_in,
        contact_gap_sigma_s: propagate_sigma(gap, &p, &covariance),
        drag_model: None,
    }
}

/// The restitution the same two arcs give when the arc after is moved by `shift_s` (one flash
/// more or fewer counted across the bounce), when that count explains the images as well as
/// the one on the path: the arcs then still cross between the last image before and the first
/// image after, the arc before falling and the arc after rising there, below every image of
/// both (`pre_points`, `post_points`), and at x values that agree within 3 sigma. A ball that
/// bounces straight up has nothing but the floor to pin its contact time, so both counts can
/// hold; None when the moved count contradicts the images.
pub(crate) fn shifted_restitution(
    pre: &ArcFit,
    post: &ArcFit,
    shift_s: f64,
    pre_points: &[super::TimedPoint],
    post_points: &[super::TimedPoint],
) -> Option<f64> {
    let c = &post.y.coefficients;
    let moved = [
        c[0] - c[1] * shift_s + c[2] * shift_s * shift_s,
        c[1] - 2.0 * c[2] * shift_s,
        c[2],
    ];
    let p = &pre.y.coefficients;
    let d = [p[0] - moved[0], p[1] - moved[1], p[2] - moved[2]];
    let (t_last, t_first) = (pre_points.last()?.t_s, post_points.first()?.t_s + shift_s);
    let (r1, r2) = crossings(&d, 0.0);
    let t = [r1, r2]
        .into_iter()
        .find(|t| t.is_finite() && *t > t_last && *t < t_first)?;
    let (v_in, v_out) = (poly_slope(p, t), poly_slope(&moved, t));
    let y = poly_value(p, t);
    let lowest = pre_points
        .iter()
        .chain(post_points)
        .map(|q| q.y_m - 3.0 * q.sigma_m)
        .fold(f64::INFINITY, f64::min);
    let x_pre = pre.x.value(t);
    let x_post = post.x.value(t - shift_s);
    let var = |f: &crate::physics::fit::PolyFit, t: f64| {
        let j = nalgebra::DVector::from_vec(vec![1.0, t]);
        (j.transpose() * &f.covariance * &j)[(0, 0)]
    };
    let x_sigma = (var(&pre.x, t) + var(&post.x, t - shift_s)).sqrt();
    let consistent =
        v_in < 0.0 && v_out > 0.0 && y <= lowest && (x_pre - x_post).abs() <= 3.0 * x_sigma;
    consistent.then(|| -v_out / v_in)
}
