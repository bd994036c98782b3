//! Column statistics used by preprocessing and profiles.
//!
//! All functions take finite values. Sums run left to right, so results do
//! not depend on anything but the input order.

/// Arithmetic mean; `None` for an empty slice.
pub fn mean(xs: &[f64]) -> Option<f64> {
    if xs.is_empty() {
        return None;
    }
    Some(xs.iter().sum::<f64>() / xs.len() as f64)
}

/// Population standard deviation (divides by n, not n - 1), two-pass.
pub fn sd_population(xs: &[f64]) -> Option<f64> {
    let m = mean(xs)?;
    let ss: f64 = xs.iter().map(|x| (x - m) * (x - m)).sum();
    Some((ss / xs.len() as f64).sqrt())
}

/// Quantile at fraction `q` in [0, 1] with linear interpolation between
/// order statistics: position `q * (n - 1)` in the sorted values (the
/// definition numbered 7 by Hyndman and Fan, "Sample quantiles in
/// statistical packages", The American Statistician 50(4), 1996).
/// `sorted` must be sorted ascending; `None` when it is empty.
pub fn quantile_sorted(sorted: &[f64], q: f64) -> Option<f64> {
    let n = sorted.len();
    if n == 0 {
        return None;
    }
    let pos = q.clamp(0.0, 1.0) * (n - 1) as f64;
    let lo = pos.floor() as usize;
    let hi = (lo + 1).min(n - 1);
    let frac = pos - lo as f64;
    Some(sorted[lo] + (sorted[hi] - sorted[lo]) * frac)
}

/// Sorted copy of the values, using the total order of f64.
pub fn sorted(xs: &[f64]) -> Vec<f64> {
    let mut v = xs.to_vec();
    v.sort_by(f64::total_cmp);
    v
}

/// Median (the 0.5 quantile above).
pub fn median(xs: &[f64]) -> Option<f64> {
    quantile_sorted(&sorted(xs), 0.5)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn quantiles_interpolate_between_order_statistics() {
        // Worked by hand: positions 0..4 hold 1, 2, 3, 4, 10.
        let s = [1.0, 2.0, 3.0, 4.0, 10.0];
        assert_eq!(quantile_sorted(&s, 0.5), Some(3.0));
        let q9 = quantile_sorted(&s, 0.9).unwrap();
        assert!((q9 - 7.6).abs() < 1e-12, "{q9}");
        assert_eq!(quantile_sorted(&s, 0.0), Some(1.0));
        assert_eq!(quantile_sorted(&s, 1.0), Some(10.0));
        assert_eq!(quantile_sorted(&[], 0.5), None);
    }

    #[test]
    fn median_of_an_even_count_is_the_midpoint() {
        assert_eq!(median(&[4.0, 1.0, 3.0, 2.0]), Some(2.5));
    }

    #[test]
    fn population_sd_divides_by_n() {
        assert_eq!(sd_population(&[1.0, 3.0]), Some(1.0));
    }
}
