//! A request to stop a computation early, as Ctrl-C makes it.
//!
//! A signal reaches the whole process, so the request is process-wide: a
//! front end sets it from its interrupt handler and clears it before the
//! next run. k-means checks it between restarts and between rounds, and
//! the run stage between its steps; a stopped computation returns
//! [`super::EngineError::Stopped`] rather than a partial result. Checking
//! is one relaxed atomic load and changes nothing when no stop was asked
//! for, so results stay bit-identical.

use std::sync::atomic::{AtomicBool, Ordering};

static REQUESTED: AtomicBool = AtomicBool::new(false);

/// Asks the computation under way to stop (safe in a signal handler: one
/// atomic store).
pub fn request() {
    REQUESTED.store(true, Ordering::Relaxed);
}

/// Clears a request, before a new computation starts.
pub fn clear() {
    REQUESTED.store(false, Ordering::Relaxed);
}

/// Whether a stop was asked for since the last [`clear`].
pub fn requested() -> bool {
    REQUESTED.load(Ordering::Relaxed)
}
