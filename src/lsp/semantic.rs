//! Semantic tokens: each word of a recipe classified as the language
//! sees it, so editors that support them colour recipes without a grammar
//! file of their own. Statement words and the fixed words of a statement
//! (`all`, `for`, `by`...) are keywords, option names properties, the
//! words an option or statement takes enum members, anything else a
//! column (a variable); numbers and ranges, quoted texts and comments are
//! themselves.

use crate::check::vocab;
use lsp_types::{SemanticToken, SemanticTokenType, SemanticTokens, SemanticTokensLegend};

/// Token types, in the order of the legend.
#[derive(Clone, Copy, PartialEq, Debug)]
enum Kind {
    Keyword = 0,
    Property = 1,
    EnumMember = 2,
    Variable = 3,
    Number = 4,
    String = 5,
    Comment = 6,
}

pub fn legend() -> SemanticTokensLegend {
    SemanticTokensLegend {
        token_types: vec![
            SemanticTokenType::KEYWORD,
            SemanticTokenType::PROPERTY,
            SemanticTokenType::ENUM_MEMBER,
            SemanticTokenType::VARIABLE,
            SemanticTokenType::NUMBER,
            SemanticTokenType::STRING,
            SemanticTokenType::COMMENT,
        ],
        token_modifiers: Vec::new(),
    }
}

/// Words with a fixed place in a statement's shape.
const FIXED: [&str; 11] = [
    "all", "except", "for", "drop", "keep", "fill", "clip", "k", "by", "against", "with",
];

/// The tokens of a whole recipe, line by line (no token spans a line).
pub fn tokens(text: &str) -> SemanticTokens {
    let mut found: Vec<(u32, u32, u32, Kind)> = Vec::new();
    // The statement a line belongs to: a line after one ending in a comma
    // continues it.
    let mut statement = String::new();
    let mut continues = false;
    for (line_no, line) in text.lines().enumerate() {
        let mut first_word = !continues;
        let mut last_code = None;
        for (start, end, kind) in lex(line) {
            let word = &line[start..end];
            let kind = match kind {
                Lexeme::Word if first_word => {
                    first_word = false;
                    statement = word.to_string();
                    vocab::statement(word).map(|_| Kind::Keyword)
                }
                Lexeme::Word => Some(classify(&statement, word)),
                Lexeme::Number => Some(Kind::Number),
                Lexeme::Text => Some(Kind::String),
                Lexeme::Comment => Some(Kind::Comment),
                Lexeme::Comma => None,
            };
            if kind != Some(Kind::Comment) {
                last_code = Some(word);
            }
            if let Some(kind) = kind {
                let col = utf16(&line[..start]);
                found.push((line_no as u32, col, utf16(word), kind));
            }
        }
        if last_code.is_some() {
            continues = last_code == Some(",");
        }
    }
    let mut data = Vec::with_capacity(found.len());
    let (mut line, mut col) = (0, 0);
    for (l, c, len, kind) in found {
        let delta_start = if l == line { c - col } else { c };
        data.push(SemanticToken {
            delta_line: l - line,
            delta_start,
            length: len,
            token_type: kind as u32,
            token_modifiers_bitset: 0,
        });
        (line, col) = (l, c);
    }
    SemanticTokens {
        result_id: None,
        data,
    }
}

fn utf16(s: &str) -> u32 {
    s.encode_utf16().count() as u32
}

/// A word after the statement word.
fn classify(statement: &str, word: &str) -> Kind {
    if vocab::options_for(statement).iter().any(|o| o.name == word) {
        Kind::Property
    } else if FIXED.contains(&word) && vocab::value(statement, word).is_some() {
        Kind::Keyword
    } else if vocab::value(statement, word).is_some() {
        Kind::EnumMember
    } else {
        Kind::Variable
    }
}

#[derive(Clone, Copy, PartialEq, Debug)]
enum Lexeme {
    Word,
    Number,
    Text,
    Comment,
    Comma,
}

/// The pieces of one line with their byte ranges.
fn lex(line: &str) -> Vec<(usize, usize, Lexeme)> {
    let bytes = line.as_bytes();
    let mut out = Vec::new();
    let mut i = 0;
    while i < bytes.len() {
        let start = i;
        let lexeme = match bytes[i] {
            b' ' | b'\t' | b'\r' => {
                i += 1;
                continue;
            }
            b'#' => {
                i = bytes.len();
                Lexeme::Comment
            }
            b',' => {
                i += 1;
                Lexeme::Comma
            }
            b'"' => {
                i += 1;
                while i < bytes.len() && bytes[i] != b'"' {
                    i += if bytes[i] == b'\\' { 2 } else { 1 };
                }
                i = (i + 1).min(bytes.len());
                Lexeme::Text
            }
            c => {
                while i < bytes.len() && !b" \t\r,#\"".contains(&bytes[i]) {
                    i += 1;
                }
                let numeric = c.is_ascii_digit()
                    || (c == b'-' && bytes.get(start + 1).is_some_and(u8::is_ascii_digit))
                    || (c == b'.' && bytes.get(start + 1).is_some_and(u8::is_ascii_digit));
                if numeric {
                    Lexeme::Number
                } else {
                    Lexeme::Word
                }
            }
        };
        out.push((start, i.min(bytes.len()), lexeme));
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The tokens back as (line, column, text, kind), decoded from deltas.
    fn decoded(text: &str) -> Vec<(u32, u32, String, Kind)> {
        let kinds = [
            Kind::Keyword,
            Kind::Property,
            Kind::EnumMember,
            Kind::Variable,
            Kind::Number,
            Kind::String,
            Kind::Comment,
        ];
        let lines: Vec<&str> = text.lines().collect();
        let (mut line, mut col) = (0, 0);
        tokens(text)
            .data
            .iter()
            .map(|t| {
                if t.delta_line > 0 {
                    col = 0;
                }
                line += t.delta_line;
                col += t.delta_start;
                let l = lines[line as usize];
                let s: String = l
                    .chars()
                    .skip(col as usize)
                    .take(t.length as usize)
                    .collect();
                (line, col, s, kinds[t.token_type as usize])
            })
            .collect()
    }

    #[test]
    fn each_word_is_classed_as_the_language_sees_it() {
        let text = "input \"data/m.csv\" key member_id  # the file\nfeatures visits,\n         basket\ntransform basket log1p\nkmeans k 2..8 seeding kmeans++\nchoose k by calinski-harabasz\n";
        let got = decoded(text);
        let find = |w: &str| got.iter().find(|t| t.2 == w).map(|t| t.3);
        assert_eq!(find("input"), Some(Kind::Keyword));
        assert_eq!(find("\"data/m.csv\""), Some(Kind::String));
        assert_eq!(find("key"), Some(Kind::Property));
        assert_eq!(find("member_id"), Some(Kind::Variable));
        assert_eq!(find("# the file"), Some(Kind::Comment));
        // A continued line belongs to its statement: `basket` is a column.
        assert_eq!(got.iter().filter(|t| t.2 == "basket").count(), 2);
        assert!(got
            .iter()
            .filter(|t| t.2 == "basket")
            .all(|t| t.3 == Kind::Variable));
        assert_eq!(find("log1p"), Some(Kind::EnumMember));
        assert_eq!(find("2..8"), Some(Kind::Number));
        assert_eq!(find("kmeans++"), Some(Kind::EnumMember));
        assert_eq!(find("by"), Some(Kind::Keyword));
        assert_eq!(find("calinski-harabasz"), Some(Kind::EnumMember));
        // `k` is an option of kmeans, a fixed word of choose.
        let ks: Vec<Kind> = got.iter().filter(|t| t.2 == "k").map(|t| t.3).collect();
        assert_eq!(ks, [Kind::Property, Kind::Keyword]);
    }

    #[test]
    fn columns_count_in_utf16_units() {
        let got = decoded("label 1 \"café €\" # é\n");
        assert_eq!(got[3], (0, 17, "# é".to_string(), Kind::Comment));
    }
}
