//! A recipe's input in a database: a table, or a query, on a connection
//! the recipe names (`input "members" database coop key member_id`).
//!
//! A table has no order of its own, so assort reads one in the order of
//! its key: a key of numbers by value, any other key by its text byte by
//! byte (`COLLATE "C"`, the same on every server whatever its locale).
//! A run over a table therefore equals a run over the same records in a
//! file sorted the same way.

use crate::sql_words::ident;

/// Where a recipe's records come from on a connection.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Source {
    /// The connection's name, as the recipe gives it.
    pub connection: String,
    /// A table name (`members`, `sales.members`) or a query, as written.
    pub text: String,
}

/// A column's type as assort reads it.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Class {
    /// Integers, decimals and double-precision numbers: a double holds
    /// each as its text would read.
    Number,
    /// Single-precision numbers (`real`): read through their text (as an
    /// export writes them: `0.09`), since the double nearest that text is
    /// not the single's own value (0.09000000357627869).
    Single,
    /// Text, and types whose text is a plain value (yes/no, identifiers).
    Text,
    /// Anything else (a date, bytes, a list), in words.
    Other(String),
}

impl Source {
    /// True when the text names a table: one or two plain SQL names
    /// joined by a dot. Anything else is read as a query.
    pub fn is_table(&self) -> bool {
        is_table_name(&self.text)
    }

    /// The source as it stands after `FROM`: the table's quoted name, or
    /// the query as a subquery.
    pub fn from_sql(&self) -> String {
        if self.is_table() {
            let parts: Vec<String> = self.text.split('.').map(ident).collect();
            parts.join(".")
        } else {
            format!(
                "({}) AS recipe_input",
                self.text.trim().trim_end_matches(';')
            )
        }
    }

    /// In words, for messages and the run record: "table `members` on
    /// connection `coop`".
    pub fn describe(&self) -> String {
        if self.is_table() {
            format!("table `{}` on connection `{}`", self.text, self.connection)
        } else {
            format!("the recipe's query on connection `{}`", self.connection)
        }
    }

    /// `SELECT` of `columns` as text, in the order of `key` (of class
    /// `key_class`), at most `limit` rows. Every value is cast to text so
    /// that it reaches assort as the same characters a CSV export would
    /// hold (floating-point numbers with every digit they need: the
    /// connection asks for `extra_float_digits = 3`).
    pub fn select_text(
        &self,
        columns: &[&str],
        key: Option<(&str, &Class)>,
        limit: Option<usize>,
    ) -> String {
        let list = as_text(columns);
        let mut sql = format!("SELECT {} FROM {}", list.join(", "), self.from_sql());
        if let Some((key, class)) = key {
            sql.push_str(" ORDER BY ");
            sql.push_str(&key_order(key, class));
        }
        if let Some(n) = limit {
            sql.push_str(&format!(" LIMIT {n}"));
        }
        sql
    }
}

impl Source {
    /// `SELECT` of `columns` as text for the first `n` records in the
    /// order of `key`: the keys are found first, over the key column
    /// alone, and only those records' other columns are read. A check
    /// thus never computes a query's columns for records past the first
    /// `n` (a value there that makes the query fail is met by the run),
    /// and a wide table is sorted by its key alone.
    pub fn first_in_key_order(
        &self,
        columns: &[&str],
        key: &str,
        class: &Class,
        n: usize,
    ) -> String {
        let list = as_text(columns);
        let order = key_order(key, class);
        format!(
            "SELECT {} FROM {from} WHERE CAST({k} AS TEXT) IN \
             (SELECT CAST({k} AS TEXT) FROM {from} ORDER BY {order} LIMIT {n}) ORDER BY {order}",
            list.join(", "),
            from = self.from_sql(),
            k = ident(key),
        )
    }
}

/// Each column cast to text, for a `SELECT` list.
fn as_text(columns: &[&str]) -> Vec<String> {
    columns
        .iter()
        .map(|c| format!("CAST({} AS TEXT)", ident(c)))
        .collect()
}

/// The `ORDER BY` term for a key of `class`.
pub fn key_order(key: &str, class: &Class) -> String {
    match class {
        Class::Number | Class::Single => ident(key),
        _ => format!("CAST({} AS TEXT) COLLATE \"C\"", ident(key)),
    }
}

/// One or two plain SQL names joined by a dot (`members`,
/// `sales.members_2026`).
pub fn is_table_name(text: &str) -> bool {
    let plain = |part: &str| {
        let mut chars = part.chars();
        chars
            .next()
            .is_some_and(|c| c.is_ascii_alphabetic() || c == '_')
            && chars.all(|c| c.is_ascii_alphanumeric() || c == '_')
    };
    let parts: Vec<&str> = text.split('.').collect();
    parts.len() <= 2 && parts.iter().all(|p| plain(p))
}

/// The class of a PostgreSQL type, by its name.
pub fn class_of(type_name: &str) -> Class {
    match type_name {
        "int2" | "int4" | "int8" | "float8" | "numeric" | "oid" => Class::Number,
        "float4" => Class::Single,
        "text" | "varchar" | "bpchar" | "name" | "char" | "bool" | "uuid" | "citext" => Class::Text,
        "date" => Class::Other("a date".into()),
        "timestamp" | "timestamptz" | "time" | "timetz" => Class::Other("a time".into()),
        "interval" => Class::Other("a length of time".into()),
        "bytea" => Class::Other("bytes".into()),
        "json" | "jsonb" | "xml" => Class::Other("a document".into()),
        other if other.starts_with('_') => Class::Other("a list".into()),
        other => Class::Other(format!("a value of type `{other}`")),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn on_coop(text: &str) -> Source {
        Source {
            connection: "coop".into(),
            text: text.into(),
        }
    }

    #[test]
    fn plain_names_are_tables_and_the_rest_queries() {
        for table in ["members", "sales.members_2026", "_x"] {
            assert!(on_coop(table).is_table(), "{table}");
        }
        for query in [
            "SELECT * FROM members",
            "a.b.c",
            "members;",
            "\"Members\"",
            "",
            "1members",
        ] {
            assert!(!on_coop(query).is_table(), "{query}");
        }
    }

    #[test]
    fn a_source_reads_as_text_in_key_order() {
        let sql = on_coop("sales.members").select_text(
            &["member_id", "basket"],
            Some(("member_id", &Class::Text)),
            Some(1000),
        );
        assert_eq!(
            sql,
            "SELECT CAST(\"member_id\" AS TEXT), CAST(\"basket\" AS TEXT) FROM \"sales\".\"members\" \
             ORDER BY CAST(\"member_id\" AS TEXT) COLLATE \"C\" LIMIT 1000"
        );
        let sql = on_coop("SELECT id, x FROM t;").select_text(
            &["id"],
            Some(("id", &Class::Number)),
            None,
        );
        assert_eq!(
            sql,
            "SELECT CAST(\"id\" AS TEXT) FROM (SELECT id, x FROM t) AS recipe_input ORDER BY \"id\""
        );
    }
}
