//! Progress of long computations (campaign reductions, Monte Carlo runs), reported to
//! whoever shows it: a terminal bar, a notebook display. Shared by every stage.

use std::fmt;
use std::sync::Arc;
use std::sync::atomic::{AtomicU64, Ordering};

/// Called with (done, total) as work completes, from any worker thread; the receiver
/// throttles what it shows.
#[derive(Clone)]
pub struct Progress(Arc<dyn Fn(u64, u64) + Send + Sync>);

impl Progress {
    /// A progress report to `f`.
    pub fn new(f: impl Fn(u64, u64) + Send + Sync + 'static) -> Self {
        Self(Arc::new(f))
    }
    /// Reports `done` of `total`.
    pub fn report(&self, done: u64, total: u64) {
        (self.0)(done, total)
    }
}

impl fmt::Debug for Progress {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str("Progress")
    }
}

/// Counts finished work across threads and reports each step.
#[derive(Debug)]
pub struct Counter<'a> {
    progress: Option<&'a Progress>,
    done: AtomicU64,
    total: u64,
}

impl<'a> Counter<'a> {
    /// A counter towards `total`.
    pub fn new(progress: Option<&'a Progress>, total: u64) -> Self {
        Self { progress, done: AtomicU64::new(0), total }
    }
    /// Adds `n` finished items and reports.
    pub fn add(&self, n: u64) {
        if let Some(p) = self.progress {
            let done = self.done.fetch_add(n, Ordering::Relaxed) + n;
            p.report(done.min(self.total), self.total);
        }
    }
}
