//! Numbers for the text a person reads, with the digits their uncertainty warrants.
//!
//! Goes in: a value, its 1-sigma and a unit. Comes out: "9.807 ± 0.012 m/s^2" (two significant
//! digits of the sigma, the value to the same decimal place), "1.23457e7 ± 2.3e3 px" where the
//! magnitude needs scientific notation, "9.80665 m/s^2" for an exact value (sigma 0), "not
//! measured" for a value that is not a number. A value that rounds to zero is written without
//! a sign; no result ends in a space.

/// Magnitudes at or above this are written in scientific notation.
const SCIENTIFIC_ABOVE: f64 = 1e6;
/// Non-zero magnitudes below this are written in scientific notation.
const SCIENTIFIC_BELOW: f64 = 1e-4;
/// Significant digits of a value written without an uncertainty.
const EXACT_DIGITS: i32 = 6;

/// `value ± sigma unit` with two significant digits of `sigma` and `value` rounded to the same
/// decimal place; `value unit` when `sigma` is 0 (exact, up to 6 significant digits); `value
/// unit (uncertainty unknown)` when `sigma` is not a finite non-negative number; `not
/// measured` when `value` is not finite. An empty `unit` leaves no space behind.
///
/// # Examples
/// ```
/// use beadline::core::numbers::measured;
/// assert_eq!(measured(9.80665, 0.0123, "m/s^2"), "9.807 ± 0.012 m/s^2");
/// assert_eq!(measured(-0.0001, 0.012, "m"), "0.000 ± 0.012 m");
/// assert_eq!(measured(f64::NAN, f64::NAN, "m"), "not measured");
/// ```
pub fn measured(value: f64, sigma: f64, unit: &str) -> String {
    let unit = if unit.is_empty() {
        String::new()
    } else {
        format!(" {unit}")
    };
    if !value.is_finite() {
        return "not measured".to_string();
    }
    if !(sigma.is_finite() && sigma >= 0.0) {
        return format!("{}{unit} (uncertainty unknown)", plain(value));
    }
    if sigma == 0.0 {
        return format!("{}{unit}", plain(value));
    }
    format!("{}{unit}", with_sigma(value, sigma))
}

/// The decimal place of the second significant digit of `sigma` (finite, > 0) once rounded:
/// 10^place.
fn sigma_place(sigma: f64) -> i32 {
    let mut place = sigma.log10().floor() as i32 - 1;
    if sigma / 10f64.powi(place) < 9.5 {
        place -= 1; // log10 rounded up at an exact power of ten
    }
    if (sigma / 10f64.powi(place)).round() >= 100.0 {
        place += 1; // 0.0996 is 0.10, not 0.100
    }
    place
}

/// A table's cells for a value and its sigma, in fixed notation: the value to the decimal place
/// of the sigma's second significant digit, the sigma to two significant digits. When the sigma
/// is not a finite number above 0, both with `decimals` decimals. A value that rounds to zero
/// has no sign; a value that is not finite is "-".
///
/// # Examples
/// ```
/// use beadline::core::numbers::cells;
/// assert_eq!(cells(812.34567, 0.0123, 3), ("812.346".to_string(), "0.012".to_string()));
/// ```
pub fn cells(value: f64, sigma: f64, decimals: usize) -> (String, String) {
    let decimals = if sigma.is_finite() && sigma > 0.0 {
        (-sigma_place(sigma)).max(0) as usize
    } else {
        decimals
    };
    let cell = |v: f64| {
        if v.is_finite() {
            fixed(v, decimals)
        } else {
            "-".to_string()
        }
    };
    (cell(value), cell(sigma))
}

/// `value ± sigma` (both finite, `sigma` > 0), as [`measured`] writes it without a unit.
fn with_sigma(value: f64, sigma: f64) -> String {
    let place = sigma_place(sigma);
    let unit_of_place = 10f64.powi(place);
    let rounded = (value / unit_of_place).round() * unit_of_place;
    let magnitude = rounded.abs().max(sigma);
    if !(SCIENTIFIC_BELOW..SCIENTIFIC_ABOVE).contains(&magnitude) {
        let value_text = if rounded == 0.0 {
            "0".to_string()
        } else {
            let exponent = rounded.abs().log10().floor() as i32;
            let decimals = (exponent - place).max(0) as usize;
            format!("{rounded:.decimals$e}")
        };
        return format!("{value_text} ± {sigma:.1e}");
    }
    let decimals = (-place).max(0) as usize;
    let value_text = unsigned_zero(format!("{rounded:.decimals$}"));
    format!("{value_text} ± {sigma:.decimals$}")
}

/// `value` with up to 6 significant digits, trailing zeros dropped, scientific notation for a
/// very large or very small magnitude; "0" for zero of either sign; "not measured" when not
/// finite.
///
/// # Examples
/// ```
/// use beadline::core::numbers::plain;
/// assert_eq!(plain(9.80665), "9.80665");
/// assert_eq!(plain(290.0), "290");
/// assert_eq!(plain(-0.0), "0");
/// ```
pub fn plain(value: f64) -> String {
    if !value.is_finite() {
        return "not measured".to_string();
    }
    if value == 0.0 {
        return "0".to_string();
    }
    let magnitude = value.abs();
    if !(SCIENTIFIC_BELOW..SCIENTIFIC_ABOVE).contains(&magnitude) {
        let text = format!("{value:.p$e}", p = (EXACT_DIGITS - 1) as usize);
        let (mantissa, exponent) = text.split_once('e').unwrap_or((&text, "0"));
        return format!("{}e{exponent}", trim_zeros(mantissa));
    }
    let decimals = (EXACT_DIGITS - 1 - magnitude.log10().floor() as i32).max(0) as usize;
    unsigned_zero(trim_zeros(&format!("{value:.decimals$}")))
}

/// `value` with `decimals` decimals, a rounding to zero written without its sign ("0.0000",
/// never "-0.0000"); "not measured" when not finite. For values whose uncertainty is not at
/// hand (times, positions of a table).
pub fn fixed(value: f64, decimals: usize) -> String {
    if !value.is_finite() {
        return "not measured".to_string();
    }
    unsigned_zero(format!("{value:.decimals$}"))
}

/// A decimal text without the trailing zeros of its fraction (and without a bare trailing dot).
fn trim_zeros(text: &str) -> String {
    if text.contains('.') {
        text.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        text.to_string()
    }
}

/// `text` without its minus sign when every digit is zero ("-0.000" is "0.000").
fn unsigned_zero(text: String) -> String {
    match text.strip_prefix('-') {
        Some(rest) if rest.chars().all(|c| c == '0' || c == '.') => rest.to_string(),
        _ => text,
    }
}

#[cfg(test)]
mod tests {
    use super::{cells, fixed, measured, plain};

    #[test]
    fn two_digits_of_the_sigma_and_the_value_to_the_same_place() {
        assert_eq!(measured(9.80665, 0.0123, "m/s^2"), "9.807 ± 0.012 m/s^2");
        assert_eq!(measured(0.812, 0.004, ""), "0.8120 ± 0.0040");
        assert_eq!(measured(12.5, 1.0, "deg"), "12.5 ± 1.0 deg");
        assert_eq!(measured(12345.0, 230.0, "px"), "12350 ± 230 px");
        // The sigma rounds up into a third digit: one place fewer.
        assert_eq!(measured(1.23456, 0.0996, ""), "1.23 ± 0.10");
        // An exact power of ten.
        assert_eq!(measured(2.0, 0.001, ""), "2.0000 ± 0.0010");
    }

    #[test]
    fn very_large_and_very_small_magnitudes_are_scientific() {
        assert_eq!(measured(12345678.0, 2300.0, "px"), "1.23457e7 ± 2.3e3 px");
        assert_eq!(measured(1.234e-6, 5.6e-8, "s"), "1.234e-6 ± 5.6e-8 s");
        assert_eq!(measured(1e-9, 5e-6, ""), "0 ± 5.0e-6");
        assert_eq!(plain(2.5e-5), "2.5e-5");
        assert_eq!(plain(3.0e9), "3e9");
    }

    #[test]
    fn an_exact_value_is_written_alone() {
        assert_eq!(measured(9.80665, 0.0, "m/s^2"), "9.80665 m/s^2");
        assert_eq!(measured(290.0, 0.0, "px/m"), "290 px/m");
        assert_eq!(plain(1.0 / 3.0), "0.333333");
        assert_eq!(plain(1234.5678), "1234.57");
    }

    #[test]
    fn zero_has_no_sign() {
        assert_eq!(measured(-0.0, 0.0, "m"), "0 m");
        assert_eq!(measured(-0.00001, 0.012, "m"), "0.000 ± 0.012 m");
        assert_eq!(plain(-0.0), "0");
        assert_eq!(fixed(-0.00001, 4), "0.0000");
        assert_eq!(fixed(-0.5, 1), "-0.5");
        assert_eq!(measured(-0.5, 0.012, ""), "-0.500 ± 0.012");
    }

    #[test]
    fn what_is_not_a_number_is_said_in_words() {
        assert_eq!(measured(f64::NAN, f64::NAN, "m"), "not measured");
        assert_eq!(measured(f64::INFINITY, 0.1, ""), "not measured");
        assert_eq!(measured(0.75, f64::NAN, ""), "0.75 (uncertainty unknown)");
        assert_eq!(measured(0.75, -1.0, "m"), "0.75 m (uncertainty unknown)");
        assert_eq!(fixed(f64::NAN, 3), "not measured");
        assert_eq!(plain(f64::NAN), "not measured");
    }

    #[test]
    fn table_cells_take_the_place_of_the_sigma() {
        let pair = |a: &str, b: &str| (a.to_string(), b.to_string());
        assert_eq!(cells(812.34567, 0.0123, 3), pair("812.346", "0.012"));
        assert_eq!(cells(812.34567, 0.25, 3), pair("812.35", "0.25"));
        assert_eq!(cells(-0.0001, 0.05, 3), pair("0.000", "0.050"));
        assert_eq!(cells(812.34567, 0.0, 3), pair("812.346", "0.000"));
        assert_eq!(cells(f64::NAN, f64::NAN, 3), pair("-", "-"));
    }

    #[test]
    fn nothing_ends_in_a_space() {
        for s in [measured(1.0, 0.1, ""), measured(1.0, 0.0, ""), plain(1.0)] {
            assert_eq!(s, s.trim_end(), "{s:?}");
        }
    }
}
