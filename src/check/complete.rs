//! Completion in context, shared by the interactive session and the
//! language server: it offers only what the checker would accept at that
//! place. Statement words at the start of a line; numeric columns (not the
//! key) after `features`, text columns after `categories`; a statement's
//! options not yet given, and the words an option takes; transforms after
//! a column in `transform`; files relative to the recipe's folder where a
//! quoted path goes. Each item says what it replaces (from
//! [`Completion::start`] to the cursor), so words holding `-` or `+`
//! (`kmeans++`, `calinski-harabasz`) complete whole, and columns carry
//! their kind and what the data's sample showed.

use super::probe::{ColumnInfo, ColumnKind};
use super::vocab;
use crate::text::thousands;
use std::path::Path;

/// What completion knows of the data and where the recipe lives.
pub struct DataView<'a> {
    /// The input's columns, with what the sample showed of each.
    pub columns: &'a [ColumnInfo],
    /// Records in the sample.
    pub sampled: usize,
    /// The key column, which is never a feature.
    pub key: Option<&'a str>,
    /// The folder the recipe's paths are relative to.
    pub folder: &'a Path,
    /// Columns other statements already use (tallied, categories, the
    /// weight column), which the checker refuses as features.
    pub elsewhere: &'a [String],
}

/// What an item is, for an editor's icon.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ItemKind {
    Statement,
    Option,
    Value,
    Column,
    Path,
}

/// One candidate.
#[derive(Debug, Clone, PartialEq)]
pub struct Item {
    /// What the list shows.
    pub label: String,
    /// What replaces the partial word (a column that is not a bare word
    /// and a path outside quotes are quoted).
    pub insert: String,
    pub kind: ItemKind,
    /// One line: a word's help, a column's kind and sample statistics.
    pub detail: String,
}

/// The candidates, and the byte offset in the text given where the part
/// they replace starts (the partial word, or the path inside quotes).
#[derive(Debug, Clone, PartialEq)]
pub struct Completion {
    pub start: usize,
    pub items: Vec<Item>,
}

impl Completion {
    /// The labels, for tests and plain lists.
    pub fn labels(&self) -> Vec<&str> {
        self.items.iter().map(|i| i.label.as_str()).collect()
    }
}

/// The columns a recipe tallies, takes as categories or as its records'
/// weights: never offered as features, which the checker would refuse.
pub fn used_elsewhere(recipe: &str) -> Vec<String> {
    Facts::of(recipe).elsewhere
}

/// What completion needs to know of the whole recipe, from one parse.
pub struct Facts {
    /// The key column its `input` names, for [`DataView::key`].
    pub key: Option<String>,
    /// The columns it uses elsewhere ([`used_elsewhere`]).
    pub elsewhere: Vec<String>,
}

impl Facts {
    pub fn of(recipe: &str) -> Facts {
        use crate::syntax::ast::{StatementKind, Value};
        let mut facts = Facts {
            key: None,
            elsewhere: Vec::new(),
        };
        for s in crate::syntax::parse(recipe).statements {
            match s.kind {
                StatementKind::Input { options, .. } if facts.key.is_none() => {
                    facts.key = (options.into_iter())
                        .find(|o| o.name.node == "key")
                        .and_then(|o| match o.value.node {
                            Value::Word(w) | Value::Text(w) => Some(w),
                            _ => None,
                        });
                }
                StatementKind::Tally { columns } | StatementKind::Categories { columns, .. } => {
                    facts.elsewhere.extend(columns.into_iter().map(|c| c.node));
                }
                StatementKind::Represents { column } => facts.elsewhere.push(column.node),
                _ => {}
            }
        }
        facts
    }
}

/// A piece of the statement before the cursor.
#[derive(Debug, Clone, PartialEq)]
enum Token<'a> {
    Word(&'a str),
    Quoted(&'a str),
    Comma,
}

/// A token and the byte offset where it starts.
type Placed<'a> = (usize, Token<'a>);

/// Cuts the statement's text into words, quoted texts and commas. Returns
/// the tokens and, when the text ends inside quotes, where the quoted text
/// starts (after the quote); `None` for the tokens when the cursor is in a
/// comment.
fn tokens(before: &str) -> Option<(Vec<Placed<'_>>, Option<usize>)> {
    let mut out = Vec::new();
    let bytes = before.as_bytes();
    let mut i = 0;
    while i < bytes.len() {
        match bytes[i] {
            b' ' | b'\t' | b'\r' | b'\n' => i += 1,
            b',' => {
                out.push((i, Token::Comma));
                i += 1;
            }
            b'#' => match before[i..].find('\n') {
                Some(n) => i += n,
                None => return None,
            },
            b'"' => {
                let start = i + 1;
                let mut j = start;
                while j < bytes.len() && bytes[j] != b'"' {
                    j += if bytes[j] == b'\\' { 2 } else { 1 };
                }
                if j >= bytes.len() {
                    return Some((out, Some(start)));
                }
                out.push((i, Token::Quoted(&before[start..j])));
                i = j + 1;
            }
            _ => {
                let start = i;
                while i < bytes.len() && !b" \t\r\n,#\"".contains(&bytes[i]) {
                    i += 1;
                }
                out.push((start, Token::Word(&before[start..i])));
            }
        }
    }
    Some((out, None))
}

/// Candidates for the word being typed at the end of `before` (the
/// statement's text up to the cursor, continued lines included).
pub fn complete(before: &str, data: &DataView<'_>) -> Completion {
    let Some((mut toks, open_quote)) = tokens(before) else {
        return Completion {
            start: before.len(),
            items: Vec::new(),
        };
    };
    let statement = match toks.first() {
        Some((_, Token::Word(w))) => *w,
        _ => "",
    };
    if let Some(start) = open_quote {
        let typed = &before[start..];
        let mut items = match file_kind(statement, &toks) {
            Some(kind) => paths(data.folder, typed, kind, false),
            None => Vec::new(),
        };
        items.retain(|i| i.label.starts_with(typed));
        items.sort_by(|a, b| a.label.cmp(&b.label));
        return Completion { start, items };
    }
    let ends_open = before.ends_with(|c: char| c.is_whitespace() || c == ',');
    let (start, partial) = match toks.last() {
        Some(&(at, Token::Word(w))) if !ends_open => {
            toks.pop();
            (at, w)
        }
        _ => (before.len(), ""),
    };
    let items = if toks.is_empty() {
        statements()
    } else {
        after(statement, &toks, data)
    };
    let mut items: Vec<Item> = items
        .into_iter()
        .filter(|i| i.insert.starts_with(partial) || i.label.starts_with(partial))
        .collect();
    items.sort_by(|a, b| a.label.cmp(&b.label));
    items.dedup_by(|a, b| a.label == b.label);
    Completion { start, items }
}

fn statements() -> Vec<Item> {
    vocab::STATEMENTS
        .iter()
        .map(|d| item(d.word, ItemKind::Statement, d.summary))
        .collect()
}

fn item(word: &str, kind: ItemKind, detail: &str) -> Item {
    Item {
        label: word.to_string(),
        insert: word.to_string(),
        kind,
        detail: detail.to_string(),
    }
}

/// The words of a statement with a fixed place (`all`, `by`...), or the
/// values of an option.
fn words(statement: &str, option: Option<&str>) -> Vec<Item> {
    vocab::values_of(statement, option)
        .map(|v| item(v.word, ItemKind::Value, v.summary))
        .collect()
}

fn fixed(statement: &str, word: &str) -> Vec<Item> {
    words(statement, None)
        .into_iter()
        .filter(|i| i.label == word)
        .collect()
}

/// Which columns a place takes.
#[derive(Clone, Copy, PartialEq)]
enum Wanted {
    /// Numeric columns other than the key.
    Numeric,
    /// Text columns other than the key.
    Text,
    /// Any column.
    Any,
}

/// Candidates after the statement's words so far (`toks`, the partial
/// word taken off).
fn after(statement: &str, toks: &[Placed<'_>], data: &DataView<'_>) -> Vec<Item> {
    let count = toks.len();
    let prev = match &toks[count - 1].1 {
        Token::Word(w) => Some(*w),
        _ => None,
    };
    let after_comma = toks[count - 1].1 == Token::Comma;
    let listed: Vec<&str> = toks[1..]
        .iter()
        .filter_map(|(_, t)| match t {
            Token::Word(w) | Token::Quoted(w) => Some(*w),
            Token::Comma => None,
        })
        .collect();
    let list_place = count == 1 || after_comma;
    let cols = |wanted| columns(data, wanted, &listed);
    match statement {
        "features" if count == 1 => [fixed("features", "all"), cols(Wanted::Numeric)].concat(),
        "features" if prev == Some("all") => fixed("features", "except"),
        "features" if prev == Some("except") => cols(Wanted::Numeric),
        "features" | "weight" | "transform" if list_place => cols(Wanted::Numeric),
        // After the columns, before any transform word.
        "transform" if prev.is_some() && !listed.iter().any(|w| is_transform(w)) => {
            words("transform", None)
        }
        "acknowledge" if list_place => cols(Wanted::Any),
        "tally" if list_place => cols(Wanted::Numeric),
        "represents" if count == 1 => cols(Wanted::Numeric),
        "call" if count == 1 => cols(Wanted::Any),
        "categories" if list_place => cols(Wanted::Text),
        "ordered" if count == 1 => cols(Wanted::Any),
        "flags" if list_place => cols(Wanted::Any),
        "missing" if count == 1 => [
            fixed("missing", "drop"),
            fixed("missing", "keep"),
            fixed("missing", "fill"),
        ]
        .concat(),
        "missing" if prev == Some("fill") => {
            [fixed("missing", "median"), fixed("missing", "mean")].concat()
        }
        "missing" if prev == Some("for") || (after_comma && listed.contains(&"for")) => {
            // `keep` is for categories.
            cols(if listed.contains(&"keep") {
                Wanted::Text
            } else {
                Wanted::Numeric
            })
        }
        "missing"
            if !listed.contains(&"for")
                && (prev == Some("drop") || prev == Some("keep") || count == 3) =>
        {
            fixed("missing", "for")
        }
        "scale" if count == 1 => words("scale", None),
        "choose" if count == 1 => fixed("choose", "k"),
        "choose" if count == 2 => fixed("choose", "by"),
        "choose" if prev == Some("by") => words("choose", Some("by")),
        "save" if count == 1 => words("save", None),
        "validate" if count == 1 => fixed("validate", "against"),
        "compare" if count == 1 => fixed("compare", "with"),
        "input" | "previous" if count == 1 => quoted_paths(statement, toks, data),
        "validate" | "compare" | "save" if count == 2 => quoted_paths(statement, toks, data),
        _ => options(statement, toks, prev, data),
    }
}

/// A statement's options not yet given, or the values of the option just
/// written.
fn options(
    statement: &str,
    toks: &[Placed<'_>],
    prev: Option<&str>,
    data: &DataView<'_>,
) -> Vec<Item> {
    let known = vocab::options_for(statement);
    let is_option =
        |t: &Token<'_>| matches!(t, Token::Word(w) if known.iter().any(|o| o.name == *w));
    // The options start at the first option name after the statement's
    // fixed part (a path, a column list).
    let Some(begin) = toks
        .iter()
        .skip(1)
        .position(|(_, t)| is_option(t))
        .map(|p| p + 1)
    else {
        let ready = match statement {
            "input" | "previous" | "recipe" => toks.len() >= 2,
            "validate" | "call" | "brief" => toks.len() >= 3,
            "categories" => toks.len() >= 2,
            _ => true,
        };
        return if ready {
            not_given(known, &[])
        } else {
            Vec::new()
        };
    };
    let opts = &toks[begin..];
    // Options alternate with their values: an odd count ends on a name.
    if opts.len() % 2 == 1 {
        let name = prev.unwrap_or("");
        return match name {
            // The key of the file being named, from its header (the
            // recipe's columns while it cannot be read).
            "key" if statement == "input" => match header_columns(toks, data) {
                none if none.is_empty() => columns(data, Wanted::Any, &[]),
                named => named,
            },
            "key" | "column" => columns(data, Wanted::Any, &[]),
            "assignments" => quoted_paths(statement, toks, data),
            // The connections the service file describes.
            "database" if statement == "input" => {
                crate::scale::postgres::service_names(&|v| std::env::var(v).ok())
                    .into_iter()
                    .map(|n| {
                        item(
                            &n,
                            ItemKind::Value,
                            "a connection in the PostgreSQL service file",
                        )
                    })
                    .collect()
            }
            _ => words(statement, Some(name)),
        };
    }
    let given: Vec<&str> = opts
        .iter()
        .step_by(2)
        .filter_map(|(_, t)| match t {
            Token::Word(w) => Some(*w),
            _ => None,
        })
        .collect();
    not_given(known, &given)
}

fn not_given(known: &[vocab::OptionDoc], given: &[&str]) -> Vec<Item> {
    // `key` and `no key` exclude each other: either given, neither is
    // offered.
    let keyed = given.contains(&"key") || given.contains(&"no");
    known
        .iter()
        .filter(|o| !given.contains(&o.name))
        .filter(|o| !(keyed && matches!(o.name, "key" | "no")))
        .map(|o| {
            item(
                o.name,
                ItemKind::Option,
                &format!("takes {}: {}", o.takes, o.summary),
            )
        })
        .collect()
}

fn is_transform(word: &str) -> bool {
    vocab::value("transform", word).is_some()
}

/// Columns of the kind a place takes, those already listed left out.
fn columns(data: &DataView<'_>, wanted: Wanted, listed: &[&str]) -> Vec<Item> {
    let is_key = |c: &ColumnInfo| data.key == Some(c.name.as_str());
    data.columns
        .iter()
        .filter(|c| !listed.contains(&c.name.as_str()))
        .filter(|c| wanted != Wanted::Numeric || !data.elsewhere.contains(&c.name))
        .filter(|c| match wanted {
            Wanted::Numeric => c.kind == ColumnKind::Numeric && !is_key(c),
            Wanted::Text => c.kind == ColumnKind::Text && !is_key(c),
            Wanted::Any => true,
        })
        .map(|c| Item {
            label: c.name.clone(),
            insert: written_column(&c.name),
            kind: ItemKind::Column,
            detail: column_detail(c, data.sampled),
        })
        .collect()
}

/// The columns of the file an `input` statement being typed names (its
/// first quoted word, relative to the recipe's folder), from its header.
fn header_columns(toks: &[Placed<'_>], data: &DataView<'_>) -> Vec<Item> {
    let Some(path) = toks.iter().find_map(|(_, t)| match t {
        Token::Quoted(p) => Some(*p),
        _ => None,
    }) else {
        return Vec::new();
    };
    let file = data.folder.join(path);
    let names: Vec<String> = match crate::parquet::is_parquet(&file) {
        // The footer's schema alone, not a sample.
        true => crate::parquet::schema(&file)
            .map(|s| s.names)
            .unwrap_or_default(),
        false => std::fs::File::open(&file)
            .ok()
            .and_then(|f| {
                csv::ReaderBuilder::new()
                    .flexible(true)
                    .from_reader(f)
                    .headers()
                    .ok()
                    .cloned()
            })
            .map(|h| h.iter().map(|n| n.trim().to_string()).collect())
            .unwrap_or_default(),
    };
    names
        .into_iter()
        .map(|name: String| Item {
            insert: written_column(&name),
            label: name,
            kind: ItemKind::Column,
            detail: format!("a column of `{path}`"),
        })
        .collect()
}

/// A column name as a recipe writes it: bare when it is a word, else
/// quoted.
pub(crate) fn written_column(name: &str) -> String {
    if is_bare_word(name) {
        name.to_string()
    } else {
        quoted(name)
    }
}

/// Text in quotes as a recipe writes it, `\` and `"` escaped.
pub(crate) fn quoted(text: &str) -> String {
    format!("\"{}\"", text.replace('\\', "\\\\").replace('"', "\\\""))
}

/// Whether a column name can be written without quotes.
fn is_bare_word(name: &str) -> bool {
    let mut chars = name.chars();
    chars
        .next()
        .is_some_and(|c| c.is_ascii_alphabetic() || c == '_')
        && chars.all(|c| c.is_ascii_alphanumeric() || matches!(c, '_' | '-' | '+'))
        && vocab::statement(name).is_none()
}

/// A column's kind and what the sample showed of it, in one line.
pub fn column_detail(c: &ColumnInfo, sampled: usize) -> String {
    let mut s = match c.kind {
        ColumnKind::Numeric => "numeric column".to_string(),
        ColumnKind::Text => "text column".to_string(),
        ColumnKind::Blank => "column blank in the sample".to_string(),
    };
    if c.numbers > 0 {
        s.push_str(&format!(
            ": min {}, mean {}, max {}",
            crate::text::short(c.min),
            crate::text::short(c.sum / c.numbers as f64),
            crate::text::short(c.max)
        ));
    } else if let Some(example) = &c.text_example {
        let example: String = example.chars().take(30).collect();
        s.push_str(&format!(", such as `{example}`"));
    }
    s.push_str(&format!(
        "; {} blank in the first {} records",
        thousands(c.blanks),
        thousands(sampled)
    ));
    s
}

/// What files a quoted path of this statement names.
#[derive(Clone, Copy)]
enum FileKind {
    Data,
    Model,
    Output(&'static [&'static str]),
}

impl FileKind {
    fn accepts(self, name: &str) -> bool {
        let ext = name.rsplit_once('.').map_or("", |(_, e)| e);
        let ext = ext.to_ascii_lowercase();
        match self {
            FileKind::Data => matches!(ext.as_str(), "csv" | "tsv" | "txt" | "parquet"),
            FileKind::Model => ext == "json",
            FileKind::Output(exts) => exts.contains(&ext.as_str()),
        }
    }
}

/// The kind of file the quoted path being typed names, if it is a path.
fn file_kind(statement: &str, toks: &[Placed<'_>]) -> Option<FileKind> {
    let last = toks.last().map(|(_, t)| t);
    match statement {
        "input" | "compare" | "validate" if toks.len() <= 2 => Some(FileKind::Data),
        "previous" if toks.len() == 1 => Some(FileKind::Model),
        "previous" if last == Some(&Token::Word("assignments")) => Some(FileKind::Data),
        "save" if toks.len() == 2 => {
            let kind = match last {
                Some(Token::Word(w)) => *w,
                _ => "",
            };
            Some(FileKind::Output(match kind {
                "profiles" => &["csv", "json"],
                "report" => &["html"],
                "model" => &["json"],
                "tree" => &["nwk", "newick"],
                _ => &["csv"],
            }))
        }
        _ => None,
    }
}

/// Paths offered where a quoted path starts (the quotes are inserted too).
fn quoted_paths(statement: &str, toks: &[Placed<'_>], data: &DataView<'_>) -> Vec<Item> {
    match file_kind(statement, toks) {
        Some(kind) => paths(data.folder, "", kind, true),
        None => Vec::new(),
    }
}

/// Folders and files of `kind` in the folder `typed` points into (relative
/// to the recipe's), whose names start as `typed` ends. Hidden entries are
/// left out; a folder ends in `/` so the next one can follow.
fn paths(folder: &Path, typed: &str, kind: FileKind, quote: bool) -> Vec<Item> {
    // Paths leave the recipe's folder only by `--allow-dir`; completion
    // does not lead there.
    if typed.starts_with('/') || typed.split('/').any(|part| part == "..") {
        return Vec::new();
    }
    let (dir, prefix) = match typed.rsplit_once('/') {
        Some((dir, _)) => (dir, format!("{dir}/")),
        None => ("", String::new()),
    };
    let Ok(entries) = std::fs::read_dir(folder.join(dir)) else {
        return Vec::new();
    };
    let mut out = Vec::new();
    for e in entries.flatten() {
        let name = e.file_name().to_string_lossy().into_owned();
        if name.starts_with('.') {
            continue;
        }
        let is_dir = e.file_type().is_ok_and(|t| t.is_dir());
        if !is_dir && !kind.accepts(&name) {
            continue;
        }
        let path = format!("{prefix}{name}{}", if is_dir { "/" } else { "" });
        let insert = match (quote, is_dir) {
            (false, _) => path.clone(),
            (true, true) => format!("\"{path}"),
            (true, false) => format!("\"{path}\""),
        };
        let detail = if is_dir { "folder" } else { "file" };
        out.push(Item {
            label: path,
            insert,
            kind: ItemKind::Path,
            detail: format!("{detail}, relative to the recipe's folder"),
        });
    }
    out
}

#[cfg(test)]
mod tests;
