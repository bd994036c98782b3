//! The canonical layout of a recipe, used by `assort fmt`, by the
//! interactive session when it saves, and by the language server.
//!
//! The layout: one statement per line with its words one space apart, no
//! space before a comma; a list continued over several lines keeps its line
//! breaks, its continuation lines indented to the first argument; comments
//! are kept, a trailing one two spaces after the statement; runs of blank
//! lines become one; no blank lines at the start or end; one final line
//! break. Formatting is idempotent: formatted text formats to itself.

use super::{logical_lines, parse, SyntaxError};

/// The recipe in canonical layout, or its syntax errors (a recipe that
/// does not parse is not reformatted).
pub fn format(src: &str) -> Result<String, Vec<SyntaxError>> {
    let parsed = parse(src);
    if !parsed.errors.is_empty() {
        return Err(parsed.errors);
    }
    let lines = logical_lines(src).map_err(|e| vec![e])?;
    let mut out: Vec<String> = Vec::new();
    let mut blank_run = false;
    for (_, text) in lines {
        let trimmed = text.trim();
        if trimmed.is_empty() {
            blank_run = !out.is_empty();
            continue;
        }
        if blank_run {
            out.push(String::new());
            blank_run = false;
        }
        if trimmed.starts_with('#') {
            out.push(trimmed.to_string());
        } else {
            out.push(statement(trimmed));
        }
    }
    let mut text = out.join("\n");
    text.push('\n');
    Ok(text)
}

#[derive(Debug, PartialEq)]
enum Token<'a> {
    Word(&'a str),
    Comma,
    Comment(&'a str),
    Newline,
}

fn tokens(text: &str) -> Vec<Token<'_>> {
    let bytes = text.as_bytes();
    let mut out = Vec::new();
    let mut i = 0;
    while i < bytes.len() {
        let c = bytes[i];
        match c {
            b'\n' => {
                out.push(Token::Newline);
                i += 1;
            }
            b' ' | b'\t' | b'\r' => i += 1,
            b',' => {
                out.push(Token::Comma);
                i += 1;
            }
            b'#' => {
                let end = text[i..].find('\n').map_or(text.len(), |e| i + e);
                out.push(Token::Comment(text[i..end].trim_end()));
                i = end;
            }
            b'"' => {
                let mut j = i + 1;
                while j < bytes.len() && bytes[j] != b'"' && bytes[j] != b'\n' {
                    j += if bytes[j] == b'\\' { 2 } else { 1 };
                }
                let end = (j + 1).min(bytes.len());
                out.push(Token::Word(&text[i..end]));
                i = end;
            }
            _ => {
                let mut j = i;
                while j < bytes.len()
                    && !matches!(bytes[j], b' ' | b'\t' | b'\r' | b'\n' | b',' | b'#' | b'"')
                {
                    j += 1;
                }
                out.push(Token::Word(&text[i..j]));
                i = j;
            }
        }
    }
    out
}

/// One statement in canonical layout.
fn statement(text: &str) -> String {
    let toks = tokens(text);
    let indent = match toks.first() {
        Some(Token::Word(w)) => w.chars().count() + 1,
        _ => 0,
    };
    let mut out = String::new();
    let mut at_line_start = true;
    let mut after_break = false;
    for t in &toks {
        match t {
            Token::Word(w) => {
                if !at_line_start {
                    out.push(' ');
                }
                out.push_str(w);
                at_line_start = false;
                after_break = false;
            }
            Token::Comma => {
                out.push(',');
                at_line_start = false;
                after_break = false;
            }
            Token::Comment(c) => {
                if !at_line_start {
                    out.push_str("  ");
                }
                out.push_str(c);
                at_line_start = false;
                after_break = false;
            }
            Token::Newline => {
                if !after_break {
                    out.push('\n');
                    out.push_str(&" ".repeat(indent));
                    at_line_start = true;
                    after_break = true;
                }
            }
        }
    }
    out.trim_end().to_string()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn statements_are_spaced_and_lists_indented() {
        let src = "\n\n# members\nrecipe   \"x\"\nfeatures a ,b,   # two\n\n\n   c\n\n\n\nkmeans  k 2..9   restarts 5 # many\n\n";
        let want = "# members\nrecipe \"x\"\nfeatures a, b,  # two\n         c\n\nkmeans k 2..9 restarts 5  # many\n";
        assert_eq!(format(src).unwrap(), want);
    }

    #[test]
    fn formatting_is_idempotent() {
        let src = "features a,\n  # note\n  b\nlabel 1 \"a, b # not a comment\"\n";
        let once = format(src).unwrap();
        assert_eq!(format(&once).unwrap(), once);
        assert!(once.contains("\"a, b # not a comment\""));
        assert!(once.contains("# note"));
    }

    #[test]
    fn a_recipe_that_does_not_parse_is_left_alone() {
        assert!(format("seed abc\n").is_err());
    }
}
