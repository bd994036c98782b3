//! The seeded sample drawn where the data lives: the `size` records whose
//! rank is smallest, a record's rank being the SHA-256 digest of the
//! recipe's seed, a colon and the record's key as text, written in
//! lower-case hexadecimal. The draw depends on nothing but the seed and the
//! keys: not on the order of the rows, how the table is split, which
//! worker reads what, or the engine (PostgreSQL and DataFusion compute the
//! same digest; this module computes it too, to check them and to draw from
//! a file the same way). Hexadecimal text of one length sorts as the
//! digest's number does, so `ORDER BY rank` is the same order everywhere;
//! two records with one rank (a repeated key) are ordered by key.
//!
//! Cost in the engine: one scan, a digest per record, and a top-`size`
//! sort: O(n log size).

use crate::text::hex;
use sha2::{Digest, Sha256};

/// The SQL dialects that differ in how text is digested.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Dialect {
    /// PostgreSQL: `sha256` takes bytes (`convert_to` gives the UTF-8).
    Postgres,
    /// DataFusion: `sha256` takes text and digests its UTF-8.
    DataFusion,
}

/// A record's rank: the digest of `seed:key`, in lower-case hexadecimal.
pub fn rank(seed: u64, key: &str) -> String {
    hex(&digest(seed, key))
}

/// The SHA-256 digest of `seed:key`, its bytes: the seed's part hashed
/// without building the text (a run in passes digests every key).
pub fn digest(seed: u64, key: &str) -> [u8; 32] {
    let mut h = Sha256::new();
    let mut prefix = itoa_u64(seed);
    prefix.push(b':');
    h.update(&prefix);
    h.update(key.as_bytes());
    h.finalize().into()
}

/// `n` in decimal digits.
fn itoa_u64(mut n: u64) -> Vec<u8> {
    let mut digits = Vec::with_capacity(21);
    loop {
        digits.push(b'0' + (n % 10) as u8);
        n /= 10;
        if n == 0 {
            break;
        }
    }
    digits.reverse();
    digits
}

/// The rank in SQL, for the key expression `key` (any type: read as its
/// text).
pub fn rank_sql(seed: u64, key: &str, dialect: Dialect) -> String {
    let text = format!("CONCAT('{seed}:', CAST({key} AS VARCHAR))");
    match dialect {
        Dialect::Postgres => format!("encode(sha256(convert_to({text}, 'UTF8')), 'hex')"),
        Dialect::DataFusion => format!("encode(sha256({text}), 'hex')"),
    }
}

/// The query drawing the sample from `source` (as it may follow `FROM`):
/// the key as text and the `columns` (expressions, selected as they are)
/// of the `size` records of smallest rank, in rank order.
pub fn sample_query(
    source: &str,
    key: &str,
    columns: &[String],
    seed: u64,
    size: usize,
    dialect: Dialect,
) -> String {
    let mut selected = vec![format!("CAST({key} AS VARCHAR) AS sample_key")];
    selected.extend(columns.iter().cloned());
    format!(
        "SELECT {}\nFROM {source}\nORDER BY {}, CAST({key} AS VARCHAR)\nLIMIT {size}",
        selected.join(", "),
        rank_sql(seed, key, dialect)
    )
}

/// The keys of the sample this module draws from `keys`: the `size`
/// smallest by rank, in rank order (then by key). O(n log n).
pub fn draw<'a>(keys: impl IntoIterator<Item = &'a str>, seed: u64, size: usize) -> Vec<&'a str> {
    let keys: Vec<&str> = keys.into_iter().collect();
    drawn_places(&keys, seed, size)
        .into_iter()
        .map(|i| keys[i])
        .collect()
}

/// [`draw`] as places in `keys`: the records of the sample, in rank order
/// (then by key). The ranks are computed in parallel. O(n log n).
pub fn drawn_places(keys: &[&str], seed: u64, size: usize) -> Vec<usize> {
    use rayon::prelude::*;
    let mut ranked: Vec<([u8; 32], usize)> = keys
        .par_iter()
        .enumerate()
        .map(|(i, k)| (digest(seed, k), i))
        .collect();
    // The digest's bytes order as its lower-case hex does; equal digests
    // (equal keys) order by key, then place.
    ranked.par_sort_unstable_by(|a, b| {
        a.0.cmp(&b.0)
            .then(keys[a.1].cmp(keys[b.1]))
            .then(a.1.cmp(&b.1))
    });
    ranked.into_iter().take(size).map(|(_, i)| i).collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_rank_is_the_digest_of_seed_colon_key() {
        // The SHA-256 digest of "abc", the published test vector of FIPS
        // 180-2, appendix B.1 (the value recalled from memory): the digest
        // and its hexadecimal writing.
        assert_eq!(
            hex(&Sha256::digest(b"abc")),
            "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
        );
        assert_eq!(rank(7, "M1"), hex(&Sha256::digest(b"7:M1")));
        assert_eq!(
            digest(18_446_744_073_709_551_615, "é"),
            <[u8; 32]>::from(Sha256::digest("18446744073709551615:é".as_bytes()))
        );
        assert_eq!(digest(0, ""), <[u8; 32]>::from(Sha256::digest(b"0:")));
        assert_ne!(rank(7, "M1"), rank(8, "M1"));
        assert_eq!(rank(7, "M1").len(), 64);
    }

    #[test]
    fn the_draw_ignores_the_order_of_the_records() {
        let keys: Vec<String> = (0..500).map(|i| format!("M{i}")).collect();
        let forward = draw(keys.iter().map(String::as_str), 2026, 40);
        let backward = draw(keys.iter().rev().map(String::as_str), 2026, 40);
        assert_eq!(forward, backward);
        assert_eq!(forward.len(), 40);
        assert_ne!(forward, draw(keys.iter().map(String::as_str), 2027, 40));
    }
}
