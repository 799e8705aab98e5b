"""Benchmark of `sdeck lsp` (not a test): hover latency, edit-to-diagnostics latency and
resident memory after many edits, on a generated 2,000-line model.

    python3 tests/lsp/bench_lsp.py [--binary target/release/sdeck] [--edits 10000]

It speaks JSON-RPC over the server's stdin/stdout with a minimal client of its own (the
end-to-end tests use pytest-lsp; here only timing matters). Every loop is bounded; the
server is a child process on this machine and nothing touches the network.
"""

from __future__ import annotations

import argparse
import json
import pathlib
import queue
import random
import statistics
import subprocess
import sys
import threading
import time

ROOT = pathlib.Path(__file__).resolve().parents[2]


def book_model(lines_wanted: int = 2000) -> str:
    """A model of the (fictional) Quillmere Credit Fund's book: ten Ornstein-Uhlenbeck
    spreads, each with parameters, a long chain of named expressions and notes, padded to
    exactly `lines_wanted` lines with comments. (Ten factors, not hundreds: the calculus
    solves the system's covariance as one dense linear system.)"""
    head = [
        "# Benchmark model: Ornstein-Uhlenbeck spreads of the (fictional) Quillmere",
        "# Credit Fund's book, each with its parameters, named expressions and notes.",
        "model quillmere_book",
        "clock year",
        "horizon 1 year",
        "",
    ]
    blocks: list[str] = []
    i = 0
    while True:
        i += 1
        block = [f"# Spread {i}: issuer {i} of the fund's book (fictional)."]
        block += [f"# note {j} on spread {i}: calibrated on the desk's history" for j in range(60)]
        block += [
            f"param k{i} = {1 + i % 7}.5 [1/year] > 0   # speed of spread {i}",
            f"param s{i} = {1 + i % 5}bp [1/sqrt(day)] > 0  # volatility of spread {i}",
            f"param m{i} = {i % 9 + 1}0bp >= 0  # level of spread {i}",
            f"shock W{i}  # shock to spread {i}",
            f"factor x{i} = {i % 9}0bp  # spread {i} today",
            f"let a{i}_0 = k{i}",
        ]
        block += [f"let a{i}_{j} = a{i}_{j - 1} * 1" for j in range(1, 120)]
        block += [f"dx{i} = a{i}_119 * (m{i} - x{i}) dt + s{i} dW{i}", ""]
        if len(head) + len(blocks) + len(block) > lines_wanted:
            break
        blocks += block
    lines = head + blocks
    lines += [f"# padding {k}" for k in range(lines_wanted - len(lines))]
    return "\n".join(lines) + "\n"


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


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    default = ROOT / "target" / "release" / "sdeck"
    if not default.exists():
        default = ROOT / "target" / "debug" / "sdeck"
    parser.add_argument("--binary", default=str(default))
    parser.add_argument("--hovers", type=int, default=300)
    parser.add_argument("--timed-edits", type=int, default=100)
    parser.add_argument("--edits", type=int, default=10_000)
    args = parser.parse_args()

    text = book_model()
    lines = text.split("\n")
    uri = "file:///tmp/sdeck-bench/quillmere_book.sde"
    server = Server(args.binary)
    server.request("initialize", {"capabilities": {}, "processId": None, "rootUri": None})
    server.notify("initialized", {})
    rss_start = server.rss_kib()
    server.notify(
        "textDocument/didOpen",
        {"textDocument": {"uri": uri, "languageId": "sdeck", "version": 1, "text": text}},
    )
    server.wait(lambda m: m.get("method") == "textDocument/publishDiagnostics" and m["params"].get("version") == 1)

    # Hover on factors (the heaviest hover: family, formulas, figures at the horizon).
    rng = random.Random(7)
    equation_lines = [k for k, line in enumerate(lines) if line.startswith("dx")]
    hover_ms = []
    for _ in range(args.hovers):
        line = rng.choice(equation_lines)
        start = time.perf_counter()
        _, answer = server.request(
            "textDocument/hover",
            {"textDocument": {"uri": uri}, "position": {"line": line, "character": 1}},
        )
        hover_ms.append((time.perf_counter() - start) * 1000)
        assert "result" in answer and answer["result"], answer

    # Edit to diagnostics: change a parameter's value, wait for that version's diagnostics.
    param_lines = [k for k, line in enumerate(lines) if line.startswith("param k")]
    version = 1
    edit_ms = []
    for n in range(args.timed_edits):
        version += 1
        line = rng.choice(param_lines)
        column = lines[line].index("=") + 2
        digit = str(n % 9 + 1)
        start = time.perf_counter()
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
                        "text": digit,
                    }
                ],
            },
        )
        wanted = version
        at, _ = server.wait(
            lambda m: m.get("method") == "textDocument/publishDiagnostics"
            and m["params"].get("version") == wanted
        )
        edit_ms.append((at - start) * 1000)

    rss_before_edits = server.rss_kib()

    # Many edits in a burst (typing into a comment and deleting again), then memory.
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
    server.close()

    print(f"binary: {args.binary}")
    print(f"model: {len(lines) - 1} lines, {len(equation_lines)} factors")
    print(
        f"hover on a factor ({args.hovers} requests): p50 {percentile(hover_ms, 50):.1f} ms, "
        f"p99 {percentile(hover_ms, 99):.1f} ms"
    )
    print(
        f"edit to diagnostics ({args.timed_edits} edits, includes the "
        f"{120} ms debounce): p50 {percentile(edit_ms, 50):.1f} ms, "
        f"p99 {percentile(edit_ms, 99):.1f} ms, mean {statistics.mean(edit_ms):.1f} ms"
    )
    print(
        f"resident memory: {rss_start / 1024:.1f} MiB before opening the model, "
        f"{rss_before_edits / 1024:.1f} MiB after the hovers and timed edits, "
        f"{rss_end / 1024:.1f} MiB after {args.edits} more edits"
    )
    return 0


if __name__ == "__main__":
    sys.exit(main())
