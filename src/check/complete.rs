//! Completion in context, shared by the interactive session and the
//! language server: statement words at the start of a line, a statement's
//! options after it, the allowed words after an option that takes a word,
//! and otherwise column names of the data.

use super::vocab;
use crate::plan::{Criterion, Linkage, Metric, Scale, Seeding, Transform};

/// Candidates for the word being typed at the end of `before` (the
/// statement's text up to the cursor), given the data's column names.
/// Returns the candidates that start with the partial word, sorted.
pub fn complete(before: &str, columns: &[String]) -> Vec<String> {
    let ends_in_space = before.ends_with(|c: char| c.is_whitespace() || c == ',');
    let words: Vec<&str> = before
        .split(|c: char| c.is_whitespace() || c == ',')
        .filter(|w| !w.is_empty())
        .collect();
    let (partial, done): (&str, &[&str]) = if ends_in_space || words.is_empty() {
        ("", &words[..])
    } else {
        (words[words.len() - 1], &words[..words.len() - 1])
    };
    let candidates: Vec<String> = match done {
        [] => vocab::statement_words().map(String::from).collect(),
        [first, ..] => after(
            first,
            done.last().copied().unwrap_or(first),
            done.len(),
            columns,
        ),
    };
    let mut out: Vec<String> = candidates
        .into_iter()
        .filter(|c| c.starts_with(partial))
        .collect();
    out.sort();
    out.dedup();
    out
}

fn owned(names: &[&str]) -> Vec<String> {
    names.iter().map(|s| s.to_string()).collect()
}

/// Candidates after statement `first`, the previous word being `prev`.
fn after(first: &str, prev: &str, count: usize, columns: &[String]) -> Vec<String> {
    let by_option = match prev {
        "linkage" => Some(owned(&Linkage::NAMES)),
        "distance" => Some(owned(&Metric::NAMES)),
        "seeding" => Some(owned(&Seeding::NAMES)),
        "by" => Some(owned(&Criterion::NAMES)),
        "key" | "column" => Some(columns.to_vec()),
        _ => None,
    };
    if let Some(c) = by_option {
        return c;
    }
    match first {
        "scale" => owned(&Scale::NAMES),
        "save" if count == 1 => owned(&vocab::SAVE_WHAT),
        "kmeans" => vocab::names(vocab::KMEANS_OPTIONS)
            .map(String::from)
            .collect(),
        "tree" => vocab::names(vocab::TREE_OPTIONS)
            .map(String::from)
            .collect(),
        "evidence" => vocab::names(vocab::EVIDENCE_OPTIONS)
            .map(String::from)
            .collect(),
        "input" => vocab::names(vocab::INPUT_OPTIONS)
            .map(String::from)
            .collect(),
        "choose" if count == 1 => owned(&["k"]),
        "choose" => owned(&["by"]),
        "missing" if count == 1 => owned(&["drop", "fill"]),
        "missing" if prev == "fill" => owned(&vocab::FILL_WORDS),
        "missing" => owned(&["for"]),
        "transform" if count >= 2 => {
            let mut c = owned(&Transform::NAMES);
            c.push("clip".into());
            c.extend(columns.iter().cloned());
            c
        }
        "features" if count == 1 => {
            let mut c = vec!["all".to_string()];
            c.extend(columns.iter().cloned());
            c
        }
        "validate" if count == 1 => owned(&["against"]),
        "compare" if count == 1 => owned(&["with"]),
        _ => columns.to_vec(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn cols() -> Vec<String> {
        vec!["visits_per_month".into(), "basket_value".into()]
    }

    #[test]
    fn statement_words_at_the_start() {
        assert_eq!(complete("ch", &cols()), ["choose"]);
        assert!(complete("", &cols()).contains(&"kmeans".to_string()));
    }

    #[test]
    fn options_and_their_words_in_context() {
        assert_eq!(complete("kmeans k 2..9 res", &cols()), ["restarts"]);
        assert_eq!(complete("tree linkage w", &cols()), ["ward", "weighted"]);
        assert_eq!(
            complete("choose k by s", &cols()),
            ["silhouette", "stability"]
        );
    }

    #[test]
    fn column_names_elsewhere() {
        assert_eq!(
            complete("features visits_per_month, bas", &cols()),
            ["basket_value"]
        );
        assert_eq!(complete("weight vis", &cols()), ["visits_per_month"]);
    }
}
