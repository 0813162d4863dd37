//! The self-checks of a measurement made with the drag model (`--fit-drag`): the flight arcs
//! agree when one gravity and one drag coefficient fit them all, and a bounce from the model is
//! judged on the model's fit of its two arcs (the apex and flight-time cross-checks of
//! [`super::checks`] hold in vacuum only).
//!
//! Goes in: the drag fit's summary, or one bounce with the model's chi-square over its arcs.
//! Comes out: a [`Check`] each, judged as every fit check is (the 99.9 % point of chi-square,
//! Wilson & Hilferty 1931).

use super::checks::{Check, advice, check, chi_square_outcome, pass_limit};

/// With drag fitted, the flight arcs agree when one gravity and one drag coefficient fit them
/// all: the joint drag fit's chi-square.
pub(super) fn drag_agreement(d: &super::drag::DragFit) -> Check {
    let outcome = chi_square_outcome(d.reduced_chi_square * d.dof as f64, d.dof);
    check(
        "arc_agreement",
        outcome,
        d.reduced_chi_square,
        format!(
            "reduced chi-square <= {:.2} ({} arcs, one gravity and one drag coefficient)",
            pass_limit(d.dof),
            d.arcs
        ),
        format!(
            "the drag model fits the {} with residuals {:.1} x the centre sigmas (gravity {:.4} \
             m/s^2, drag {:.4} per m){}",
            crate::core::words::count(d.arcs, "flight arc", "flight arcs"),
            d.reduced_chi_square.max(0.0).sqrt(),
            d.gravity_mps2,
            d.drag_per_m,
            advice(
                outcome,
                "the arcs are not one ball in one air (a miscounted flash, a wrong image on the \
                 path, spin, or a scale that changes across the photo: give --plane)"
            )
        ),
    )
}

/// A bounce measured with the drag model: its apex and flight-time cross-checks hold in vacuum
/// only, so the bounce is judged on the model's fit of its two arcs (one gravity and one drag
/// coefficient for both: what the vacuum cross-checks test in vacuum).
pub(super) fn model_agreement(
    k: usize,
    b: &super::bounce::Bounce,
    fit: super::bounce::ModelFit,
) -> Check {
    let outcome = chi_square_outcome(fit.chi_square, fit.dof);
    let reduced = fit.chi_square / fit.dof.max(1) as f64;
    check(
        "restitution_agreement",
        outcome,
        reduced,
        format!(
            "the drag model fits both arcs: reduced chi-square <= {:.2} ({} degrees of freedom)",
            pass_limit(fit.dof),
            fit.dof
        ),
        format!(
            "bounce {}: e = {:.4} +- {:.4} from the drag model's velocities at the contact; the \
             apex and flight-time cross-checks hold in vacuum only and are not made: the model \
             fits the two arcs with residuals {:.1} x the centre sigmas{}",
            k + 1,
            b.restitution,
            b.restitution_sigma,
            reduced.max(0.0).sqrt(),
            advice(
                outcome,
                "the arcs around this bounce do not tell one story (spin, a wrong image or flash \
                 count in an arc)"
            )
        ),
    )
}
