//! The sdeck language server: the checks and the derived law of a model, live in any
//! editor that speaks the Language Server Protocol.
//!
//! The server only translates: every figure, message and fix comes from the one analysis
//! entry point (`sdeck_checks::check`) and the calculus; this crate converts them to the
//! protocol. Layout: [`documents`] holds the open texts (edits applied in order, under a
//! synchronous lock), `analysis` runs the analysis of one version, `shared` schedules the
//! analyses of each document and publishes their diagnostics, `capabilities` says what
//! the server offers, `convert` is the one place where byte offsets become protocol
//! positions, and one module per feature (`hover`, `hints`, `actions`, `navigation`,
//! `completion`, `tokens`). [`transport`]
//! checks every frame before tower-lsp reads it, so a malformed one is answered with an
//! error instead of ending the session.
//!
//! Analyses: at most one runs per document, on a blocking thread, always for the newest
//! version (versions that arrive meanwhile are skipped, not queued); every feature and
//! the diagnostics share its result. A request waits for it without holding the serving
//! loop, at most [`ANALYSIS_WAIT`], and a `$/cancelRequest` ends the wait.
//!
//! Start it with [`run_stdio`] (what `sdeck lsp` does).

mod actions;
mod analysis;
mod capabilities;
mod completion;
mod convert;
pub mod documents;
mod durations;
mod hints;
mod hover;
mod navigation;
mod shared;
mod stdio;
mod tokens;
mod trace;
pub mod transport;

pub use stdio::run_stdio;

/// The protocol's types, as this crate uses them (for tests and the fuzz targets).
pub use tower_lsp::lsp_types;

use analysis::Analyzed;
use capabilities::capabilities;
use documents::{DocumentStore, PositionEncoding};
use serde::{Deserialize, Serialize};
use shared::{guard, Shared};
use std::collections::HashMap;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::{Arc, Mutex, RwLock};
use std::time::Duration;
use tower_lsp::jsonrpc::{Error, ErrorCode, Result};
use tower_lsp::lsp_types::*;
use tower_lsp::{Client, LanguageServer};

/// How long the server waits after an edit before it analyses (a burst of typing is
/// analysed once, at its end).
pub const DIAGNOSTICS_DEBOUNCE: Duration = Duration::from_millis(120);

/// The longest a request waits for the analysis of its document; past this it gets an
/// error (the analysis goes on, and the next request finds it).
pub const ANALYSIS_WAIT: Duration = Duration::from_secs(10);

/// How many messages tower-lsp handles at once. Requests waiting for a slow analysis
/// hold a place each; this many leaves room for every other document and for
/// `$/cancelRequest`.
pub const CONCURRENT_MESSAGES: usize = 64;

/// How often the server looks whether the process that started it is still alive.
pub const PARENT_CHECK: Duration = Duration::from_secs(2);

/// Whether `shutdown` was received (the exit code of `exit` and of a closed stdin).
pub(crate) static SHUT_DOWN: AtomicBool = AtomicBool::new(false);

/// The protocol's exit code: 0 after a `shutdown` request, 1 without one.
pub(crate) fn exit_code() -> i32 {
    if SHUT_DOWN.load(Ordering::SeqCst) {
        0
    } else {
        1
    }
}

/// The custom request that returns the server's copy of a document. It exists for the
/// end-to-end tests (tests/lsp), which compare it with the client's text after many
/// edits; editors have no use for it.
pub const DOCUMENT_TEXT_METHOD: &str = "sdeck/documentText";

#[derive(Debug, Deserialize)]
#[serde(rename_all = "camelCase")]
pub struct DocumentTextParams {
    pub uri: Url,
}

#[derive(Debug, Serialize)]
#[serde(rename_all = "camelCase")]
pub struct DocumentTextResult {
    pub text: String,
    pub version: i32,
    /// How many analyses of the document have run since it was opened (the tests check
    /// that requests share one, and that a burst of edits is analysed once).
    pub analyses: u64,
    /// How many analyses were given up because the text changed while they ran.
    pub abandoned: u64,
    /// Derivations of the whole model computed, and taken over from an earlier version
    /// whose model had the same content.
    pub derivations: u64,
    pub derivations_reused: u64,
    /// Values of expectations computed, and taken over (same content of their factor).
    pub expectation_values: u64,
    pub expectation_values_reused: u64,
    /// Reports of a factor at the horizon (hover) built, and taken over.
    pub reports: u64,
    pub reports_reused: u64,
}

/// The language server.
pub struct Backend {
    client: Client,
    shared: Arc<Shared>,
}

impl Backend {
    pub fn new(client: Client) -> Backend {
        Backend {
            client: client.clone(),
            shared: Arc::new(Shared {
                client,
                documents: DocumentStore::default(),
                encoding: RwLock::new(PositionEncoding::Utf16),
                push: RwLock::new(true),
                plain_hover: AtomicBool::new(false),
                slots: Mutex::new(HashMap::new()),
                analysed: tokio::sync::Notify::new(),
                published: tokio::sync::Mutex::new(HashMap::new()),
            }),
        }
    }

    /// The test-only request: the server's text of a document and its version.
    pub async fn document_text(&self, params: DocumentTextParams) -> Result<DocumentTextResult> {
        // One lock for both counts: a second `slots()` in the same expression would wait
        // for the first guard, which lives until the end of the statement.
        let (analyses, abandoned, memo) = self
            .shared
            .slots()
            .get(&params.uri)
            .map_or((0, 0, None), |slot| {
                (slot.count, slot.abandoned, Some(slot.memo.clone()))
            });
        let counts = memo.map(|m| m.counts()).unwrap_or_default();
        match self.shared.documents.snapshot(&params.uri) {
            Some(s) => Ok(DocumentTextResult {
                text: s.text,
                version: s.version,
                analyses,
                abandoned,
                derivations: counts.checks.derivations,
                derivations_reused: counts.checks.derivations_reused,
                expectation_values: counts.checks.expectations,
                expectation_values_reused: counts.checks.expectations_reused,
                reports: counts.reports,
                reports_reused: counts.reports_reused,
            }),
            None => Err(Error::invalid_params(format!("{} is not open", params.uri))),
        }
    }

    /// Reads the project settings of an open document again and re-publishes its
    /// diagnostics under them.
    async fn refresh_project(&self, uri: Url) {
        self.shared
            .documents
            .set_project(&uri, analysis::project_settings(&uri));
        self.shared.forget(&uri);
        if let Some(version) = self.shared.documents.version(&uri) {
            self.shared.published.lock().await.remove(&uri);
            self.schedule_diagnostics(uri, version, false);
        }
    }

    /// Runs a feature on the current analysis of a document, on a blocking thread: the
    /// serving loop never waits for an analysis. `None` when the document is not open; a
    /// panic becomes an error response.
    async fn with_analysis<T, F>(
        &self,
        uri: &Url,
        what: &'static str,
        feature: F,
    ) -> Result<Option<T>>
    where
        T: Send + 'static,
        F: FnOnce(&Analyzed, PositionEncoding) -> T + Send + 'static,
    {
        let asked = std::time::Instant::now();
        let Some(analyzed) = self.shared.analysis(uri).await? else {
            return Ok(None);
        };
        let encoding = self.shared.encoding();
        let ready = std::time::Instant::now();
        let task = tokio::task::spawn_blocking(move || {
            let started = std::time::Instant::now();
            let result = guard(what, || Some(feature(&analyzed, encoding)));
            trace::feature(what, ready - asked, started - ready, started.elapsed());
            result
        });
        match task.await {
            Ok(result) => result,
            Err(e) => Err(Error {
                code: ErrorCode::InternalError,
                message: format!("sdeck: {what} failed ({e}); the server goes on serving").into(),
                data: None,
            }),
        }
    }

    /// Analyses the document (after the debounce when typing) and publishes its
    /// diagnostics, unless a newer version arrived meanwhile.
    fn schedule_diagnostics(&self, uri: Url, version: i32, debounce: bool) {
        if !*self.shared.push.read().unwrap_or_else(|p| p.into_inner()) {
            return;
        }
        let shared = self.shared.clone();
        tokio::spawn(async move {
            if debounce {
                tokio::time::sleep(DIAGNOSTICS_DEBOUNCE).await;
            }
            if shared.documents.version(&uri) != Some(version) {
                return; // a newer edit has its own task
            }
            shared.start(&uri);
        });
    }
}

#[tower_lsp::async_trait]
impl LanguageServer for Backend {
    async fn initialize(&self, params: InitializeParams) -> Result<InitializeResult> {
        let offers_utf8 = params
            .capabilities
            .general
            .as_ref()
            .and_then(|g| g.position_encodings.as_ref())
            .is_some_and(|list| list.contains(&PositionEncodingKind::UTF8));
        let encoding = if offers_utf8 {
            PositionEncoding::Utf8
        } else {
            PositionEncoding::Utf16
        };
        *self
            .shared
            .encoding
            .write()
            .unwrap_or_else(|p| p.into_inner()) = encoding;
        let pulls = params
            .capabilities
            .text_document
            .as_ref()
            .is_some_and(|t| t.diagnostic.is_some());
        *self.shared.push.write().unwrap_or_else(|p| p.into_inner()) = !pulls;
        // Plain text when the client puts it first, or does not take Markdown at all.
        let formats = params
            .capabilities
            .text_document
            .as_ref()
            .and_then(|t| t.hover.as_ref())
            .and_then(|h| h.content_format.as_ref());
        let plain = formats.is_some_and(|list| {
            list.first() == Some(&MarkupKind::PlainText) || !list.contains(&MarkupKind::Markdown)
        });
        self.shared.plain_hover.store(plain, Ordering::SeqCst);
        if let Some(pid) = params.process_id {
            stdio::watch_parent(pid);
        }
        Ok(InitializeResult {
            capabilities: capabilities(encoding),
            server_info: Some(ServerInfo {
                name: "sdeck".to_string(),
                version: Some(env!("CARGO_PKG_VERSION").to_string()),
            }),
        })
    }

    async fn shutdown(&self) -> Result<()> {
        SHUT_DOWN.store(true, Ordering::SeqCst);
        Ok(())
    }

    async fn did_open(&self, params: DidOpenTextDocumentParams) {
        let doc = params.text_document;
        // Settings are read before the document is stored; nothing awaits in between.
        let project = analysis::project_settings(&doc.uri);
        let problem = project.problem.clone();
        self.shared
            .documents
            .open(doc.uri.clone(), &doc.text, doc.version, project);
        self.schedule_diagnostics(doc.uri, doc.version, false);
        if let Some(problem) = problem {
            self.client
                .show_message(
                    MessageType::WARNING,
                    format!(
                        "sdeck: the project file is broken, default rule levels apply: {problem}"
                    ),
                )
                .await;
        }
    }

    async fn did_change(&self, params: DidChangeTextDocumentParams) {
        // The edit is applied here, synchronously, before any await: see documents.rs.
        let uri = params.text_document.uri;
        let version = params.text_document.version;
        let encoding = self.shared.encoding();
        let applied = guard("applying an edit", || {
            self.shared
                .documents
                .apply(&uri, version, &params.content_changes, encoding)
        });
        match applied {
            Ok(Ok(())) => self.schedule_diagnostics(uri, version, true),
            Ok(Err(e)) => {
                self.client
                    .log_message(
                        MessageType::ERROR,
                        format!("sdeck: edit of {uri} not applied: {e}"),
                    )
                    .await
            }
            Err(e) => self.client.log_message(MessageType::ERROR, e.message).await,
        }
    }

    async fn did_save(&self, params: DidSaveTextDocumentParams) {
        // The project file may have changed: read the rule settings again.
        self.refresh_project(params.text_document.uri).await;
    }

    async fn did_change_watched_files(&self, _: DidChangeWatchedFilesParams) {
        // A project file changed (the client watches sdeck.toml): every open document
        // takes its settings again.
        for uri in self.shared.documents.uris() {
            self.refresh_project(uri).await;
        }
    }

    async fn did_close(&self, params: DidCloseTextDocumentParams) {
        let uri = params.text_document.uri;
        self.shared.documents.close(&uri);
        self.shared.slots().remove(&uri);
        self.shared.published.lock().await.remove(&uri);
        if *self.shared.push.read().unwrap_or_else(|p| p.into_inner()) {
            self.client.publish_diagnostics(uri, Vec::new(), None).await;
        }
    }

    async fn diagnostic(
        &self,
        params: DocumentDiagnosticParams,
    ) -> Result<DocumentDiagnosticReportResult> {
        let uri = params.text_document.uri;
        let for_uri = uri.clone();
        let items = self
            .with_analysis(&uri, "diagnostics", move |a, encoding| {
                let converter = a.converter(encoding);
                a.shown_diagnostics()
                    .iter()
                    .map(|d| converter.diagnostic(&for_uri, d))
                    .collect::<Vec<_>>()
            })
            .await?
            .unwrap_or_default();
        Ok(DocumentDiagnosticReportResult::Report(
            DocumentDiagnosticReport::Full(RelatedFullDocumentDiagnosticReport {
                related_documents: None,
                full_document_diagnostic_report: FullDocumentDiagnosticReport {
                    result_id: None,
                    items,
                },
            }),
        ))
    }

    async fn hover(&self, params: HoverParams) -> Result<Option<Hover>> {
        let p = params.text_document_position_params;
        let format = if self.shared.plain_hover.load(Ordering::SeqCst) {
            MarkupKind::PlainText
        } else {
            MarkupKind::Markdown
        };
        self.with_analysis(&p.text_document.uri, "hover", move |a, encoding| {
            hover::hover(a, encoding, p.position, format)
        })
        .await
        .map(Option::flatten)
    }

    async fn inlay_hint(&self, params: InlayHintParams) -> Result<Option<Vec<InlayHint>>> {
        let range = params.range;
        self.with_analysis(
            &params.text_document.uri,
            "inlay hints",
            move |a, encoding| hints::inlay_hints(a, encoding, range),
        )
        .await
    }

    async fn code_action(&self, params: CodeActionParams) -> Result<Option<CodeActionResponse>> {
        let uri = params.text_document.uri.clone();
        let range = params.range;
        let for_uri = uri.clone();
        self.with_analysis(&uri, "code actions", move |a, encoding| {
            actions::code_actions(a, encoding, &for_uri, range)
        })
        .await
    }

    async fn completion(&self, params: CompletionParams) -> Result<Option<CompletionResponse>> {
        let p = params.text_document_position;
        self.with_analysis(&p.text_document.uri, "completion", move |a, encoding| {
            CompletionResponse::List(completion::complete(a, encoding, p.position))
        })
        .await
    }

    async fn goto_definition(
        &self,
        params: GotoDefinitionParams,
    ) -> Result<Option<GotoDefinitionResponse>> {
        let p = params.text_document_position_params;
        let uri = p.text_document.uri.clone();
        self.with_analysis(
            &p.text_document.uri,
            "go to definition",
            move |a, encoding| {
                navigation::definition(a, encoding, &uri, p.position)
                    .map(GotoDefinitionResponse::Scalar)
            },
        )
        .await
        .map(Option::flatten)
    }

    async fn references(&self, params: ReferenceParams) -> Result<Option<Vec<Location>>> {
        let p = params.text_document_position;
        let uri = p.text_document.uri.clone();
        let include_declaration = params.context.include_declaration;
        self.with_analysis(&p.text_document.uri, "references", move |a, encoding| {
            navigation::references(a, encoding, &uri, p.position, include_declaration)
        })
        .await
        .map(Option::flatten)
    }

    async fn prepare_rename(
        &self,
        params: TextDocumentPositionParams,
    ) -> Result<Option<PrepareRenameResponse>> {
        let position = params.position;
        self.with_analysis(
            &params.text_document.uri,
            "prepare rename",
            move |a, encoding| navigation::prepare_rename(a, encoding, position),
        )
        .await
        .map(Option::flatten)
    }

    async fn rename(&self, params: RenameParams) -> Result<Option<WorkspaceEdit>> {
        let p = params.text_document_position;
        let uri = p.text_document.uri.clone();
        let new_name = params.new_name;
        let outcome = self
            .with_analysis(&p.text_document.uri, "rename", move |a, encoding| {
                navigation::rename(a, encoding, &uri, p.position, &new_name)
            })
            .await?;
        match outcome {
            None => Ok(None),
            Some(result) => result.map_err(Error::invalid_params),
        }
    }

    async fn document_symbol(
        &self,
        params: DocumentSymbolParams,
    ) -> Result<Option<DocumentSymbolResponse>> {
        self.with_analysis(
            &params.text_document.uri,
            "document symbols",
            |a, encoding| DocumentSymbolResponse::Nested(navigation::document_symbols(a, encoding)),
        )
        .await
    }

    async fn semantic_tokens_full(
        &self,
        params: SemanticTokensParams,
    ) -> Result<Option<SemanticTokensResult>> {
        self.with_analysis(
            &params.text_document.uri,
            "semantic tokens",
            |a, encoding| {
                SemanticTokensResult::Tokens(SemanticTokens {
                    result_id: None,
                    data: tokens::semantic_tokens(a, encoding, None),
                })
            },
        )
        .await
    }

    async fn semantic_tokens_range(
        &self,
        params: SemanticTokensRangeParams,
    ) -> Result<Option<SemanticTokensRangeResult>> {
        let range = params.range;
        self.with_analysis(
            &params.text_document.uri,
            "semantic tokens",
            move |a, encoding| {
                SemanticTokensRangeResult::Tokens(SemanticTokens {
                    result_id: None,
                    data: tokens::semantic_tokens(a, encoding, Some(range)),
                })
            },
        )
        .await
    }

    async fn formatting(&self, params: DocumentFormattingParams) -> Result<Option<Vec<TextEdit>>> {
        let Some(snapshot) = self.shared.documents.snapshot(&params.text_document.uri) else {
            return Ok(None);
        };
        let encoding = self.shared.encoding();
        guard("formatting", || {
            match sdeck_format::format(&snapshot.text) {
                sdeck_format::Outcome::Formatted(text) if text != snapshot.text => {
                    let index = sdeck_syntax::LineIndex::new(&snapshot.text);
                    let converter = convert::Converter {
                        text: &snapshot.text,
                        index: &index,
                        encoding,
                    };
                    Some(vec![TextEdit {
                        range: converter.range(&(0..snapshot.text.len())),
                        new_text: text,
                    }])
                }
                // Already formatted, or not parseable: nothing to change.
                _ => Some(Vec::new()),
            }
        })
    }
}

#[cfg(test)]
mod tests;
