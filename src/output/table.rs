//! `save table "NAME"`: the assignments written into a table on the
//! input's connection, for a database input whose segments should stay
//! where the data lives. The rows are those of `save assignments`, byte
//! for byte as its CSV holds them (the database reads that CSV text with
//! `COPY`), so the table and the file cannot disagree; the key column
//! takes the input key's own type, so the table joins back to the input
//! on equal keys.
//!
//! A recipe may come from a colleague: it writes a table only when the
//! person running it allowed that table by name (`--allow-table`, checked
//! before anything is read), and the recipe's own query never runs in
//! the writing transaction (see [`crate::scale::postgres::Database::replace_table`]).

use super::files;
use crate::plan::TablePlan;
use crate::run::{Outcome, RunError};
use crate::scale::postgres::Target;
use crate::scale::source::Source;

/// Replaces the table `table` names with the run's assignments (the text
/// of `saved`, the run's assignments file, when it saves one), then runs
/// `then` (the run's files written) before the table's transaction
/// commits; nothing changes in the database unless both succeed. Returns
/// the table and its rows in words, for the list of what was written.
pub fn replace(
    o: &Outcome,
    table: &TablePlan,
    saved: Option<&files::Rendered>,
    then: impl FnOnce() -> Result<(), RunError>,
) -> Result<String, RunError> {
    let database = |e: crate::scale::postgres::DbError| RunError::Database {
        reason: e.to_string(),
    };
    let env = |v: &str| std::env::var(v).ok();
    let mut db = Target::resolve(&table.connection, &env)
        .and_then(|t| t.connect())
        .map_err(database)?;
    let input = o.plan.input.source().ok_or_else(|| RunError::Database {
        reason: "`save table` needs a database input".into(),
    })?;
    let key = &o.plan.input.key;
    let key_type = if o.plan.input.keyless {
        "bigint"
    } else {
        let types = db.column_types(&input).map_err(database)?;
        let found = types.iter().find(|(name, _)| name == key);
        key_sql_type(found.map_or("text", |(_, t)| t.as_str()))
    };
    let target = Source {
        connection: table.connection.clone(),
        text: table.name.clone(),
    };
    let shown = table.describe();
    let columns = format!(
        "{} {key_type} NOT NULL, segment integer NOT NULL, label text, distance numeric, nearer_by numeric",
        crate::sql_words::ident(key)
    );
    let rows = db
        .replace_table(
            &target.from_sql(),
            &columns,
            |w| {
                let written = match saved {
                    Some(file) => copy_rendered(file, w),
                    None => files::write_assignments(o, w),
                };
                written.map_err(|e| match e {
                    RunError::Write { reason, .. } => RunError::Write {
                        path: shown.clone(),
                        reason,
                    },
                    other => other,
                })
            },
            then,
        )
        .map_err(database)??;
    Ok(format!(
        "{shown} ({})",
        crate::text::count(usize::try_from(rows).unwrap_or(usize::MAX), "row")
    ))
}

/// The text of a rendered file into `w`: its bytes, or the file staged
/// beside its target (a run in passes), read back in pieces.
fn copy_rendered(file: &files::Rendered, w: &mut dyn std::io::Write) -> Result<(), RunError> {
    let failed = |e: std::io::Error| RunError::Write {
        path: String::new(),
        reason: e.to_string(),
    };
    match &file.staged {
        Some(staged) => {
            let mut from = std::fs::File::open(&staged.path).map_err(failed)?;
            std::io::copy(&mut from, w).map(|_| ()).map_err(failed)
        }
        None => w.write_all(&file.bytes).map_err(failed),
    }
}

/// The column type the table's key takes for an input key of PostgreSQL
/// type `type_name`: the same type where its text reads back to the same
/// value (numbers, identifiers), text otherwise (a key assort read as
/// text is written as that text).
fn key_sql_type(type_name: &str) -> &'static str {
    match type_name {
        "int2" => "smallint",
        "int4" => "integer",
        "int8" => "bigint",
        "numeric" => "numeric",
        "float8" => "double precision",
        "float4" => "real",
        "uuid" => "uuid",
        _ => "text",
    }
}
