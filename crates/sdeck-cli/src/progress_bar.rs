//! The progress bar of `sdeck simulate` on stderr, fed by the simulator's progress
//! reports: drawn only when stderr is a terminal and only once a run has lasted a second,
//! so short runs and pipes stay clean; cleared when the run ends.

use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};
use sdeck_simulate::progress::{Progress, ProgressSink};
use std::io::IsTerminal;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Mutex;
use std::time::{Duration, Instant};

/// Delay before the bar appears.
const SHOW_AFTER: Duration = Duration::from_secs(1);

/// A bar that stays hidden until the run has lasted [`SHOW_AFTER`] on a terminal.
struct TerminalBar {
    bar: ProgressBar,
    started: Mutex<Option<Instant>>,
    shown: AtomicBool,
    on_terminal: bool,
}

impl TerminalBar {
    fn new(on_terminal: bool) -> TerminalBar {
        let bar = ProgressBar::with_draw_target(Some(0), ProgressDrawTarget::hidden());
        if let Ok(style) = ProgressStyle::with_template("[{bar:40}] {percent:>3}% simulating paths")
        {
            bar.set_style(style.progress_chars("#-"));
        }
        TerminalBar {
            bar,
            started: Mutex::new(None),
            shown: AtomicBool::new(false),
            on_terminal,
        }
    }

    fn elapsed(&self) -> Duration {
        self.started
            .lock()
            .ok()
            .and_then(|started| started.map(|at| at.elapsed()))
            .unwrap_or_default()
    }
}

impl ProgressSink for TerminalBar {
    fn start(&self, total: usize) {
        self.bar.set_length(total as u64);
        self.bar.set_position(0);
        if let Ok(mut started) = self.started.lock() {
            *started = Some(Instant::now());
        }
    }

    fn advance(&self) {
        self.bar.inc(1);
        if self.on_terminal
            && !self.shown.load(Ordering::Relaxed)
            && self.elapsed() >= SHOW_AFTER
            && !self.shown.swap(true, Ordering::Relaxed)
        {
            self.bar.set_draw_target(ProgressDrawTarget::stderr());
        }
    }

    fn finish(&self) {
        self.bar.finish_and_clear();
    }
}

/// The progress report of a simulation started from the command line.
pub fn on_terminal() -> Progress {
    Progress::new(TerminalBar::new(std::io::stderr().is_terminal()))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_bar_counts_blocks_and_stays_hidden_off_a_terminal() {
        let bar = TerminalBar::new(false);
        bar.start(4);
        bar.advance();
        bar.advance();
        assert_eq!(bar.bar.length(), Some(4));
        assert_eq!(bar.bar.position(), 2);
        assert!(bar.bar.is_hidden());
        assert!(!bar.shown.load(Ordering::Relaxed));
        bar.finish();
        assert!(bar.bar.is_finished());
    }

    #[test]
    fn the_bar_waits_a_second_before_it_shows_on_a_terminal() {
        let bar = TerminalBar::new(true);
        bar.start(2);
        bar.advance();
        assert!(!bar.shown.load(Ordering::Relaxed), "shown before a second");
        if let Ok(mut started) = bar.started.lock() {
            *started = Instant::now().checked_sub(SHOW_AFTER);
        }
        bar.advance();
        assert!(
            bar.shown.load(Ordering::Relaxed),
            "not shown after a second"
        );
        bar.finish();
    }
}
