//! Words for the text a person reads: a count with its noun in the right number.
//!
//! Goes in: a count and the noun's two forms. Comes out: "1 flash", "2 flashes", "0 flashes".

/// `n` followed by `one` when n is 1, else by `many`.
pub fn count(n: usize, one: &str, many: &str) -> String {
    format!("{n} {}", if n == 1 { one } else { many })
}

#[cfg(test)]
mod tests {
    use super::count;

    #[test]
    fn one_takes_the_singular_and_every_other_count_the_plural() {
        assert_eq!(count(1, "flash", "flashes"), "1 flash");
        assert_eq!(count(0, "flash", "flashes"), "0 flashes");
        assert_eq!(count(2, "bounce", "bounces"), "2 bounces");
    }
}
