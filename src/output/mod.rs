//! Output: the run's outcome as terminal tables and as files.
//!
//! Files are built in memory first and written only after the whole run has
//! succeeded, each to a temporary file beside its target and then renamed,
//! so a failed or interrupted run never leaves a partial or clobbered output.

pub mod changes;
pub mod charts;
pub mod deliver;
pub mod files;
pub mod json;
pub mod people;
pub mod record;
pub mod report;
pub mod set;
pub mod sql;
pub mod tables;

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
