//! Numbers and names as people read them: a column's display name from
//! `call`, numbers with thousands separators and a fixed number of
//! decimals per format, percentages for shares, and never `-0.0`.

use crate::plan::{Display, FeatureKind, NumberFormat, Plan};

/// The name people see for a column: its `call` name, else the column.
pub fn name<'a>(plan: &'a Plan, column: &'a str) -> &'a str {
    plan.display.get(column).map_or(column, |d| d.name.as_str())
}

/// A value of `column` as people read it, in the column's format: an
/// ordered category by its levels, a flag as the share set (unless `call`
/// gives a format).
pub fn value(plan: &Plan, column: &str, v: f64) -> String {
    let display = plan.display.get(column);
    match kind(plan, column) {
        FeatureKind::Ordered(levels) => ranked(levels, v),
        FeatureKind::Flag if display.is_none() => share(v),
        _ => formatted(v, display),
    }
}

/// The kind of a clustered column (a number for any other column).
pub fn kind<'a>(plan: &'a Plan, column: &str) -> &'a FeatureKind {
    const NUMBER: &FeatureKind = &FeatureKind::Number;
    plan.features
        .iter()
        .find(|f| f.column == column)
        .map_or(NUMBER, |f| &f.kind)
}

/// A rank of an ordered category in words: the level itself when the
/// rank is whole (a median, a quartile), else the rank with the two
/// levels it falls between (a mean: `2.4 (silver to gold)`).
pub fn ranked(levels: &[String], v: f64) -> String {
    let level = |r: f64| {
        levels
            .get((r as usize).saturating_sub(1))
            .map(String::as_str)
    };
    if !v.is_finite() || levels.is_empty() {
        return "n/a".into();
    }
    let v = v.clamp(1.0, levels.len() as f64);
    if v.fract() == 0.0 {
        return level(v).unwrap_or("n/a").to_string();
    }
    match (level(v.floor()), level(v.ceil())) {
        (Some(lo), Some(hi)) => format!("{} ({lo} to {hi})", decimals(v, 1)),
        _ => decimals(v, 1),
    }
}

/// A value in a display format (`None`: a plain number).
pub fn formatted(v: f64, display: Option<&Display>) -> String {
    if !v.is_finite() {
        return "n/a".into();
    }
    let format = display.map_or(NumberFormat::Number, |d| d.format);
    let unit = display.and_then(|d| d.unit.as_deref());
    match format {
        NumberFormat::Percent => share(v),
        NumberFormat::Count => with_unit(decimals(v, 0), unit),
        NumberFormat::Money => money(v, unit, 2),
        NumberFormat::Number => {
            let places = if v.abs() >= 100.0 {
                0
            } else if v.abs() >= 10.0 {
                1
            } else {
                2
            };
            with_unit(decimals(v, places), unit)
        }
    }
}

/// Money with its symbol before it and `places` decimals: `€1,250.00`,
/// `-€3`; an amount that rounds to zero has no sign.
pub fn money(v: f64, unit: Option<&str>, places: usize) -> String {
    let text = decimals(v.abs(), places);
    let sign = if text.chars().any(|c| c.is_ascii_digit() && c != '0') && v < 0.0 {
        "-"
    } else {
        ""
    };
    format!("{sign}{}{text}", unit.unwrap_or(""))
}

/// A value of `column` in its format within `room` characters, for the
/// terminal's fixed-width tables: a percentage (`57.8 %`), money with its
/// symbol (`€170.48`, whole when the cents do not fit: `€3,242`), a whole
/// count; other numbers, and what still does not fit, as the short form.
/// Words of a unit are left to the row's name, and so is the rank of an
/// ordered category (its row reads `mean rank`).
pub fn compact(plan: &Plan, column: &str, v: f64, room: usize) -> String {
    let display = plan.display.get(column);
    let fits = |t: String| (t.chars().count() <= room).then_some(t);
    match kind(plan, column) {
        FeatureKind::Flag if display.is_none() => {
            if let Some(t) = fits(share(v)).or_else(|| fits(format!("{:.0} %", v * 100.0))) {
                return t;
            }
        }
        _ => {}
    }
    let tried = match display.map(|d| d.format) {
        Some(NumberFormat::Percent) => {
            fits(share(v)).or_else(|| fits(format!("{:.0} %", v * 100.0)))
        }
        Some(NumberFormat::Money) => {
            let unit = display.and_then(|d| d.unit.as_deref());
            fits(money(v, unit, 2)).or_else(|| fits(money(v, unit, 0)))
        }
        Some(NumberFormat::Count) => fits(decimals(v, 0)),
        _ => None,
    };
    tried.unwrap_or_else(|| crate::output::short(v))
}

/// A share (a fraction) as a percentage with one decimal: `29.7 %`.
pub fn share(f: f64) -> String {
    if !f.is_finite() {
        return "n/a".into();
    }
    format!("{} %", decimals(f * 100.0, 1))
}

fn with_unit(text: String, unit: Option<&str>) -> String {
    match unit {
        Some(u) => format!("{text} {u}"),
        None => text,
    }
}

/// `v` with its sign always written (`+1.5`, `-0.3`), except a value that
/// rounds to zero (`0.0`).
pub fn signed(v: f64, places: usize) -> String {
    let text = decimals(v, places);
    if v > 0.0 && text.chars().any(|c| c.is_ascii_digit() && c != '0') {
        format!("+{text}")
    } else {
        text
    }
}

/// `v` rounded to `places` decimals with thousands separators; a value
/// that rounds to zero has no sign.
pub fn decimals(v: f64, places: usize) -> String {
    let text = format!("{:.*}", places, v.abs());
    let (whole, frac) = text.split_once('.').unwrap_or((&text, ""));
    let grouped = crate::text::group_digits(whole);
    let zero = text.chars().all(|c| c == '0' || c == '.');
    let sign = if v < 0.0 && !zero { "-" } else { "" };
    if frac.is_empty() {
        format!("{sign}{grouped}")
    } else {
        format!("{sign}{grouped}.{frac}")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn shown(v: f64, format: NumberFormat, unit: Option<&str>) -> String {
        formatted(
            v,
            Some(&Display {
                name: String::new(),
                format,
                unit: unit.map(String::from),
            }),
        )
    }

    #[test]
    fn numbers_read_as_people_write_them() {
        assert_eq!(decimals(1234567.891, 2), "1,234,567.89");
        assert_eq!(decimals(-0.04, 1), "0.0", "no minus zero");
        assert_eq!(decimals(-12.6, 0), "-13");
        assert_eq!(share(0.2104), "21.0 %");
        assert_eq!(signed(1.53, 1), "+1.5");
        assert_eq!(signed(-0.02, 1), "0.0");
        assert_eq!(signed(-0.31, 1), "-0.3");
        assert_eq!(shown(0.2104, NumberFormat::Percent, None), "21.0 %");
        assert_eq!(shown(1250.0, NumberFormat::Money, Some("€")), "€1,250.00");
        assert_eq!(shown(-0.001, NumberFormat::Money, Some("€")), "€0.00");
        assert_eq!(shown(12480.4, NumberFormat::Count, None), "12,480");
        assert_eq!(
            shown(4.5, NumberFormat::Number, Some("visits")),
            "4.50 visits"
        );
        assert_eq!(formatted(170.48, None), "170");
        assert_eq!(formatted(65.75, None), "65.8");
    }
}
