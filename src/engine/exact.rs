//! Exact sums for k-means rounds split across workers.
//!
//! One Lloyd round assigns each record to its nearest centre, then sums
//! each feature and counts the records of each segment; a new centre is a
//! sum over a count. Floating-point addition is not associative: when an
//! engine splits the records among workers (threads, database partitions,
//! cluster executors) differently, the sums and so the centres differ in
//! their last bits, and the next round may place a record differently.
//! Here each value is summed as a fixed-point integer instead. Integer
//! addition is exact in any order, so a round gives the same sums on 1 or
//! 64 workers, and in every engine that forms the same integers.
//!
//! **The scheme.** Feature j gets a shift `s_j` from the largest magnitude
//! `m_j` it takes: with `2^(e-1) <= m_j < 2^e`, `s_j = 61 - e`. A value `x`
//! becomes the integer `floor(x * 2^s_j)`, of magnitude at most `2^61`.
//! Scaling by a power of two and `floor` are both exact on a double, so
//! every engine that follows IEEE 754 (PostgreSQL, DataFusion, this crate)
//! forms the same integer from the same double. Sums are held in 128 bits
//! (`i128` here, `NUMERIC` or `DECIMAL(38, 0)` in SQL): fewer than
//! 4 · 10^19 records (10^38 / 2^61) cannot overflow them. The driver turns
//! a sum back into a double itself: `(sum as f64) * 2^-s_j`, then divides
//! by the count. What `floor` drops is below `m_j * 2^-60`, far under a
//! double's own precision at `m_j`.
//!
//! The within-segment sum of squares is summed the same way: each record's
//! squared distance to its centre (computed in doubles, left to right as
//! [`super::dist2`] does) is fixed with one shift chosen from the largest
//! squared distance any record can have, `sum_j (2 m_j)^2`.
//!
//! **Range.** Every value finite, and each feature's largest magnitude
//! zero or between `2^-60` and `2^60` (about `8.7e-19` to `1.15e18`); data
//! outside is refused by [`Shifts::of`]. Prepared features (z-scores,
//! ranges, logarithms) lie far inside; only unscaled raw amounts could come
//! near the top.
//!
//! Cost: O(n d k) for a round over n records, d features and k centres, as
//! for a floating-point round; O(k d) integers of memory per worker.

use ndarray::ArrayView2;
use rayon::prelude::*;

/// The largest magnitude allowed, exclusive: `2^60`.
pub const LARGEST: f64 = 1_152_921_504_606_846_976.0;
/// The smallest non-zero largest magnitude allowed: `2^-60`.
pub const SMALLEST: f64 = 1.0 / LARGEST;
/// Bits of a fixed value's magnitude: values lie within `±2^61`.
const BITS: i32 = 61;

/// How a feature's values become integers: `floor(x * 2^shift)`.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Shift(i32);

/// Data the scheme cannot hold exactly, named by feature number.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum OutOfRange {
    #[error("feature {feature} has a value that is not a finite number")]
    NotFinite { feature: usize },
    #[error("feature {feature} reaches {largest:e}, at or above the exact sums' limit of 2^60 (about 1.15e18)")]
    TooLarge { feature: usize, largest: f64 },
    #[error("feature {feature} is at most {largest:e} in size, below the exact sums' limit of 2^-60 (about 8.7e-19), without being zero")]
    TooSmall { feature: usize, largest: f64 },
}

impl Shift {
    /// The shift for values of magnitude at most `largest` (zero or within
    /// [`SMALLEST`]..[`LARGEST`], checked by the caller).
    fn for_largest(largest: f64) -> Shift {
        if largest == 0.0 {
            return Shift(0);
        }
        // 2^(e-1) <= largest < 2^e, from the double's own exponent (exact,
        // unlike a logarithm).
        let e = ((largest.to_bits() >> 52) & 0x7ff) as i32 - 1022;
        Shift(BITS - e)
    }

    /// The power of two the shift stands for, `2^shift` (a normal double
    /// for every shift the range allows), built from its exponent bits.
    #[inline]
    pub fn factor(self) -> f64 {
        f64::from_bits(((1023 + i64::from(self.0)) as u64) << 52)
    }

    /// The integer `x` is summed as: `floor(x * 2^shift)`.
    #[inline]
    pub fn fixed(self, x: f64) -> i64 {
        // Within the range |x * 2^shift| <= 2^61, so the cast (which cuts
        // toward zero) is exact on the integer part, and one step down
        // mends a cut negative fraction: `floor` without its library call
        // (the baseline x86-64 target has no rounding instruction).
        let v = x * self.factor();
        let t = v as i64;
        if (t as f64) > v {
            t - 1
        } else {
            t
        }
    }

    /// A sum of fixed values as a double: `sum * 2^-shift`, the sum
    /// rounded to the nearest double first.
    #[inline]
    pub fn float(self, sum: i128) -> f64 {
        sum as f64 / self.factor()
    }

    /// The exponent, for writing the scheme into SQL.
    pub fn exponent(self) -> i32 {
        self.0
    }
}

/// The shifts of every feature and of the squared distances.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Shifts {
    pub features: Vec<Shift>,
    pub within: Shift,
}

impl Shifts {
    /// The shifts for features whose largest magnitudes are `largest`, or
    /// why the data is out of the scheme's range. O(d).
    pub fn of(largest: &[f64]) -> Result<Shifts, OutOfRange> {
        let mut features = Vec::with_capacity(largest.len());
        for (feature, &m) in largest.iter().enumerate() {
            if !m.is_finite() {
                return Err(OutOfRange::NotFinite { feature });
            }
            let m = m.abs();
            if m >= LARGEST {
                return Err(OutOfRange::TooLarge {
                    feature,
                    largest: m,
                });
            }
            if m != 0.0 && m < SMALLEST {
                return Err(OutOfRange::TooSmall {
                    feature,
                    largest: m,
                });
            }
            features.push(Shift::for_largest(m));
        }
        // A record and a centre of the same feature differ by at most
        // 2 m_j; the bound is below 4 d 2^120, a normal double.
        let bound: f64 = largest.iter().map(|m| 4.0 * m * m).sum();
        Ok(Shifts {
            features,
            within: Shift::for_largest(bound),
        })
    }

    /// The shifts for the data itself: its largest magnitude per column.
    /// O(n d).
    pub fn of_data(data: ArrayView2<'_, f64>) -> Result<Shifts, OutOfRange> {
        let largest: Vec<f64> = data.columns().into_iter().map(largest).collect();
        Shifts::of(&largest)
    }
}

/// What one Lloyd round sums, for k segments over d features: the records
/// of each segment, each feature's fixed-point sum per segment (segment
/// after segment), and the fixed-point within-segment sum of squares.
/// Parts of the data summed apart and then [`RoundSums::add`]ed give the
/// same value, whatever the parts.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct RoundSums {
    pub k: usize,
    pub d: usize,
    pub counts: Vec<u64>,
    pub sums: Vec<i128>,
    pub within: i128,
}

impl RoundSums {
    /// Nothing summed yet.
    pub fn new(k: usize, d: usize) -> RoundSums {
        RoundSums {
            k,
            d,
            counts: vec![0; k],
            sums: vec![0; k * d],
            within: 0,
        }
    }

    /// Adds another part's sums.
    pub fn add(&mut self, other: &RoundSums) {
        for (a, b) in self.counts.iter_mut().zip(&other.counts) {
            *a += b;
        }
        for (a, b) in self.sums.iter_mut().zip(&other.sums) {
            *a += b;
        }
        self.within += other.within;
    }

    /// Places one record at its nearest centre (`centres`, k rows of d in
    /// one slice; ties to the lower number) and adds it there.
    #[inline]
    pub fn observe(&mut self, row: &[f64], centres: &[f64], shifts: &Shifts) {
        let (best, d2, _) = super::kmeans::nearest_two(row, centres, self.d.max(1));
        let at = best as usize;
        self.counts[at] += 1;
        let sums = &mut self.sums[at * self.d..(at + 1) * self.d];
        for ((s, &x), shift) in sums.iter_mut().zip(row).zip(&shifts.features) {
            *s += i128::from(shift.fixed(x));
        }
        self.within += i128::from(shifts.within.fixed(d2));
    }

    /// The new centres: each segment's sums over its count; a segment that
    /// drew no record keeps its centre from `previous`.
    pub fn centres(&self, shifts: &Shifts, previous: &[f64]) -> Vec<f64> {
        let mut out = previous.to_vec();
        for (s, &n) in self.counts.iter().enumerate().filter(|(_, &n)| n > 0) {
            for (j, shift) in shifts.features.iter().enumerate() {
                out[s * self.d + j] = shift.float(self.sums[s * self.d + j]) / n as f64;
            }
        }
        out
    }

    /// The within-segment sum of squares the round's placement gives.
    pub fn within(&self, shifts: &Shifts) -> f64 {
        shifts.within.float(self.within)
    }
}

/// An exact sum of values whose magnitude is at most a bound given up
/// front, and their count: the fill means and z-score parameters of
/// recipes whose results must not depend on how the records are split or
/// ordered (`sample ... by key`), in memory and in passes alike. Each
/// value is summed as [`Shift::fixed`] with the shift of the bound.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Sum {
    shift: Shift,
    total: i128,
    count: u64,
}

impl Sum {
    /// Nothing summed yet, for values of magnitude at most `largest`, or
    /// why that bound is out of the scheme's range.
    pub fn new(largest: f64) -> Result<Sum, OutOfRange> {
        let shifts = Shifts::of(&[largest])?;
        Ok(Sum {
            shift: shifts.features[0],
            total: 0,
            count: 0,
        })
    }

    /// A sum formed elsewhere (in a database, say) of `count` values of
    /// magnitude at most `largest`, whose fixed-point integers total
    /// `total`.
    pub fn from_total(largest: f64, total: i128, count: u64) -> Result<Sum, OutOfRange> {
        let mut sum = Sum::new(largest)?;
        sum.total = total;
        sum.count = count;
        Ok(sum)
    }

    /// The shift each value is summed with.
    pub fn shift(&self) -> Shift {
        self.shift
    }

    /// The fixed-point integers' total.
    pub fn fixed_total(&self) -> i128 {
        self.total
    }

    #[inline]
    pub fn add(&mut self, x: f64) {
        self.total += i128::from(self.shift.fixed(x));
        self.count += 1;
    }

    /// Adds another part's sum, of the same bound.
    pub fn merge(&mut self, other: &Sum) {
        self.total += other.total;
        self.count += other.count;
    }

    pub fn count(&self) -> u64 {
        self.count
    }

    /// The sum as a double.
    pub fn total(&self) -> f64 {
        self.shift.float(self.total)
    }

    /// The sum over the count; `None` for no values.
    pub fn mean(&self) -> Option<f64> {
        (self.count > 0).then(|| self.total() / self.count as f64)
    }
}

/// The largest magnitude among `xs` (0 for none; NaN if one is NaN).
pub fn largest<'a>(xs: impl IntoIterator<Item = &'a f64>) -> f64 {
    xs.into_iter().fold(0.0_f64, |m, x| {
        if m.is_nan() || x.is_nan() {
            f64::NAN
        } else {
            m.max(x.abs())
        }
    })
}

/// The mean of values of largest magnitude `largest` from their exact sum
/// ([`Sum`]); `None` for none. O(n).
pub fn mean(xs: &[f64], largest: f64) -> Result<Option<f64>, OutOfRange> {
    let mut sum = Sum::new(largest)?;
    xs.iter().for_each(|&x| sum.add(x));
    Ok(sum.mean())
}

/// The bound of a squared deviation from `mean` of values of largest
/// magnitude `largest`: `(largest + |mean|)^2`.
pub fn deviation_bound(largest: f64, mean: f64) -> f64 {
    (largest + mean.abs()).powi(2)
}

/// The population standard deviation of `xs` around their `mean`, from
/// the exact sum of the squared deviations (each computed in doubles),
/// `sqrt(sum / n)`; 0 for no values. O(n).
pub fn sd_population(xs: &[f64], largest: f64, mean: f64) -> Result<f64, OutOfRange> {
    let mut sum = Sum::new(deviation_bound(largest, mean))?;
    xs.iter().for_each(|&x| sum.add((x - mean) * (x - mean)));
    Ok(sum.mean().map_or(0.0, f64::sqrt))
}

/// Records per part of a round run in parallel here; any other split
/// gives the same sums.
const PART: usize = 4096;

/// One round over `data` with `centres` (k rows of d in one slice): parts
/// of the records summed in parallel, then added. O(n d k).
pub fn round(data: ArrayView2<'_, f64>, centres: &[f64], shifts: &Shifts) -> RoundSums {
    let d = data.ncols();
    let k = centres.len() / d.max(1);
    let x = data.as_standard_layout();
    let rows = x.as_slice().expect("a standard-layout array is one slice");
    rows.par_chunks(PART * d.max(1))
        .map(|part| {
            let mut sums = RoundSums::new(k, d);
            for row in part.chunks_exact(d.max(1)) {
                sums.observe(row, centres, shifts);
            }
            sums
        })
        .reduce(
            || RoundSums::new(k, d),
            |mut a, b| {
                a.add(&b);
                a
            },
        )
}

#[cfg(test)]
mod tests {
    use super::*;
    use ndarray::Array2;
    use proptest::prelude::*;

    /// The exact mean and population standard deviation of a small set
    /// whose values are exact in binary: 2, 4, 4, 4, 5, 5, 7, 9 has mean 5
    /// and population standard deviation 2 (a common textbook example,
    /// checked by hand).
    #[test]
    fn exact_mean_and_sd_of_a_worked_example() {
        let xs = [2.0, 4.0, 4.0, 4.0, 5.0, 5.0, 7.0, 9.0];
        let m = mean(&xs, largest(&xs)).unwrap().unwrap();
        assert_eq!(m, 5.0);
        assert_eq!(sd_population(&xs, largest(&xs), m).unwrap(), 2.0);
        assert_eq!(mean(&[], 0.0).unwrap(), None);
        assert!(Sum::new(2e18).is_err(), "beyond 2^60 is refused");
    }

    fn sums_of(rows: &[Vec<f64>], centres: &[f64], shifts: &Shifts) -> RoundSums {
        let d = rows.first().map_or(1, Vec::len);
        let mut s = RoundSums::new(centres.len() / d, d);
        for r in rows {
            s.observe(r, centres, shifts);
        }
        s
    }

    proptest! {
        /// An exact sum split into parts, summed in any order, is the sum
        /// of one pass; its mean is within a few units in the last place of
        /// the mean in doubles (the values are floored at 2^-60 of the
        /// bound, far below that).
        #[test]
        fn a_sum_split_anywhere_is_the_same_sum(
            values in prop::collection::vec(-1.0e9..1.0e9f64, 1..400),
            cut in 0usize..400,
        ) {
            let bound = largest(&values);
            let cut = cut.min(values.len());
            let mut whole = Sum::new(bound).unwrap();
            values.iter().for_each(|&x| whole.add(x));
            let (mut a, mut b) = (Sum::new(bound).unwrap(), Sum::new(bound).unwrap());
            values[..cut].iter().rev().for_each(|&x| a.add(x));
            values[cut..].iter().for_each(|&x| b.add(x));
            b.merge(&a);
            prop_assert_eq!(b, whole);
            let float = values.iter().sum::<f64>() / values.len() as f64;
            let exact = whole.mean().unwrap();
            prop_assert!((exact - float).abs() <= 1e-6 * bound.max(1.0), "{} {}", exact, float);
        }

        /// Any split of the records into parts, each summed by itself and
        /// the parts added in any order, gives the sums of one pass.
        #[test]
        fn any_split_sums_to_the_same(
            values in prop::collection::vec(-1.0e6..1.0e6f64, 3..300),
            cuts in prop::collection::vec(0usize..100, 0..6),
            backwards in any::<bool>(),
        ) {
            let rows: Vec<Vec<f64>> = values.chunks_exact(3).map(<[f64]>::to_vec).collect();
            let centres = [0.0, 0.0, 0.0, 1.0e5, -3.0e5, 7.0, -2.0e5, 4.0e5, 1.0];
            let largest: Vec<f64> = (0..3)
                .map(|j| rows.iter().map(|r| r[j].abs()).fold(0.0, f64::max))
                .collect();
            let shifts = Shifts::of(&largest).unwrap();
            let whole = sums_of(&rows, &centres, &shifts);
            let mut at: Vec<usize> = cuts.iter().map(|c| c * rows.len() / 100).collect();
            at.extend([0, rows.len()]);
            at.sort_unstable();
            let mut parts: Vec<RoundSums> = at
                .windows(2)
                .map(|w| sums_of(&rows[w[0]..w[1]], &centres, &shifts))
                .collect();
            if backwards {
                parts.reverse();
            }
            let mut added = RoundSums::new(3, 3);
            for p in &parts {
                added.add(p);
            }
            prop_assert_eq!(&added, &whole);
            // And the parallel round, in its own parts, agrees.
            let flat: Vec<f64> = rows.concat();
            let data = Array2::from_shape_vec((rows.len(), 3), flat).unwrap();
            prop_assert_eq!(&round(data.view(), &centres, &shifts), &whole);
        }
    }

    proptest! {
        /// The fixed value is `floor(x * 2^shift)`, and the factor the
        /// power of two, for every shift the range gives.
        #[test]
        fn fixed_is_the_floor_of_the_scaled_value(
            largest in SMALLEST..LARGEST,
            fraction in -1.0..1.0f64,
        ) {
            let shift = Shifts::of(&[largest]).unwrap().features[0];
            prop_assert_eq!(shift.factor(), 2f64.powi(shift.exponent()));
            let x = largest * fraction;
            prop_assert_eq!(shift.fixed(x) as f64, (x * shift.factor()).floor());
        }
    }

    #[test]
    fn values_at_the_ends_of_the_range_are_held_and_beyond_them_refused() {
        let below_top = LARGEST - LARGEST * f64::EPSILON / 2.0;
        let shifts = Shifts::of(&[below_top, SMALLEST, 0.0]).unwrap();
        // The top: at most 2^61 in magnitude, either sign.
        assert!(shifts.features[0].fixed(below_top) <= 1 << 61);
        assert!(shifts.features[0].fixed(-below_top) >= -(1 << 61));
        // The bottom: the smallest allowed largest magnitude keeps its
        // 61 bits.
        assert_eq!(shifts.features[1].fixed(SMALLEST), 1 << 60);
        // A million records at the top do not overflow, and come back.
        let mut s = RoundSums::new(1, 3);
        let row = [below_top, -SMALLEST, 0.0];
        for _ in 0..1_000_000 {
            s.observe(&row, &[0.0, 0.0, 0.0], &shifts);
        }
        let c = s.centres(&shifts, &[0.0; 3]);
        // The sum of a million keeps more bits than a double: back within
        // one unit in the last place.
        assert!(
            (c[0] - below_top).abs() <= below_top * f64::EPSILON,
            "{}",
            c[0]
        );
        assert_eq!(c[1..], [-SMALLEST, 0.0]);
        assert!(s.within(&shifts) > 0.0);

        assert_eq!(
            Shifts::of(&[1.0, LARGEST]),
            Err(OutOfRange::TooLarge {
                feature: 1,
                largest: LARGEST
            })
        );
        assert!(matches!(
            Shifts::of(&[SMALLEST / 2.0]),
            Err(OutOfRange::TooSmall { feature: 0, .. })
        ));
        assert_eq!(
            Shifts::of(&[f64::NAN]),
            Err(OutOfRange::NotFinite { feature: 0 })
        );
        let data = Array2::from_shape_vec((2, 1), vec![1.0, f64::INFINITY]).unwrap();
        assert!(Shifts::of_data(data.view()).is_err());
    }

    #[test]
    fn a_round_of_exact_sums_lands_where_floating_sums_do() {
        // The centres equal the plain means to within a few units in the
        // last place (the fixed values keep 61 bits against 53).
        let rows: Vec<Vec<f64>> = (0..1000)
            .map(|i| {
                let t = f64::from(i);
                vec![(t * 0.37).sin() * 3.0, (t * 0.11).cos() - 0.5]
            })
            .collect();
        let centres = [-1.0, 0.0, 1.0, 0.0];
        let shifts = Shifts::of(&[3.0, 1.5]).unwrap();
        let s = sums_of(&rows, &centres, &shifts);
        let c = s.centres(&shifts, &centres);
        for seg in 0..2 {
            let members: Vec<&Vec<f64>> = rows
                .iter()
                .filter(|r| {
                    let (b, _, _) = crate::engine::kmeans::nearest_two(r, &centres, 2);
                    b as usize == seg
                })
                .collect();
            assert_eq!(members.len() as u64, s.counts[seg]);
            for j in 0..2 {
                let mean = members.iter().map(|r| r[j]).sum::<f64>() / members.len() as f64;
                assert!(
                    (c[seg * 2 + j] - mean).abs() < 1e-13,
                    "{} {}",
                    c[seg * 2 + j],
                    mean
                );
            }
        }
    }
}
