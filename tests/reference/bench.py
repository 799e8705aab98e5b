#!/usr/bin/env python3
"""Times the reference figures for three models (best of N, microseconds per evaluation).

For each model two numbers are printed:
  * numeric: the figures from matrices already built (what a calculator does per
    request): mean and covariance at the horizon, half-life, stationary law;
  * full: the whole reference pipeline for the model, including reading the file,
    the sympy derivation of the generator and the solve_ivp cross-check.

Usage: python3 tests/reference/bench.py [--repeat N]
The numbers depend on the machine; docs/benchmarks.md records where they were taken.
"""

from __future__ import annotations

import argparse
import math
import os
import platform
import sys
import timeit
from pathlib import Path

# The matrices here are at most 10 x 10: extra BLAS threads only spin, and on a busy
# machine they turn microseconds into milliseconds. Set before numpy loads BLAS.
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
os.environ.setdefault("OMP_NUM_THREADS", "1")

import numpy as np  # noqa: E402
import scipy  # noqa: E402
from scipy import linalg  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parent))
import compute  # noqa: E402  (the reference script next to this file)

BENCHMARKED = {
    "ou_quillon_overnight_daily_units.sde": "one-factor Ornstein-Uhlenbeck",
    "system_ostmarch_three_factors.sde": "three-factor linear system",
    "polynomial_wexcombe_log_price_variance.sde": "polynomial (log price + square-root variance)",
}


def spec_for(file: str) -> compute.ModelSpec:
    for spec in compute.MODELS:
        if spec.file == file:
            return spec
    raise SystemExit(f"bench: no model {file} in compute.MODELS")


def gaussian_numeric(model: compute.NumericModel):
    """Matrices built once; returns a function computing every figure from them."""
    indices = list(range(model.size))
    a, c = compute.affine_parts(model, indices)
    q = np.array([[compute.as_float(model.diffusion_covariance[i, j]) for j in indices] for i in indices])
    x0 = model.initial
    horizon = model.horizon
    n = model.size

    def figures():
        augmented = np.zeros((n + 1, n + 1))
        augmented[:n, :n] = a
        augmented[:n, n] = c
        mean = (linalg.expm(augmented * horizon) @ np.append(x0, 1.0))[:n]
        block = np.zeros((2 * n, 2 * n))
        block[:n, :n] = -a
        block[:n, n:] = q
        block[n:, n:] = a.T
        exponential = linalg.expm(block * horizon)
        covariance = exponential[n:, n:].T @ exponential[:n, n:]
        half_lives = [math.log(2.0) / -a[i, i] if a[i, i] < 0 and not np.any(np.delete(a[i], i)) else None
                      for i in range(n)]
        stationary_mean = -np.linalg.solve(a, c)
        stationary_covariance = linalg.solve_continuous_lyapunov(a, -q)
        return mean, covariance, half_lives, stationary_mean, stationary_covariance

    return figures


def polynomial_numeric(model: compute.NumericModel):
    indices = list(range(model.size))
    system = compute.moment_system(model, indices, model.initial)
    generator = np.array(system.generator.tolist(), dtype=float)
    start = np.zeros(len(system.exponents))
    start[0] = 1.0
    variance_index = model.spec.factors.index(next(s for s in model.spec.factors if s.family == "square-root"))
    closure = compute.dependency_closure(model, variance_index)
    stationary_system = compute.moment_system(model, closure, np.zeros(len(closure)))
    stationary_generator = np.array(stationary_system.generator.tolist(), dtype=float)
    horizon = model.horizon

    def figures():
        moments = linalg.expm(generator * horizon) @ start
        mean, covariance = compute.moments_to_mean_covariance(system, moments)
        decaying = stationary_generator[1:, 1:]
        stationary = np.linalg.solve(decaying, -stationary_generator[1:, 0])
        half_life = math.log(2.0) / -generator[1 + variance_index, 1 + variance_index]
        return mean, covariance, stationary, half_life

    return figures


def best_microseconds(function, repeat: int) -> float:
    timer = timeit.Timer(function)
    number, _ = timer.autorange()
    return min(timer.repeat(repeat=repeat, number=number)) / number * 1e6


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description="Times the reference figures.")
    parser.add_argument("--repeat", type=int, default=7, help="best of this many runs (default 7)")
    arguments = parser.parse_args(argv)
    rows = []
    for file, label in BENCHMARKED.items():
        spec = spec_for(file)
        model = compute.build_numeric_model(spec)
        if compute.is_gaussian(model, list(range(model.size))):
            numeric = gaussian_numeric(model)
            method = "Van Loan expm + Lyapunov"
        else:
            numeric = polynomial_numeric(model)
            method = "generator expm (deg <= 2)"
        numeric_us = best_microseconds(numeric, arguments.repeat)
        full_us = best_microseconds(lambda: compute.model_record(spec), max(1, arguments.repeat // 3))
        rows.append((label, model.size, method, numeric_us, full_us))
    print(f"python {platform.python_version()}, numpy {np.__version__}, scipy {scipy.__version__}, "
          f"BLAS threads {os.environ['OPENBLAS_NUM_THREADS']}, best of {arguments.repeat}")
    header = ["model", "factors", "method", "numeric µs/eval", "full µs/eval"]
    table = [header] + [
        [label, str(size), method, f"{numeric_us:,.1f}", f"{full_us:,.0f}"]
        for label, size, method, numeric_us, full_us in rows
    ]
    widths = [max(len(line[k]) for line in table) for k in range(len(header))]
    for position, line in enumerate(table):
        print("| " + " | ".join(cell.ljust(width) for cell, width in zip(line, widths)) + " |")
        if position == 0:
            print("|" + "|".join("-" * (width + 2) for width in widths) + "|")
    return 0


if __name__ == "__main__":
    sys.exit(main())
