"""`sdeck lsp` driven byte by byte: malformed frames, the end of the client, documents
whose analysis is slow, hover as the client asks, the Feller fix, completion by context
and hints by range.

These tests write JSON-RPC frames themselves (the client library of test_server.py
refuses to send a broken frame) and read the server's frames with a plain reader. Every
wait is bounded; the server is a child process and nothing leaves the machine.
"""

from __future__ import annotations

import json
import pathlib
import queue
import re
import signal
import subprocess
import threading
import time

import pytest

from conftest import SDECK

ROOT = pathlib.Path(__file__).resolve().parents[2]


class Raw:
    """A language client that writes whatever bytes it is given."""

    def __init__(self, capabilities: dict | None = None, process_id: int | None = None, initialize: bool = True):
        self.process = subprocess.Popen(
            [SDECK, "lsp"], stdin=subprocess.PIPE, stdout=subprocess.PIPE, stderr=subprocess.DEVNULL
        )
        self.messages: queue.Queue = queue.Queue()
        self.seen: list[dict] = []
        self.next_id = 100
        threading.Thread(target=self._read, daemon=True).start()
        if initialize:
            self.request(
                "initialize", {"processId": process_id, "rootUri": None, "capabilities": capabilities or {}}
            )
            self.notify("initialized", {})

    def _read(self):
        out = self.process.stdout
        while True:
            header = b""
            while not header.endswith(b"\r\n\r\n"):
                byte = out.read(1)
                if not byte:
                    return
                header += byte
            length = int(re.search(rb"Content-Length: *(\d+)", header).group(1))
            self.messages.put(json.loads(out.read(length)))

    def write(self, data: bytes):
        self.process.stdin.write(data)
        self.process.stdin.flush()

    def frame(self, body: bytes):
        self.write(b"Content-Length: %d\r\n\r\n" % len(body) + body)

    def send(self, message: dict):
        self.frame(json.dumps(message).encode())

    def notify(self, method: str, params):
        self.send({"jsonrpc": "2.0", "method": method, "params": params})

    def start(self, method: str, params) -> int:
        self.next_id += 1
        self.send({"jsonrpc": "2.0", "id": self.next_id, "method": method, "params": params})
        return self.next_id

    def wait(self, predicate, timeout: float = 30.0) -> dict:
        for message in self.seen:
            if predicate(message):
                self.seen.remove(message)
                return message
        deadline = time.monotonic() + timeout
        while True:
            left = deadline - time.monotonic()
            if left <= 0:
                raise AssertionError("no such message from the server in time")
            try:
                message = self.messages.get(timeout=left)
            except queue.Empty:
                continue
            if predicate(message):
                return message
            self.seen.append(message)

    def answer(self, wanted: int, timeout: float = 30.0) -> dict:
        return self.wait(lambda m: m.get("id") == wanted and "method" not in m, timeout)

    def request(self, method: str, params, timeout: float = 30.0) -> dict:
        return self.answer(self.start(method, params), timeout)

    def open(self, uri: str, text: str, version: int = 1):
        self.notify(
            "textDocument/didOpen",
            {"textDocument": {"uri": uri, "languageId": "sdeck", "version": version, "text": text}},
        )

    def diagnostics(self, uri: str, version: int, timeout: float = 30.0) -> list:
        message = self.wait(
            lambda m: m.get("method") == "textDocument/publishDiagnostics"
            and m["params"]["uri"] == uri
            and m["params"].get("version") == version,
            timeout,
        )
        return message["params"]["diagnostics"]

    def close(self):
        if self.process.poll() is None:
            try:
                self.request("shutdown", None, timeout=10)
                self.notify("exit", None)
                self.process.wait(timeout=10)
            except Exception:
                self.process.kill()
                self.process.wait(timeout=10)


@pytest.fixture
def raw():
    clients: list[Raw] = []

    def make(**kwargs) -> Raw:
        client = Raw(**kwargs)
        clients.append(client)
        return client

    yield make
    for client in clients:
        client.close()


def at(text: str, needle: str, shift: int = 0) -> dict:
    offset = text.index(needle) + shift
    line = text.count("\n", 0, offset)
    column = offset - (text.rfind("\n", 0, offset) + 1)
    return {"line": line, "character": column}


# A Vasicek short rate of the (fictional) Larkspur Funding desk; the speed is written
# per day, the horizon in months.
VASICEK = (
    "model larkspur_short_rate\nclock year\nhorizon 18 month\n"
    "param kappa = 0.5% [1/day] > 0  # speed of the rate\nparam theta = 3%\n"
    "param sigma = 1% [1/sqrt(year)] > 0\nshock W\nfactor r = 1%  # the funding rate\n"
    "dr = kappa * (theta - r) dt + sigma dW\n"
)


def test_malformed_frames_get_an_error_each_and_the_server_keeps_serving(raw):
    client = raw()
    uri = "file:///tmp/sdeck-raw/larkspur.sde"
    client.open(uri, VASICEK)
    client.diagnostics(uri, 1)
    # Invalid JSON, a JSON array, an object without "jsonrpc", a header without
    # Content-Length (its body follows), each then a good request.
    client.frame(b'{"jsonrpc": "2.0", "id": 1, "method": ')
    error = client.wait(lambda m: "error" in m)
    assert error["error"]["code"] == -32700 and error["id"] is None, error
    client.frame(b'[{"jsonrpc": "2.0", "id": 2, "method": "shutdown"}]')
    assert client.wait(lambda m: "error" in m)["error"]["code"] == -32600
    client.frame(b'{"id": 3, "method": "textDocument/hover", "params": {}}')
    error = client.wait(lambda m: "error" in m)
    assert error["error"]["code"] == -32600 and error["id"] == 3, error
    client.write(b'Content-Type: application/vscode-jsonrpc\r\n\r\n{"jsonrpc": "2.0", "id": 4}')
    error = client.wait(lambda m: "error" in m)
    assert error["error"]["code"] == -32700 and "Content-Length" in error["error"]["message"], error
    # Still serving, and the document is still open.
    hover = client.request(
        "textDocument/hover", {"textDocument": {"uri": uri}, "position": at(VASICEK, "dr =", 1)}
    )
    assert "ornstein-uhlenbeck" in hover["result"]["contents"]["value"]
    assert client.process.poll() is None


def test_the_server_ends_when_stdin_closes(raw):
    client = raw()
    client.process.stdin.close()
    assert client.process.wait(timeout=10) is not None


def test_the_server_ends_when_the_process_that_started_it_dies(raw):
    parent = subprocess.Popen(["sleep", "60"])
    client = raw(process_id=parent.pid)
    time.sleep(0.5)
    assert client.process.poll() is None
    parent.send_signal(signal.SIGKILL)
    parent.wait(timeout=10)
    # The server looks every 2 s.
    assert client.process.wait(timeout=15) is not None


def spreads(factors: int) -> str:
    """Spreads of the (fictional) Harrowgate Rates desk on one shock, each with its own
    speed and an expectation on its standard deviation: a large one takes a while to
    check in a debug build."""
    lines = ["model harrowgate_spreads", "clock year", "horizon 1 year", "shock M", "param v = 1% [1/sqrt(year)] > 0"]
    for i in range(factors):
        lines += [
            f"param k{i} = {0.5 + i % 7 * 0.1:.1f} [1/year] > 0",
            f"factor x{i} = 1%",
            f"dx{i} = k{i} * (2% - x{i}) dt + v dM",
            f"expect sd(x{i}) in [0, 1%]",
        ]
    return "\n".join(lines) + "\n"


def test_hovers_on_a_slow_document_do_not_hold_up_other_documents(raw):
    client = raw()
    slow_uri, quick_uri = "file:///tmp/sdeck-raw/slow.sde", "file:///tmp/sdeck-raw/quick.sde"
    slow_text = spreads(4_000)
    client.open(quick_uri, VASICEK)
    client.diagnostics(quick_uri, 1)
    client.open(slow_uri, slow_text)
    started = time.monotonic()
    hovers = [
        client.start("textDocument/hover", {"textDocument": {"uri": slow_uri}, "position": at(slow_text, "dx1 =", 1)})
        for _ in range(4)
    ]
    # A request for the healthy document is answered while the slow one is analysed.
    quick = client.request(
        "textDocument/hover", {"textDocument": {"uri": quick_uri}, "position": at(VASICEK, "dr =", 1)}, timeout=5
    )
    quick_at = time.monotonic() - started
    assert "ornstein-uhlenbeck" in quick["result"]["contents"]["value"]
    # A cancelled request is answered at once with RequestCancelled.
    client.notify("$/cancelRequest", {"id": hovers[0]})
    cancelled = client.answer(hovers[0], timeout=5)
    assert cancelled["error"]["code"] == -32800, cancelled
    answers = [client.answer(h, timeout=60) for h in hovers[1:]]
    # On a loaded machine the analysis may outlast the server's wait (10 s): the answer
    # is then an error that says so, and asking again finds the analysis.
    deadline = time.monotonic() + 120
    while any("result" not in a for a in answers) and time.monotonic() < deadline:
        assert all(a.get("error", {}).get("code") in (None, -32803) for a in answers), answers
        answers = [
            a if "result" in a else client.request(
                "textDocument/hover",
                {"textDocument": {"uri": slow_uri}, "position": at(slow_text, "dx1 =", 1)},
                timeout=60,
            )
            for a in answers
        ]
    slow_at = time.monotonic() - started
    assert all("factor" in a["result"]["contents"]["value"] for a in answers), answers
    assert quick_at < slow_at, (quick_at, slow_at)
    # The four hovers and the diagnostics shared one analysis of version 1.
    text = client.request("sdeck/documentText", {"uri": slow_uri})["result"]
    assert text["analyses"] == 1, text


def test_a_burst_of_edits_is_analysed_for_its_last_version(raw):
    client = raw()
    uri = "file:///tmp/sdeck-raw/burst.sde"
    text = spreads(300)
    client.open(uri, text)
    client.diagnostics(uri, 1)
    line = text.split("\n").index("param k0 = 0.5 [1/year] > 0")
    for version in range(2, 32):
        client.notify(
            "textDocument/didChange",
            {
                "textDocument": {"uri": uri, "version": version},
                "contentChanges": [
                    {
                        "range": {"start": {"line": line, "character": 11}, "end": {"line": line, "character": 12}},
                        "text": str(version % 9 + 1),
                    }
                ],
            },
        )
        time.sleep(0.01)
    client.diagnostics(uri, 31)
    state = client.request("sdeck/documentText", {"uri": uri})["result"]
    # Typed faster than the debounce: the versions in between were not analysed.
    assert state["version"] == 31 and state["analyses"] <= 4, state


def test_an_edit_to_a_comment_or_to_one_factor_derives_only_what_changed(raw):
    client = raw()
    uri = "file:///tmp/sdeck-raw/reuse.sde"
    text = spreads(120)
    client.open(uri, text)
    assert client.diagnostics(uri, 1) == []

    def hover_x3(text: str) -> str:
        return hover_text(client, uri, at(text, "dx3 =", 1))["contents"]["value"]

    def state() -> dict:
        return client.request("sdeck/documentText", {"uri": uri})["result"]

    def edit(version: int, line: int, start: int, end: int, new: str):
        change = {"range": {"start": {"line": line, "character": start}, "end": {"line": line, "character": end}}, "text": new}
        client.notify(
            "textDocument/didChange",
            {"textDocument": {"uri": uri, "version": version}, "contentChanges": [change]},
        )

    shown = hover_x3(text)
    first = state()
    assert (first["derivations"], first["expectationValues"], first["reports"]) == (1, 120, 1), first
    # A comment on a new first line: every span moves, no content does. Nothing is
    # derived again and the hover is the same.
    edit(2, 0, 0, 0, "# reviewed by the desk\n")
    text = "# reviewed by the desk\n" + text
    assert client.diagnostics(uri, 2) == []
    assert hover_x3(text) == shown
    after_comment = state()
    assert after_comment["derivations"] == 1 and after_comment["derivationsReused"] == 1, after_comment
    assert after_comment["expectationValues"] == 120 and after_comment["expectationValuesReused"] == 120, after_comment
    assert (after_comment["reports"], after_comment["reportsReused"]) == (1, 1), after_comment
    # The speed of x0: the model is derived again (the calculus derives whole models),
    # x0's expectation alone is evaluated again, and x3's hover is taken over.
    line = text.split("\n").index("param k0 = 0.5 [1/year] > 0")
    edit(3, line, 13, 14, "6")
    assert client.diagnostics(uri, 3) == []
    assert hover_x3(text) == shown
    after_speed = state()
    assert after_speed["derivations"] == 2, after_speed
    assert after_speed["expectationValues"] == 121 and after_speed["expectationValuesReused"] == 239, after_speed
    assert (after_speed["reports"], after_speed["reportsReused"]) == (1, 2), after_speed


def hover_text(client: Raw, uri: str, position: dict) -> dict:
    return client.request("textDocument/hover", {"textDocument": {"uri": uri}, "position": position})["result"]


def test_hover_is_plain_text_when_the_client_asks_and_puts_the_figures_first(raw):
    uri = "file:///tmp/sdeck-raw/larkspur.sde"
    plain = raw(capabilities={"textDocument": {"hover": {"contentFormat": ["plaintext"]}}})
    plain.open(uri, VASICEK)
    contents = hover_text(plain, uri, at(VASICEK, "dr =", 1))["contents"]
    assert contents["kind"] == "plaintext"
    value = contents["value"]
    assert "**" not in value and "```" not in value and "`r`" not in value, value
    assert not any(line.startswith("|") for line in value.splitlines()), value
    assert all(len(line) <= 80 for line in value.splitlines()), value
    # Figures first, formulas after: mean before the formula of the solution.
    assert value.index("mean") < value.index("solution"), value
    # The horizon as written (18 month) and the half-life in the speed's unit (day):
    # ln 2 / 0.005 = 138.6 days (common practice, no source).
    assert "t = 18 month" in value, value
    assert re.search(r"half-life +138\.6 day", value), value

    markdown = raw(capabilities={"textDocument": {"hover": {"contentFormat": ["markdown", "plaintext"]}}})
    markdown.open(uri, VASICEK)
    contents = hover_text(markdown, uri, at(VASICEK, "dr =", 1))["contents"]
    assert contents["kind"] == "markdown"
    assert "**factor `r`**" in contents["value"]
    assert all(len(line) <= 80 for line in contents["value"].splitlines()), contents["value"]
    rows = [line for line in contents["value"].splitlines() if line.startswith("| ")]
    labels = [row.split(" | ")[0].strip("| ") for row in rows]
    assert labels[:5] == ["figure", "mean", "sd", "5% · 50% · 95%", "half-life"], labels


# A square-root funding rate of the (fictional) Brackenfield Savings that breaks Feller.
FELLER = (
    "model brackenfield_rate\nclock year\nhorizon 1 year\n"
    "param kappa = 0.2 [1/year] > 0\nparam theta = 4%\nparam xi = 25% [1/sqrt(year)] > 0\n"
    "shock W\nfactor r = 3% >= 0\ndr = kappa * (theta - r) dt + xi * sqrt(r) dW\n"
)


def test_the_feller_message_and_its_fixes_write_the_same_numbers(raw):
    client = raw()
    uri = "file:///tmp/sdeck-raw/brackenfield.sde"
    client.open(uri, FELLER)
    [feller] = [d for d in client.diagnostics(uri, 1) if d.get("code") == "feller-condition"]
    actions = client.request(
        "textDocument/codeAction",
        {"textDocument": {"uri": uri}, "range": feller["range"], "context": {"diagnostics": [feller]}},
    )["result"]
    written = {}
    for action in actions:
        if "Feller" not in action["title"]:
            continue
        for edit in action.get("edit", {}).get("changes", {}).get(uri, []):
            written[action["title"].split("`")[1]] = edit["newText"]
    # 2κθ = 0.016 < ξ² = 0.0625: κ ≥ 0.0625 / 0.08 = 0.78125 → 0.782 (up, three digits);
    # ξ ≤ √0.016 = 0.126491 → 0.126, written as 12.6% like the literal (Feller 1951;
    # Cox, Ingersoll & Ross 1985).
    assert written == {"kappa": "0.782", "xi": "12.6%"}, written
    message, _, rest = feller["message"].partition("\nhelp: ")
    help_line = rest.split("\n")[0]
    assert "raise kappa to at least 0.782 [1/year]" in help_line, feller
    assert "lower xi to at most 0.126 [1/sqrt(year)]" in help_line, feller
    # The help does not repeat the message.
    assert "raise" not in message and "0.782" not in message, message


COMPLETION_MODEL = (
    "model quillmere_pair\nclock year\nhorizon 1 year\nparam k = 1 [1/year]\n"
    "shock W1, W2\nfactor x = 0\nfactor y = 0\ndx = -k * x dt + 0.1 dW1\n"
    "dy = -k * y dt + 0.1 dW2\n"
)


def labels_at(client: Raw, uri: str, text: str, line: str) -> set[str]:
    edited = text + line
    client.notify(
        "textDocument/didChange",
        {"textDocument": {"uri": uri, "version": labels_at.version}, "contentChanges": [{"text": edited}]},
    )
    labels_at.version += 1
    position = {"line": edited.count("\n"), "character": len(line)}
    result = client.request("textDocument/completion", {"textDocument": {"uri": uri}, "position": position})["result"]
    items = result["items"] if isinstance(result, dict) else result
    return {item["label"] for item in items}


labels_at.version = 2


def test_completion_offers_what_fits_the_place(raw):
    client = raw()
    uri = "file:///tmp/sdeck-raw/quillmere.sde"
    client.open(uri, COMPLETION_MODEL)
    assert labels_at(client, uri, COMPLETION_MODEL, "expect mean(") == {"x", "y"}
    assert labels_at(client, uri, COMPLETION_MODEL, "corr ") == {"W1", "W2"}
    after_d = labels_at(client, uri, COMPLETION_MODEL, "d")
    assert {"dx", "dy"} <= after_d and not after_d & {"k", "W1", "exp", "x"}, after_d
    units = labels_at(client, uri, COMPLETION_MODEL, "param s = 1 [1/")
    assert {"year", "day", "month"} <= units and "k" not in units, units


def test_inlay_hints_of_a_range_are_only_those_in_it(raw):
    client = raw()
    uri = "file:///tmp/sdeck-raw/larkspur.sde"
    client.open(uri, VASICEK)
    whole = client.request(
        "textDocument/inlayHint",
        {"textDocument": {"uri": uri}, "range": {"start": {"line": 0, "character": 0}, "end": {"line": 99, "character": 0}}},
    )["result"]
    kappa_line = at(VASICEK, "param kappa")["line"]
    part = client.request(
        "textDocument/inlayHint",
        {
            "textDocument": {"uri": uri},
            "range": {"start": {"line": kappa_line, "character": 0}, "end": {"line": kappa_line, "character": 99}},
        },
    )["result"]
    assert len(whole) > len(part) > 0, (whole, part)
    assert all(h["position"]["line"] == kappa_line for h in part), part
    assert [h for h in whole if h["position"]["line"] == kappa_line] == part


def test_shutdown_with_null_params_is_answered(raw):
    # Emacs 28's eglot sends `"params": null` with shutdown; the protocol allows it, and
    # the editor waits for the answer on its way out.
    client = raw()
    answer = client.request("shutdown", None, timeout=10)
    assert "error" not in answer and answer.get("result") is None, answer
    client.notify("exit", None)
    assert client.process.wait(timeout=10) == 0
