//! assort: segmentation recipes for people who segment records for a living.
//!
//! The pipeline, one module per stage:
//!
//! ```text
//! recipe text --syntax--> syntax tree --check (+ data header)--> Plan
//!      Plan --run (over engine)--> Outcome --output--> tables and files
//! ```
//!
//! - [`syntax`]: pest grammar to a syntax tree with spans.
//! - [`check`]: syntax tree and the data's header to diagnostics and a
//!   typed [`plan::Plan`].
//! - [`run`]: the interpreter: reads the data, prepares the matrix, calls
//!   the engine, builds profiles.
//! - [`engine`]: clustering and criteria; knows nothing of the language.
//! - [`output`]: terminal tables and output files.
//! - [`text`]: small formatting helpers shared by messages and outputs.
//! - [`parquet`]: Parquet input, read as the same table in CSV would be.
//! - [`csv_lines`]: the line of each CSV record, as an editor counts it.

pub mod check;
pub mod csv_lines;
pub mod engine;
pub mod lsp;
pub mod output;
pub mod parquet;
pub mod plan;
pub mod repl;
pub mod run;
pub mod scale;
pub mod session;
pub mod sql_words;
pub mod syntax;
pub mod text;
