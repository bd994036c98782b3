//! Small text helpers shared by messages, tables and reports.

/// A whole number with a comma between thousands: `1234567` → `1,234,567`.
/// Takes any unsigned integer type.
pub fn thousands(n: impl Unsigned) -> String {
    group_digits(&n.to_string())
}

/// A run of digits with a comma every three from the right: `1234567` as
/// `1,234,567`.
pub fn group_digits(digits: &str) -> String {
    let mut out = String::with_capacity(digits.len() + digits.len() / 3);
    for (i, c) in digits.chars().enumerate() {
        if i > 0 && (digits.len() - i).is_multiple_of(3) {
            out.push(',');
        }
        out.push(c);
    }
    out
}

/// The unsigned integer types [`thousands`] takes.
pub trait Unsigned: std::fmt::Display {}
impl Unsigned for usize {}
impl Unsigned for u64 {}
impl Unsigned for u128 {}

/// A count with its noun, singular for one: `count(1, "value")` → `1 value`,
/// `count(1200, "value")` → `1,200 values`.
pub fn count(n: usize, noun: &str) -> String {
    if n == 1 {
        format!("1 {noun}")
    } else {
        format!("{} {noun}s", thousands(n))
    }
}

/// A number in about four significant digits, for tables.
pub fn short(v: f64) -> String {
    if !v.is_finite() {
        return if v.is_nan() { "-".into() } else { "inf".into() };
    }
    let a = v.abs();
    if a >= 1000.0 {
        format!("{v:.0}")
    } else if a >= 100.0 {
        format!("{v:.1}")
    } else if a >= 1.0 {
        format!("{v:.2}")
    } else {
        format!("{v:.3}")
    }
}

#[cfg(test)]
mod tests {
    use super::{count, thousands};

    #[test]
    fn counts_take_the_singular_for_one() {
        assert_eq!(count(1, "blank value"), "1 blank value");
        assert_eq!(count(0, "record"), "0 records");
        assert_eq!(count(12_000, "record"), "12,000 records");
    }

    #[test]
    fn thousands_are_separated_by_commas() {
        assert_eq!(thousands(0usize), "0");
        assert_eq!(thousands(999usize), "999");
        assert_eq!(thousands(1000usize), "1,000");
        assert_eq!(thousands(10_000_000u64), "10,000,000");
        assert_eq!(thousands(123_456usize), "123,456");
        assert_eq!(
            thousands(9_000_000_000_000_000_000_000u128),
            "9,000,000,000,000,000,000,000"
        );
    }
}
