#!/usr/bin/env python3
"""Benchmark of `sdeck check` as a model grows (not a test).

Generates models of N one-factor mean-reverting (Ornstein-Uhlenbeck) factors that all
share one shock, with one `expect sd(x, T)` per two factors, and times `sdeck check` on
each size; then the 2,000-line model of the language-server benchmark (about 270 factors
and 180 expectations). Prints a Markdown table of wall time and peak resident memory
and CPU time of the child (getrusage), which is steadier than wall time on a busy
machine.

    cargo build --release -p sdeck-cli
    python3 bench/scale_check.py                        # 30 60 120 270 1000 factors
    python3 bench/scale_check.py --sizes 30 60 --runs 1
    python3 bench/scale_check.py --write /tmp/m.sde --factors 270   # only write a model

The expectations are true: sd(x, T) = vol·sqrt((1 − e^(−2κT)) / (2κ)) (Vasicek 1977),
so a run that reports `expectation-failed` is wrong, and the script says so. The
portfolio is fictional (the Harrowgate Rates desk).
"""

from __future__ import annotations

import argparse
import math
import os
import pathlib
import resource
import statistics
import subprocess
import sys
import tempfile
import time

ROOT = pathlib.Path(__file__).resolve().parents[1]


def sd_at(kappa: float, vol: float, t: float) -> float:
    """Standard deviation of an Ornstein-Uhlenbeck factor at t (Vasicek 1977)."""
    return vol * math.sqrt((1.0 - math.exp(-2.0 * kappa * t)) / (2.0 * kappa))


def shared_shock_model(factors: int, expect_every: int = 2, comments: bool = False) -> str:
    """`factors` Ornstein-Uhlenbeck factors driven by one shock; every `expect_every`-th
    factor carries `expect sd(x, T)` with its true value inside the interval."""
    lines = [
        "# Rate spreads of the (fictional) Harrowgate Rates desk: every spread reverts to",
        "# its own level and all move with one market shock.",
        "model harrowgate_spreads",
        "clock year",
        "horizon 1 year",
        "shock M  # the market shock every spread loads on",
        "",
    ]
    for i in range(factors):
        kappa = 0.4 + (i % 17) * 0.15
        level = 1.0 + (i % 11) * 0.25  # percent
        vol = 0.5 + (i % 7) * 0.1  # percent per sqrt(year)
        start = 0.5 + (i % 13) * 0.3  # percent
        horizon = (i % 4) + 1  # years
        if comments:
            lines.append(f"# spread {i}: issuer {i} of the desk's book")
        lines += [
            f"param kappa{i} = {kappa:.2f} [1/year] > 0",
            f"param level{i} = {level:.2f}%",
            f"param vol{i} = {vol:.1f}% [1/sqrt(year)] > 0",
            f"factor x{i} = {start:.1f}%",
            f"dx{i} = kappa{i} * (level{i} - x{i}) dt + vol{i} dM",
        ]
        if i % expect_every == 0:
            sd = sd_at(kappa, vol / 100.0, horizon) * 100.0
            lines.append(
                f"expect sd(x{i}, {horizon} year) in [{sd * 0.98:.5f}%, {sd * 1.02:.5f}%]"
            )
    return "\n".join(lines) + "\n"


def two_thousand_lines() -> str:
    """The 2,000-line model: 270 factors, 180 expectations (two factors in three),
    a comment per factor, padded with notes to exactly 2,000 lines."""
    lines = []
    for i, line in enumerate(shared_shock_model(270, 1, comments=True).splitlines()):
        if line.startswith("expect") and (len([l for l in lines if l.startswith("dx")]) - 1) % 3 == 2:
            continue
        lines.append(line)
    lines += [f"# note {k}: figures reviewed by the desk" for k in range(2000 - len(lines))]
    return "\n".join(lines[:2000]) + "\n"


def param_lines(count: int) -> str:
    """`count` plain `param` lines: the input of the memory-per-byte figure."""
    lines = ["model harrowgate_parameters", "clock year"]
    lines += [f"param p{i} = {i % 97 + 0.25}" for i in range(count)]
    return "\n".join(lines) + "\n"


def measure(binary: str, path: pathlib.Path, runs: int) -> tuple[float, float, float, float, str]:
    # Each measurement in its own child process, so ru_maxrss is the model's own.
    code = (
        "import os,resource,subprocess,sys,time\n"
        "t=time.perf_counter()\n"
        "p=subprocess.run([sys.argv[1],'check','--format','json',sys.argv[2]],capture_output=True)\n"
        "e=time.perf_counter()-t\n"
        "u=resource.getrusage(resource.RUSAGE_CHILDREN)\n"
        "r=u.ru_maxrss/1024\n"
        "c=u.ru_utime+u.ru_stime\n"
        "import json\n"
        "try:\n"
        "  rules=sorted({d['rule'] for d in json.loads(p.stdout)['diagnostics']})\n"
        "except Exception as x:\n"
        "  rules=['unreadable output: %r exit %d %s'%(x,p.returncode,p.stderr[:200])]\n"
        "print(e,r,c,','.join(rules) or 'none')\n"
    )
    times, cpu, rss, rules = [], [], 0.0, ""
    for _ in range(runs):
        out = subprocess.run(
            [sys.executable, "-c", code, binary, str(path)], capture_output=True, text=True, check=True
        ).stdout.split(maxsplit=3)
        times.append(float(out[0]))
        rss = max(rss, float(out[1]))
        cpu.append(float(out[2]))
        rules = out[3].strip() if len(out) > 3 else "none"
    return statistics.median(times), min(times), statistics.median(cpu), rss, rules


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--binary", default=str(ROOT / "target" / "release" / "sdeck"))
    parser.add_argument("--sizes", type=int, nargs="*", default=[30, 60, 120, 270, 1000])
    parser.add_argument("--runs", type=int, default=3)
    parser.add_argument("--write", help="only write a model to this path")
    parser.add_argument("--factors", type=int, default=270)
    parser.add_argument("--two-thousand", action="store_true", help="with --write: the 2,000-line model")
    parser.add_argument(
        "--params", type=int, nargs="*", default=[10_000, 100_000, 200_000], help="param-line counts for the memory per input byte"
    )
    args = parser.parse_args()
    if args.write:
        text = two_thousand_lines() if args.two_thousand else shared_shock_model(args.factors)
        pathlib.Path(args.write).write_text(text)
        return 0
    print("| model | lines | expectations | median ms | best ms | CPU ms (median) | peak RSS MiB | rules fired |")
    print("|---|---:|---:|---:|---:|---:|---:|---|")
    with tempfile.TemporaryDirectory() as folder:
        cases = [(f"{n} factors, one shock", shared_shock_model(n)) for n in args.sizes]
        cases.append(("2,000-line model, 270 factors", two_thousand_lines()))
        for label, text in cases:
            path = pathlib.Path(folder) / "model.sde"
            path.write_text(text)
            median, best, cpu, rss, rules = measure(args.binary, path, args.runs)
            expectations = sum(1 for l in text.splitlines() if l.startswith("expect"))
            print(
                f"| {label} | {len(text.splitlines())} | {expectations} | {median * 1000:.1f} "
                f"| {best * 1000:.1f} | {cpu * 1000:.0f} | {rss:.1f} | {rules} |",
                flush=True,
            )
            if "expectation-failed" in rules:
                print("error: an expectation failed; the figures are wrong", file=sys.stderr)
                return 1

        # Resident memory per byte of input: peak RSS of `sdeck check` on files of plain
        # `param` lines, whole and less that of an empty model (the program itself).
        print()
        print("| input | bytes | peak RSS MiB | RSS bytes per input byte | net of an empty model | rules fired |")
        print("|---|---:|---:|---:|---:|---|")
        empty = pathlib.Path(folder) / "empty.sde"
        empty.write_text("model harrowgate_parameters\nclock year\n")
        base = measure(args.binary, empty, 1)[3]
        for count in args.params:
            path = pathlib.Path(folder) / "params.sde"
            text = param_lines(count)
            path.write_text(text)
            *_, rss, rules = measure(args.binary, path, 1)
            size = len(text.encode())
            print(
                f"| {count:,} param lines | {size:,} | {rss:.1f} | {rss * 2**20 / size:.0f} "
                f"| {(rss - base) * 2**20 / size:.0f} | {rules} |",
                flush=True,
            )
    return 0


if __name__ == "__main__":
    sys.exit(main())
