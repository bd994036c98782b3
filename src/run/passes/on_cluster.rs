//! `input "FOLDER" key KEY cluster NAME read passes`: the k-means rounds of
//! a Parquet input read in passes run on an Apache DataFusion Ballista
//! cluster (the `ballista` feature). Each round is one query there
//! ([`crate::scale::round`], exact sums), over the prepared features
//! written as SQL with the parameters' exact doubles, as for a database
//! ([`super::database::prepared`]); the driver here updates the centres
//! between rounds. The other passes (the look, the parameters, the sample,
//! the chosen segments' sums and the assignments) still read the folder
//! here, so it must be where both this machine and the executors read it
//! by the same path (a shared mount).
//!
//! The cluster's scheduler is found at the address in the variable
//! `ASSORT_CLUSTER_NAME` (`host:port`; NAME the recipe's name in capitals),
//! never in the recipe.

use super::{Candidate, FeatureParams, Input, KMeansPlan, Plan, RunError, Shifts, Step};
use crate::scale::cluster::{Cluster, ClusterError};
use crate::scale::sql::InEngine;
use crate::sql_words::ident;

/// The name the folder takes in the cluster's session.
const TABLE: &str = "records";

/// The variable holding cluster `name`'s scheduler address.
pub fn variable(name: &str) -> String {
    format!("ASSORT_CLUSTER_{}", name.to_ascii_uppercase())
}

/// The scheduler's host and port for cluster `name`, from `env`.
pub fn address(
    name: &str,
    env: &dyn Fn(&str) -> Option<String>,
) -> Result<(String, u16), RunError> {
    let var = variable(name);
    let bad = |reason: String| RunError::Cluster {
        reason: format!("cluster `{name}`: {reason}"),
    };
    let value = env(&var).ok_or_else(|| {
        bad(format!(
            "no address: set `{var}` to its scheduler's `host:port`"
        ))
    })?;
    let at = value.trim().trim_start_matches("df://");
    let (host, port) = at
        .rsplit_once(':')
        .ok_or_else(|| bad(format!("`{var}` is `{value}`, not `host:port`")))?;
    let port = port.parse().map_err(|_| {
        bad(format!(
            "`{var}` is `{value}`: `{port}` is not a port number"
        ))
    })?;
    Ok((host.to_string(), port))
}

/// Whether cluster `plan.input.cluster` has an address and something
/// answers there (a TCP connection within 10 seconds): checked before the
/// first pass, so a run over a large folder does not read it for nothing.
pub(super) fn reachable(plan: &Plan) -> Result<(), RunError> {
    let name = plan.input.cluster.as_deref().unwrap_or_default();
    let env = |v: &str| std::env::var(v).ok();
    let (host, port) = address(name, &env)?;
    let unreachable = |reason: String| RunError::Cluster {
        reason: format!("cluster `{name}`: nothing answers at {host}:{port} ({reason})"),
    };
    let addresses = std::net::ToSocketAddrs::to_socket_addrs(&(host.as_str(), port))
        .map_err(|e| unreachable(e.to_string()))?;
    let mut last = String::from("no address");
    for a in addresses {
        match std::net::TcpStream::connect_timeout(&a, std::time::Duration::from_secs(10)) {
            Ok(_) => return Ok(()),
            Err(e) => last = e.to_string(),
        }
    }
    Err(unreachable(last))
}

/// The fit's candidates, each k's refinement rounds on the cluster.
pub(super) fn fit_each_k(
    plan: &Plan,
    km: &KMeansPlan,
    input: &Input,
    driven: &crate::run::driven::Driven<'_>,
    (params, shifts): (&[FeatureParams], &Shifts),
    progress: &dyn Fn(Step),
) -> Result<Vec<Candidate>, RunError> {
    let name = plan.input.cluster.as_deref().unwrap_or_default();
    let env = |v: &str| std::env::var(v).ok();
    let (host, port) = address(name, &env)?;
    let failed = |e: ClusterError| RunError::Cluster {
        reason: format!("cluster `{name}`: {e} (reading {})", input.shown),
    };
    let folder = std::path::absolute(&plan.input.resolved).map_err(|e| RunError::Cluster {
        reason: format!("cluster `{name}`: {e}"),
    })?;
    let mut cluster = Cluster::connect(&host, port, partitions(&folder)).map_err(failed)?;
    cluster.register_parquet(TABLE, &folder).map_err(failed)?;
    let types = cluster.column_types(TABLE).map_err(failed)?;
    let mut columns = Vec::with_capacity(plan.features.len());
    for f in &plan.features {
        let at = input.at[columns.len()];
        let column = &input.names[at];
        match types.iter().find(|(n, _)| n == column) {
            Some((_, t)) if crate::scale::cluster::exact_as_double(t) => {}
            found => {
                return Err(RunError::Cluster {
                    reason: format!(
                        "cluster `{name}`: feature `{}` of {} is {}; on a cluster the features are read as integers or double-precision numbers (their SQL cast is then the value assort reads), so store it as one",
                        f.column,
                        input.shown,
                        found.map_or("missing".to_string(), |(_, t)| format!("of type {t}"))
                    ),
                })
            }
        }
        columns.push(format!("CAST({} AS DOUBLE PRECISION)", ident(column)));
    }
    let kept = super::database::kept(plan, &columns);
    let mut engine = InEngine {
        engine: &mut cluster,
        source: format!("(SELECT * FROM {TABLE} WHERE {kept}) AS kept_records"),
        features: (params.iter().zip(&columns))
            .map(|(p, c)| super::database::prepared(p, c))
            .collect(),
        shifts,
    };
    driven.each_k(plan, km, &mut engine, failed, progress)
}

/// How many parts the cluster splits a query into: one per Parquet file
/// of the folder, at least 4 and at most 64 (the sums are exact, so the
/// split changes nothing but the speed).
fn partitions(folder: &std::path::Path) -> usize {
    let files = std::fs::read_dir(folder)
        .map(|entries| {
            entries
                .flatten()
                .filter(|e| e.path().extension().is_some_and(|x| x == "parquet"))
                .count()
        })
        .unwrap_or(1);
    files.clamp(4, 64)
}
