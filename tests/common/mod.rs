//! Helpers shared by the integration tests that read the public data sets
//! in tests/data (Iris and Wine, UCI; see tests/data/ATTRIBUTION.md).

use ndarray::Array2;
use std::path::Path;

/// The measurements of a data file whose last column is the class: every
/// other column, as records by features.
pub fn measurements(name: &str) -> Array2<f64> {
    let text = std::fs::read_to_string(
        Path::new(env!("CARGO_MANIFEST_DIR"))
            .join("tests/data")
            .join(name),
    )
    .unwrap();
    let rows: Vec<Vec<f64>> = text
        .lines()
        .skip(1)
        .map(|l| {
            let f: Vec<&str> = l.split(',').collect();
            f[..f.len() - 1]
                .iter()
                .map(|v| v.parse().unwrap())
                .collect()
        })
        .collect();
    let d = rows[0].len();
    Array2::from_shape_vec((rows.len(), d), rows.into_iter().flatten().collect()).unwrap()
}
