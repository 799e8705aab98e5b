//! How a simulation tells its caller how far it has got. The simulator draws nothing:
//! it calls a [`ProgressSink`] the caller gives in
//! [`SimulationOptions::progress`](crate::SimulationOptions::progress) (the command line
//! draws a bar on a terminal; the review document and the tests give none).

use std::fmt;
use std::sync::Arc;

/// Receives the progress of a run: how many blocks of paths there are, and each one as
/// it finishes. Called from the worker threads, so it must be cheap and thread-safe.
pub trait ProgressSink: Send + Sync {
    /// The run starts with `total` blocks of paths to simulate.
    fn start(&self, total: usize);
    /// One more block finished.
    fn advance(&self);
    /// The run is over (called once, also when it ends early).
    fn finish(&self);
}

/// A shared [`ProgressSink`], as the options of a simulation hold it. Two are equal when
/// they are the same sink.
#[derive(Clone)]
pub struct Progress(pub Arc<dyn ProgressSink>);

impl Progress {
    pub fn new(sink: impl ProgressSink + 'static) -> Progress {
        Progress(Arc::new(sink))
    }
}

impl fmt::Debug for Progress {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str("Progress(..)")
    }
}

impl PartialEq for Progress {
    fn eq(&self, other: &Progress) -> bool {
        Arc::ptr_eq(&self.0, &other.0)
    }
}

/// Calls `finish` on the sink when dropped, so that a run that stops early (an error, a
/// panic in a worker) still ends the caller's display.
pub(crate) struct Reporting<'p>(pub(crate) Option<&'p Progress>);

impl<'p> Reporting<'p> {
    pub(crate) fn start(progress: Option<&'p Progress>, total: usize) -> Reporting<'p> {
        if let Some(p) = progress {
            p.0.start(total);
        }
        Reporting(progress)
    }

    pub(crate) fn advance(&self) {
        if let Some(p) = self.0 {
            p.0.advance();
        }
    }
}

impl Drop for Reporting<'_> {
    fn drop(&mut self) {
        if let Some(p) = self.0 {
            p.0.finish();
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::sync::atomic::{AtomicUsize, Ordering};

    #[derive(Default)]
    struct Count {
        total: AtomicUsize,
        done: AtomicUsize,
        finished: AtomicUsize,
    }

    impl ProgressSink for Count {
        fn start(&self, total: usize) {
            self.total.store(total, Ordering::Relaxed);
        }
        fn advance(&self) {
            self.done.fetch_add(1, Ordering::Relaxed);
        }
        fn finish(&self) {
            self.finished.fetch_add(1, Ordering::Relaxed);
        }
    }

    #[test]
    fn reporting_starts_advances_and_finishes_once() {
        let count = Arc::new(Count::default());
        let progress = Progress(count.clone());
        {
            let reporting = Reporting::start(Some(&progress), 3);
            reporting.advance();
            reporting.advance();
        }
        assert_eq!(count.total.load(Ordering::Relaxed), 3);
        assert_eq!(count.done.load(Ordering::Relaxed), 2);
        assert_eq!(count.finished.load(Ordering::Relaxed), 1);
        assert_eq!(progress, progress.clone());
        assert_ne!(progress, Progress::new(Count::default()));
        // No sink: nothing to call, nothing to fail.
        Reporting::start(None, 3).advance();
    }
}
