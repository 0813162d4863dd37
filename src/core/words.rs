//! Words for the text a person reads: a count with its noun in the right number.
//!
//! Goes in: a count and the noun's two forms, or a named value. Comes out: "1 flash",
//! "2 flashes", "0 flashes"; a value's name as the JSON documents write it ("not_measured",
//! "faint"), never a Rust name.

/// `n` followed by `one` when n is 1, else by `many`.
pub fn count(n: usize, one: &str, many: &str) -> String {
    format!("{n} {}", if n == 1 { one } else { many })
}

/// The name a value has in the JSON documents (its serde name: `Outcome::NotMeasured` is
/// "not_measured"); the Rust form when it has none (not a plain name).
pub fn name<T: serde::Serialize + std::fmt::Debug>(v: &T) -> String {
    match serde_json::to_value(v) {
        Ok(serde_json::Value::String(s)) => s,
        _ => format!("{v:?}"),
    }
}

#[cfg(test)]
mod tests {
    use super::{count, name};

    #[test]
    fn a_named_value_reads_as_in_the_json() {
        use crate::physics::bands::Outcome;
        assert_eq!(name(&Outcome::NotMeasured), "not_measured");
        assert_eq!(name(&crate::core::light::Polarity::Bright), "bright");
    }

    #[test]
    fn one_takes_the_singular_and_every_other_count_the_plural() {
        assert_eq!(count(1, "flash", "flashes"), "1 flash");
        assert_eq!(count(0, "flash", "flashes"), "0 flashes");
        assert_eq!(count(2, "bounce", "bounces"), "2 bounces");
    }
}
