//! "Did you mean": the nearest name in scope, by edit distance.

/// Edit distance over characters counting insertions, deletions,
/// substitutions and transpositions of neighbours as one edit each (the
/// optimal string alignment distance; F. J. Damerau, "A technique for
/// computer detection and correction of spelling errors", CACM 7(3), 1964).
/// O(|a| |b|) time and memory.
pub fn edit_distance(a: &str, b: &str) -> usize {
    let a: Vec<char> = a.chars().collect();
    let b: Vec<char> = b.chars().collect();
    let mut d = vec![vec![0usize; b.len() + 1]; a.len() + 1];
    for (i, row) in d.iter_mut().enumerate() {
        row[0] = i;
    }
    for (j, cell) in d[0].iter_mut().enumerate() {
        *cell = j;
    }
    for i in 1..=a.len() {
        for j in 1..=b.len() {
            let cost = usize::from(a[i - 1] != b[j - 1]);
            d[i][j] = (d[i - 1][j] + 1)
                .min(d[i][j - 1] + 1)
                .min(d[i - 1][j - 1] + cost);
            if i > 1 && j > 1 && a[i - 1] == b[j - 2] && a[i - 2] == b[j - 1] {
                d[i][j] = d[i][j].min(d[i - 2][j - 2] + 1);
            }
        }
    }
    d[a.len()][b.len()]
}

/// The candidate nearest to `word`, if it is close enough to be a likely
/// misspelling: at most a third of the word's length in edits (at least
/// one, at most three). Ties go to the earlier candidate.
pub fn nearest<'a, I>(word: &str, candidates: I) -> Option<String>
where
    I: IntoIterator<Item = &'a str>,
{
    let limit = (word.chars().count() / 3).clamp(1, 3);
    let lower = word.to_lowercase();
    let mut best: Option<(usize, &str)> = None;
    for c in candidates {
        let d = edit_distance(&lower, &c.to_lowercase());
        if d <= limit && best.is_none_or(|(bd, _)| d < bd) {
            best = Some((d, c));
        }
    }
    best.map(|(_, c)| c.to_string())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_close_misspelling_is_suggested() {
        assert_eq!(
            nearest("vists_per_month", ["visits_per_month", "tenure_months"]),
            Some("visits_per_month".into())
        );
        assert_eq!(nearest("sead", ["seed", "scale"]), Some("seed".into()));
    }

    #[test]
    fn a_distant_word_gets_no_suggestion() {
        assert_eq!(nearest("colour", ["seed", "scale"]), None);
    }

    #[test]
    fn edit_distance_counts_insertions_deletions_and_substitutions() {
        assert_eq!(edit_distance("kitten", "sitting"), 3);
        assert_eq!(edit_distance("", "abc"), 3);
        assert_eq!(edit_distance("rnu", "run"), 1);
    }
}
