"""Resident memory of `sdeck lsp` through a session (a benchmark, not a test): open the
2,000-line model of bench_lsp.py, hover on every factor, type and delete a letter in a
comment N times, printing VmRSS and the thread count after each step. Run it with and
without `MIMALLOC_PURGE_DELAY=0` (the allocator then returns freed pages at once) to see
how much of the memory is freed pages the allocator keeps for a while.

    python3 tests/lsp/bench_memory.py [--binary target/release/sdeck] [--edits 3000]
"""

from __future__ import annotations

import argparse
import sys

from bench_lsp import ROOT, Server, scale_model


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--binary", default=str(ROOT / "target" / "release" / "sdeck"))
    parser.add_argument("--edits", type=int, default=3000)
    args = parser.parse_args()
    text = scale_model()
    uri = "file:///tmp/sdeck-bench/harrowgate_spreads.sde"
    server = Server(args.binary)
    server.request("initialize", {"capabilities": {}, "processId": None, "rootUri": None})
    server.notify("initialized", {})

    def report(step: str):
        print(f"{step}: {server.rss_kib() / 1024:.1f} MiB, {server.threads()} threads")

    report("started")
    server.notify("textDocument/didOpen", {"textDocument": {"uri": uri, "languageId": "sdeck", "version": 1, "text": text}})
    server.wait(lambda m: m.get("method") == "textDocument/publishDiagnostics" and m["params"].get("version") == 1)
    report("opened")
    equations = [k for k, line in enumerate(text.split("\n")) if line.startswith("dx")]
    for line in equations:
        server.request("textDocument/hover", {"textDocument": {"uri": uri}, "position": {"line": line, "character": 1}})
    report(f"{len(equations)} hovers")
    version = 1
    for n in range(args.edits):
        version += 1
        insert = n % 2 == 0
        change = {
            "range": {"start": {"line": 0, "character": 2}, "end": {"line": 0, "character": 2 if insert else 3}},
            "text": "κ" if insert else "",
        }
        server.notify("textDocument/didChange", {"textDocument": {"uri": uri, "version": version}, "contentChanges": [change]})
    final = version
    server.wait(
        lambda m: m.get("method") == "textDocument/publishDiagnostics" and m["params"].get("version") == final,
        timeout=300,
    )
    report(f"{args.edits} edits")
    server.close()
    return 0


if __name__ == "__main__":
    sys.path.insert(0, str(ROOT / "tests" / "lsp"))
    sys.exit(main())
