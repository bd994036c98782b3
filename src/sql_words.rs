//! Words of SQL text shared by every query assort writes (the scoring and
//! rules queries, a k-means round where the data lives): identifiers and
//! literals quoted, numbers with every digit, comments that cannot end
//! early, and the branch that sends a record to its nearest centre.

/// An identifier, double-quoted (quotes inside doubled).
pub fn ident(name: &str) -> String {
    format!("\"{}\"", name.replace('"', "\"\""))
}

/// A text literal, single-quoted (quotes inside doubled).
pub fn text(value: &str) -> String {
    format!("'{}'", value.replace('\'', "''"))
}

/// Text for a `--` comment: a line break ends a comment and makes the rest
/// of the line live SQL, so every control character (line feed, carriage
/// return, vertical tab, form feed and the rest) and the Unicode line and
/// paragraph separators are written as a visible `\u{..}` escape instead.
/// Recipe names and file names reach the comments this way; they can hold
/// any of these (a file name may hold a line feed).
pub fn comment(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for c in text.chars() {
        if c.is_control() || matches!(c, '\u{2028}' | '\u{2029}') {
            out.extend(c.escape_unicode());
        } else {
            out.push(c);
        }
    }
    out
}

/// A number with every digit needed to read back the same `f64`.
pub fn number(v: f64) -> String {
    // `1e-7` and `1e21` are standard SQL; `inf` and `NaN` never reach
    // here (a model holds finite numbers).
    format!("{v:?}")
}

/// The branch of centre `s` of `k`: reached only when no earlier centre is
/// at least as near, so `<=` against the later ones sends a tie to the
/// earlier centre, as assort does; the last centre is what is left.
pub fn nearest_branch(s: usize, k: usize) -> String {
    if s + 1 == k {
        return "ELSE".to_string();
    }
    let cond: Vec<String> = (s + 1..k).map(|j| format!("d{s} <= d{j}")).collect();
    format!("WHEN {} THEN", cond.join(" AND "))
}
