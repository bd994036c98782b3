//! Exact order statistics of columns read in passes (medians, quantiles),
//! by radix selection: each value is mapped to a 64-bit key that orders as
//! the value does, and each pass narrows every wanted rank to the group of
//! values sharing the next 16 bits of its key, from a histogram of those
//! bits among the values of its group so far. A group small enough
//! ([`COLLECT`] values) is collected whole in the next pass and the rank
//! picked from it. The result is the value at that rank, exactly as a
//! sort of every value would give it, whatever the order or the split of
//! the records: histograms and collections merge by addition and
//! concatenation.
//!
//! # Cost
//! At most four histogram passes and one collecting pass, in practice two
//! or three (the first histogram splits by sign, exponent and the top
//! four bits of the mantissa, the second by the next sixteen). Memory: a
//! histogram of 2^16 counts (512 KiB) per distinct group being narrowed,
//! per worker, and at most [`COLLECT`] values per collected group.
//!
//! Method: radix selection over the bits of an order-preserving key, as in
//! most-significant-digit radix sorting (Knuth, *The Art of Computer
//! Programming*, vol. 3, section 5.2.5), keeping only the digit that holds
//! the wanted rank.

/// Bits of a key narrowed per pass.
const DIGIT: u32 = 16;

/// A group of at most this many values is collected whole.
pub const COLLECT: u64 = 1 << 16;

/// The key of `x`, ordered as the doubles are (`-0.0` taken as `0.0`).
#[inline]
pub fn key(x: f64) -> u64 {
    let b = if x == 0.0 { 0 } else { x.to_bits() };
    if b >> 63 == 1 {
        !b
    } else {
        b | (1 << 63)
    }
}

/// The double of a key.
pub fn value(key: u64) -> f64 {
    f64::from_bits(if key >> 63 == 1 {
        key & !(1 << 63)
    } else {
        !key
    })
}

/// One group looked at in a pass: the values of `column` whose key's top
/// `bits` bits are `prefix`; counted by their next digit, or collected.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Probe {
    pub column: usize,
    bits: u32,
    prefix: u64,
    collect: bool,
}

impl Probe {
    fn holds(&self, key: u64) -> bool {
        self.bits == 0 || key >> (64 - self.bits) == self.prefix
    }
}

/// What a pass gathered for one probe.
#[derive(Debug, Clone, PartialEq)]
pub enum Tally {
    Counts(Vec<u64>),
    Values(Vec<f64>),
}

impl Tally {
    /// Takes in one value of the probe's column.
    #[inline]
    pub fn observe(&mut self, probe: &Probe, x: f64) {
        let k = key(x);
        if !probe.holds(k) {
            return;
        }
        match self {
            Tally::Counts(c) => {
                let digit = ((k << probe.bits) >> (64 - DIGIT)) as usize;
                c[digit] += 1;
            }
            Tally::Values(v) => v.push(x),
        }
    }

    fn merge(&mut self, other: Tally) {
        match (self, other) {
            (Tally::Counts(a), Tally::Counts(b)) => a.iter_mut().zip(b).for_each(|(a, b)| *a += b),
            (Tally::Values(a), Tally::Values(b)) => a.extend(b),
            _ => {}
        }
    }
}

/// Merges one worker's tallies into another's, probe by probe.
pub fn merge(into: &mut [Tally], from: Vec<Tally>) {
    into.iter_mut().zip(from).for_each(|(a, b)| a.merge(b));
}

/// One wanted order statistic: the value of rank `rank` (0-based) among
/// `group` values of `column` sharing the key's top `bits` bits `prefix`.
#[derive(Debug, Clone)]
struct Want {
    column: usize,
    rank: u64,
    group: u64,
    bits: u32,
    prefix: u64,
    found: Option<f64>,
}

/// Order statistics being selected over passes.
#[derive(Debug, Clone)]
pub struct Selection {
    wants: Vec<Want>,
    probes: Vec<Probe>,
    collect: u64,
}

impl Selection {
    /// The values of rank `rank` of column `column` for each of `wants`,
    /// among `counts[column]` values; a rank past the count is clamped to
    /// the last. Groups up to [`COLLECT`] values are collected.
    pub fn new(counts: &[u64], wants: &[(usize, u64)]) -> Selection {
        Selection::collecting(counts, wants, COLLECT)
    }

    /// [`Selection::new`] collecting groups of up to `collect` values.
    pub fn collecting(counts: &[u64], wants: &[(usize, u64)], collect: u64) -> Selection {
        let wants = wants
            .iter()
            .map(|&(column, rank)| {
                let group = counts.get(column).copied().unwrap_or(0);
                Want {
                    column,
                    rank: rank.min(group.saturating_sub(1)),
                    group,
                    bits: 0,
                    prefix: 0,
                    found: (group == 0).then_some(f64::NAN),
                }
            })
            .collect();
        let mut s = Selection {
            wants,
            probes: Vec::new(),
            collect,
        };
        s.plan();
        s
    }

    /// The probes of the next pass, one per distinct group still wanted.
    fn plan(&mut self) {
        let mut probes: Vec<Probe> = Vec::new();
        for w in self.wants.iter().filter(|w| w.found.is_none()) {
            let p = Probe {
                column: w.column,
                bits: w.bits,
                prefix: w.prefix,
                collect: w.group <= self.collect,
            };
            if !probes.contains(&p) {
                probes.push(p);
            }
        }
        self.probes = probes;
    }

    /// What the next pass looks for; empty when every value is found.
    pub fn probes(&self) -> &[Probe] {
        &self.probes
    }

    /// Empty tallies for the next pass's probes, one set per worker.
    pub fn tallies(&self) -> Vec<Tally> {
        self.probes
            .iter()
            .map(|p| match p.collect {
                true => Tally::Values(Vec::new()),
                false => Tally::Counts(vec![0; 1 << DIGIT]),
            })
            .collect()
    }

    /// Narrows every wanted rank by a pass's merged tallies.
    pub fn settle(&mut self, tallies: Vec<Tally>) {
        let mut tallies = tallies;
        for t in tallies.iter_mut() {
            if let Tally::Values(v) = t {
                v.sort_unstable_by(f64::total_cmp);
            }
        }
        for w in self.wants.iter_mut().filter(|w| w.found.is_none()) {
            let Some(at) = self
                .probes
                .iter()
                .position(|p| p.column == w.column && p.bits == w.bits && p.prefix == w.prefix)
            else {
                continue;
            };
            match &tallies[at] {
                Tally::Values(v) => {
                    w.found = v
                        .get(w.rank as usize)
                        .map(|&x| if x == 0.0 { 0.0 } else { x });
                }
                Tally::Counts(counts) => {
                    let mut below = 0;
                    for (digit, &c) in counts.iter().enumerate() {
                        if below + c > w.rank {
                            w.rank -= below;
                            w.group = c;
                            w.prefix = (w.prefix << DIGIT) | digit as u64;
                            w.bits += DIGIT;
                            break;
                        }
                        below += c;
                    }
                    if w.bits == 64 {
                        w.found = Some(value(w.prefix));
                    }
                }
            }
        }
        self.plan();
    }

    /// The wanted values, in the order asked for, once all are found (a
    /// column with no values gives NaN).
    pub fn found(&self) -> Option<Vec<f64>> {
        self.wants.iter().map(|w| w.found).collect()
    }
}

/// The ranks (0-based) the quantile at `q` of `n` values reads, and the
/// fraction between them: Hyndman and Fan's definition 7, as
/// [`crate::engine::stats::quantile_sorted`] reads them.
pub fn quantile_ranks(n: u64, q: f64) -> (u64, u64, f64) {
    let pos = q.clamp(0.0, 1.0) * n.saturating_sub(1) as f64;
    let lo = pos.floor() as u64;
    let hi = (lo + 1).min(n.saturating_sub(1));
    (lo, hi, pos - lo as f64)
}

/// The quantile from its two order statistics, with the arithmetic of
/// [`crate::engine::stats::quantile_sorted`].
pub fn interpolate(at_lo: f64, at_hi: f64, frac: f64) -> f64 {
    at_lo + (at_hi - at_lo) * frac
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::engine::stats;
    use proptest::prelude::*;

    /// Runs a selection over `columns` split into `parts` workers, as a
    /// pass would; returns the values and the passes made.
    fn select(
        columns: &[Vec<f64>],
        wants: &[(usize, u64)],
        collect: u64,
        parts: usize,
    ) -> (Vec<f64>, usize) {
        let counts: Vec<u64> = columns.iter().map(|c| c.len() as u64).collect();
        let mut s = Selection::collecting(&counts, wants, collect);
        let mut passes = 0;
        while !s.probes().is_empty() {
            passes += 1;
            let mut total = s.tallies();
            for part in 0..parts {
                let mut t = s.tallies();
                for (p, tally) in s.probes().iter().zip(t.iter_mut()) {
                    let col = &columns[p.column];
                    for x in col.iter().skip(part).step_by(parts) {
                        tally.observe(p, *x);
                    }
                }
                merge(&mut total, t);
            }
            s.settle(total);
            assert!(passes <= 5, "at most four histograms and a collection");
        }
        (s.found().unwrap(), passes)
    }

    #[test]
    fn keys_order_as_the_doubles_do() {
        let xs = [
            f64::NEG_INFINITY,
            -1e300,
            -2.5,
            -1e-300,
            0.0,
            1e-310,
            1.0,
            1.5,
            1e300,
        ];
        for pair in xs.windows(2) {
            assert!(key(pair[0]) < key(pair[1]), "{pair:?}");
        }
        for &x in &xs {
            assert_eq!(value(key(x)), x);
        }
        assert_eq!(key(-0.0), key(0.0));
    }

    proptest! {
        /// The quantiles selected over passes, split among workers, are the
        /// quantiles of the whole sorted column to the bit, through
        /// histograms (a collect threshold of 8) or collected outright.
        #[test]
        fn selected_quantiles_are_the_sorted_ones(
            values in prop::collection::vec(
                prop_oneof![-1.0e6..1.0e6f64, Just(0.0), Just(3.25), Just(-7.0), 1e-12..1e-9f64],
                1..600,
            ),
            qs in prop::collection::vec(0.0..=1.0f64, 1..5),
            collect in prop_oneof![Just(8u64), Just(COLLECT)],
            parts in 1usize..4,
        ) {
            let mut qs = qs;
            qs.sort_by(f64::total_cmp);
            let n = values.len() as u64;
            let wants: Vec<(usize, u64)> = qs
                .iter()
                .flat_map(|&q| {
                    let (lo, hi, _) = quantile_ranks(n, q);
                    [(0, lo), (0, hi)]
                })
                .collect();
            let (found, _) = select(std::slice::from_ref(&values), &wants, collect, parts);
            let mut sorted = values.clone();
            sorted.sort_by(f64::total_cmp);
            for (i, &q) in qs.iter().enumerate() {
                let (_, _, frac) = quantile_ranks(n, q);
                let here = interpolate(found[2 * i], found[2 * i + 1], frac);
                let there = stats::quantile_sorted(&sorted, q).unwrap();
                prop_assert_eq!(here.to_bits(), (there + 0.0).to_bits(), "q {}", q);
            }
        }
    }

    #[test]
    fn a_wide_column_is_narrowed_in_a_few_passes() {
        let column: Vec<f64> = (0..200_000)
            .map(|i| ((i * 7919) % 200_000) as f64 * 0.37 - 1e4)
            .collect();
        let (found, passes) = select(
            std::slice::from_ref(&column),
            &[(0, 0), (0, 99_999), (0, 199_999)],
            COLLECT,
            2,
        );
        let mut sorted = column;
        sorted.sort_by(f64::total_cmp);
        assert_eq!(found, vec![sorted[0], sorted[99_999], sorted[199_999]]);
        assert!(passes <= 3, "{passes} passes");
    }
}
