"""End-to-end tests of `sdeck lsp`, driven by pytest-lsp (a client this project does not
write) over stdio against the built binary."""

from __future__ import annotations

import asyncio
import json
import random
import re
import subprocess
import time

import pytest
from conftest import ROOT, SDECK
from lsprotocol import types
from pytest_lsp import LanguageClient

# A Vasicek short rate of the (fictional) Larkspur Credit Union, with a speed written per
# day so that hover and hints convert it.
VASICEK = """# Larkspur Credit Union, overnight funding rate.
model larkspur_funding
clock year
horizon 2 year

param kappa = 0.5% [1/day]        > 0   # speed of mean reversion
param theta = 3%                        # long-run level
param sigma = 1%   [1/sqrt(year)] > 0   # volatility

shock W
factor r = 1%
dr = kappa * (theta - r) dt + sigma dW
"""

UNDECLARED_NOISE = """model brantmoor_deposit_rate
param speed = 0.8 [1/year] > 0
param level = 1%
param vol = 0.4% [1/sqrt(year)] > 0
factor deposit = 1.1%
ddeposit = speed * (level - deposit) dt + vol dW
"""


def uri_of(name: str) -> str:
    return f"file:///tmp/sdeck-lsp-tests/{name}"


def position(text: str, offset: int) -> types.Position:
    """The UTF-16 position of a code-point offset."""
    before = text[:offset]
    line = before.count("\n")
    column_text = before[before.rfind("\n") + 1 :]
    return types.Position(line=line, character=len(column_text.encode("utf-16-le")) // 2)


def offset_of(text: str, pos: types.Position) -> int:
    """The code-point offset of a UTF-16 position."""
    lines = text.split("\n")
    start = sum(len(line) + 1 for line in lines[: pos.line])
    line = lines[pos.line] if pos.line < len(lines) else ""
    units = 0
    for i, ch in enumerate(line):
        if units >= pos.character:
            return start + i
        units += len(ch.encode("utf-16-le")) // 2
    return start + len(line)


def apply_edits(text: str, edits: list[types.TextEdit]) -> str:
    spans = sorted(
        ((offset_of(text, e.range.start), offset_of(text, e.range.end), e.new_text) for e in edits),
        reverse=True,
    )
    for start, end, new in spans:
        text = text[:start] + new + text[end:]
    return text


def open_document(client: LanguageClient, uri: str, text: str, version: int = 1) -> None:
    client.text_document_did_open(
        types.DidOpenTextDocumentParams(
            text_document=types.TextDocumentItem(uri=uri, language_id="sdeck", version=version, text=text)
        )
    )


async def published(client: LanguageClient, uri: str, version: int, timeout: float = 20.0):
    """The diagnostics published for `uri` at `version`."""
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        for params in client.published:
            if params.uri == uri and params.version == version:
                return params.diagnostics
        await asyncio.sleep(0.02)
    raise AssertionError(f"no diagnostics for {uri} version {version}")


async def server_text(client: LanguageClient, uri: str):
    """The server's copy of a document (the test-only request sdeck/documentText)."""
    result = await client.protocol.send_request_async("sdeck/documentText", {"uri": uri})
    if isinstance(result, dict):
        return result["text"], result["version"]
    return result.text, result.version


def codes(diagnostics) -> list[str]:
    return [d.code for d in diagnostics]


async def test_opening_a_model_publishes_its_diagnostics(client: LanguageClient):
    # The flawed example of the rule's manual page (its first `sde` block).
    page = (ROOT / "crates/sdeck-checks/src/rules/feller_condition.md").read_text()
    flawed = page.split("```sde\n")[1].split("```")[0]
    uri = uri_of("feller.sde")
    open_document(client, uri, flawed, version=7)
    diagnostics = await published(client, uri, 7)
    assert "feller-condition" in codes(diagnostics)
    feller = next(d for d in diagnostics if d.code == "feller-condition")
    assert feller.severity == types.DiagnosticSeverity.Warning
    assert feller.source == "sdeck"
    # The same rules and messages as `sdeck check --format json`.
    out = subprocess.run(
        [SDECK, "check", "--format", "json", "--stdin-name", "feller.sde", "-"],
        input=flawed,
        capture_output=True,
        text=True,
    )
    report = json.loads(out.stdout)
    cli_messages = sorted((d["rule"], d["message"]) for d in report["diagnostics"])
    lsp_messages = sorted((d.code, d.message.split("\nhelp: ")[0].split("\nnote: ")[0]) for d in diagnostics)
    assert lsp_messages == cli_messages
    # Lines agree too (the CLI counts from 1).
    cli_lines = sorted(d["range"]["start"]["line"] - 1 for d in report["diagnostics"])
    assert sorted(d.range.start.line for d in diagnostics) == cli_lines
    # Pull diagnostics give the same list.
    report = await client.text_document_diagnostic_async(
        types.DocumentDiagnosticParams(text_document=types.TextDocumentIdentifier(uri=uri))
    )
    assert codes(report.items) == codes(diagnostics)


async def test_hover_on_a_state_equals_sdeck_moments(client: LanguageClient, tmp_path):
    path = tmp_path / "larkspur_funding.sde"
    path.write_text(VASICEK)
    uri = path.as_uri()
    open_document(client, uri, VASICEK)
    await published(client, uri, 1)
    hover = await client.text_document_hover_async(
        types.HoverParams(
            text_document=types.TextDocumentIdentifier(uri=uri),
            position=position(VASICEK, VASICEK.index("dr =") + 1),
        )
    )
    markdown = hover.contents.value
    assert "ornstein-uhlenbeck" in markdown

    def row(label: str) -> float:
        match = re.search(rf"^\| {label} \| ([^ |]+)", markdown, re.MULTILINE)
        assert match, markdown
        return float(match.group(1))

    out = subprocess.run(
        [SDECK, "moments", "--format", "json", str(path)], capture_output=True, text=True, check=True
    )
    state = json.loads(out.stdout)["factors"][0]
    # The hover prints four significant digits (within half a unit of the fourth).
    assert row("mean") == pytest.approx(state["mean"], rel=5e-4)
    assert row("variance") == pytest.approx(state["variance"], rel=5e-4)
    # And both agree with Vasicek 1977 (J. Financial Economics 5, eq. 27-28):
    # mean θ + (r0 − θ)e^{−κt}, variance σ²(1 − e^{−2κt})/(2κ), κ = 0.005·365, t = 2.
    import math

    kappa, theta, sigma, r0, t = 0.005 * 365, 0.03, 0.01, 0.01, 2.0
    assert state["mean"] == pytest.approx(theta + (r0 - theta) * math.exp(-kappa * t), rel=1e-9)
    assert state["variance"] == pytest.approx(sigma**2 * (1 - math.exp(-2 * kappa * t)) / (2 * kappa), rel=1e-9)


async def test_a_quick_fix_makes_its_diagnostic_disappear(client: LanguageClient):
    uri = uri_of("brantmoor.sde")
    text = UNDECLARED_NOISE
    open_document(client, uri, text)
    diagnostics = await published(client, uri, 1)
    undefined = [d for d in diagnostics if d.code == "unknown-name" and "W" in d.message]
    assert undefined, diagnostics
    actions = await client.text_document_code_action_async(
        types.CodeActionParams(
            text_document=types.TextDocumentIdentifier(uri=uri),
            range=undefined[0].range,
            context=types.CodeActionContext(diagnostics=undefined),
        )
    )
    fix = next(a for a in actions if isinstance(a, types.CodeAction) and "shock W" in a.title)
    assert fix.kind == types.CodeActionKind.QuickFix
    edits = fix.edit.changes[uri]
    client.text_document_did_change(
        types.DidChangeTextDocumentParams(
            text_document=types.VersionedTextDocumentIdentifier(uri=uri, version=2),
            content_changes=[
                types.TextDocumentContentChangePartial(range=e.range, text=e.new_text)
                for e in sorted(edits, key=lambda e: (e.range.start.line, e.range.start.character), reverse=True)
            ],
        )
    )
    text = apply_edits(text, edits)
    after = await published(client, uri, 2)
    assert not [d for d in after if d.code == "unknown-name" and "W" in d.message], after
    assert (await server_text(client, uri)) == (text, 2)


ALPHABET = list("abcxyz =+*-()[]#0123456789\n") + ["κ", "σ", "θ", "é", "🚀", "📈", "ñ", "∑"]


def random_text(rng: random.Random, n: int) -> str:
    return "".join(rng.choice(ALPHABET) for _ in range(n))


async def test_a_thousand_random_edits_leave_the_server_holding_the_clients_text(client: LanguageClient):
    rng = random.Random(20261201)
    uri = uri_of("random_edits.sde")
    text = "# κ-model 🚀 of the Osmere Rail desk\nparam κ = 2 [1/year]\n"
    open_document(client, uri, text)
    version = 1
    # Requests in flight while edits arrive: the server must still apply every edit, in
    # order, and answer every request.
    pending = []
    for n in range(1000):
        if n % 25 == 0:
            pending.append(
                asyncio.ensure_future(
                    client.text_document_hover_async(
                        types.HoverParams(
                            text_document=types.TextDocumentIdentifier(uri=uri),
                            position=types.Position(line=0, character=rng.randint(0, 5)),
                        )
                    )
                )
            )
        version += 1
        changes = []
        for _ in range(rng.choice([1, 1, 1, 2, 3])):
            start = rng.randint(0, len(text))
            end = min(len(text), start + rng.choice([0, 0, 1, 2, 5, 20]))
            new = random_text(rng, rng.choice([0, 1, 1, 3, 8]))
            changes.append(
                types.TextDocumentContentChangePartial(
                    range=types.Range(start=position(text, start), end=position(text, end)), text=new
                )
            )
            text = text[:start] + new + text[end:]
        client.text_document_did_change(
            types.DidChangeTextDocumentParams(
                text_document=types.VersionedTextDocumentIdentifier(uri=uri, version=version),
                content_changes=changes,
            )
        )
    await asyncio.gather(*pending)
    held, held_version = await server_text(client, uri)
    assert held_version == version
    assert held == text
    # The last diagnostics published are those of the last version, never an older one.
    await published(client, uri, version)
    await asyncio.sleep(0.5)
    last = [p for p in client.published if p.uri == uri][-1]
    assert last.version == version


async def test_utf8_positions_when_the_client_offers_them(utf8_client: LanguageClient):
    uri = uri_of("utf8.sde")
    text = "# 🚀 note\nparam κ = 1\n"
    open_document(utf8_client, uri, text)
    # Replace κ (bytes 6..8 of line 1) with σ.
    utf8_client.text_document_did_change(
        types.DidChangeTextDocumentParams(
            text_document=types.VersionedTextDocumentIdentifier(uri=uri, version=2),
            content_changes=[
                types.TextDocumentContentChangePartial(
                    range=types.Range(start=types.Position(line=1, character=6), end=types.Position(line=1, character=8)),
                    text="σ",
                )
            ],
        )
    )
    assert (await server_text(utf8_client, uri)) == ("# 🚀 note\nparam σ = 1\n", 2)


async def test_a_malformed_request_gets_an_error_and_the_server_keeps_serving(client: LanguageClient):
    uri = uri_of("malformed.sde")
    open_document(client, uri, VASICEK)
    # The client library would refuse to send malformed parameters of a method it knows;
    # for this one request it is told the method is unknown, so the dict goes as it is.
    protocol = client.protocol
    known = protocol.get_message_type
    protocol.get_message_type = lambda method: None if method == "textDocument/hover" else known(method)
    try:
        with pytest.raises(Exception) as raised:
            await protocol.send_request_async("textDocument/hover", {"textDocument": 5, "position": "here"})
    finally:
        protocol.get_message_type = known
    assert "invalid" in repr(raised.value).lower() or "-32602" in repr(raised.value), repr(raised.value)
    with pytest.raises(Exception):
        await client.protocol.send_request_async("sdeck/documentText", {"uri": "file:///not/open.sde"})
    # Still serving.
    hover = await client.text_document_hover_async(
        types.HoverParams(
            text_document=types.TextDocumentIdentifier(uri=uri),
            position=position(VASICEK, VASICEK.index("kappa *") + 1),
        )
    )
    assert "1.825 [1/year]" in hover.contents.value


async def test_formatting_and_navigation(client: LanguageClient):
    uri = uri_of("navigation.sde")
    text = "param  k=2[1/year]>0\nshock W\nfactor x=0\ndx=-k*x dt+0.1 dW\n"
    open_document(client, uri, text)
    edits = await client.text_document_formatting_async(
        types.DocumentFormattingParams(
            text_document=types.TextDocumentIdentifier(uri=uri),
            options=types.FormattingOptions(tab_size=4, insert_spaces=True),
        )
    )
    formatted = apply_edits(text, edits)
    assert formatted == "param k = 2 [1/year] > 0\nshock W\nfactor x = 0\ndx = -k * x dt + 0.1 dW\n"
    refs = await client.text_document_references_async(
        types.ReferenceParams(
            text_document=types.TextDocumentIdentifier(uri=uri),
            position=position(text, text.index("W")),
            context=types.ReferenceContext(include_declaration=True),
        )
    )
    assert len(refs) == 2
    rename = await client.text_document_rename_async(
        types.RenameParams(
            text_document=types.TextDocumentIdentifier(uri=uri),
            position=position(text, text.index("W")),
            new_name="Z",
        )
    )
    assert apply_edits(text, rename.changes[uri]).count("Z") == 2


async def test_a_client_that_pulls_gets_no_pushes(pull_client: LanguageClient):
    uri = uri_of("pull.sde")
    open_document(pull_client, uri, UNDECLARED_NOISE)
    report = await pull_client.text_document_diagnostic_async(
        types.DocumentDiagnosticParams(text_document=types.TextDocumentIdentifier(uri=uri))
    )
    assert "unknown-name" in codes(report.items)
    # Pushes would show every diagnostic twice in such a client: none is sent.
    await asyncio.sleep(0.5)
    assert [p for p in pull_client.published if p.uri == uri] == []


async def test_the_project_file_sets_rule_levels_and_exclusions(client: LanguageClient, tmp_path):
    (tmp_path / "sdeck.toml").write_text('[rules]\nunused = "off"\n\n[files]\nexclude = ["drafts/**"]\n')
    text = "param spare = 1\nshock W\nfactor x = 0\ndx = 0.1 dW\n"
    model = tmp_path / "penrith_rate.sde"
    model.write_text(text)
    uri = model.as_uri()
    open_document(client, uri, text)
    assert "unused" not in codes(await published(client, uri, 1))
    # The project changes and the file is saved: the new level applies.
    (tmp_path / "sdeck.toml").write_text('[rules]\nunused = "error"\n')
    before = len(client.published)
    client.text_document_did_save(
        types.DidSaveTextDocumentParams(text_document=types.TextDocumentIdentifier(uri=uri))
    )
    deadline = time.monotonic() + 20
    while time.monotonic() < deadline:
        later = [p for p in client.published[before:] if p.uri == uri]
        if later:
            break
        await asyncio.sleep(0.02)
    unused = [d for d in later[-1].diagnostics if d.code == "unused"]
    assert unused and unused[0].severity == types.DiagnosticSeverity.Error
    # A file the project leaves out shows nothing, as `sdeck check` skips it.
    (tmp_path / "sdeck.toml").write_text('[files]\nexclude = ["drafts/**"]\n')
    (tmp_path / "drafts").mkdir()
    draft = tmp_path / "drafts" / "draft.sde"
    draft.write_text(UNDECLARED_NOISE)
    open_document(client, draft.as_uri(), UNDECLARED_NOISE)
    assert list(await published(client, draft.as_uri(), 1)) == []


async def test_hover_on_coupled_states_equals_sdeck_moments(client: LanguageClient):
    path = ROOT / "demo-models" / "two_factor_rates.sde"
    text = path.read_text()
    uri = path.as_uri()
    open_document(client, uri, text)
    await published(client, uri, 1)
    out = subprocess.run(
        [SDECK, "moments", "--format", "json", str(path)], capture_output=True, text=True, check=True
    )
    states = json.loads(out.stdout)["factors"]
    assert len(states) == 2
    for state in states:
        at = text.index(f"\nd{state['name']} =") + 2
        hover = await client.text_document_hover_async(
            types.HoverParams(text_document=types.TextDocumentIdentifier(uri=uri), position=position(text, at))
        )
        markdown = hover.contents.value
        assert state["family"] in markdown
        for label, key in [("mean", "mean"), ("variance", "variance")]:
            match = re.search(rf"^\| {label} \| ([^ |]+)", markdown, re.MULTILINE)
            assert match, markdown
            assert float(match.group(1)) == pytest.approx(state[key], rel=5e-4)
