//! A progress bar on stderr for long simulations: drawn only when stderr is a terminal and
//! only once a run has lasted a second, so short runs and pipes stay clean.

use std::io::{IsTerminal, Write};
use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};
use std::sync::Arc;
use std::thread::JoinHandle;
use std::time::{Duration, Instant};

/// Delay before the bar appears.
const SHOW_AFTER: Duration = Duration::from_secs(1);
/// Redraw period.
const REDRAW_EVERY: Duration = Duration::from_millis(100);
const BAR_WIDTH: usize = 40;

struct Shared {
    done: AtomicUsize,
    finished: AtomicBool,
}

/// Counts finished blocks; a watcher thread draws the bar.
pub struct Progress {
    shared: Arc<Shared>,
    watcher: Option<JoinHandle<()>>,
}

impl Progress {
    /// Starts the watcher when `wanted` and stderr is a terminal.
    pub fn start(wanted: bool, total: usize) -> Progress {
        let shared = Arc::new(Shared {
            done: AtomicUsize::new(0),
            finished: AtomicBool::new(false),
        });
        let watcher = if wanted && std::io::stderr().is_terminal() {
            let watched = Arc::clone(&shared);
            // A thread that cannot be started only costs the bar, never the run.
            std::thread::Builder::new()
                .name("sdeck-progress".into())
                .spawn(move || watch(&watched, total))
                .ok()
        } else {
            None
        };
        Progress { shared, watcher }
    }

    /// One more block finished.
    pub fn advance(&self) {
        self.shared.done.fetch_add(1, Ordering::Relaxed);
    }

    /// Stops the watcher and clears the bar.
    pub fn finish(mut self) {
        self.stop();
    }

    fn stop(&mut self) {
        self.shared.finished.store(true, Ordering::Relaxed);
        if let Some(watcher) = self.watcher.take() {
            // A panicking watcher only loses the bar.
            let _ = watcher.join();
        }
    }
}

impl Drop for Progress {
    fn drop(&mut self) {
        self.stop();
    }
}

/// The bar as text: `[#####-----]  42% simulating paths`.
pub fn render_bar(done: usize, total: usize) -> String {
    let fraction = if total == 0 {
        1.0
    } else {
        (done as f64 / total as f64).clamp(0.0, 1.0)
    };
    let filled = (fraction * BAR_WIDTH as f64).round() as usize;
    format!(
        "[{}{}] {:>3}% simulating paths",
        "#".repeat(filled),
        "-".repeat(BAR_WIDTH - filled.min(BAR_WIDTH)),
        (fraction * 100.0).round() as u32
    )
}

fn watch(shared: &Shared, total: usize) {
    let start = Instant::now();
    let mut drawn = false;
    while !shared.finished.load(Ordering::Relaxed) {
        std::thread::sleep(REDRAW_EVERY);
        if start.elapsed() < SHOW_AFTER {
            continue;
        }
        let bar = render_bar(shared.done.load(Ordering::Relaxed), total);
        let mut stderr = std::io::stderr().lock();
        // Drawing is best effort: a closed stderr must not stop the simulation.
        let _ = write!(stderr, "\r{bar}");
        let _ = stderr.flush();
        drawn = true;
    }
    if drawn {
        let mut stderr = std::io::stderr().lock();
        let _ = write!(stderr, "\r{}\r", " ".repeat(BAR_WIDTH + 24));
        let _ = stderr.flush();
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn bar_fills_in_proportion() {
        assert_eq!(
            render_bar(0, 4),
            format!("[{}]   0% simulating paths", "-".repeat(40))
        );
        assert_eq!(
            render_bar(1, 4),
            format!(
                "[{}{}]  25% simulating paths",
                "#".repeat(10),
                "-".repeat(30)
            )
        );
        assert_eq!(
            render_bar(9, 4),
            format!("[{}] 100% simulating paths", "#".repeat(40))
        );
    }
}
