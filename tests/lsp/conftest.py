"""Shared set-up of the end-to-end tests of `sdeck lsp`.

The tests drive the built binary target/debug/sdeck. When it is missing, or when
SDECK_LSP_BUILD=1, the first test session builds it with `cargo build -p sdeck-cli`; set
SDECK_BIN to test another binary.
"""

from __future__ import annotations

import os
import pathlib
import subprocess
import sys

import pytest
import pytest_lsp
from lsprotocol import types
from pytest_lsp import ClientServerConfig, LanguageClient

ROOT = pathlib.Path(__file__).resolve().parents[2]
BINARY = pathlib.Path(os.environ.get("SDECK_BIN", ROOT / "target" / "debug" / "sdeck"))


def ensure_binary() -> str:
    if os.environ.get("SDECK_LSP_BUILD") == "1" or not BINARY.exists():
        subprocess.run(
            ["cargo", "build", "-p", "sdeck-cli"], cwd=ROOT, check=True, stdout=sys.stderr
        )
    return str(BINARY)


SDECK = ensure_binary()


def record_publishes(lsp_client: LanguageClient) -> None:
    """Keeps every publishDiagnostics, with its version, in `lsp_client.published`."""
    lsp_client.published = []
    features = lsp_client.protocol.fm.features
    original = features.get(types.TEXT_DOCUMENT_PUBLISH_DIAGNOSTICS)

    def recording(params):
        lsp_client.published.append(params)
        if original is not None:
            return original(params)

    features[types.TEXT_DOCUMENT_PUBLISH_DIAGNOSTICS] = recording


@pytest_lsp.fixture(config=ClientServerConfig(server_command=[SDECK, "lsp"]))
async def client(lsp_client: LanguageClient):
    """A client that counts columns in UTF-16 and takes pushed diagnostics."""
    record_publishes(lsp_client)
    await lsp_client.initialize_session(
        types.InitializeParams(
            capabilities=types.ClientCapabilities(
                text_document=types.TextDocumentClientCapabilities(
                    publish_diagnostics=types.PublishDiagnosticsClientCapabilities(
                        version_support=True, related_information=True
                    )
                )
            )
        )
    )
    yield
    await lsp_client.shutdown_session()


@pytest_lsp.fixture(config=ClientServerConfig(server_command=[SDECK, "lsp"]))
async def utf8_client(lsp_client: LanguageClient):
    """A client that offers UTF-8 columns."""
    result = await lsp_client.initialize_session(
        types.InitializeParams(
            capabilities=types.ClientCapabilities(
                general=types.GeneralClientCapabilities(
                    position_encodings=[types.PositionEncodingKind.Utf8]
                )
            )
        )
    )
    assert result.capabilities.position_encoding == types.PositionEncodingKind.Utf8
    yield
    await lsp_client.shutdown_session()


@pytest_lsp.fixture(config=ClientServerConfig(server_command=[SDECK, "lsp"]))
async def pull_client(lsp_client: LanguageClient):
    """A client that pulls diagnostics itself (textDocument/diagnostic)."""
    record_publishes(lsp_client)
    await lsp_client.initialize_session(
        types.InitializeParams(
            capabilities=types.ClientCapabilities(
                text_document=types.TextDocumentClientCapabilities(
                    diagnostic=types.DiagnosticClientCapabilities(dynamic_registration=False)
                )
            )
        )
    )
    yield
    await lsp_client.shutdown_session()
