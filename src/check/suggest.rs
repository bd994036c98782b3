//! "Did you mean": the nearest name in scope, by edit distance.

/// Levenshtein distance over characters. O(|a| |b|) time, O(|b|) memory.
pub fn edit_distance(a: &str, b: &str) -> usize {
    let b: Vec<char> = b.chars().collect();
    let mut prev: Vec<usize> = (0..=b.len()).collect();
    let mut cur = vec![0; b.len() + 1];
    for (i, ca) in a.chars().enumerate() {
        cur[0] = i + 1;
        for (j, cb) in b.iter().enumerate() {
            let cost = usize::from(ca != *cb);
            cur[j + 1] = (prev[j] + cost).min(prev[j + 1] + 1).min(cur[j] + 1);
        }
        std::mem::swap(&mut prev, &mut cur);
    }
    prev[b.len()]
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
    }
}
