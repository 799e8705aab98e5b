"""Benchmark of `sdeck lsp` (not a test): hover, inlay hint and completion latency, a
burst of typing to its final diagnostics, resident memory and threads after many edits,
on the 2,000-line model of bench/scale_check.py (270 factors, 180 expectations).

    python3 tests/lsp/bench_lsp.py [--binary target/release/sdeck] [--edits 10000] [--trace]

With --trace the server runs with SDECK_LSP_TRACE=1 and the script prints, beside each
latency the client sees, the time the request spent inside the server (from its frame
read to its answer written) and the feature's own time: what the client sees beyond
these is the pipes, the client and the machine's scheduler.

It speaks JSON-RPC over the server's stdin/stdout with a minimal client of its own (the
end-to-end tests use pytest-lsp; here only timing matters). Every loop is bounded; the
server is a child process on this machine and nothing touches the network.
"""

from __future__ import annotations

import argparse
import importlib.util
import json
import os
import pathlib
import re
import queue
import random
import subprocess
import sys
import threading
import time

ROOT = pathlib.Path(__file__).resolve().parents[2]


class Server:
    def __init__(self, binary: str, trace: bool = False):
        env = dict(os.environ, SDECK_LSP_TRACE="1") if trace else None
        self.process = subprocess.Popen(
            [binary, "lsp"],
            stdin=subprocess.PIPE,
            stdout=subprocess.PIPE,
            stderr=subprocess.PIPE if trace else subprocess.DEVNULL,
            env=env,
        )
        self.messages: queue.Queue = queue.Queue()
        self.next_id = 0
        self.trace_lines: list[str] = []
        threading.Thread(target=self._read, daemon=True).start()
        if trace:
            threading.Thread(target=self._read_trace, daemon=True).start()

    def _read_trace(self):
        for line in self.process.stderr:
            self.trace_lines.append(line.decode(errors="replace").rstrip("\n"))

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
    parser.add_argument("--trace", action="store_true", help="time each request inside the server too")
    args = parser.parse_args()
    load_start = os.getloadavg()

    text = scale_model()
    lines = text.split("\n")
    uri = "file:///tmp/sdeck-bench/harrowgate_spreads.sde"
    server = Server(args.binary, args.trace)
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
    time.sleep(0.1)
    open_analysis = analyses_traced(server.trace_lines)

    rng = random.Random(7)
    equation_lines = [k for k, line in enumerate(lines) if line.startswith("dx")]

    inside: dict[str, str] = {}

    def timed(method: str, params_of) -> list[float]:
        out = []
        first_line = len(server.trace_lines)
        for _ in range(args.requests):
            params = params_of()
            start = time.perf_counter()
            _, answer = server.request(method, params)
            out.append((time.perf_counter() - start) * 1000)
            assert "result" in answer, answer
        if args.trace:
            time.sleep(0.2)  # the last trace lines
            inside[method] = traced(server.trace_lines[first_line:])
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
    burst_first_line = len(server.trace_lines)
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
    _, state = server.request("sdeck/documentText", {"uri": uri})
    after_burst = state["result"]
    burst_analyses = analyses_traced(server.trace_lines[burst_first_line:])
    edits_first_line = len(server.trace_lines)

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
    _, state = server.request("sdeck/documentText", {"uri": uri})
    after_edits = state["result"]
    time.sleep(0.2)
    edit_analyses = analyses_traced(server.trace_lines[edits_first_line:])
    server.close()
    load_end = os.getloadavg()

    def p(values, q):
        return f"{percentile(values, q):.1f}"

    expectations = sum(1 for line in lines if line.startswith("expect"))
    print(f"binary: {args.binary}")
    print(f"model: {len(lines) - 1} lines, {len(equation_lines)} factors, {expectations} expectations")
    print(f"open to first diagnostics: {open_ms:.1f} ms")
    if args.trace:
        print(f"  its analysis (nothing to take over): {open_analysis}")
    print(f"hover on a factor ({args.requests}): p50 {p(hover_ms, 50)} ms, p99 {p(hover_ms, 99)} ms")
    print(inside.get("textDocument/hover", ""), end="")
    print(f"inlay hints, 40-line range ({args.requests}): p50 {p(hint_ms, 50)} ms, p99 {p(hint_ms, 99)} ms")
    print(inside.get("textDocument/inlayHint", ""), end="")
    print(f"completion ({args.requests}): p50 {p(completion_ms, 50)} ms, p99 {p(completion_ms, 99)} ms")
    print(inside.get("textDocument/completion", ""), end="")
    print(
        f"burst of {args.burst} edits 200 ms apart: final diagnostics {burst_ms:.1f} ms after the last "
        f"edit (includes the {120} ms debounce)"
    )
    print(
        f"resident memory: {rss_start / 1024:.1f} MiB before opening, {rss_before_edits / 1024:.1f} MiB "
        f"after the requests and the burst, {rss_end / 1024:.1f} MiB after {args.edits} more edits; "
        f"{threads} threads"
    )
    print(f"analyses: {counts(after_burst)} after the burst; {counts(after_edits)} after the edits")
    if args.trace:
        print(f"  analyses of the burst (parameter values): {burst_analyses}")
        print(f"  analyses of the edits (a comment): {edit_analyses}")
    print(f"load average: {load_start[0]:.1f} at the start, {load_end[0]:.1f} at the end")
    return 0


def counts(state: dict) -> str:
    """What the server derived and took over (the test-only sdeck/documentText)."""
    return (
        f"{state['analyses']} run ({state['abandoned']} given up), derivations "
        f"{state['derivations']} computed / {state['derivationsReused']} taken over, expectation values "
        f"{state['expectationValues']} / {state['expectationValuesReused']}, hover reports "
        f"{state['reports']} / {state['reportsReused']}"
    )


TRACE_ANALYSIS = re.compile(
    r"the analysis of version \d+ (took|given up after) ([0-9.]+) ms(?: \(([0-9.]+) ms of processor\))?"
)


def analyses_traced(lines: list[str]) -> str:
    found = [m for m in map(TRACE_ANALYSIS.search, lines) if m]
    done = [m for m in found if m.group(1) == "took"]
    if not done:
        return "none traced"
    wall = [float(m.group(2)) for m in done]
    cpu = [float(m.group(3)) for m in done if m.group(3)]
    text = f"{len(done)} run, wall p50 {percentile(wall, 50):.1f} ms, max {max(wall):.1f} ms"
    if cpu:
        text += f", processor p50 {percentile(cpu, 50):.1f} ms"
    return text + f"; {len(found) - len(done)} given up"


TRACE_TOTAL = re.compile(r"sdeck trace: (\S+) \S+ in the server ([0-9.]+) ms")
TRACE_FEATURE = re.compile(r"waited ([0-9.]+) ms for the analysis and ([0-9.]+) ms for a thread, ran ([0-9.]+) ms")


def traced(lines: list[str]) -> str:
    """Percentiles of the server's own times, from its trace lines."""
    total = [float(m.group(2)) for m in map(TRACE_TOTAL.search, lines) if m]
    features = [m for m in map(TRACE_FEATURE.search, lines) if m]
    if not total or not features:
        return ""
    waits = [float(m.group(1)) for m in features]
    threads = [float(m.group(2)) for m in features]
    runs = [float(m.group(3)) for m in features]

    def p(values, q):
        return f"{percentile(values, q):.2f}"

    return (
        f"  in the server: p50 {p(total, 50)} ms, p99 {p(total, 99)} ms, max {max(total):.2f} ms; "
        f"the feature ran p50 {p(runs, 50)}, p99 {p(runs, 99)} ms; "
        f"waited for the analysis p99 {p(waits, 99)} ms, for a thread p99 {p(threads, 99)} ms\n"
    )


if __name__ == "__main__":
    sys.exit(main())
