//! Where a run's time goes: each stage's wall time and the process's peak
//! memory when it ended, for people deciding what to try next on a large
//! file (`--json` and `assort run --times`). Never written into the run
//! record, whose bytes must not change from one rerun to the next.

use serde::Serialize;
use std::time::Instant;

/// One stage of a run, measured.
#[derive(Debug, Clone, Serialize)]
pub struct StageTime {
    pub stage: &'static str,
    /// Wall time of the stage alone.
    pub seconds: f64,
    /// The process's peak resident memory when the stage ended, in bytes
    /// (`None` where the system does not say: Linux's `VmHWM`).
    pub peak_bytes: Option<u64>,
}

/// Laps of a run's stages, in order.
#[derive(Debug)]
pub struct Clock {
    last: Instant,
    pub laps: Vec<StageTime>,
}

impl Clock {
    pub fn start() -> Clock {
        Clock {
            last: Instant::now(),
            laps: Vec::new(),
        }
    }

    /// Ends `stage`: its time since the previous lap.
    pub fn lap(&mut self, stage: &'static str) {
        let now = Instant::now();
        self.laps.push(StageTime {
            stage,
            seconds: (now - self.last).as_secs_f64(),
            peak_bytes: peak_bytes(),
        });
        self.last = now;
    }
}

/// The process's peak resident memory so far, from `/proc/self/status`.
pub fn peak_bytes() -> Option<u64> {
    let status = std::fs::read_to_string("/proc/self/status").ok()?;
    let line = status.lines().find(|l| l.starts_with("VmHWM:"))?;
    let kib: u64 = line.split_whitespace().nth(1)?.parse().ok()?;
    Some(kib * 1024)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn laps_follow_each_other_and_name_their_stage() {
        let mut c = Clock::start();
        c.lap("read");
        c.lap("fit");
        let names: Vec<&str> = c.laps.iter().map(|l| l.stage).collect();
        assert_eq!(names, ["read", "fit"]);
        assert!(c.laps.iter().all(|l| l.seconds >= 0.0));
        if cfg!(target_os = "linux") {
            assert!(c.laps[0].peak_bytes.is_some_and(|b| b > 0));
        }
    }
}
