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

/// [`quantile_sorted`] at each of `qs` (ascending, in [0, 1]) without
/// sorting: each order statistic the definition reads is found by
/// selection (`select_nth_unstable`, expected O(n)) within what is left
/// right of the one before, and the next one up as the least value right
/// of it, so the values and their bits are those of the sorted copy.
/// Reorders `values`. Expected O(n · qs.len()) against O(n log n).
pub fn quantiles_selected(values: &mut [f64], qs: &[f64]) -> Option<Vec<f64>> {
    let n = values.len();
    if n == 0 {
        return None;
    }
    let mut from = 0;
    let mut out = Vec::with_capacity(qs.len());
    for &q in qs {
        let pos = q.clamp(0.0, 1.0) * (n - 1) as f64;
        // Positions rise with q; a q out of order starts the search anew.
        let lo = (pos.floor() as usize).min(n - 1);
        if lo < from {
            from = 0;
        }
        values[from..].select_nth_unstable_by(lo - from, f64::total_cmp);
        let at_lo = values[lo];
        let at_hi = if lo + 1 < n {
            values[lo + 1..]
                .iter()
                .copied()
                .min_by(f64::total_cmp)
                .unwrap_or(at_lo)
        } else {
            at_lo
        };
        let frac = pos - lo as f64;
        out.push(at_lo + (at_hi - at_lo) * frac);
        from = lo;
    }
    Some(out)
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

/// Weighted arithmetic mean `Σ w x / Σ w`; `None` when empty. With every
/// weight 1 it is [`mean`] to the last bit.
pub fn mean_weighted(xs: &[f64], w: &[f64]) -> Option<f64> {
    if xs.is_empty() {
        return None;
    }
    let total: f64 = w.iter().sum();
    Some(xs.iter().zip(w).map(|(x, w)| w * x).sum::<f64>() / total)
}

/// Weighted population standard deviation, `sqrt(Σ w (x - m)² / Σ w)`,
/// two-pass: a record of weight `w` counts as `w` records.
pub fn sd_population_weighted(xs: &[f64], w: &[f64]) -> Option<f64> {
    let m = mean_weighted(xs, w)?;
    let total: f64 = w.iter().sum();
    let ss: f64 = xs.iter().zip(w).map(|(x, w)| w * (x - m) * (x - m)).sum();
    Some((ss / total).sqrt())
}

/// Values with their weights, sorted by value: what weighted quantiles
/// read. O(n log n).
pub fn sorted_weighted(xs: &[f64], w: &[f64]) -> Vec<(f64, f64)> {
    let mut v: Vec<(f64, f64)> = xs.iter().copied().zip(w.iter().copied()).collect();
    v.sort_by(|a, b| a.0.total_cmp(&b.0));
    v
}

/// [`quantile_sorted`] over weighted values: the definition numbered 7 by
/// Hyndman and Fan on the data with each value repeated as often as its
/// weight. Position `q (W - 1)` for the total weight W; the value at an
/// expanded position `t` is the first whose running weight exceeds `t`.
/// With whole-number weights this equals the quantile of the repeated
/// values exactly; with every weight 1 it is [`quantile_sorted`].
/// O(n) over the sorted pairs.
pub fn quantile_sorted_weighted(sorted: &[(f64, f64)], q: f64) -> Option<f64> {
    let last = sorted.last()?.0;
    let total: f64 = sorted.iter().map(|p| p.1).sum();
    let pos = (q.clamp(0.0, 1.0) * (total - 1.0)).max(0.0);
    let lo = pos.floor();
    let frac = pos - lo;
    let mut at_lo = None;
    let mut acc = 0.0;
    for &(x, w) in sorted {
        acc += w;
        if at_lo.is_none() && acc > lo {
            at_lo = Some(x);
        }
        if acc > lo + 1.0 {
            let a = at_lo.unwrap_or(x);
            return Some(a + (x - a) * frac);
        }
    }
    let a = at_lo.unwrap_or(last);
    Some(a + (last - a) * frac)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn weighted_quantiles_equal_those_of_the_repeated_values() {
        // Property by construction: 1 x2, 4 x1, 10 x3 against the repeated
        // list [1, 1, 4, 10, 10, 10].
        let (x, w) = ([10.0, 1.0, 4.0], [3.0, 2.0, 1.0]);
        let repeated = sorted(&[1.0, 1.0, 4.0, 10.0, 10.0, 10.0]);
        let s = sorted_weighted(&x, &w);
        for q in [0.0, 0.1, 0.25, 0.4, 0.5, 0.75, 0.9, 1.0] {
            assert_eq!(
                quantile_sorted_weighted(&s, q),
                quantile_sorted(&repeated, q),
                "q = {q}"
            );
        }
        let m = mean_weighted(&x, &w).unwrap();
        assert!((m - 36.0 / 6.0).abs() < 1e-12);
        let sd = sd_population_weighted(&x, &w).unwrap();
        let sd_rep = sd_population(&[1.0, 1.0, 4.0, 10.0, 10.0, 10.0]).unwrap();
        assert!((sd - sd_rep).abs() < 1e-12);
    }

    #[test]
    fn selected_quantiles_are_the_sorted_ones_to_the_bit() {
        let mut r = super::super::rng::Stream::new(5, 1);
        for n in [1usize, 2, 3, 7, 100, 1001] {
            let v: Vec<f64> = (0..n)
                .map(|i| ((r.unit() - 0.5) * 100.0).round() / 7.0 + (i % 3) as f64)
                .collect();
            let qs = [0.0, 0.1, 0.25, 0.5, 0.5, 0.75, 0.9, 1.0];
            let got = quantiles_selected(&mut v.clone(), &qs).unwrap();
            let s = sorted(&v);
            for (q, g) in qs.iter().zip(&got) {
                assert_eq!(
                    g.to_bits(),
                    quantile_sorted(&s, *q).unwrap().to_bits(),
                    "n {n} q {q}"
                );
            }
        }
        assert_eq!(quantiles_selected(&mut [], &[0.5]), None);
    }

    #[test]
    fn unit_weights_give_the_unweighted_bits() {
        let x = [3.5, -1.25, 8.0, 2.0, 2.0, 7.75];
        let w = [1.0; 6];
        assert_eq!(mean_weighted(&x, &w), mean(&x));
        assert_eq!(sd_population_weighted(&x, &w), sd_population(&x));
        let s = sorted_weighted(&x, &w);
        for q in [0.0, 0.25, 0.5, 0.6, 0.75, 1.0] {
            assert_eq!(
                quantile_sorted_weighted(&s, q),
                quantile_sorted(&sorted(&x), q)
            );
        }
    }

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
