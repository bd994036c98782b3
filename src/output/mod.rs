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
pub mod table;
pub mod tables;

pub use crate::text::short;

/// The name a segment goes by in the hand-off and in the SQL queries'
/// `segment_name`: its label, or `segment N` when it has none.
pub fn segment_name(segment: usize, label: Option<&str>) -> String {
    label.map_or_else(|| format!("segment {segment}"), str::to_string)
}
