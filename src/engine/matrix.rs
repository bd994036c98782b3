//! The condensed dissimilarity matrix: every pair of n records once,
//! n(n - 1)/2 values of 8 bytes, row after row (entry (i, j) with i < j).
//! Trees over a matrix linkage and k-medoids read it; it is filled once,
//! in parallel, each entry by itself, so the thread count never changes a
//! value.

use rayon::prelude::*;

/// Entry (i, j), i < j, of a symmetric dissimilarity with a zero diagonal.
#[derive(Debug, Clone)]
pub struct Condensed {
    n: usize,
    values: Vec<f64>,
}

impl Condensed {
    /// Fills the matrix of `n` records from `f(i, j)`, i < j, rows in
    /// parallel. O(n²) calls of `f`, n(n - 1)/2 values of memory.
    pub fn from_fn(n: usize, f: impl Fn(usize, usize) -> f64 + Sync) -> Condensed {
        let mut values = vec![0.0; Condensed::pairs(n)];
        // Split the buffer into one slice per row and fill them in parallel.
        let mut slices: Vec<(usize, &mut [f64])> = Vec::with_capacity(n);
        let mut rest: &mut [f64] = &mut values;
        for i in 0..n.saturating_sub(1) {
            let (head, tail) = std::mem::take(&mut rest).split_at_mut(n - 1 - i);
            slices.push((i, head));
            rest = tail;
        }
        slices.into_par_iter().for_each(|(i, out)| {
            for (off, v) in out.iter_mut().enumerate() {
                *v = f(i, i + 1 + off);
            }
        });
        Condensed { n, values }
    }

    /// Pairs of `n` records: the matrix's length.
    pub fn pairs(n: usize) -> usize {
        n * n.saturating_sub(1) / 2
    }

    /// Records.
    pub fn n(&self) -> usize {
        self.n
    }

    fn at(&self, i: usize, j: usize) -> usize {
        let (i, j) = if i < j { (i, j) } else { (j, i) };
        self.n * i - i * (i + 1) / 2 + j - i - 1
    }

    /// The dissimilarity of records i and j; 0 when i == j.
    #[inline]
    pub fn get(&self, i: usize, j: usize) -> f64 {
        if i == j {
            0.0
        } else {
            self.values[self.at(i, j)]
        }
    }

    /// Overwrites entry (i, j), i != j (the linkage updates do).
    pub fn set(&mut self, i: usize, j: usize, v: f64) {
        let at = self.at(i, j);
        self.values[at] = v;
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn entries_are_found_in_either_order_and_the_diagonal_is_zero() {
        let m = Condensed::from_fn(5, |i, j| (10 * i + j) as f64);
        assert_eq!(m.get(1, 3), 13.0);
        assert_eq!(m.get(3, 1), 13.0);
        assert_eq!(m.get(0, 4), 4.0);
        assert_eq!(m.get(2, 2), 0.0);
        assert_eq!(m.n(), 5);
    }
}
