#!/usr/bin/env python3
"""Benchmark of `sdeck check` on a large model repository.

Generates N varied models (default 20 000) into a temporary folder: one-factor families
(arithmetic and geometric Brownian, Ornstein-Uhlenbeck, square-root), correlated linear
systems of 2 to 6 factors, polynomial and seasonal models, with pinned expectations, in
several clocks and units; about one model in ten carries a mistake (syntax, undefined
name, unused parameter, Feller condition, dimension, failed expectation). Then it times,
with a warm page cache:

  - `cat` of every model file (the cost of reading them),
  - `sdeck check DIR` with each output format, on all cores and on one,

and prints a Markdown table. Scenarios are fictional (the Larkspur, Fenmarch and Wrenmoor
names are our own).

    cargo build --release -p sdeck-cli
    python3 bench/check_many.py                   # 20 000 models, 3 runs each
    python3 bench/check_many.py --models 2000 --runs 1 --keep /tmp/models
"""

import argparse
import os
import pathlib
import random
import shutil
import statistics
import subprocess
import sys
import tempfile
import time

ROOT = pathlib.Path(__file__).resolve().parents[1]

DESKS = ["larkspur", "fenmarch", "wrenmoor", "harrowgate", "vesper_bay", "pemberly", "tallisand"]


def pct(x):
    return f"{x * 100:.3g}%"


def one_state(rng, name, noise, kind):
    """Declarations and the equation of one factor of family `kind`."""
    k = rng.uniform(0.2, 3.0)
    level = rng.uniform(0.005, 0.06)
    lines = []
    if kind == "ou":
        vol = rng.uniform(0.002, 0.02)
        lines += [
            f"param kappa_{name} = {k:.3f} [1/year] > 0   # speed of {name}",
            f"param level_{name} = {pct(level)}             # long-run level of {name}",
            f"param vol_{name} = {pct(vol)} [1/sqrt(year)] > 0",
            f"factor {name} = {pct(rng.uniform(0.0, 0.06))}",
            f"d{name} = kappa_{name} * (level_{name} - {name}) dt + vol_{name} d{noise}",
        ]
    elif kind == "cir":
        vol = min(rng.uniform(0.01, 0.2), (2 * k * level) ** 0.5 * 0.95)
        lines += [
            f"param kappa_{name} = {k:.3f} [1/year] > 0",
            f"param level_{name} = {pct(level)} >= 0",
            f"param vol_{name} = {vol:.5f} [1/sqrt(year)] > 0",
            f"factor {name} = {pct(rng.uniform(0.001, 0.06))} >= 0",
            f"d{name} = kappa_{name} * (level_{name} - {name}) dt + vol_{name} * sqrt({name}) d{noise}",
        ]
    elif kind == "gbm":
        lines += [
            f"param mu_{name} = {pct(rng.uniform(-0.02, 0.1))} [1/year]",
            f"param sigma_{name} = {pct(rng.uniform(0.05, 0.6))} [1/sqrt(year)] > 0",
            f"factor {name} = {rng.uniform(10, 200):.2f} [WRC] > 0",
            f"d{name} = mu_{name} * {name} dt + sigma_{name} * {name} d{noise}",
        ]
    else:  # abm
        lines += [
            f"param drift_{name} = {rng.uniform(-0.01, 0.01):.5f} [1/year]",
            f"param vol_{name} = {pct(rng.uniform(0.001, 0.02))} [1/sqrt(year)] > 0",
            f"factor {name} = {pct(rng.uniform(0.0, 0.05))}",
            f"d{name} = drift_{name} dt + vol_{name} d{noise}",
        ]
    return lines


def expectation(rng, name, kind):
    if kind in ("ou", "cir"):
        return rng.choice(
            [
                f"expect halflife({name}) < 10 year",
                f"expect stationary_mean({name}) in [0%, 10%]",
                f"expect mean({name}, 6 month) in [-5%, 15%]",
            ]
        )
    if kind == "gbm":
        return f"expect mean({name}, 1 year) > 0 WRC"
    return f"expect sd({name}) < 10%"


def system(rng, size):
    """A correlated linear system of `size` factors (all Gaussian)."""
    lines = []
    names = [f"x{i}" for i in range(size)]
    noises = [f"W{i}" for i in range(size)]
    lines.append("shock " + ", ".join(noises))
    for i in range(1, size):
        lines.append(f"corr W0 W{i} = {rng.uniform(-0.3, 0.3):.3f}")
    for i, n in enumerate(names):
        lines.append(f"param a{i} = {rng.uniform(0.5, 3.0):.3f} [1/year] > 0")
        lines.append(f"param s{i} = {pct(rng.uniform(0.002, 0.02))} [1/sqrt(year)] > 0")
        lines.append(f"factor {n} = {pct(rng.uniform(-0.01, 0.05))}")
    for i, n in enumerate(names):
        coupling = ""
        if i > 0:
            lines.append(f"param c{i} = {rng.uniform(0.05, 0.3):.3f} [1/year]")
            coupling = f" + c{i} * x{i - 1}"
        lines.append(f"d{n} = (-a{i} * {n}{coupling}) dt + s{i} dW{i}")
    lines.append(f"expect sd(x0, 1 year) < 20%")
    return lines


def model_text(rng, index):
    desk = rng.choice(DESKS)
    shape = rng.choices(
        ["single", "pair", "system", "polynomial", "seasonal"], weights=[45, 20, 20, 8, 7]
    )[0]
    clock = rng.choice(["year", "year", "year", "month", "day"])
    lines = [
        f"# {desk.replace('_', ' ').title()} treasury desk, model {index} (generated for the benchmark).",
        f"model {desk}_{index}",
        f"clock {clock}" if clock != "year" else "clock year",
        f"horizon {rng.choice(['6 month', '1 year', '2 year', '3 month'])}",
        "unit WRC",
    ]
    if shape == "single":
        kind = rng.choice(["ou", "cir", "gbm", "abm"])
        lines.append("shock W")
        lines += one_state(rng, "r", "W", kind)
        lines.append(expectation(rng, "r", kind))
    elif shape == "pair":
        k1, k2 = rng.choice(["ou", "cir", "gbm", "abm"]), rng.choice(["ou", "cir", "gbm", "abm"])
        lines.append("shock W, B")
        lines.append(f"corr W B = {rng.uniform(-0.8, 0.8):.2f}")
        lines += one_state(rng, "r", "W", k1)
        lines += one_state(rng, "s", "B", k2)
        lines.append(expectation(rng, "r", k1))
        lines.append(expectation(rng, "s", k2))
    elif shape == "system":
        lines += system(rng, rng.randint(2, 6))
    elif shape == "polynomial":
        lines += [
            "shock W",
            f"param kappa = {rng.uniform(0.5, 2):.3f} [1/year] > 0",
            f"param level = {rng.uniform(0.5, 2):.3f}",
            f"param vol = {rng.uniform(0.05, 0.3):.3f} [1/sqrt(year)] > 0",
            f"factor v = {rng.uniform(0.5, 2):.3f} >= 0",
            "dv = kappa * (level - v) dt + vol * sqrt(v * v + 1) dW",
        ]
    else:
        lines += [
            "shock W",
            "param freq = 1 [1/year] > 0",
            f"param amp = {rng.uniform(1, 10):.2f} [WRC/year]",
            f"param speed = {rng.uniform(1, 20):.2f} [1/year] > 0",
            f"param base = {rng.uniform(30, 90):.2f} [WRC]",
            f"param vol = {rng.uniform(1, 8):.2f} [WRC/sqrt(year)] > 0",
            "let season = sin(2 * pi * freq * t)",
            f"factor p = {rng.uniform(30, 90):.2f} [WRC]",
            "dp = (speed * (base - p) + amp * season) dt + vol dW",
            "expect halflife(p) < 1 year",
        ]
    # About one model in ten carries a mistake.
    flaw = rng.random()
    if flaw < 0.02:
        lines.append("param broken-name = 1")
    elif flaw < 0.04:
        lines.append("param leftover = 2.5%")
    elif flaw < 0.06:
        lines.append("let ghost = missing_rate * 2")
    elif flaw < 0.08:
        lines.append("expect mean(nothing, 1 year) > 0")
    elif flaw < 0.09:
        lines.append("param vol_bad = 1% [1/year] > 0\nlet bad = vol_bad + 1")
    elif flaw < 0.10:
        lines.append("expect halflife(r) < 1 day" if shape in ("single", "pair") else "param x = (")
    return "\n".join(lines) + "\n"


def generate(folder, count, seed):
    rng = random.Random(seed)
    per_folder = 500
    for i in range(count):
        sub = folder / f"desk_{i // per_folder:03d}"
        if i % per_folder == 0:
            sub.mkdir(parents=True, exist_ok=True)
        (sub / f"model_{i:05d}.sde").write_text(model_text(rng, i), encoding="utf-8")


def timed(command, runs, env=None):
    times = []
    code = None
    for _ in range(runs):
        start = time.perf_counter()
        done = subprocess.run(command, shell=isinstance(command, str), stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, env=env, check=False)
        times.append(time.perf_counter() - start)
        code = done.returncode
    return statistics.median(times), min(times), code


def main():
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--models", type=int, default=20_000)
    parser.add_argument("--runs", type=int, default=3)
    parser.add_argument("--seed", type=int, default=7)
    parser.add_argument("--sdeck", default=str(ROOT / "target" / "release" / "sdeck"))
    parser.add_argument("--keep", help="generate into this folder and keep it")
    args = parser.parse_args()
    if not os.path.exists(args.sdeck):
        sys.exit(f"{args.sdeck} not found: run `cargo build --release -p sdeck-cli` first")

    folder = pathlib.Path(args.keep) if args.keep else pathlib.Path(tempfile.mkdtemp(prefix="sdeck-bench-"))
    try:
        folder.mkdir(parents=True, exist_ok=True)
        generate(folder, args.models, args.seed)
        files = sorted(str(p) for p in folder.rglob("*.sde"))
        size = sum(os.path.getsize(f) for f in files)
        list_file = folder / "files.txt"
        list_file.write_text("\0".join(files), encoding="utf-8")
        cat = f"xargs -0 cat < '{list_file}' > /dev/null"
        subprocess.run(cat, shell=True, check=True)  # warm the page cache

        rows = [("cat (read every file)", *timed(cat, args.runs))]
        for fmt in ["json", "human", "sarif"]:
            rows.append((f"sdeck check --format {fmt}, all cores", *timed([args.sdeck, "check", "--format", fmt, str(folder)], args.runs)))
        one = dict(os.environ, RAYON_NUM_THREADS="1")
        rows.append(("sdeck check --format json, one core", *timed([args.sdeck, "check", "--format", "json", str(folder)], args.runs, env=one)))

        done = subprocess.run([args.sdeck, "check", "--format", "json", str(folder)], capture_output=True, text=True, check=False)
        import json

        report = json.loads(done.stdout)
        by_rule = {}
        for d in report["diagnostics"]:
            by_rule[d["rule"]] = by_rule.get(d["rule"], 0) + 1

        print(f"{len(files)} models, {size / 1e6:.1f} MB, {os.cpu_count()} cores; median (best) of {args.runs} runs\n")
        print("| command | median s | best s | per model µs (median) | exit |")
        print("|---|---:|---:|---:|---:|")
        for name, median, best, code in rows:
            print(f"| {name} | {median:.3f} | {best:.3f} | {median / len(files) * 1e6:.0f} | {code} |")
        print(f"\nfindings: {report['files']} files, {len(report['diagnostics'])} diagnostics: "
              + ", ".join(f"{k} {v}" for k, v in sorted(by_rule.items())))
    finally:
        if not args.keep:
            shutil.rmtree(folder, ignore_errors=True)


if __name__ == "__main__":
    main()
