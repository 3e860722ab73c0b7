//! Cooperative cancellation and progress reporting for long runs.
//!
//! Long computations (temperature scans, benchmarks) poll an [`Interrupt`]
//! between sweeps and return what they have finished when it is raised, so
//! an interrupted notebook cell never loses results. They report
//! [`Progress`] through a [`ProgressFn`] callback that may be called from any
//! worker thread.

use serde::{Deserialize, Serialize};
use std::sync::atomic::{AtomicBool, AtomicU64, Ordering};
use std::sync::Arc;

/// A shared "please stop" flag. Cloning shares the flag.
///
/// The kernel raises it on a Jupyter interrupt; simulation loops poll it
/// between sweeps (never inside the single-flip hot loop).
#[derive(Clone, Debug, Default)]
pub struct Interrupt(Arc<AtomicBool>);

impl Interrupt {
    /// A fresh flag, not requested.
    pub fn new() -> Self {
        Self::default()
    }

    /// Ask every holder of this flag to stop at its next check.
    pub fn request(&self) {
        self.0.store(true, Ordering::SeqCst);
    }

    /// Has a stop been requested?
    ///
    /// `Relaxed` would be enough for correctness of a monotone flag; `SeqCst`
    /// costs nothing measurable at one check per sweep.
    pub fn is_requested(&self) -> bool {
        self.0.load(Ordering::SeqCst)
    }

    /// Lower the flag again (the kernel does this before running a new cell).
    pub fn clear(&self) {
        self.0.store(false, Ordering::SeqCst);
    }
}

/// Progress of a long run: `done` out of `total` units of work (for scans:
/// Monte Carlo sweeps summed over all temperatures).
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct Progress {
    /// What is running, e.g. "temperature scan".
    pub label: String,
    /// Units of work finished.
    pub done: u64,
    /// Units of work in the whole run.
    pub total: u64,
}

impl Progress {
    /// Fraction finished in `[0, 1]` (1 for an empty run).
    pub fn fraction(&self) -> f64 {
        if self.total == 0 {
            1.0
        } else {
            (self.done as f64 / self.total as f64).min(1.0)
        }
    }
}

/// Progress callback used by long runs; it may be called from several
/// threads, hence `Sync`.
pub type ProgressFn<'a> = &'a (dyn Fn(&Progress) + Sync);

/// A callback that ignores progress, for callers that do not display it.
pub fn ignore_progress(_: &Progress) {}

/// Progress of a run whose work is counted in units (sweeps) done by several
/// threads at once: an atomic counter reported about every 0.5 % of the work,
/// so the number of reports is deterministic and independent of timing.
pub struct SharedProgress<'a> {
    label: &'static str,
    done: AtomicU64,
    total: u64,
    step: u64,
    report: ProgressFn<'a>,
}

impl<'a> SharedProgress<'a> {
    /// Starts counting `total` units and reports 0 done at once.
    pub fn start(label: &'static str, total: u64, report: ProgressFn<'a>) -> Self {
        report(&Progress {
            label: label.to_string(),
            done: 0,
            total,
        });
        SharedProgress {
            label,
            done: AtomicU64::new(0),
            total,
            step: (total / 200).max(1),
            report,
        }
    }

    /// One unit of work finished (any thread).
    pub fn unit_done(&self) {
        let done = self.done.fetch_add(1, Ordering::Relaxed) + 1;
        if done.is_multiple_of(self.step) || done == self.total {
            (self.report)(&Progress {
                label: self.label.to_string(),
                done,
                total: self.total,
            });
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn interrupt_is_shared_between_clones_and_clears() {
        let a = Interrupt::new();
        let b = a.clone();
        assert!(!b.is_requested());
        a.request();
        assert!(b.is_requested());
        b.clear();
        assert!(!a.is_requested());
    }

    #[test]
    fn progress_fraction() {
        let p = Progress {
            label: "x".into(),
            done: 3,
            total: 12,
        };
        assert_eq!(p.fraction(), 0.25);
        let empty = Progress {
            label: "x".into(),
            done: 0,
            total: 0,
        };
        assert_eq!(empty.fraction(), 1.0);
    }
}
