//! Seeded random streams.
//!
//! The generator is ChaCha20 (`rand_chacha::ChaCha20Rng`), whose output for
//! a given key and stream is fixed by its specification, so a seed gives the
//! same draws on every machine. The key comes from the recipe's seed through
//! `SeedableRng::seed_from_u64`, which rand_core documents as value-stable;
//! the 64-bit stream number separates independent uses (one per k and
//! restart, say), so parallel work never shares a stream.
//!
//! Uniform numbers are derived here from raw 64-bit words rather than through
//! rand's distributions, so an upgrade of rand cannot change a result.

use super::weights::{draw_by_weight, Weights};
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha20Rng;

/// The name of the generator, for run records and reports.
pub const GENERATOR: &str = "ChaCha20 (rand_chacha), key from seed_from_u64, one stream per use";

/// A seeded stream of random numbers.
pub struct Stream(ChaCha20Rng);

impl Stream {
    /// The stream numbered `stream` under `seed`.
    pub fn new(seed: u64, stream: u64) -> Stream {
        let mut rng = ChaCha20Rng::seed_from_u64(seed);
        rng.set_stream(stream);
        Stream(rng)
    }

    /// A uniform number in [0, 1) with 53 random bits.
    pub fn unit(&mut self) -> f64 {
        (self.0.next_u64() >> 11) as f64 * (1.0 / (1u64 << 53) as f64)
    }

    /// A uniform whole number in `0..n`, without modulo bias (rejection
    /// sampling). `n` must be positive.
    pub fn below(&mut self, n: usize) -> usize {
        debug_assert!(n > 0);
        let n = n as u64;
        // The largest multiple of n that fits; draws at or above it are
        // rejected so every residue is equally likely.
        let zone = u64::MAX - (u64::MAX % n);
        loop {
            let x = self.0.next_u64();
            if x < zone {
                return (x % n) as usize;
            }
        }
    }
}

/// k records spread out as k-means++ spreads its starts: the first drawn
/// uniformly, each next one with probability proportional to `weight(i,
/// j)`, the weight of record `i` against the nearest chosen record `j` (a
/// squared distance for k-means-like costs, the dissimilarity itself for
/// medoids). `None` when fewer than k records have weight apart (too few
/// distinct records). With record weights `w` the first is drawn by
/// weight and each next one by record weight times `weight(i, j)`. O(n k)
/// calls of `weight`.
pub fn spread_records(
    (n, w): (usize, Weights<'_>),
    k: usize,
    rng: &mut Stream,
    weight: impl Fn(usize, usize) -> f64,
) -> Option<Vec<usize>> {
    let first = match w.as_slice() {
        Some(ws) => draw_by_weight(ws, rng.unit(), w.total(n)),
        None => rng.below(n),
    };
    let mut chosen = vec![first];
    let mut nearest: Vec<f64> = (0..n).map(|i| weight(i, chosen[0])).collect();
    while chosen.len() < k {
        let total: f64 = (nearest.iter().enumerate()).map(|(i, d)| w.at(i) * d).sum();
        if total <= 0.0 {
            return None;
        }
        let target = rng.unit() * total;
        let mut acc = 0.0;
        // The last record with weight is the fallback against rounding.
        let mut pick = nearest.iter().rposition(|&d| d > 0.0).unwrap_or(0);
        for (i, &d) in nearest.iter().enumerate() {
            acc += w.at(i) * d;
            if d > 0.0 && acc > target {
                pick = i;
                break;
            }
        }
        chosen.push(pick);
        for (i, near) in nearest.iter_mut().enumerate() {
            *near = near.min(weight(i, pick));
        }
    }
    Some(chosen)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_same_seed_and_stream_give_the_same_draws() {
        let a: Vec<u64> = (0..4).map(|_| Stream::new(7, 3).0.next_u64()).collect();
        assert!(a.windows(2).all(|w| w[0] == w[1]));
        let mut s = Stream::new(7, 3);
        let mut t = Stream::new(7, 4);
        assert_ne!(s.0.next_u64(), t.0.next_u64());
    }

    #[test]
    fn draws_stay_in_range() {
        let mut s = Stream::new(1, 0);
        for _ in 0..1000 {
            let u = s.unit();
            assert!((0.0..1.0).contains(&u));
            assert!(s.below(7) < 7);
        }
    }
}
