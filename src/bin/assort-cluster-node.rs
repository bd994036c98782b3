//! One process of a trial Apache DataFusion Ballista cluster on this
//! machine (the `ballista` feature): Ballista's own scheduler or executor,
//! run as a library, for trying assort's cluster rounds and for the test
//! that starts a scheduler and two executors (tests/cluster_rounds.rs). A
//! production cluster runs Ballista's released programs instead.
//!
//! ```text
//! assort-cluster-node scheduler --port 50050
//! assort-cluster-node executor --scheduler 50050 --port 50051 --grpc-port 50052 --work-dir /tmp/ex1
//! ```

use clap::{Parser, Subcommand};
use std::path::PathBuf;
use std::process::ExitCode;

#[derive(Parser)]
#[command(about = "One process of a trial Ballista cluster on this machine")]
struct Node {
    #[command(subcommand)]
    role: Role,
}

#[derive(Subcommand)]
enum Role {
    /// The scheduler, listening on 127.0.0.1.
    Scheduler {
        #[arg(long, default_value_t = 50050)]
        port: u16,
    },
    /// An executor, taking tasks from the scheduler on 127.0.0.1.
    Executor {
        /// The scheduler's port.
        #[arg(long, default_value_t = 50050)]
        scheduler: u16,
        /// Where it serves its results.
        #[arg(long, default_value_t = 50051)]
        port: u16,
        #[arg(long, default_value_t = 50052)]
        grpc_port: u16,
        /// Where it keeps the results it serves.
        #[arg(long)]
        work_dir: PathBuf,
        /// Tasks it runs at a time.
        #[arg(long, default_value_t = 1)]
        slots: usize,
    },
}

fn main() -> ExitCode {
    let served = match Node::parse().role {
        Role::Scheduler { port } => assort::scale::cluster::serve_scheduler(port),
        Role::Executor {
            scheduler,
            port,
            grpc_port,
            work_dir,
            slots,
        } => assort::scale::cluster::serve_executor(scheduler, (port, grpc_port), &work_dir, slots),
    };
    match served {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            eprintln!("error: {e}");
            ExitCode::FAILURE
        }
    }
}
