"""Benchmark of `sdeck lsp` (not a test): hover, inlay hint and completion latency, a
burst of typing to its final diagnostics, resident memory and threads after many edits,
on the 2,000-line model of bench/scale_check.py (270 factors, 180 expectations).

    python3 tests/lsp/bench_lsp.py [--binary target/release/sdeck] [--edits 10000]

It speaks JSON-RPC over the server's stdin/stdout with a minimal client of its own (the
end-to-end tests use pytest-lsp; here only timing matters). Every loop is bounded; the
server is a child process on this machine and nothing touches the network.
"""

from __future__ import annotations

import argparse
import importlib.util
import json
import pathlib
import queue
import random
import subprocess
import sys
import threading
import time

ROOT = pathlib.Path(__file__).resolve().parents[2]


class Server:
    def __init__(self, binary: str):
        self.process = subprocess.Popen(
            [binary, "lsp"], stdin=subprocess.PIPE, stdout=subprocess.PIPE, stderr=subprocess.DEVNULL
        )
        self.messages: queue.Queue = queue.Queue()
        self.next_id = 0
        threading.Thread(target=self._read, daemon=True).start()

    def _read(self):
        out = self.process.stdout
        while True:
            header = b""
            while not header.endswith(b"\r\n\r\n"):
                byte = out.read(1)
                if not byte:
                    return
                header += byte
            length = int(header.split(b"Content-Length:")[1].split(b"\r\n")[0])
            self.messages.put((time.perf_counter(), json.loads(out.read(length))))

    def send(self, message: dict):
        body = json.dumps(message).encode()
        self.process.stdin.write(b"Content-Length: %d\r\n\r\n" % len(body) + body)
        self.process.stdin.flush()

    def notify(self, method: str, params: dict):
        self.send({"jsonrpc": "2.0", "method": method, "params": params})

    def request(self, method: str, params: dict, timeout: float = 60.0):
        self.next_id += 1
        wanted = self.next_id
        self.send({"jsonrpc": "2.0", "id": wanted, "method": method, "params": params})
        return self.wait(lambda m: m.get("id") == wanted, timeout)

    def wait(self, predicate, timeout: float = 60.0):
        deadline = time.perf_counter() + timeout
        while True:
            left = deadline - time.perf_counter()
            if left <= 0:
                raise TimeoutError("no answer from the server")
            at, message = self.messages.get(timeout=left)
            if predicate(message):
                return at, message

    def threads(self) -> int:
        for line in pathlib.Path(f"/proc/{self.process.pid}/status").read_text().splitlines():
            if line.startswith("Threads:"):
                return int(line.split()[1])
        return -1

    def rss_kib(self) -> int:
        for line in pathlib.Path(f"/proc/{self.process.pid}/status").read_text().splitlines():
            if line.startswith("VmRSS:"):
                return int(line.split()[1])
        return -1

    def close(self):
        try:
            self.request("shutdown", None, timeout=10)
            self.notify("exit", None)
            self.process.wait(timeout=10)
        except Exception:
            self.process.kill()


def percentile(values: list[float], p: float) -> float:
    ordered = sorted(values)
    k = min(len(ordered) - 1, max(0, round(p / 100 * (len(ordered) - 1))))
    return ordered[k]


def scale_model() -> str:
    """The 2,000-line model of bench/scale_check.py: 270 factors, 180 expectations."""
    spec = importlib.util.spec_from_file_location("scale_check", ROOT / "bench" / "scale_check.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module.two_thousand_lines()


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    default = ROOT / "target" / "release" / "sdeck"
    if not default.exists():
        default = ROOT / "target" / "debug" / "sdeck"
    parser.add_argument("--binary", default=str(default))
    parser.add_argument("--requests", type=int, default=300)
    parser.add_argument("--burst", type=int, default=45)
    parser.add_argument("--edits", type=int, default=10_000)
    args = parser.parse_args()

    text = scale_model()
    lines = text.split("\n")
    uri = "file:///tmp/sdeck-bench/harrowgate_spreads.sde"
    server = Server(args.binary)
    server.request("initialize", {"capabilities": {}, "processId": None, "rootUri": None})
    server.notify("initialized", {})
    rss_start = server.rss_kib()
    opened = time.perf_counter()
    server.notify(
        "textDocument/didOpen",
        {"textDocument": {"uri": uri, "languageId": "sdeck", "version": 1, "text": text}},
    )
    at, _ = server.wait(lambda m: m.get("method") == "textDocument/publishDiagnostics" and m["params"].get("version") == 1)
    open_ms = (at - opened) * 1000

    rng = random.Random(7)
    equation_lines = [k for k, line in enumerate(lines) if line.startswith("dx")]

    def timed(method: str, params_of) -> list[float]:
        out = []
        for _ in range(args.requests):
            params = params_of()
            start = time.perf_counter()
            _, answer = server.request(method, params)
            out.append((time.perf_counter() - start) * 1000)
            assert "result" in answer, answer
        return out

    doc = {"uri": uri}
    hover_ms = timed(
        "textDocument/hover",
        lambda: {"textDocument": doc, "position": {"line": rng.choice(equation_lines), "character": 1}},
    )

    def hint_range():
        first = rng.randrange(0, len(lines) - 41)
        return {
            "textDocument": doc,
            "range": {"start": {"line": first, "character": 0}, "end": {"line": first + 40, "character": 0}},
        }

    hint_ms = timed("textDocument/inlayHint", hint_range)

    def completion_at():
        line = rng.choice(equation_lines)
        return {"textDocument": doc, "position": {"line": line, "character": lines[line].index("=") + 2}}

    completion_ms = timed("textDocument/completion", completion_at)

    # A burst of typing: edits 200 ms apart to a parameter, then the final diagnostics.
    param_lines = [k for k, line in enumerate(lines) if line.startswith("param kappa")]
    version = 1
    last_sent = 0.0
    for n in range(args.burst):
        version += 1
        line = rng.choice(param_lines)
        column = lines[line].index("=") + 2
        server.notify(
            "textDocument/didChange",
            {
                "textDocument": {"uri": uri, "version": version},
                "contentChanges": [
                    {
                        "range": {
                            "start": {"line": line, "character": column},
                            "end": {"line": line, "character": column + 1},
                        },
                        "text": str(n % 9 + 1),
                    }
                ],
            },
        )
        last_sent = time.perf_counter()
        time.sleep(0.2)
    final = version
    at, _ = server.wait(
        lambda m: m.get("method") == "textDocument/publishDiagnostics" and m["params"].get("version") == final
    )
    # The wait above began 200 ms after the last edit; `at` is when the answer arrived.
    burst_ms = (at - last_sent) * 1000
    rss_before_edits = server.rss_kib()

    # Many edits in a row (typing into a comment and deleting again), then memory.
    comment_line = 0
    for n in range(args.edits):
        version += 1
        insert = n % 2 == 0
        change = {
            "range": {
                "start": {"line": comment_line, "character": 2},
                "end": {"line": comment_line, "character": 2 if insert else 3},
            },
            "text": "κ" if insert else "",
        }
        server.notify(
            "textDocument/didChange",
            {"textDocument": {"uri": uri, "version": version}, "contentChanges": [change]},
        )
    final = version
    server.wait(
        lambda m: m.get("method") == "textDocument/publishDiagnostics" and m["params"].get("version") == final,
        timeout=300,
    )
    rss_end = server.rss_kib()
    threads = server.threads()
    server.close()

    def p(values, q):
        return f"{percentile(values, q):.1f}"

    expectations = sum(1 for line in lines if line.startswith("expect"))
    print(f"binary: {args.binary}")
    print(f"model: {len(lines) - 1} lines, {len(equation_lines)} factors, {expectations} expectations")
    print(f"open to first diagnostics: {open_ms:.1f} ms")
    print(f"hover on a factor ({args.requests}): p50 {p(hover_ms, 50)} ms, p99 {p(hover_ms, 99)} ms")
    print(f"inlay hints, 40-line range ({args.requests}): p50 {p(hint_ms, 50)} ms, p99 {p(hint_ms, 99)} ms")
    print(f"completion ({args.requests}): p50 {p(completion_ms, 50)} ms, p99 {p(completion_ms, 99)} ms")
    print(
        f"burst of {args.burst} edits 200 ms apart: final diagnostics {burst_ms:.1f} ms after the last "
        f"edit (includes the {120} ms debounce)"
    )
    print(
        f"resident memory: {rss_start / 1024:.1f} MiB before opening, {rss_before_edits / 1024:.1f} MiB "
        f"after the requests and the burst, {rss_end / 1024:.1f} MiB after {args.edits} more edits; "
        f"{threads} threads"
    )
    return 0


if __name__ == "__main__":
    sys.exit(main())
