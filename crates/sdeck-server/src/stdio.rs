//! The server on standard input and output: the runtime, the transport, and the ways the
//! process ends with its client (`exit`, standard input closing, the client's process
//! gone).

use crate::{exit_code, transport, Backend, SHUT_DOWN};
use crate::{CONCURRENT_MESSAGES, DOCUMENT_TEXT_METHOD, PARENT_CHECK};
use std::sync::atomic::Ordering;
use std::time::Duration;
use tower_lsp::{LspService, Server};

/// Ends the process on the `exit` notification. tower-lsp stops serving only when the
/// next message arrives or stdin closes; a client that sends `exit` and waits for the
/// process (as the protocol allows) would wait for ever.
struct EndOnExit<S> {
    inner: S,
}

impl<S> tower_service::Service<tower_lsp::jsonrpc::Request> for EndOnExit<S>
where
    S: tower_service::Service<tower_lsp::jsonrpc::Request>,
{
    type Response = S::Response;
    type Error = S::Error;
    type Future = S::Future;

    fn poll_ready(
        &mut self,
        cx: &mut std::task::Context<'_>,
    ) -> std::task::Poll<std::result::Result<(), Self::Error>> {
        self.inner.poll_ready(cx)
    }

    fn call(&mut self, request: tower_lsp::jsonrpc::Request) -> Self::Future {
        match request.method() {
            "shutdown" => SHUT_DOWN.store(true, Ordering::SeqCst),
            // The protocol: exit code 0 after a shutdown request, 1 without one.
            "exit" => std::process::exit(exit_code()),
            _ => {}
        }
        self.inner.call(request)
    }
}

/// Ends the process when the process `pid` (the client, from `initialize`) is gone, so
/// that a server whose editor died does not live on.
pub(crate) fn watch_parent(pid: u32) {
    tokio::spawn(async move {
        let mut every = tokio::time::interval(PARENT_CHECK);
        loop {
            every.tick().await;
            if !process_alive(pid) {
                std::process::exit(exit_code());
            }
        }
    });
}

/// Whether a process exists (signal 0 delivers nothing and only checks).
#[cfg(unix)]
fn process_alive(pid: u32) -> bool {
    let Ok(pid) = libc::pid_t::try_from(pid) else {
        return true;
    };
    // SAFETY: kill with signal 0 sends no signal; it only reports whether `pid` exists.
    let status = unsafe { libc::kill(pid, 0) };
    status == 0 || std::io::Error::last_os_error().raw_os_error() == Some(libc::EPERM)
}

/// Elsewhere the check is not made; stdin closing still ends the server.
#[cfg(not(unix))]
fn process_alive(_pid: u32) -> bool {
    true
}

/// Serves the protocol on stdin/stdout until the client exits, closes stdin or dies.
pub fn run_stdio() -> std::io::Result<()> {
    let runtime = tokio::runtime::Builder::new_multi_thread()
        .worker_threads(2)
        // One analysis per document at a time, and features run after it: a bounded pool.
        .max_blocking_threads(16)
        .enable_all()
        .build()?;
    runtime.block_on(async {
        let (service, socket) = LspService::build(Backend::new)
            .custom_method(DOCUMENT_TEXT_METHOD, Backend::document_text)
            .finish();
        let service = EndOnExit { inner: service };
        // When the client closes stdin it is gone: give tower-lsp a moment to send what
        // it still has, then end.
        let pipes = transport::start(tokio::io::stdin(), transport::raw_stdout(), || {
            std::thread::spawn(|| {
                std::thread::sleep(Duration::from_millis(500));
                std::process::exit(exit_code());
            });
        });
        Server::new(pipes.input, pipes.output, socket)
            .concurrency_level(CONCURRENT_MESSAGES)
            .serve(service)
            .await;
    });
    // The reader of stdin sits on a blocking thread that never returns while stdin is
    // open; do not wait for it once the client has said `exit`.
    runtime.shutdown_background();
    Ok(())
}
