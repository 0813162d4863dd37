//! The floor line under the bounces and the contacts it is found from.
//!
//! Goes in: the timed path, its consecutive fitted flight arcs (a bounce between each pair), the
//! drag model when drag is fitted, the ball radius and the 1-sigma of the camera roll the frame
//! was turned by. Comes out: the [`FloorLine`] (height, 1-sigma, how many contacts, their
//! scatter).
//!
//! Method: each contact's centre height is where the arcs before and after the bounce meet
//! (their parabolas, or with drag fitted their model trajectories); the floor is the generalised
//! least-squares mean of the heights (Aitken 1935) less the radius, its sigma widened by the
//! Birge ratio of their scatter when above 1.

use super::drag::DragModel;
use super::flight::ArcFit;
use super::{FloorLine, TimedPoint, bounce};
use crate::core::words::count;
use nalgebra::{DMatrix, DVector};

/// What the contacts of the bounces are found from: the consecutive fitted flight arcs, the
/// drag model when drag is fitted, and the 1-sigma of the roll the frame was turned by.
pub(crate) struct Contacts<'a> {
    pub pairs: &'a [(usize, &'a ArcFit, &'a ArcFit)],
    pub model: Option<&'a DragModel>,
    pub roll_sigma_rad: f64,
}

impl Contacts<'_> {
    /// The drag model's arc indexes of the bounce between `a` and `b` (arc k and k + 1 of the
    /// model), when drag is fitted over both.
    pub fn in_model(&self, a: &ArcFit, b: &ArcFit) -> Option<(&DragModel, usize)> {
        let d = self.model?;
        let k = d.arc_of(&a.range)?;
        (d.arc_of(&b.range)? == k + 1).then_some((d, k))
    }
}

/// The times of the last image before and the first image after the bounce between `a` and `b`.
fn gap_times(pts: &[TimedPoint], a: &ArcFit, b: &ArcFit) -> (f64, f64) {
    (pts[a.range.end - 1].t_s, pts[b.range.start].t_s)
}

/// The floor line: the given height, or the weighted mean contact height of the bounces less
/// the radius, its sigma inflated by the scatter of the contacts (reduced chi-square, at least
/// 1). With drag fitted the contacts are where the model's trajectories meet (the bounces
/// between arcs in the model); otherwise where the arcs' parabolas cross. NaN without a usable
/// contact.
pub(crate) fn floor_line(
    pts: &[TimedPoint],
    contacts: &Contacts,
    radius_m: f64,
    given_y_m: Option<f64>,
) -> FloorLine {
    if let Some(y) = given_y_m {
        return FloorLine {
            y_m: y,
            sigma_m: 0.0,
            source: "given".into(),
            contacts: 0,
            contacts_reduced_chi_square: None,
        };
    }
    let found = model_contacts(pts, contacts).or_else(|| {
        let crossings: Vec<(usize, &ArcFit, bounce::Contact)> = contacts
            .pairs
            .iter()
            .filter_map(|(k, a, b)| {
                bounce::contact_height(a, b, gap_times(pts, a, b)).map(|c| (*k, *a, c))
            })
            .collect();
        let (heights, covariance) = contact_covariance(&crossings);
        weighted_contacts(&heights, covariance, contacts.roll_sigma_rad)
            .map(|w| (w, crossings.len(), ""))
    });
    match found {
        Some(((mean, variance, reduced), n, how)) => FloorLine {
            y_m: mean - radius_m,
            sigma_m: (variance * reduced.unwrap_or(1.0).max(1.0)).sqrt(),
            source: format!("contact heights of {}{how}", count(n, "bounce", "bounces")),
            contacts: n,
            contacts_reduced_chi_square: reduced,
        },
        None => FloorLine {
            y_m: f64::NAN,
            sigma_m: f64::NAN,
            source: "no bounce: not estimated".into(),
            contacts: 0,
            contacts_reduced_chi_square: None,
        },
    }
}

/// A weighted floor height (see [`weighted_contacts`]), the contacts it came from and how.
type FloorEstimate = ((f64, f64, Option<f64>), usize, &'static str);

/// The floor from the drag model's contacts of the bounces between arcs in the model (None
/// without drag, or when no pair of trajectories meets).
fn model_contacts(pts: &[TimedPoint], contacts: &Contacts) -> Option<FloorEstimate> {
    let mut ks = Vec::new();
    let mut gaps = Vec::new();
    let mut model = None;
    for (_, a, b) in contacts.pairs {
        if let Some((d, k)) = contacts.in_model(a, b) {
            ks.push(k);
            gaps.push(gap_times(pts, a, b));
            model = Some(d);
        }
    }
    let (at, covariance) = model?.contacts(&ks, &gaps)?;
    let heights: Vec<[f64; 2]> = at.to_vec();
    weighted_contacts(&heights, covariance, contacts.roll_sigma_rad)
        .map(|w| (w, ks.len(), " (drag model)"))
}

/// The contacts' (x, height) and the covariance of the heights where the arcs' parabolas cross.
/// Consecutive bounces share the arc between them, so their heights are correlated: the
/// covariance of every pair that shares an arc is propagated through that arc's y covariance
/// (the arc after bounce k is the one before bounce k + 1 when their arc indexes follow).
fn contact_covariance(
    contacts: &[(usize, &ArcFit, bounce::Contact)],
) -> (Vec<[f64; 2]>, DMatrix<f64>) {
    let n = contacts.len();
    let mut cov = DMatrix::<f64>::zeros(n, n);
    let quadratic =
        |a: &DVector<f64>, m: &DMatrix<f64>, b: &DVector<f64>| (a.transpose() * m * b)[(0, 0)];
    for (i, (k, pre, c)) in contacts.iter().enumerate() {
        cov[(i, i)] = quadratic(&c.d_pre_y, &pre.y.covariance, &c.d_pre_y)
            + quadratic(&c.d_post_y, &c.post_covariance, &c.d_post_y);
        if let Some((k_next, shared, next)) = contacts.get(i + 1)
            && *k_next == k + 1
        {
            let v = quadratic(&c.d_post_y, &shared.y.covariance, &next.d_pre_y);
            cov[(i, i + 1)] = v;
            cov[(i + 1, i)] = v;
        }
    }
    let heights = contacts.iter().map(|c| [c.2.x_m, c.2.y_m]).collect();
    (heights, cov)
}

/// The generalised least-squares mean of the contact heights (x, height) with covariance `cov`,
/// its variance and the reduced chi-square of the heights about it (None under 2 contacts). The
/// frame was rotated by a roll known to `roll_sigma_rad`: a rotation error d tilts the floor line
/// by d, moving the height of a contact at x by d (x - the contacts' mean x).
fn weighted_contacts(
    contacts: &[[f64; 2]],
    mut cov: DMatrix<f64>,
    roll_sigma_rad: f64,
) -> Option<(f64, f64, Option<f64>)> {
    let n = contacts.len();
    if n == 0 {
        return None;
    }
    // Centred on the contacts: the floor is known best where they are, and the estimate does
    // not depend on where the frame's origin lies.
    let mean_x = contacts.iter().map(|c| c[0]).sum::<f64>() / n as f64;
    let x = DVector::from_iterator(n, contacts.iter().map(|c| c[0] - mean_x));
    cov += &x * x.transpose() * roll_sigma_rad.powi(2);
    let inv = cov.try_inverse()?;
    let ones = DVector::from_element(n, 1.0);
    let h = DVector::from_iterator(n, contacts.iter().map(|c| c[1]));
    let info = (ones.transpose() * &inv * &ones)[(0, 0)];
    if !(info.is_finite() && info > 0.0) {
        return None;
    }
    let mean = (ones.transpose() * &inv * &h)[(0, 0)] / info;
    let r = h - ones * mean;
    let chi2 = (r.transpose() * &inv * &r)[(0, 0)];
    Some((mean, 1.0 / info, (n > 1).then(|| chi2 / (n - 1) as f64)))
}
