//! Robust statistics shared by every stage: medians and the median absolute deviation.
//!
//! Goes in: samples. Comes out: medians and robust sigmas. Method: the median absolute deviation
//! scaled to a Gaussian's standard deviation (Hampel 1974; the consistency constant 1.4826 =
//! 1 / Phi^-1(3/4)).

/// Median absolute deviation to the standard deviation of a Gaussian: 1 / Phi^-1(3/4).
pub const MAD_TO_SIGMA: f64 = 1.4826;

/// The median (the upper of the middle two), 0 for no values.
pub fn upper_median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    v.get(v.len() / 2).copied().unwrap_or(0.0)
}

/// The median (the upper of the middle two) of the finite values, None when there are none.
pub fn finite_median(mut values: Vec<f64>) -> Option<f64> {
    values.retain(|v| v.is_finite());
    values.sort_by(f64::total_cmp);
    values.get(values.len() / 2).copied()
}

/// The median of `v` (the upper of the middle two), reordering it; NaN for no values.
pub fn median_f32(v: &mut [f32]) -> f32 {
    if v.is_empty() {
        return f32::NAN;
    }
    let mid = v.len() / 2;
    let (_, m, _) = v.select_nth_unstable_by(mid, f32::total_cmp);
    *m
}

/// Robust sigma: 1.4826 x median absolute deviation about the median. Quantised data (two JPEGs
/// of one scene, where most differences are exactly 0) can have a zero median deviation while
/// the noise is not zero: then the mean absolute deviation of the central 98 % x sqrt(pi / 2)
/// (its Gaussian scale factor) is used instead.
pub fn robust_sigma(values: &mut [f32]) -> f32 {
    let m = median_f32(values);
    for v in values.iter_mut() {
        *v = (*v - m).abs();
    }
    let mad = median_f32(values);
    if mad > 0.0 || values.is_empty() {
        return MAD_TO_SIGMA as f32 * mad;
    }
    let k = (values.len() - 1) * 98 / 100;
    values.select_nth_unstable_by(k, f32::total_cmp);
    let central = &values[..=k];
    let mean = central.iter().map(|&v| v as f64).sum::<f64>() / central.len() as f64;
    (std::f64::consts::FRAC_PI_2.sqrt() * mean) as f32
}
