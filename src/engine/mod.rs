//! The clustering engine: k-means, the criteria that judge a partition, the
//! comparison of partitions and the small statistics preprocessing needs.
//!
//! The engine knows nothing of the recipe language and does no I/O: it takes
//! matrices and validated settings and returns numbers. Every random draw
//! comes from a named, portable generator (ChaCha20) seeded from the caller's
//! seed, and every parallel computation writes per-item results that are then
//! reduced in a fixed order, so the thread count never changes a bit of any
//! result.
//!
//! Data matrices are records by features, row-major, finite values only: the
//! data boundary (the run stage) rejects NaN and infinity with a located
//! error before anything reaches here.

pub mod compare;
pub mod criteria;
pub mod drift;
pub mod evidence;
pub mod exact;
pub mod gower;
pub mod kmeans;
pub mod kmedoids;
pub mod kprototypes;
pub mod matching;
pub mod matrix;
pub mod pca;
pub mod rng;
pub mod rules;
pub mod silhouette;
pub mod stats;
pub mod stop;
pub mod tree;
pub mod weights;

use thiserror::Error;

/// A request the engine cannot carry out on the data it was given.
#[derive(Debug, Clone, PartialEq, Error)]
#[non_exhaustive]
pub enum EngineError {
    #[error("cannot form {k} segments from {n} records")]
    TooFewRecords { k: usize, n: usize },
    #[error("fewer than {k} distinct records: cannot form {k} separate segments")]
    TooFewDistinct { k: usize },
    #[error("`{linkage}` linkage is defined only for Euclidean distances")]
    NeedsEuclidean { linkage: &'static str },
    #[error("k must be at least 1, found {k}")]
    BadK { k: usize },
    #[error("the data has no columns to cluster on")]
    NoFeatures,
    #[error("stopped on request before the result was complete")]
    Stopped,
}

/// Squared Euclidean distance between two equally long rows.
///
/// Summed left to right in one accumulator: the order is fixed, so the
/// result is the same on every machine.
#[inline]
pub fn dist2(a: &[f64], b: &[f64]) -> f64 {
    let mut s = 0.0;
    for (x, y) in a.iter().zip(b) {
        let d = x - y;
        s += d * d;
    }
    s
}
