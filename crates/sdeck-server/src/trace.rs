//! Where a request's time goes inside the server, for the benchmark
//! (tests/lsp/bench_lsp.py): with `SDECK_LSP_TRACE=1` in its environment the server
//! writes one line to standard error per answered request, from the moment its frame was
//! read off standard input to the moment its answer was written to standard output, and
//! per feature the time it waited for the analysis and the time the feature took, and per
//! analysis its time. A
//! client's latency beyond these is spent outside the server (the pipes, the client, the
//! machine's scheduler). Off, it costs one relaxed load per message.

use serde::Deserialize;
use serde_json::Value;
use std::collections::HashMap;
use std::sync::{Mutex, OnceLock};
use std::time::{Duration, Instant};

/// The environment variable that turns the trace on.
pub const TRACE_VARIABLE: &str = "SDECK_LSP_TRACE";

fn enabled() -> bool {
    static ENABLED: OnceLock<bool> = OnceLock::new();
    *ENABLED.get_or_init(|| std::env::var_os(TRACE_VARIABLE).is_some_and(|v| v == "1"))
}

/// Requests read and not yet answered: their method and when they were read.
fn pending() -> std::sync::MutexGuard<'static, HashMap<String, (String, Instant)>> {
    static PENDING: OnceLock<Mutex<HashMap<String, (String, Instant)>>> = OnceLock::new();
    PENDING
        .get_or_init(Mutex::default)
        .lock()
        .unwrap_or_else(|p| p.into_inner())
}

/// The id and method of a message, and nothing else of it.
#[derive(Deserialize)]
struct Head {
    id: Option<Value>,
    method: Option<String>,
}

fn head(body: &[u8]) -> Option<Head> {
    serde_json::from_slice(body).ok()
}

/// A message from the client has been read.
pub fn read(body: &[u8]) {
    if !enabled() {
        return;
    }
    if let Some(Head {
        id: Some(id),
        method: Some(method),
    }) = head(body)
    {
        pending().insert(id.to_string(), (method, Instant::now()));
    }
}

/// A message to the client has been written.
pub fn written(body: &[u8]) {
    if !enabled() {
        return;
    }
    let Some(Head {
        id: Some(id),
        method: None,
    }) = head(body)
    else {
        return;
    };
    if let Some((method, at)) = pending().remove(&id.to_string()) {
        eprintln!(
            "sdeck trace: {method} {id} in the server {:.3} ms, {} bytes",
            ms(at.elapsed()),
            body.len()
        );
    }
}

/// A feature has run: how long it waited for the analysis, then for a thread, and how
/// long it took.
pub fn feature(what: &str, analysis: Duration, thread: Duration, run: Duration) {
    if enabled() {
        eprintln!(
            "sdeck trace: {what} waited {:.3} ms for the analysis and {:.3} ms for a thread, \
             ran {:.3} ms",
            ms(analysis),
            ms(thread),
            ms(run)
        );
    }
}

fn ms(d: Duration) -> f64 {
    d.as_secs_f64() * 1000.0
}

/// An analysis has ended, or was given up: its wall time, and the processor time of its
/// thread (which a loaded machine does not stretch), when the platform tells it.
pub fn analysis(version: i32, took: Duration, cpu: Option<Duration>, abandoned: bool) {
    if enabled() {
        let how = if abandoned { "given up after" } else { "took" };
        let cpu = cpu.map_or(String::new(), |c| {
            format!(" ({:.3} ms of processor)", ms(c))
        });
        eprintln!(
            "sdeck trace: the analysis of version {version} {how} {:.3} ms{cpu}",
            ms(took)
        );
    }
}

/// The processor time the calling thread has used, where the platform tells it.
pub fn thread_cpu() -> Option<Duration> {
    if !enabled() {
        return None;
    }
    #[cfg(unix)]
    {
        let mut t = libc::timespec {
            tv_sec: 0,
            tv_nsec: 0,
        };
        // SAFETY: clock_gettime writes one timespec through the pointer it is given,
        // which points at a live local.
        let status = unsafe { libc::clock_gettime(libc::CLOCK_THREAD_CPUTIME_ID, &mut t) };
        if status == 0 {
            let secs = u64::try_from(t.tv_sec).ok()?;
            let nanos = u32::try_from(t.tv_nsec).ok()?;
            return Some(Duration::new(secs, nanos));
        }
    }
    None
}
