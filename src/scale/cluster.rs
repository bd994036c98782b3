//! k-means rounds on an Apache DataFusion Ballista cluster (behind the
//! `ballista` cargo feature): a scheduler and its executors read a Parquet
//! folder where it lies and run the queries of [`super::round`] and
//! [`super::sample`] in DataFusion's dialect; only the sample, each round's
//! k rows of exact sums and (when asked) the assignments come back.
//!
//! DataFusion evaluates a query's double arithmetic as written (left to
//! right, IEEE 754, no fused multiply-add) and sums `DECIMAL(38, 0)` values
//! as 128-bit integers, so a round on the cluster gives the sums the
//! in-memory round gives, to the last digit, however the executors split
//! the files (tests/cluster_rounds.rs).
//!
//! The client is synchronous to the rest of assort: a [`Cluster`] owns a
//! small runtime and waits on each query. [`serve_scheduler`] and
//! [`serve_executor`] run Ballista's own scheduler and executor in the
//! calling process (a trial cluster on one machine, and the test's); a
//! production cluster runs Ballista's released programs instead.

use super::sample::Dialect;
use super::sql::SqlEngine;
use ballista::prelude::{SessionConfigExt, SessionContextExt};
use datafusion::arrow::array::{Array, AsArray};
use datafusion::arrow::datatypes::{DataType, Float64Type};
use datafusion::execution::SessionStateBuilder;
use datafusion::prelude::{ParquetReadOptions, SessionConfig, SessionContext};
use std::net::{TcpListener, TcpStream};
use std::path::{Path, PathBuf};
use std::process::{Child, Command, Stdio};
use std::sync::Arc;
use std::time::{Duration, Instant};

/// What went wrong on the cluster, naming it and the step.
#[derive(Debug, thiserror::Error)]
pub enum ClusterError {
    #[error("{what} on the cluster at {address} failed: {reason}")]
    Failed {
        address: String,
        what: String,
        reason: String,
    },
    #[error("the cluster's runtime could not start: {0}")]
    Runtime(String),
}

/// A session on a Ballista scheduler.
pub struct Cluster {
    runtime: tokio::runtime::Runtime,
    context: SessionContext,
    address: String,
}

impl Cluster {
    /// Connects to the scheduler at `host:port`; queries are split into at
    /// most `partitions` parts (DataFusion's target partitions: a folder
    /// of that many files or more is read as that many parts).
    pub fn connect(host: &str, port: u16, partitions: usize) -> Result<Cluster, ClusterError> {
        let runtime = tokio::runtime::Builder::new_multi_thread()
            .worker_threads(2)
            .enable_all()
            .build()
            .map_err(|e| ClusterError::Runtime(e.to_string()))?;
        let address = format!("{host}:{port}");
        let config = SessionConfig::new_with_ballista().with_target_partitions(partitions.max(1));
        let state = SessionStateBuilder::new()
            .with_config(config)
            .with_default_features()
            .build();
        let url = format!("df://{address}");
        let context = runtime
            .block_on(SessionContext::remote_with_state(&url, state))
            .map_err(|e| ClusterError::Failed {
                address: address.clone(),
                what: "connecting".into(),
                reason: e.to_string(),
            })?;
        Ok(Cluster {
            runtime,
            context,
            address,
        })
    }

    fn fault(&self, what: &str, reason: impl ToString) -> ClusterError {
        ClusterError::Failed {
            address: self.address.clone(),
            what: what.into(),
            reason: reason.to_string(),
        }
    }

    /// Names the Parquet file or folder of files at `path` `table` in this
    /// session. The executors read it by the same path, so it must be
    /// where they can reach it.
    pub fn register_parquet(&mut self, table: &str, path: &Path) -> Result<(), ClusterError> {
        let mut at = path.to_string_lossy().into_owned();
        if path.is_dir() && !at.ends_with('/') {
            at.push('/');
        }
        let options = ParquetReadOptions::default();
        self.runtime
            .block_on(self.context.register_parquet(table, &at, options))
            .map_err(|e| self.fault(&format!("naming `{}` as a table", path.display()), e))
    }

    /// The columns of table `table` and their Arrow types, from the
    /// session's own record of it (the files' footers).
    pub fn column_types(&mut self, table: &str) -> Result<Vec<(String, DataType)>, ClusterError> {
        let provider = self
            .runtime
            .block_on(self.context.table_provider(table))
            .map_err(|e| self.fault(&format!("reading the columns of `{table}`"), e))?;
        Ok(provider
            .schema()
            .fields()
            .iter()
            .map(|f| (f.name().clone(), f.data_type().clone()))
            .collect())
    }

    /// Runs `sql` and returns its rows, every value as text (`None` for a
    /// NULL).
    pub fn read(
        &mut self,
        sql: &str,
        what: &str,
    ) -> Result<Vec<Vec<Option<String>>>, ClusterError> {
        let batches = self
            .runtime
            .block_on(async { self.context.sql(sql).await?.collect().await })
            .map_err(|e| self.fault(what, e))?;
        let mut rows = Vec::new();
        for batch in batches {
            let mut columns = Vec::with_capacity(batch.num_columns());
            for column in batch.columns() {
                // A double as Rust writes it: the shortest text that reads
                // back as the same double.
                let text: Vec<Option<String>> = if column.data_type() == &DataType::Float64 {
                    let c = column.as_primitive::<Float64Type>();
                    (0..c.len())
                        .map(|i| (!c.is_null(i)).then(|| format!("{:?}", c.value(i))))
                        .collect()
                } else {
                    let c = datafusion::arrow::compute::cast(column, &DataType::Utf8)
                        .map_err(|e| self.fault(what, e))?;
                    let c = c.as_string::<i32>();
                    (0..c.len())
                        .map(|i| (!c.is_null(i)).then(|| c.value(i).to_string()))
                        .collect()
                };
                columns.push(text);
            }
            for i in 0..batch.num_rows() {
                rows.push(columns.iter().map(|c| c[i].clone()).collect());
            }
        }
        Ok(rows)
    }

    /// The physical plan DataFusion makes of `sql` on the client, as text:
    /// how many parts each step runs in.
    pub fn plan(&mut self, sql: &str) -> Result<String, ClusterError> {
        let rows = self.read(&format!("EXPLAIN {sql}"), "planning a query")?;
        Ok(rows
            .into_iter()
            .flatten()
            .flatten()
            .collect::<Vec<_>>()
            .join("\n"))
    }
}

/// True when a column of type `t` cast to a double in SQL gives the
/// double assort reads from the Parquet file (`v as f64`): integers and
/// double-precision numbers. Singles, decimals, booleans and text are read
/// here by rules of assort's own (a single or a decimal as the double its
/// text gives, text parsed), which a cast need not follow to the last bit.
pub fn exact_as_double(t: &DataType) -> bool {
    use DataType as T;
    matches!(
        t,
        T::Int8
            | T::Int16
            | T::Int32
            | T::Int64
            | T::UInt8
            | T::UInt16
            | T::UInt32
            | T::UInt64
            | T::Float64
    )
}

impl SqlEngine for Cluster {
    type Error = ClusterError;
    fn dialect(&self) -> Dialect {
        Dialect::DataFusion
    }
    fn read(&mut self, sql: &str, what: &str) -> Result<Vec<Vec<Option<String>>>, ClusterError> {
        Cluster::read(self, sql, what)
    }
    fn failed(&self, what: &str, reason: String) -> ClusterError {
        self.fault(what, reason)
    }
}

/// A multi-threaded runtime for a serving process, or why not.
fn serving_runtime() -> Result<tokio::runtime::Runtime, ClusterError> {
    tokio::runtime::Builder::new_multi_thread()
        .enable_all()
        .build()
        .map_err(|e| ClusterError::Runtime(e.to_string()))
}

/// Runs Ballista's scheduler in this process, listening on `127.0.0.1:port`,
/// until the process ends.
pub fn serve_scheduler(port: u16) -> Result<(), ClusterError> {
    use ballista_scheduler::cluster::BallistaCluster;
    use ballista_scheduler::config::SchedulerConfig;
    let failed = |reason: String| ClusterError::Failed {
        address: format!("127.0.0.1:{port}"),
        what: "serving as the scheduler".into(),
        reason,
    };
    let config = SchedulerConfig::default().with_port(port);
    let address = format!("127.0.0.1:{port}")
        .parse()
        .map_err(|e: std::net::AddrParseError| failed(e.to_string()))?;
    serving_runtime()?.block_on(async move {
        let cluster = BallistaCluster::new_from_config(&config)
            .await
            .map_err(|e| failed(e.to_string()))?;
        ballista_scheduler::scheduler_process::start_server(cluster, address, Arc::new(config))
            .await
            .map_err(|e| failed(e.to_string()))
    })
}

/// Runs a Ballista executor in this process, taking `slots` tasks at a
/// time from the scheduler at `127.0.0.1:scheduler`, serving its results on
/// `port` (and `grpc_port`), keeping its shuffle files under `work_dir`;
/// until the process ends.
pub fn serve_executor(
    scheduler: u16,
    (port, grpc_port): (u16, u16),
    work_dir: &Path,
    slots: usize,
) -> Result<(), ClusterError> {
    use ballista_executor::executor_process::{start_executor_process, ExecutorProcessConfig};
    let config = ExecutorProcessConfig {
        bind_host: "127.0.0.1".into(),
        port,
        grpc_port,
        scheduler_host: "127.0.0.1".into(),
        scheduler_port: scheduler,
        vcores: slots.max(1),
        work_dir: Some(work_dir.to_string_lossy().into_owned()),
        ..ExecutorProcessConfig::default()
    };
    serving_runtime()?.block_on(async move {
        start_executor_process(Arc::new(config))
            .await
            .map_err(|e| ClusterError::Failed {
                address: format!("127.0.0.1:{scheduler}"),
                what: format!("serving as an executor on port {port}"),
                reason: e.to_string(),
            })
    })
}

/// A trial cluster on this machine: a scheduler and executors, each a
/// process of its own running `node` (`assort-cluster-node`), on ports
/// free when it starts, ended when this is dropped.
pub struct TrialCluster {
    children: Vec<Child>,
    /// The scheduler's port on 127.0.0.1.
    pub scheduler: u16,
    /// Each executor's work folder, where it keeps the results it serves.
    pub work_dirs: Vec<PathBuf>,
}

impl TrialCluster {
    /// Starts a scheduler, then `executors` executors taking `slots` tasks
    /// at a time, their work folders and logs in `dir`; returns once each
    /// listens and a moment more for the executors to register.
    pub fn start(
        node: &Path,
        executors: usize,
        slots: usize,
        dir: &Path,
    ) -> Result<TrialCluster, ClusterError> {
        let scheduler = free_port()?;
        let mut cluster = TrialCluster {
            children: Vec::new(),
            scheduler,
            work_dirs: Vec::new(),
        };
        let port = scheduler.to_string();
        cluster.spawn(node, &["scheduler", "--port", &port], dir, "scheduler")?;
        cluster.wait_for(scheduler, "scheduler")?;
        for e in 0..executors {
            let (port, grpc) = (free_port()?, free_port()?);
            let work = dir.join(format!("executor-{e}"));
            std::fs::create_dir_all(&work).map_err(|e| trial(e.to_string()))?;
            let at = work.to_string_lossy().into_owned();
            let args = [
                "executor",
                "--scheduler",
                &scheduler.to_string(),
                "--port",
                &port.to_string(),
                "--grpc-port",
                &grpc.to_string(),
                "--work-dir",
                &at,
                "--slots",
                &slots.to_string(),
            ];
            cluster.spawn(node, &args, dir, &format!("executor-{e}"))?;
            cluster.wait_for(port, "executor")?;
            cluster.work_dirs.push(work);
        }
        // An executor registers with the scheduler after it listens.
        std::thread::sleep(Duration::from_secs(2));
        Ok(cluster)
    }

    fn spawn(
        &mut self,
        node: &Path,
        args: &[&str],
        dir: &Path,
        name: &str,
    ) -> Result<(), ClusterError> {
        let log = std::fs::File::create(dir.join(format!("{name}.log")))
            .map_err(|e| trial(e.to_string()))?;
        let child = Command::new(node)
            .args(args)
            .stdout(Stdio::null())
            .stderr(log)
            .spawn()
            .map_err(|e| trial(format!("starting {}: {e}", node.display())))?;
        self.children.push(child);
        Ok(())
    }

    /// Waits until something listens on `port` (the process last
    /// started), failing if it ends first or takes a minute.
    fn wait_for(&mut self, port: u16, what: &str) -> Result<(), ClusterError> {
        let start = Instant::now();
        let child = self
            .children
            .last_mut()
            .ok_or_else(|| trial("nothing started".into()))?;
        while TcpStream::connect(("127.0.0.1", port)).is_err() {
            if let Ok(Some(status)) = child.try_wait() {
                return Err(trial(format!(
                    "the {what} ended before it listened: {status}"
                )));
            }
            if start.elapsed() > Duration::from_secs(60) {
                return Err(trial(format!("the {what} did not listen within a minute")));
            }
            std::thread::sleep(Duration::from_millis(100));
        }
        Ok(())
    }
}

impl Drop for TrialCluster {
    fn drop(&mut self) {
        for child in &mut self.children {
            let _ = child.kill();
            let _ = child.wait();
        }
    }
}

fn trial(reason: String) -> ClusterError {
    ClusterError::Failed {
        address: "127.0.0.1".into(),
        what: "starting a trial cluster".into(),
        reason,
    }
}

/// A port nobody listens on now (the system's choice).
pub fn free_port() -> Result<u16, ClusterError> {
    TcpListener::bind("127.0.0.1:0")
        .and_then(|l| l.local_addr())
        .map(|a| a.port())
        .map_err(|e| trial(e.to_string()))
}
