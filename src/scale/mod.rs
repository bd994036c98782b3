//! Segments where the data lives (docs/scale-out.md): k-means rounds run
//! by an engine that holds the records (a database, a cluster), the driver
//! here keeping only the centres and each round's exact sums
//! ([`crate::engine::exact`]).

pub mod aggregate;
#[cfg(feature = "ballista")]
pub mod cluster;
pub mod drive;
pub mod postgres;
pub mod round;
pub mod sample;
pub mod select;
pub mod source;
pub mod sql;
pub mod stream;
