//! Small text helpers shared by messages, tables and reports.

use crate::plan::DecimalMark;

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

/// [`short`] with a comma between thousands (`35,324`), for what people
/// read in the report and its charts; the terminal keeps [`short`] for its
/// fixed-width columns.
pub fn short_grouped(v: f64) -> String {
    let s = short(v);
    if !v.is_finite() || v.abs() < 1000.0 {
        return s;
    }
    match s.strip_prefix('-') {
        Some(digits) => format!("-{}", group_digits(digits)),
        None => group_digits(&s),
    }
}

/// Weighted members (a sum of record weights): whole sums as counts
/// (`1,204`), others to three significant figures or more (`99.5`).
pub fn members(w: f64) -> String {
    if w.is_finite() && w.fract() == 0.0 && w.abs() < 1e15 {
        group_digits(&format!("{w:.0}"))
    } else {
        short_grouped(w)
    }
}

/// Names joined for a sentence: `a`, `a and b`, `a, b and c`.
pub fn and_list(names: &[String]) -> String {
    match names {
        [] => String::new(),
        [one] => one.clone(),
        [rest @ .., last] => format!("{} and {last}", rest.join(", ")),
    }
}

/// A category value as assort and its SQL read it: spaces (U+0020) at both
/// ends removed, nothing else. SQL's `TRIM` removes spaces only, so a tab
/// or a non-breaking space at an end stays part of the value here too, and
/// a record lands in the same segment in assort and in the database.
pub fn trim_spaces(value: &str) -> &str {
    value.trim_matches(' ')
}

/// Whether a value has white space other than a space at an end once
/// [`trim_spaces`] has run: a value the reader should be told about,
/// because `gold` and `gold` followed by a tab are different values.
pub fn odd_space_at_end(value: &str) -> bool {
    let v = trim_spaces(value);
    v.starts_with(char::is_whitespace) || v.ends_with(char::is_whitespace)
}

/// Whether a field counts as missing: blank after trimming.
pub fn is_blank(field: &str) -> bool {
    field.trim().is_empty()
}

/// Parses a data field as a finite number written with a decimal point.
pub fn parse_number(field: &str) -> Option<f64> {
    parse_number_in(field, DecimalMark::Point)
}

/// Parses a data field as a finite number written with the given decimal
/// mark. With a decimal comma, a point is refused rather than guessed at
/// (`1.234,5` writes thousands with points in some countries, a decimal in
/// others).
pub fn parse_number_in(field: &str, mark: DecimalMark) -> Option<f64> {
    let t = field.trim();
    if mark == DecimalMark::Comma {
        if t.contains('.') || t.matches(',').count() > 1 {
            return None;
        }
        return parse_number_in(&t.replace(',', "."), DecimalMark::Point);
    }
    // Rust's parser also accepts words like `inf` and `NaN`; data values
    // must be written as digits.
    if !t.bytes().any(|b| b.is_ascii_digit()) {
        return None;
    }
    t.parse::<f64>().ok().filter(|v| v.is_finite())
}

/// Bytes as lower-case hexadecimal, two digits each (digests as the run
/// record, the data digests and the sample's ranks write them).
pub fn hex(bytes: &[u8]) -> String {
    use std::fmt::Write as _;
    let mut out = String::with_capacity(2 * bytes.len());
    for b in bytes {
        let _ = write!(out, "{b:02x}");
    }
    out
}

/// A size in bytes for people: MiB below a GiB, GiB with one decimal
/// above (`120 MiB`, `1.4 GiB`).
pub fn bytes(n: usize) -> String {
    const MIB: f64 = 1024.0 * 1024.0;
    let mib = n as f64 / MIB;
    if mib < 1024.0 {
        format!("{} MiB", mib.ceil().max(1.0))
    } else {
        format!("{:.1} GiB", mib / 1024.0)
    }
}

#[cfg(test)]
mod tests {
    use super::{and_list, count, odd_space_at_end, short_grouped, thousands, trim_spaces};

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

    #[test]
    fn category_values_lose_spaces_only_as_sql_trim_does() {
        assert_eq!(trim_spaces("  gold "), "gold");
        assert_eq!(trim_spaces("gold\t"), "gold\t");
        assert_eq!(trim_spaces(" gold\u{a0} "), "gold\u{a0}");
        assert!(odd_space_at_end("gold\t") && odd_space_at_end(" \u{3000}gold"));
        assert!(!odd_space_at_end("  gold ") && !odd_space_at_end("old mill"));
    }

    #[test]
    fn names_join_as_a_sentence() {
        let names = |v: &[&str]| v.iter().map(|s| s.to_string()).collect::<Vec<_>>();
        assert_eq!(and_list(&names(&["a"])), "a");
        assert_eq!(and_list(&names(&["a", "b"])), "a and b");
        assert_eq!(and_list(&names(&["a", "b", "c"])), "a, b and c");
    }

    #[test]
    fn report_numbers_group_thousands() {
        assert_eq!(short_grouped(35324.03), "35,324");
        assert_eq!(short_grouped(-1234567.0), "-1,234,567");
        assert_eq!(short_grouped(999.5), "999.5");
        assert_eq!(short_grouped(0.481), "0.481");
    }
}
