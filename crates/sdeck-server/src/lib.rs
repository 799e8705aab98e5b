//! The sdeck language server: the checks and the derived law of a model, live in any
//! editor that speaks the Language Server Protocol.
//!
//! The server only translates: every figure, message and fix comes from the one analysis
//! entry point (`sdeck_checks::check`) and the calculus; this crate converts them to the
//! protocol. Layout: [`documents`] holds the open texts (edits applied in order, under a
//! synchronous lock), `analysis` runs the analysis of one version, `convert` is the one
//! place where byte offsets become protocol positions, and one module per feature
//! (`hover`, `hints`, `actions`, `navigation`, `completion`, `tokens`).
//!
//! Start it with [`run_stdio`] (what `sdeck lsp` does).

mod actions;
mod analysis;
mod completion;
mod convert;
pub mod documents;
mod hints;
mod hover;
mod navigation;
pub mod nearest_correlation;
mod tokens;

use analysis::Analyzed;
use documents::{DocumentStore, PositionEncoding};
use serde::{Deserialize, Serialize};
use std::collections::HashMap;
use std::panic::AssertUnwindSafe;
use std::sync::{Arc, Mutex, RwLock};
use std::time::Duration;
use tower_lsp::jsonrpc::{Error, ErrorCode, Result};
use tower_lsp::lsp_types::*;
use tower_lsp::{Client, LanguageServer, LspService, Server};

/// How long the server waits after an edit before it analyses (a burst of typing is
/// analysed once, at its end).
pub const DIAGNOSTICS_DEBOUNCE: Duration = Duration::from_millis(120);

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
}

/// State shared by the handlers and the diagnostics tasks.
struct Shared {
    documents: DocumentStore,
    encoding: RwLock<PositionEncoding>,
    /// Whether to push diagnostics (off when the client pulls them itself, so that no
    /// editor shows every diagnostic twice).
    push: RwLock<bool>,
    /// The latest analysis of each document.
    analyses: Mutex<HashMap<Url, Arc<Analyzed>>>,
    /// The version last published per document; held while publishing so that a stale
    /// result can never be sent after a newer one.
    published: tokio::sync::Mutex<HashMap<Url, i32>>,
}

impl Shared {
    fn encoding(&self) -> PositionEncoding {
        *self.encoding.read().unwrap_or_else(|p| p.into_inner())
    }

    /// The analysis of the document's current version, computed if not yet known.
    fn analyzed(&self, uri: &Url) -> Result<Option<Arc<Analyzed>>> {
        let Some(snapshot) = self.documents.snapshot(uri) else {
            return Ok(None);
        };
        {
            let cache = self.analyses.lock().unwrap_or_else(|p| p.into_inner());
            if let Some(a) = cache.get(uri) {
                if a.version == snapshot.version {
                    return Ok(Some(a.clone()));
                }
            }
        }
        let analyzed = Arc::new(guard("the analysis", || Analyzed::compute(snapshot))?);
        self.remember(uri, &analyzed);
        Ok(Some(analyzed))
    }

    /// Keeps an analysis unless a newer one is already kept.
    fn remember(&self, uri: &Url, analyzed: &Arc<Analyzed>) {
        let mut cache = self.analyses.lock().unwrap_or_else(|p| p.into_inner());
        let newer_known = cache.get(uri).is_some_and(|a| a.version > analyzed.version);
        if !newer_known && self.documents.version(uri).is_some() {
            cache.insert(uri.clone(), analyzed.clone());
        }
    }
}

/// Runs `f`, turning a panic into an error response (the server keeps serving).
fn guard<T>(what: &str, f: impl FnOnce() -> T) -> Result<T> {
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

/// The language server.
pub struct Backend {
    client: Client,
    shared: Arc<Shared>,
}

impl Backend {
    pub fn new(client: Client) -> Backend {
        Backend {
            client,
            shared: Arc::new(Shared {
                documents: DocumentStore::default(),
                encoding: RwLock::new(PositionEncoding::Utf16),
                push: RwLock::new(true),
                analyses: Mutex::new(HashMap::new()),
                published: tokio::sync::Mutex::new(HashMap::new()),
            }),
        }
    }

    /// The test-only request: the server's text of a document and its version.
    pub async fn document_text(&self, params: DocumentTextParams) -> Result<DocumentTextResult> {
        match self.shared.documents.snapshot(&params.uri) {
            Some(s) => Ok(DocumentTextResult {
                text: s.text,
                version: s.version,
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
        self.shared
            .analyses
            .lock()
            .unwrap_or_else(|p| p.into_inner())
            .remove(&uri);
        if let Some(version) = self.shared.documents.version(&uri) {
            self.shared.published.lock().await.remove(&uri);
            self.schedule_diagnostics(uri, version, false);
        }
    }

    /// Runs a feature on the current analysis of a document, on a blocking thread: the
    /// serving loop (which applies edits) never waits for an analysis. `None` when the
    /// document is not open; a panic becomes an error response.
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
        let shared = self.shared.clone();
        let uri = uri.clone();
        let encoding = shared.encoding();
        let task = tokio::task::spawn_blocking(move || {
            let Some(analyzed) = shared.analyzed(&uri)? else {
                return Ok(None);
            };
            guard(what, || Some(feature(&analyzed, encoding)))
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

    /// Analyses the document after the debounce and publishes its diagnostics, unless a
    /// newer version arrived meanwhile.
    fn schedule_diagnostics(&self, uri: Url, version: i32, debounce: bool) {
        if !*self.shared.push.read().unwrap_or_else(|p| p.into_inner()) {
            return;
        }
        let shared = self.shared.clone();
        let client = self.client.clone();
        tokio::spawn(async move {
            if debounce {
                tokio::time::sleep(DIAGNOSTICS_DEBOUNCE).await;
            }
            if shared.documents.version(&uri) != Some(version) {
                return; // a newer edit has its own task
            }
            let task_shared = shared.clone();
            let task_uri = uri.clone();
            let analysed =
                tokio::task::spawn_blocking(move || task_shared.analyzed(&task_uri)).await;
            let analyzed = match analysed {
                Ok(Ok(Some(a))) => a,
                Ok(Ok(None)) => return,
                Ok(Err(e)) => {
                    client.log_message(MessageType::ERROR, e.message).await;
                    return;
                }
                Err(e) => {
                    client
                        .log_message(
                            MessageType::ERROR,
                            format!("sdeck: analysis task failed: {e}"),
                        )
                        .await;
                    return;
                }
            };
            publish(&shared, &client, &uri, &analyzed).await;
        });
    }
}

/// Publishes the diagnostics of one analysis if it is still the document's current
/// version and nothing newer was published.
async fn publish(shared: &Shared, client: &Client, uri: &Url, analyzed: &Analyzed) {
    let mut published = shared.published.lock().await;
    if shared.documents.version(uri) != Some(analyzed.version) {
        return;
    }
    if published.get(uri).is_some_and(|v| *v > analyzed.version) {
        return;
    }
    let converter = analyzed.converter(shared.encoding());
    let diagnostics = match guard("converting diagnostics", || {
        analyzed
            .shown_diagnostics()
            .iter()
            .map(|d| converter.diagnostic(uri, d))
            .collect::<Vec<_>>()
    }) {
        Ok(d) => d,
        Err(e) => {
            client.log_message(MessageType::ERROR, e.message).await;
            return;
        }
    };
    published.insert(uri.clone(), analyzed.version);
    client
        .publish_diagnostics(uri.clone(), diagnostics, Some(analyzed.version))
        .await;
}

fn capabilities(encoding: PositionEncoding) -> ServerCapabilities {
    ServerCapabilities {
        position_encoding: Some(match encoding {
            PositionEncoding::Utf8 => PositionEncodingKind::UTF8,
            PositionEncoding::Utf16 => PositionEncodingKind::UTF16,
        }),
        text_document_sync: Some(TextDocumentSyncCapability::Options(
            TextDocumentSyncOptions {
                open_close: Some(true),
                change: Some(TextDocumentSyncKind::INCREMENTAL),
                will_save: None,
                will_save_wait_until: None,
                save: Some(TextDocumentSyncSaveOptions::Supported(true)),
            },
        )),
        hover_provider: Some(HoverProviderCapability::Simple(true)),
        completion_provider: Some(CompletionOptions {
            trigger_characters: Some(vec!["[".to_string()]),
            ..CompletionOptions::default()
        }),
        definition_provider: Some(OneOf::Left(true)),
        references_provider: Some(OneOf::Left(true)),
        rename_provider: Some(OneOf::Right(RenameOptions {
            prepare_provider: Some(true),
            work_done_progress_options: WorkDoneProgressOptions::default(),
        })),
        document_symbol_provider: Some(OneOf::Left(true)),
        document_formatting_provider: Some(OneOf::Left(true)),
        code_action_provider: Some(CodeActionProviderCapability::Options(CodeActionOptions {
            code_action_kinds: Some(vec![CodeActionKind::QUICKFIX, CodeActionKind::REFACTOR]),
            work_done_progress_options: WorkDoneProgressOptions::default(),
            resolve_provider: None,
        })),
        inlay_hint_provider: Some(OneOf::Left(true)),
        semantic_tokens_provider: Some(SemanticTokensServerCapabilities::SemanticTokensOptions(
            SemanticTokensOptions {
                legend: tokens::legend(),
                full: Some(SemanticTokensFullOptions::Bool(true)),
                range: None,
                work_done_progress_options: WorkDoneProgressOptions::default(),
            },
        )),
        diagnostic_provider: Some(DiagnosticServerCapabilities::Options(DiagnosticOptions {
            identifier: Some("sdeck".to_string()),
            inter_file_dependencies: false,
            workspace_diagnostics: false,
            work_done_progress_options: WorkDoneProgressOptions::default(),
        })),
        ..ServerCapabilities::default()
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
        Ok(InitializeResult {
            capabilities: capabilities(encoding),
            server_info: Some(ServerInfo {
                name: "sdeck".to_string(),
                version: Some(env!("CARGO_PKG_VERSION").to_string()),
            }),
        })
    }

    async fn shutdown(&self) -> Result<()> {
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
        self.shared
            .analyses
            .lock()
            .unwrap_or_else(|p| p.into_inner())
            .remove(&uri);
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
        self.with_analysis(&p.text_document.uri, "hover", move |a, encoding| {
            hover::hover(a, encoding, p.position)
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
            CompletionResponse::Array(completion::complete(a, encoding, p.position))
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
                    data: tokens::semantic_tokens(a, encoding),
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

/// Ends the process on the `exit` notification. tower-lsp stops serving only when the
/// next message arrives or stdin closes; a client that sends `exit` and waits for the
/// process (as the protocol allows) would wait for ever.
struct EndOnExit<S> {
    inner: S,
    shut_down: bool,
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
            "shutdown" => self.shut_down = true,
            // The protocol: exit code 0 after a shutdown request, 1 without one.
            "exit" => std::process::exit(if self.shut_down { 0 } else { 1 }),
            _ => {}
        }
        self.inner.call(request)
    }
}

/// Serves the protocol on stdin/stdout until the client exits.
pub fn run_stdio() -> std::io::Result<()> {
    let runtime = tokio::runtime::Builder::new_multi_thread()
        .worker_threads(2)
        .enable_all()
        .build()?;
    runtime.block_on(async {
        let (service, socket) = LspService::build(Backend::new)
            .custom_method(DOCUMENT_TEXT_METHOD, Backend::document_text)
            .finish();
        let service = EndOnExit {
            inner: service,
            shut_down: false,
        };
        Server::new(tokio::io::stdin(), tokio::io::stdout(), socket)
            .serve(service)
            .await;
    });
    // The reader of stdin sits on a blocking thread that never returns while stdin is
    // open; do not wait for it once the client has said `exit`.
    runtime.shutdown_background();
    Ok(())
}

#[cfg(test)]
mod tests;
