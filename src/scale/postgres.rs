//! A PostgreSQL database where the data lives. A recipe names a
//! connection; how to reach it and log in comes from where PostgreSQL's own
//! tools take it, never from the recipe: the service file (`PGSERVICEFILE`,
//! else `~/.pg_service.conf`, else `pg_service.conf` in `PGSYSCONFDIR`),
//! then the environment (`PGHOST`, `PGPORT`, `PGDATABASE`, `PGUSER`,
//! `PGPASSWORD`), then for a password the password file (`PGPASSFILE`,
//! else `~/.pgpass`). A recipe may come from a colleague, so every statement
//! assort sends runs in a read-only transaction, and a recipe's own query
//! is checked to be one statement that only reads.

use postgres::error::SqlState;
use postgres::{Client, NoTls};
use std::collections::HashMap;
use std::path::PathBuf;

/// What went wrong, naming the connection (and the table or query).
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum DbError {
    #[error("connection `{connection}` is not described: {reason}")]
    Unknown { connection: String, reason: String },
    #[error("cannot connect to `{connection}` ({target}): {reason}")]
    CannotConnect {
        connection: String,
        target: String,
        reason: String,
    },
    #[error("the recipe's query on connection `{connection}` would change the database ({reason}); assort only reads")]
    Writes { connection: String, reason: String },
    #[error(
        "the recipe's query on connection `{connection}` is not one statement that reads: {reason}"
    )]
    NotOneQuery { connection: String, reason: String },
    #[error("`{connection}` failed at {what}: {reason}")]
    Failed {
        connection: String,
        what: String,
        reason: String,
    },
}

/// Where a named connection leads. The password, when one is found, is
/// kept out of every message and record.
#[derive(Clone, PartialEq)]
pub struct Target {
    pub name: String,
    pub host: String,
    pub port: u16,
    pub dbname: String,
    pub user: String,
    password: Option<String>,
}

impl std::fmt::Debug for Target {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(&self.describe())
    }
}

impl Target {
    /// The connection `name`: its section of the service file, completed
    /// from the environment (`env` reads a variable; the process's own in
    /// use, a map in tests). O(size of the service file).
    pub fn resolve(name: &str, env: &dyn Fn(&str) -> Option<String>) -> Result<Target, DbError> {
        let unknown = |reason: String| DbError::Unknown {
            connection: name.to_string(),
            reason,
        };
        let service = service_section(name, env).map_err(unknown)?;
        let pick = |key: &str, var: &str| service.get(key).cloned().or_else(|| env(var));
        let port = match pick("port", "PGPORT") {
            Some(p) => p
                .trim()
                .parse()
                .map_err(|_| unknown(format!("port `{p}` is not a port number")))?,
            None => 5432,
        };
        let user = pick("user", "PGUSER")
            .or_else(|| env("USER"))
            .ok_or_else(|| unknown("no user: give `user` in its service or set PGUSER".into()))?;
        let mut target = Target {
            name: name.to_string(),
            host: pick("host", "PGHOST").unwrap_or_else(|| DEFAULT_SOCKETS.into()),
            port,
            dbname: pick("dbname", "PGDATABASE").unwrap_or_else(|| user.clone()),
            user,
            password: pick("password", "PGPASSWORD"),
        };
        if target.password.is_none() {
            target.password = password_file(&target, env);
        }
        Ok(target)
    }

    /// The connection in words, without its password: for messages and
    /// the run record.
    pub fn describe(&self) -> String {
        format!(
            "database `{}` as `{}` at {} port {}",
            self.dbname, self.user, self.host, self.port
        )
    }

    /// Connects; nothing is sent but the log-in until a read.
    pub fn connect(&self) -> Result<Database, DbError> {
        let mut config = postgres::Config::new();
        config
            .host(&self.host)
            .port(self.port)
            .user(&self.user)
            .dbname(&self.dbname)
            .application_name("assort")
            // Floating-point values as text with every digit they need
            // (PostgreSQL 12 and later: the shortest exact form).
            .options("-c extra_float_digits=3")
            .connect_timeout(std::time::Duration::from_secs(10));
        if let Some(p) = &self.password {
            config.password(p);
        }
        let client = config.connect(NoTls).map_err(|e| DbError::CannotConnect {
            connection: self.name.clone(),
            target: self.describe(),
            reason: reason(&e),
        })?;
        Ok(Database {
            client,
            name: self.name.clone(),
        })
    }
}

/// Where the server's Unix sockets are when no host is given (Debian's
/// packages; libpq's own default).
const DEFAULT_SOCKETS: &str = "/var/run/postgresql";

/// The password for `target` in the password file (`PGPASSFILE`, else
/// `~/.pgpass`), read as libpq reads it: lines `host:port:database:user:
/// password`, `*` matching anything, `\:` and `\\` standing for `:` and
/// `\`, the first matching line winning; `localhost` also matches a
/// connection through the default socket folder. Like libpq, a file that
/// others may read is ignored (its mode must be 0600 or stricter), and
/// nothing is said about it: a missing password shows up as the server
/// refusing the log-in. O(size of the file).
fn password_file(target: &Target, env: &dyn Fn(&str) -> Option<String>) -> Option<String> {
    let path = env("PGPASSFILE")
        .map(PathBuf::from)
        .or_else(|| env("HOME").map(|h| PathBuf::from(h).join(".pgpass")))?;
    #[cfg(unix)]
    {
        use std::os::unix::fs::PermissionsExt;
        let mode = std::fs::metadata(&path).ok()?.permissions().mode();
        if mode & 0o077 != 0 {
            return None;
        }
    }
    let text = std::fs::read_to_string(&path).ok()?;
    let port = target.port.to_string();
    let host_matches = |h: &str| {
        h == "*" || h == target.host || (h == "localhost" && target.host == DEFAULT_SOCKETS)
    };
    text.lines()
        .filter(|l| !l.trim_start().starts_with('#'))
        .map(password_fields)
        .find(|f| {
            f.len() == 5
                && host_matches(&f[0])
                && (f[1] == "*" || f[1] == port)
                && (f[2] == "*" || f[2] == target.dbname)
                && (f[3] == "*" || f[3] == target.user)
        })
        .map(|f| f[4].clone())
}

/// A password file line's fields: split at `:`, with `\:` and `\\`
/// standing for `:` and `\`.
fn password_fields(line: &str) -> Vec<String> {
    let mut fields = vec![String::new()];
    let mut chars = line.chars();
    while let Some(c) = chars.next() {
        match c {
            '\\' => {
                if let (Some(next), Some(f)) = (chars.next(), fields.last_mut()) {
                    f.push(next);
                }
            }
            ':' if fields.len() < 5 => fields.push(String::new()),
            c => {
                if let Some(f) = fields.last_mut() {
                    f.push(c);
                }
            }
        }
    }
    fields
}

/// The service files to look in, in order: `PGSERVICEFILE`, else
/// `~/.pg_service.conf`, then `pg_service.conf` in `PGSYSCONFDIR`.
fn service_files(env: &dyn Fn(&str) -> Option<String>) -> Vec<PathBuf> {
    [
        env("PGSERVICEFILE").map(PathBuf::from),
        env("HOME").map(|h| PathBuf::from(h).join(".pg_service.conf")),
        env("PGSYSCONFDIR").map(|d| PathBuf::from(d).join("pg_service.conf")),
    ]
    .into_iter()
    .flatten()
    .collect()
}

/// The connection names the service files describe (their sections), in
/// the order found, each once: what an editor offers after `database`.
pub fn service_names(env: &dyn Fn(&str) -> Option<String>) -> Vec<String> {
    let mut names: Vec<String> = Vec::new();
    for file in service_files(env) {
        let Ok(text) = std::fs::read_to_string(&file) else {
            continue;
        };
        for line in text.lines().map(str::trim) {
            if let Some(section) = line.strip_prefix('[').and_then(|l| l.strip_suffix(']')) {
                let section = section.trim().to_string();
                if !names.contains(&section) {
                    names.push(section);
                }
            }
        }
    }
    names
}

/// The section `[name]` of the first service file found, as key = value.
fn service_section(
    name: &str,
    env: &dyn Fn(&str) -> Option<String>,
) -> Result<HashMap<String, String>, String> {
    let files = service_files(env);
    for file in &files {
        let Ok(text) = std::fs::read_to_string(file) else {
            continue;
        };
        let mut inside = false;
        let mut found: Option<HashMap<String, String>> = None;
        for line in text.lines().map(str::trim) {
            if line.is_empty() || line.starts_with('#') {
                continue;
            }
            if let Some(section) = line.strip_prefix('[').and_then(|l| l.strip_suffix(']')) {
                inside = section.trim() == name;
                if inside {
                    found = Some(HashMap::new());
                }
                continue;
            }
            if let (true, Some(map), Some((k, v))) = (inside, found.as_mut(), line.split_once('='))
            {
                map.insert(k.trim().to_string(), v.trim().to_string());
            }
        }
        if let Some(map) = found {
            return Ok(map);
        }
    }
    if files.is_empty() {
        return Err("no service file (set PGSERVICEFILE, or write ~/.pg_service.conf)".into());
    }
    let places: Vec<String> = files.iter().map(|f| format!("`{}`", f.display())).collect();
    Err(format!("no section [{name}] in {}", places.join(" or ")))
}

/// A server's message without the client library's framing.
fn reason(e: &postgres::Error) -> String {
    match e.as_db_error() {
        Some(db) => db.message().to_string(),
        None => e.to_string(),
    }
}

/// An open connection.
pub struct Database {
    client: Client,
    name: String,
}

impl std::fmt::Debug for Database {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "connection `{}`", self.name)
    }
}

impl Database {
    /// Runs one statement in a read-only transaction (rolled back after),
    /// every selected value as text (NULL as `None`; a value of another
    /// type is an error: select text). `what` names the step for
    /// messages.
    pub fn read(&mut self, sql: &str, what: &str) -> Result<Vec<Vec<Option<String>>>, DbError> {
        let mut out = Vec::new();
        self.each_row(sql, what, |row| {
            out.push(row.iter().map(|v| v.map(str::to_string)).collect());
            Ok::<(), std::convert::Infallible>(())
        })?
        .map_err(|never| match never {})?;
        Ok(out)
    }

    /// Runs one statement in a read-only transaction (rolled back after)
    /// and hands `each` every row as it arrives, values as text borrowed
    /// from the row (select text), NULL as `None`: a table larger than
    /// memory is never held, and no value is copied unless `each` keeps
    /// it. `each` may stop the reading with its own error.
    pub fn each_row<E>(
        &mut self,
        sql: &str,
        what: &str,
        mut each: impl FnMut(&[Option<&str>]) -> Result<(), E>,
    ) -> Result<Result<(), E>, DbError> {
        use postgres::fallible_iterator::FallibleIterator;
        let failed = self.failure(what);
        let mut tx = self
            .client
            .build_transaction()
            .read_only(true)
            .start()
            .map_err(&failed)?;
        // One statement only: the extended protocol refuses a second.
        let none: [&(dyn postgres::types::ToSql + Sync); 0] = [];
        let mut rows = tx.query_raw(sql, none).map_err(&failed)?;
        while let Some(r) = rows.next().map_err(&failed)? {
            let values: Vec<Option<&str>> = (0..r.len())
                .map(|i| r.try_get::<_, Option<&str>>(i))
                .collect::<Result<_, _>>()
                .map_err(&failed)?;
            if let Err(e) = each(&values) {
                return Ok(Err(e));
            }
        }
        drop(rows);
        tx.rollback().map_err(&failed)?;
        Ok(Ok(()))
    }

    /// How a failed statement of step `what` is reported: a refused write
    /// as such, anything else as the step failing.
    fn failure(&self, what: &str) -> impl Fn(postgres::Error) -> DbError {
        let (name, what) = (self.name.clone(), what.to_string());
        move |e: postgres::Error| {
            if e.code() == Some(&SqlState::READ_ONLY_SQL_TRANSACTION) {
                DbError::Writes {
                    connection: name.clone(),
                    reason: reason(&e),
                }
            } else {
                DbError::Failed {
                    connection: name.clone(),
                    what: what.clone(),
                    reason: reason(&e),
                }
            }
        }
    }

    /// The columns of a recipe's input and how assort reads each. A
    /// query is first checked to be one statement that only reads
    /// ([`Database::check_query`]).
    pub fn columns(
        &mut self,
        source: &super::source::Source,
    ) -> Result<Vec<(String, super::source::Class)>, DbError> {
        Ok(self
            .column_types(source)?
            .into_iter()
            .map(|(name, type_name)| (name, super::source::class_of(&type_name)))
            .collect())
    }

    /// The columns of a recipe's input and their PostgreSQL type names
    /// (`int8`, `text`, ..), the query checked as [`Database::columns`]
    /// checks it.
    pub fn column_types(
        &mut self,
        source: &super::source::Source,
    ) -> Result<Vec<(String, String)>, DbError> {
        if !source.is_table() {
            self.check_query(&source.text)?;
        }
        let sql = format!("SELECT * FROM {} LIMIT 0", source.from_sql());
        let statement = self
            .client
            .prepare(&sql)
            .map_err(self.failure(&format!("reading {}", source.describe())))?;
        Ok(statement
            .columns()
            .iter()
            .map(|c| (c.name().to_string(), c.type_().name().to_string()))
            .collect())
    }

    /// Replaces table `table` (its SQL name, quoted as it is to be sent)
    /// with a new one of `columns` (their SQL definitions) holding the CSV
    /// text with a header line that `fill` writes, then runs `then` (the
    /// files of the same run written) and commits only when both
    /// succeeded: a failure anywhere leaves the old table as it was.
    ///
    /// One read-write transaction, of statements assort writes and never
    /// the recipe's query: the rows go into a staging table in the
    /// target's schema (`CREATE`, `COPY ... FROM STDIN`), and only then is
    /// the old table dropped and the new one renamed into its place, so
    /// readers of the old table wait for the last step only. The old
    /// table's indexes, grants and comments go with it (the new one is
    /// the database user's own). Returns the number of rows written.
    pub fn replace_table<E>(
        &mut self,
        table: &str,
        columns: &str,
        fill: impl FnOnce(&mut dyn std::io::Write) -> Result<(), E>,
        then: impl FnOnce() -> Result<(), E>,
    ) -> Result<Result<u64, E>, DbError> {
        // Not [`Database::failure`]: a refused write here is the server's
        // (a standby, a user without the right), not the recipe's.
        let (connection, what) = (self.name.clone(), format!("writing table {table}"));
        let failed = |e: postgres::Error| DbError::Failed {
            connection: connection.clone(),
            what: what.clone(),
            reason: reason(&e),
        };
        let (schema, name) = match table.rsplit_once("\".\"") {
            Some((schema, name)) => (format!("{schema}\"."), format!("\"{name}")),
            None => (String::new(), table.to_string()),
        };
        let staged = format!("assort_staged_{}", std::process::id());
        let staged_sql = format!("{schema}\"{staged}\"");
        let mut tx = self
            .client
            .build_transaction()
            .read_only(false)
            .start()
            .map_err(&failed)?;
        tx.batch_execute(&format!("CREATE TABLE {staged_sql} ({columns})"))
            .map_err(&failed)?;
        let mut writer = tx
            .copy_in(&format!(
                "COPY {staged_sql} FROM STDIN (FORMAT csv, HEADER true)"
            ))
            .map_err(&failed)?;
        if let Err(e) = fill(&mut writer) {
            // Dropped unfinished, the copy is cancelled; the transaction
            // rolls back when dropped.
            return Ok(Err(e));
        }
        let rows = writer.finish().map_err(&failed)?;
        tx.batch_execute(&format!(
            "DROP TABLE IF EXISTS {table}; ALTER TABLE {staged_sql} RENAME TO {name}"
        ))
        .map_err(&failed)?;
        if let Err(e) = then() {
            return Ok(Err(e));
        }
        tx.commit().map_err(|e| DbError::Failed {
            connection: connection.clone(),
            what: format!(
                "committing table {table}, after the run's files were written (they are the new ones; the table is the old one)"
            ),
            reason: reason(&e),
        })?;
        Ok(Ok(rows))
    }

    /// A recipe's own query, checked to be one statement that only reads,
    /// and its columns' names. It is prepared (a second statement after `;`
    /// is refused), then run as a subquery that returns no row (a data
    /// changing statement cannot stand there), in a read-only transaction
    /// (a function that writes is refused by the server).
    pub fn check_query(&mut self, query: &str) -> Result<Vec<String>, DbError> {
        let name = self.name.clone();
        let not_one = |reason: String| DbError::NotOneQuery {
            connection: name.clone(),
            reason,
        };
        let statement = self
            .client
            .prepare(query)
            .map_err(|e| not_one(reason(&e)))?;
        let columns: Vec<String> = statement
            .columns()
            .iter()
            .map(|c| c.name().to_string())
            .collect();
        if columns.is_empty() {
            return Err(not_one("it returns no columns".into()));
        }
        let wrapped = format!("SELECT * FROM ({query}) AS recipe_input LIMIT 0");
        match self.read(&wrapped, "checking the recipe's query") {
            Ok(_) => Ok(columns),
            // Prepared alone but not readable as a subquery: a statement
            // that changes data (`DELETE ... RETURNING`).
            Err(DbError::Failed { reason, .. }) => Err(not_one(format!(
                "it is not a query that reads rows (the server: {reason})"
            ))),
            Err(e) => Err(e),
        }
    }
}

impl super::sql::SqlEngine for Database {
    type Error = DbError;
    fn dialect(&self) -> super::sample::Dialect {
        super::sample::Dialect::Postgres
    }
    fn read(&mut self, sql: &str, what: &str) -> Result<Vec<Vec<Option<String>>>, DbError> {
        Database::read(self, sql, what)
    }
    fn failed(&self, what: &str, reason: String) -> DbError {
        DbError::Failed {
            connection: self.name.clone(),
            what: what.into(),
            reason,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn password_file_fields_unescape_colons_and_backslashes() {
        assert_eq!(
            password_fields(r"db.example:5432:*:ana:p\:w\\d:x"),
            ["db.example", "5432", "*", "ana", r"p:w\d:x"]
        );
        assert_eq!(password_fields("a:b"), ["a", "b"]);
    }

    /// A target at `host` as `user` of database `coop`, with the password
    /// file holding `lines` at `mode`.
    fn from_file(host: &str, user: &str, lines: &str, mode: u32) -> Option<String> {
        use std::os::unix::fs::PermissionsExt;
        let dir = tempfile::tempdir().unwrap();
        let file = dir.path().join("pgpass");
        std::fs::write(&file, lines).unwrap();
        std::fs::set_permissions(&file, std::fs::Permissions::from_mode(mode)).unwrap();
        let target = Target {
            name: "coop".into(),
            host: host.into(),
            port: 5432,
            dbname: "coop".into(),
            user: user.into(),
            password: None,
        };
        let path = file.display().to_string();
        password_file(&target, &|v: &str| {
            (v == "PGPASSFILE").then(|| path.clone())
        })
    }

    #[test]
    fn the_first_matching_password_line_wins_as_in_libpq() {
        let lines = "# the co-op's reader\nother:*:*:*:no\n*:5433:*:*:wrong-port\n\
                     /var/run/postgresql:5432:coop:reader:first\n*:*:*:reader:second\n";
        assert_eq!(
            from_file("/var/run/postgresql", "reader", lines, 0o600).as_deref(),
            Some("first")
        );
        assert_eq!(
            from_file("/tmp/sock", "reader", lines, 0o600).as_deref(),
            Some("second")
        );
        assert_eq!(from_file("/tmp/sock", "writer", lines, 0o600), None);
        // `localhost` stands for the default socket folder.
        let local = "localhost:5432:coop:reader:local\n";
        assert_eq!(
            from_file("/var/run/postgresql", "reader", local, 0o600).as_deref(),
            Some("local")
        );
        assert_eq!(from_file("/tmp/sock", "reader", local, 0o600), None);
    }

    #[test]
    fn service_names_are_every_section_once_in_the_order_found() {
        let dir = tempfile::tempdir().unwrap();
        let (a, b) = (dir.path().join("a.conf"), dir.path().join("b"));
        std::fs::write(&a, "# x\n[coop]\nhost=h\n[ warehouse ]\nuser=u\n").unwrap();
        std::fs::create_dir(&b).unwrap();
        std::fs::write(b.join("pg_service.conf"), "[other]\n[coop]\n").unwrap();
        let (a, b) = (a.display().to_string(), b.display().to_string());
        let env = |v: &str| match v {
            "PGSERVICEFILE" => Some(a.clone()),
            "PGSYSCONFDIR" => Some(b.clone()),
            _ => None,
        };
        assert_eq!(service_names(&env), ["coop", "warehouse", "other"]);
    }

    #[test]
    fn a_password_file_others_may_read_is_ignored() {
        let lines = "*:*:*:*:secret\n";
        assert_eq!(from_file("h", "u", lines, 0o400).as_deref(), Some("secret"));
        assert_eq!(from_file("h", "u", lines, 0o644), None);
        assert_eq!(from_file("h", "u", lines, 0o640), None);
    }
}
