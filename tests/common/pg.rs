//! A throwaway PostgreSQL server for the tests that run assort's SQL in a
//! real database: a fresh cluster (`initdb`) in a temporary folder,
//! started with `pg_ctl` listening on a Unix socket in that folder only,
//! stopped and removed when dropped. The server refuses to run as root,
//! so under root (as CI runs) it runs as the `postgres` user the Debian
//! package creates.
//!
//! On a machine without PostgreSQL the tests that need it say so and
//! pass; with `ASSORT_REQUIRE_POSTGRES` set (`.ci/run` sets it, after
//! installing the server) they fail instead.

use std::path::{Path, PathBuf};
use std::process::{Command, Output, Stdio};

pub struct Postgres {
    dir: tempfile::TempDir,
    bin: PathBuf,
    /// Run the server's programs as `postgres` (we are root).
    as_postgres: bool,
}

/// The folder holding `initdb`, `pg_ctl` and `psql`: `ASSORT_PG_BIN`, the
/// newest `/usr/lib/postgresql/N/bin` (Debian), or wherever `pg_ctl` is
/// on the path.
fn bin_dir() -> Option<PathBuf> {
    if let Some(dir) = std::env::var_os("ASSORT_PG_BIN") {
        return Some(PathBuf::from(dir));
    }
    let mut versions: Vec<(u32, PathBuf)> = std::fs::read_dir("/usr/lib/postgresql")
        .into_iter()
        .flatten()
        .flatten()
        .filter_map(|e| {
            let v = e.file_name().to_str()?.parse().ok()?;
            let bin = e.path().join("bin");
            bin.join("initdb").exists().then_some((v, bin))
        })
        .collect();
    versions.sort();
    if let Some((_, bin)) = versions.pop() {
        return Some(bin);
    }
    let which = Command::new("sh")
        .args(["-c", "command -v pg_ctl"])
        .output()
        .ok()?;
    let path = String::from_utf8(which.stdout).ok()?;
    Path::new(path.trim()).parent().map(Path::to_path_buf)
}

fn is_root() -> bool {
    Command::new("id")
        .arg("-u")
        .output()
        .is_ok_and(|o| String::from_utf8_lossy(&o.stdout).trim() == "0")
}

impl Postgres {
    /// Starts a server, or says why not and returns `None` (failing the
    /// test instead when `ASSORT_REQUIRE_POSTGRES` is set).
    pub fn start() -> Option<Postgres> {
        match Self::try_start() {
            Ok(pg) => Some(pg),
            Err(why) => {
                assert!(
                    std::env::var_os("ASSORT_REQUIRE_POSTGRES").is_none(),
                    "PostgreSQL is required here (ASSORT_REQUIRE_POSTGRES) but did not start: {why}"
                );
                eprintln!("skipped the PostgreSQL part: {why}");
                None
            }
        }
    }

    fn try_start() -> Result<Postgres, String> {
        let bin = bin_dir().ok_or("no PostgreSQL server programs found")?;
        let dir = tempfile::tempdir().map_err(|e| e.to_string())?;
        let as_postgres = is_root();
        if as_postgres {
            let chown = Command::new("chown")
                .args(["postgres:"])
                .arg(dir.path())
                .output()
                .map_err(|e| e.to_string())?;
            if !chown.status.success() {
                return Err(format!(
                    "cannot give the folder to user postgres: {}",
                    String::from_utf8_lossy(&chown.stderr)
                ));
            }
        }
        let pg = Postgres {
            dir,
            bin,
            as_postgres,
        };
        let data = pg.dir.path().join("data");
        pg.server_program(
            "initdb",
            &[
                "-D".as_ref(),
                data.as_os_str(),
                "-A".as_ref(),
                "trust".as_ref(),
                "-U".as_ref(),
                "assort".as_ref(),
                "-E".as_ref(),
                "UTF8".as_ref(),
                "--locale=C".as_ref(),
                "--no-sync".as_ref(),
            ],
        )?;
        pg.pg_ctl("start")?;
        Ok(pg)
    }

    /// `pg_ctl start` (or `restart`) on the cluster, listening on the
    /// folder's socket only; the server's log in the error.
    fn pg_ctl(&self, action: &str) -> Result<Output, String> {
        let data = self.dir.path().join("data");
        let options = format!(
            "-k {} -c listen_addresses='' -c fsync=off -p 5432",
            self.dir.path().display()
        );
        let log = self.dir.path().join("server.log");
        self.server_program(
            "pg_ctl",
            &[
                "-D".as_ref(),
                data.as_os_str(),
                "-o".as_ref(),
                options.as_ref(),
                "-l".as_ref(),
                log.as_os_str(),
                "-w".as_ref(),
                action.as_ref(),
            ],
        )
        .map_err(|e| {
            let log = std::fs::read_to_string(&log).unwrap_or_default();
            format!("{e}\n{log}")
        })
    }

    /// Stops the server at once, as a crash or a killed server would end
    /// (`pg_ctl stop -m immediate`).
    #[allow(dead_code)] // the tests stop a server; the benches do not
    pub fn kill(&self) -> Result<(), String> {
        let data = self.dir.path().join("data");
        self.server_program(
            "pg_ctl",
            &[
                "-D".as_ref(),
                data.as_os_str(),
                "-m".as_ref(),
                "immediate".as_ref(),
                "-w".as_ref(),
                "stop".as_ref(),
            ],
        )
        .map(|_| ())
    }

    /// Restarts the server (for settings read at start only).
    pub fn restart(&self) -> Result<(), String> {
        self.pg_ctl("restart").map(|_| ())
    }

    /// Runs one of the server's programs (as `postgres` under root).
    fn server_program(&self, name: &str, args: &[&std::ffi::OsStr]) -> Result<Output, String> {
        let program = self.bin.join(name);
        let mut cmd = if self.as_postgres {
            let mut c = Command::new("runuser");
            c.args(["-u", "postgres", "--"]).arg(&program);
            c
        } else {
            Command::new(&program)
        };
        let out = cmd
            .args(args)
            .stdin(Stdio::null())
            .output()
            .map_err(|e| format!("cannot run {}: {e}", program.display()))?;
        if out.status.success() {
            Ok(out)
        } else {
            Err(format!(
                "{name} failed: {}{}",
                String::from_utf8_lossy(&out.stdout),
                String::from_utf8_lossy(&out.stderr)
            ))
        }
    }

    /// Runs the SQL file `script` with `psql` (stopping at the first
    /// error) and returns what it prints as CSV, header first; an error is
    /// returned as psql's message.
    pub fn psql_file(&self, script: &Path) -> Result<Vec<csv::StringRecord>, String> {
        let out = Command::new(self.bin.join("psql"))
            .args(["-X", "-q", "-v", "ON_ERROR_STOP=1", "--csv", "-h"])
            .arg(self.dir.path())
            .args(["-p", "5432", "-U", "assort", "-d", "postgres", "-f"])
            .arg(script)
            .stdin(Stdio::null())
            .output()
            .map_err(|e| format!("cannot run psql: {e}"))?;
        if !out.status.success() {
            return Err(String::from_utf8_lossy(&out.stderr).into_owned());
        }
        let mut reader = csv::ReaderBuilder::new()
            .has_headers(false)
            .from_reader(out.stdout.as_slice());
        Ok(reader.records().map(|r| r.unwrap()).collect())
    }

    /// The folder of the server's Unix socket (its port is 5432, its user
    /// `assort`, its database `postgres`).
    pub fn socket_dir(&self) -> &Path {
        self.dir.path()
    }

    /// Writes a PostgreSQL service file at `path` whose section `[name]`
    /// leads to this server, followed by `more` (other sections).
    pub fn service_file(&self, path: &Path, name: &str, more: &str) {
        let text = format!(
            "# a comment\n[{name}]\nhost={}\nport=5432\nuser=assort\ndbname=postgres\n\n{more}",
            self.socket_dir().display()
        );
        std::fs::write(path, text).unwrap();
    }

    /// Runs SQL text as [`Postgres::psql_file`] does.
    pub fn psql(&self, sql: &str) -> Result<Vec<csv::StringRecord>, String> {
        let script = self.dir.path().join("script.sql");
        std::fs::write(&script, sql).unwrap();
        self.psql_file(&script)
    }
}

impl Drop for Postgres {
    fn drop(&mut self) {
        let data = self.dir.path().join("data");
        let _ = self.server_program(
            "pg_ctl",
            &[
                "-D".as_ref(),
                data.as_os_str(),
                "-m".as_ref(),
                "immediate".as_ref(),
                "stop".as_ref(),
            ],
        );
    }
}
