//! One-to-one matching of minimum total cost: the assignment problem,
//! solved exactly by the Hungarian method.
//!
//! # Reference
//! H. W. Kuhn, "The Hungarian method for the assignment problem", Naval
//! Research Logistics Quarterly 2, 1955; J. Munkres, "Algorithms for the
//! assignment and transportation problems", 1957. This is the O(n³)
//! shortest-augmenting-path form with row and column potentials (as in
//! R. Jonker and A. Volgenant, "A shortest augmenting path algorithm for
//! dense and sparse linear assignment problems", Computing 38, 1987).
//!
//! # Rectangular problems
//! With `r` rows and `c` columns, `min(r, c)` pairs are matched: the
//! smaller side is padded with dummy entries of cost 0, so every real row
//! or column beyond the smaller side is left unmatched, and the pairs
//! matched are those of least total cost.
//!
//! # Determinism
//! Ties between equal-cost solutions go the same way on every run: the
//! scan order is fixed (lowest column first), and no parallelism is used.

/// The pairs `(row, column)` of a minimum-cost one-to-one matching of the
/// `rows x cols` matrix `cost` (row-major), with `min(rows, cols)` pairs,
/// in row order. Costs must be finite.
///
/// # Example
/// ```
/// use assort::engine::matching::assign;
/// // Row 0 is cheapest at column 1, row 1 at column 0.
/// let pairs = assign(&[4.0, 1.0, 2.0, 5.0], 2, 2);
/// assert_eq!(pairs, vec![(0, 1), (1, 0)]);
/// ```
///
/// O(n³) for n = max(rows, cols); O(n²) memory.
pub fn assign(cost: &[f64], rows: usize, cols: usize) -> Vec<(usize, usize)> {
    debug_assert_eq!(cost.len(), rows * cols);
    let n = rows.max(cols);
    if n == 0 {
        return Vec::new();
    }
    let at = |i: usize, j: usize| -> f64 {
        if i < rows && j < cols {
            cost[i * cols + j]
        } else {
            0.0
        }
    };
    // 1-based arrays; index 0 is the virtual start of each augmenting path.
    let mut u = vec![0.0; n + 1];
    let mut v = vec![0.0; n + 1];
    // row_of[j]: the row matched to column j (0 = none).
    let mut row_of = vec![0usize; n + 1];
    let mut way = vec![0usize; n + 1];
    for i in 1..=n {
        row_of[0] = i;
        let mut j0 = 0;
        let mut least = vec![f64::INFINITY; n + 1];
        let mut used = vec![false; n + 1];
        loop {
            used[j0] = true;
            let i0 = row_of[j0];
            let mut delta = f64::INFINITY;
            let mut j1 = 0;
            for j in 1..=n {
                if used[j] {
                    continue;
                }
                let reduced = at(i0 - 1, j - 1) - u[i0] - v[j];
                if reduced < least[j] {
                    least[j] = reduced;
                    way[j] = j0;
                }
                if least[j] < delta {
                    delta = least[j];
                    j1 = j;
                }
            }
            // Every column is reachable (the matrix is dense), so j1 was set.
            for j in 0..=n {
                if used[j] {
                    u[row_of[j]] += delta;
                    v[j] -= delta;
                } else {
                    least[j] -= delta;
                }
            }
            j0 = j1;
            if row_of[j0] == 0 {
                break;
            }
        }
        // Flip the augmenting path.
        loop {
            let j1 = way[j0];
            row_of[j0] = row_of[j1];
            j0 = j1;
            if j0 == 0 {
                break;
            }
        }
    }
    let mut pairs: Vec<(usize, usize)> = (1..=n)
        .filter(|&j| row_of[j] >= 1 && row_of[j] <= rows && j <= cols)
        .map(|j| (row_of[j] - 1, j - 1))
        .collect();
    pairs.sort_unstable();
    pairs
}

#[cfg(test)]
mod tests {
    use super::assign;

    /// Every one-to-one matching of min(r, c) pairs, by brute force.
    fn best_by_brute_force(cost: &[f64], rows: usize, cols: usize) -> f64 {
        fn go(
            cost: &[f64],
            rows: usize,
            cols: usize,
            i: usize,
            used: &mut Vec<bool>,
            left: usize,
        ) -> f64 {
            if left == 0 || i == rows {
                return if left == 0 { 0.0 } else { f64::INFINITY };
            }
            // Row i unmatched (only when rows exceed the pairs needed).
            let mut best = if rows - i > left {
                go(cost, rows, cols, i + 1, used, left)
            } else {
                f64::INFINITY
            };
            for j in 0..cols {
                if !used[j] {
                    used[j] = true;
                    best =
                        best.min(cost[i * cols + j] + go(cost, rows, cols, i + 1, used, left - 1));
                    used[j] = false;
                }
            }
            best
        }
        go(cost, rows, cols, 0, &mut vec![false; cols], rows.min(cols))
    }

    #[test]
    fn a_worked_three_by_three_example() {
        // Worked by hand over all six pairings: the greedy choice takes both
        // 1s and leaves row 1 a cost of 10 (total 12); the optimum gives up
        // the 1 at (0, 0) for 2 + 2 + 1 = 5, the only pairing below 12.
        let cost = [1.0, 2.0, 10.0, 2.0, 10.0, 10.0, 10.0, 10.0, 1.0];
        assert_eq!(assign(&cost, 3, 3), vec![(0, 1), (1, 0), (2, 2)]);
    }

    #[test]
    fn matches_brute_force_on_square_and_rectangular_matrices() {
        let mut s = crate::engine::rng::Stream::new(3, 7);
        for (rows, cols) in [(1, 1), (2, 3), (3, 2), (4, 4), (5, 3), (3, 6), (6, 6)] {
            for _ in 0..40 {
                // Whole costs from a few values, so ties are common.
                let cost: Vec<f64> = (0..rows * cols).map(|_| s.below(5) as f64).collect();
                let pairs = assign(&cost, rows, cols);
                assert_eq!(pairs.len(), rows.min(cols));
                let mut seen_r = vec![false; rows];
                let mut seen_c = vec![false; cols];
                for &(r, c) in &pairs {
                    assert!(!seen_r[r] && !seen_c[c], "one to one");
                    seen_r[r] = true;
                    seen_c[c] = true;
                }
                let total: f64 = pairs.iter().map(|&(r, c)| cost[r * cols + c]).sum();
                assert_eq!(total, best_by_brute_force(&cost, rows, cols), "{cost:?}");
            }
        }
    }

    #[test]
    fn an_empty_problem_has_no_pairs() {
        assert!(assign(&[], 0, 0).is_empty());
        assert!(assign(&[], 0, 3).is_empty());
    }
}
