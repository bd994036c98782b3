//! Principal components of a data matrix, for projecting records onto a
//! plane.
//!
//! The components are the eigenvectors of the covariance matrix (divisor
//! n - 1), by nalgebra's symmetric eigen-decomposition of the d x d matrix,
//! ordered by decreasing variance (K. Pearson, "On lines and planes of
//! closest fit to systems of points in space", Philosophical Magazine 2,
//! 1901). Each component's sign is fixed so that its largest-magnitude
//! loading is positive (ties to the first), so the projection is the same
//! on every run. O(n d² + d³) time, O(d²) memory beyond the scores.

use nalgebra::{DMatrix, SymmetricEigen};
use ndarray::{Array2, ArrayView2};

#[derive(Debug, Clone)]
pub struct Pca {
    pub mean: Vec<f64>,
    /// `m` rows of `d` loadings.
    pub components: Vec<Vec<f64>>,
    /// The variance along each component.
    pub variance: Vec<f64>,
}

/// The data's total variance: the sum of its columns' variances, with the
/// components' divisor (n - 1), so the shares of all d components add up
/// to exactly 1 (the trace of the covariance matrix). O(n d).
pub fn total_variance(data: ArrayView2<'_, f64>) -> f64 {
    let (n, d) = data.dim();
    if n < 2 {
        return 0.0;
    }
    (0..d)
        .map(|f| {
            let col = data.column(f);
            let mean = col.sum() / n as f64;
            col.iter().map(|x| (x - mean) * (x - mean)).sum::<f64>() / (n - 1) as f64
        })
        .sum()
}

/// The first `m` principal components (fewer when d is smaller).
pub fn principal_components(data: ArrayView2<'_, f64>, m: usize) -> Pca {
    let (n, d) = data.dim();
    let mean: Vec<f64> = (0..d)
        .map(|f| data.column(f).iter().sum::<f64>() / n.max(1) as f64)
        .collect();
    let centred = DMatrix::from_fn(n, d, |i, f| data[[i, f]] - mean[f]);
    let cov = (centred.transpose() * &centred) / (n.max(2) - 1) as f64;
    let eig = SymmetricEigen::new(cov);
    let mut order: Vec<usize> = (0..d).collect();
    order.sort_by(|&a, &b| {
        eig.eigenvalues[b]
            .total_cmp(&eig.eigenvalues[a])
            .then(a.cmp(&b))
    });
    let mut components = Vec::new();
    let mut variance = Vec::new();
    for &j in order.iter().take(m.min(d)) {
        let mut v: Vec<f64> = eig.eigenvectors.column(j).iter().copied().collect();
        let mut big = 0;
        for (i, x) in v.iter().enumerate() {
            if x.abs() > v[big].abs() {
                big = i;
            }
        }
        if v[big] < 0.0 {
            v.iter_mut().for_each(|x| *x = -*x);
        }
        components.push(v);
        variance.push(eig.eigenvalues[j]);
    }
    Pca {
        mean,
        components,
        variance,
    }
}

impl Pca {
    /// Each record's coordinates on the components.
    pub fn project(&self, data: ArrayView2<'_, f64>) -> Array2<f64> {
        let (n, d) = data.dim();
        Array2::from_shape_fn((n, self.components.len()), |(i, c)| {
            (0..d)
                .map(|f| (data[[i, f]] - self.mean[f]) * self.components[c][f])
                .sum()
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_shares_of_all_components_add_up_to_the_whole() {
        // Small n, where dividing by n or by n - 1 differs most.
        let x = ndarray::array![
            [1.0, 2.0, 0.5],
            [2.0, 1.0, 0.1],
            [4.0, 3.0, 0.9],
            [0.5, 5.0, 0.3]
        ];
        let p = principal_components(x.view(), 3);
        let total = total_variance(x.view());
        let shares: f64 = p.variance.iter().sum::<f64>() / total;
        assert!((shares - 1.0).abs() < 1e-12, "shares add up to {shares}");
    }
}
