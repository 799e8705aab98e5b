//! The analyses of the open documents: at most one runs per document, on a blocking
//! thread, always for the newest version; requests wait for it without holding the
//! serving loop, and each result is published unless a newer one was.

use crate::analysis::{self, Analyzed};
use crate::documents::{DocumentStore, PositionEncoding};
use crate::{trace, ANALYSIS_WAIT};
use std::collections::HashMap;
use std::panic::AssertUnwindSafe;
use std::sync::atomic::AtomicBool;
use std::sync::{Arc, Mutex, RwLock};
use tower_lsp::jsonrpc::{Error, ErrorCode, Result};
use tower_lsp::lsp_types::{MessageType, Url};
use tower_lsp::Client;

/// The analysis of one version of a document, or the error it ended with.
pub(crate) struct Outcome {
    pub(crate) version: i32,
    pub(crate) result: Result<Arc<Analyzed>>,
}

/// The analyses of one document.
#[derive(Default)]
pub(crate) struct Slot {
    /// The analysis of the newest version analysed so far.
    pub(crate) latest: Option<Arc<Outcome>>,
    /// Whether an analysis of this document is running.
    pub(crate) running: bool,
    /// Analyses run since the document was opened.
    pub(crate) count: u64,
    /// Analyses given up since the document was opened: a newer version arrived.
    pub(crate) abandoned: u64,
    /// What the analyses keep across versions, by content; dropped with the slot when the
    /// document closes.
    pub(crate) memo: Arc<analysis::DocumentMemo>,
}

/// State shared by the handlers and the analysis threads.
pub(crate) struct Shared {
    pub(crate) client: Client,
    pub(crate) documents: DocumentStore,
    pub(crate) encoding: RwLock<PositionEncoding>,
    /// Whether to push diagnostics (off when the client pulls them itself, so that no
    /// editor shows every diagnostic twice).
    pub(crate) push: RwLock<bool>,
    /// Whether hovers are plain text (the client does not take Markdown).
    pub(crate) plain_hover: AtomicBool,
    /// Per document, its analyses.
    pub(crate) slots: Mutex<HashMap<Url, Slot>>,
    /// Woken whenever an analysis ends.
    pub(crate) analysed: tokio::sync::Notify,
    /// The version last published per document; held while publishing so that a stale
    /// result can never be sent after a newer one.
    pub(crate) published: tokio::sync::Mutex<HashMap<Url, i32>>,
}

impl Shared {
    pub(crate) fn encoding(&self) -> PositionEncoding {
        *self.encoding.read().unwrap_or_else(|p| p.into_inner())
    }

    pub(crate) fn slots(&self) -> std::sync::MutexGuard<'_, HashMap<Url, Slot>> {
        self.slots.lock().unwrap_or_else(|p| p.into_inner())
    }

    pub(crate) fn latest(&self, uri: &Url) -> Option<Arc<Outcome>> {
        self.slots().get(uri).and_then(|slot| slot.latest.clone())
    }

    /// Starts analysing the document's newest version, unless an analysis of it is
    /// running or its newest version is analysed already.
    pub(crate) fn start(self: &Arc<Self>, uri: &Url) {
        let Some(current) = self.documents.version(uri) else {
            return;
        };
        {
            let mut slots = self.slots();
            let slot = slots.entry(uri.clone()).or_default();
            let done = slot.latest.as_ref().is_some_and(|o| o.version == current);
            if slot.running || done {
                return;
            }
            slot.running = true;
        }
        let shared = self.clone();
        let uri = uri.clone();
        let runtime = tokio::runtime::Handle::current();
        tokio::task::spawn_blocking(move || shared.run(&uri, &runtime));
    }

    /// The one analysis thread of a document: analyses its newest version until no
    /// newer one is waiting, publishing each result.
    pub(crate) fn run(self: &Arc<Self>, uri: &Url, runtime: &tokio::runtime::Handle) {
        loop {
            let snapshot = self.documents.snapshot(uri);
            let memo = {
                let mut slots = self.slots();
                let Some(slot) = slots.get_mut(uri) else {
                    return; // closed meanwhile
                };
                let newest_done = match &snapshot {
                    None => true,
                    Some(s) => slot.latest.as_ref().is_some_and(|o| o.version == s.version),
                };
                if newest_done {
                    slot.running = false;
                    drop(slots);
                    self.analysed.notify_waiters();
                    return;
                }
                slot.memo.clone()
            };
            let Some(snapshot) = snapshot else { return };
            let version = snapshot.version;
            // Typed past: the analysis of this version stops at its next cancellation
            // point and the loop takes the newest version.
            let stale = || self.documents.version(uri) != Some(version);
            let (started, cpu) = (std::time::Instant::now(), trace::thread_cpu());
            let analysed = guard("the analysis", || {
                Analyzed::compute_unless_stale(snapshot, &stale, memo)
            });
            let cpu = cpu
                .zip(trace::thread_cpu())
                .map(|(a, b)| b.saturating_sub(a));
            trace::analysis(
                version,
                started.elapsed(),
                cpu,
                matches!(analysed, Ok(None)),
            );
            let result = match analysed {
                Ok(Some(analyzed)) => Ok(Arc::new(analyzed)),
                Ok(None) => {
                    if let Some(slot) = self.slots().get_mut(uri) {
                        slot.abandoned += 1;
                    }
                    continue;
                }
                Err(e) => Err(e),
            };
            let outcome = Arc::new(Outcome { version, result });
            match self.slots().get_mut(uri) {
                Some(slot) => {
                    slot.latest = Some(outcome.clone());
                    slot.count += 1;
                }
                None => return,
            }
            self.analysed.notify_waiters();
            if *self.push.read().unwrap_or_else(|p| p.into_inner()) {
                let shared = self.clone();
                let uri = uri.clone();
                runtime.spawn(async move { shared.publish(&uri, &outcome).await });
            }
        }
    }

    /// The analysis of the document as it is now (or of a newer version), waiting for
    /// it at most [`ANALYSIS_WAIT`]. `None` when the document is not open.
    pub(crate) async fn analysis(self: &Arc<Self>, uri: &Url) -> Result<Option<Arc<Analyzed>>> {
        let Some(wanted) = self.documents.version(uri) else {
            return Ok(None);
        };
        let deadline = tokio::time::Instant::now() + ANALYSIS_WAIT;
        loop {
            let woken = self.analysed.notified();
            tokio::pin!(woken);
            woken.as_mut().enable();
            if let Some(outcome) = self.latest(uri).filter(|o| o.version >= wanted) {
                return outcome.result.clone().map(Some);
            }
            if self.documents.version(uri).is_none() {
                return Ok(None);
            }
            self.start(uri);
            if tokio::time::timeout_at(deadline, woken).await.is_err() {
                return Err(Error {
                    code: ErrorCode::ServerError(-32803),
                    message: format!(
                        "sdeck: the analysis of version {wanted} is still running after {} s; \
                         ask again",
                        ANALYSIS_WAIT.as_secs()
                    )
                    .into(),
                    data: None,
                });
            }
        }
    }

    /// Forgets the analyses of a document (its settings changed, or it closed).
    pub(crate) fn forget(&self, uri: &Url) {
        if let Some(slot) = self.slots().get_mut(uri) {
            slot.latest = None;
        }
    }

    /// Publishes the diagnostics of one analysis if it is still the document's current
    /// version and nothing newer was published.
    pub(crate) async fn publish(&self, uri: &Url, outcome: &Outcome) {
        let analyzed = match &outcome.result {
            Ok(a) => a,
            Err(e) => {
                self.client
                    .log_message(MessageType::ERROR, e.message.clone())
                    .await;
                return;
            }
        };
        let mut published = self.published.lock().await;
        if self.documents.version(uri) != Some(analyzed.version) {
            return;
        }
        if published.get(uri).is_some_and(|v| *v >= analyzed.version) {
            return;
        }
        let converter = analyzed.converter(self.encoding());
        let diagnostics = match guard("converting diagnostics", || {
            analyzed
                .shown_diagnostics()
                .iter()
                .map(|d| converter.diagnostic(uri, d))
                .collect::<Vec<_>>()
        }) {
            Ok(d) => d,
            Err(e) => {
                self.client.log_message(MessageType::ERROR, e.message).await;
                return;
            }
        };
        published.insert(uri.clone(), analyzed.version);
        self.client
            .publish_diagnostics(uri.clone(), diagnostics, Some(analyzed.version))
            .await;
    }
}

/// Runs `f`, turning a panic into an error response (the server keeps serving).
pub(crate) fn guard<T>(what: &str, f: impl FnOnce() -> T) -> Result<T> {
    std::panic::catch_unwind(AssertUnwindSafe(f)).map_err(|payload| {
        let reason = payload
            .downcast_ref::<&str>()
            .map(|s| s.to_string())
            .or_else(|| payload.downcast_ref::<String>().cloned())
            .unwrap_or_else(|| "unknown cause".to_string());
        Error {
            code: ErrorCode::InternalError,
            message: format!("sdeck: {what} failed ({reason}); the server goes on serving").into(),
            data: None,
        }
    })
}
