"""The Monte Carlo engine against a vectorised numpy Euler loop and against the sampler floor,
in one process pair: this script (numpy) and the Rust benchmark it starts, taking turns.

Model (no closed form, so both run Euler–Maruyama):

    dc = r c (cap - c) dt + s c (cap - c) dW,   r = 1.5, cap = 1, s = 0.3, c(0) = 0.1, t = 1

400,000 paths and 200 steps by default. numpy: in-place array updates over all paths, one
normal draw per path per step (numpy's default generator, PCG64 with the ziggurat method).
The Rust side (crates/sdeck-simulate/benches/throughput.rs) times the engine and the floor,
the time to draw as many normals with the engine's generator and sampler alone, on the
machine's best instruction set (SDECK_BENCH_ISA=baseline in the environment: SSE2 only).

    pip install numpy
    cargo bench -p sdeck-simulate --bench throughput --no-run
    python3 bench/simulate_vs_numpy.py [--paths N] [--steps N] [--rounds N]

Each round runs numpy once (about a second) and the Rust benchmark once (a warm-up and
--rust-runs timed runs of the engine and of the floor, about 0.1 s each: a single run that
short is at the mercy of one descheduled thread); the best of the rounds is reported for
each, with the load average, since the machine may be shared.
"""

import argparse
import os
import re
import subprocess
import sys
import time

import numpy as np

R, CAP, S, C0, AT = 1.5, 1.0, 0.3, 0.1, 1.0


def numpy_euler(paths: int, steps: int, seed: int) -> np.ndarray:
    rng = np.random.default_rng(seed)
    dt = AT / steps
    c = np.full(paths, C0)
    g = np.empty(paths)
    z = np.empty(paths)
    for _ in range(steps):
        rng.standard_normal(out=z)
        np.subtract(CAP, c, out=g)  # g = c (cap - c)
        g *= c
        z *= g  # diffusion s g sqrt(dt) Z
        z *= S * np.sqrt(dt)
        g *= R * dt  # drift r g dt
        c += g
        c += z
    return c


def rust_run(paths: int, steps: int, threads: int | None, runs: int) -> dict:
    env = dict(os.environ, SDECK_BENCH_PATHS=str(paths), SDECK_BENCH_STEPS=str(steps),
               SDECK_BENCH_RUNS=str(runs), SDECK_BENCH_ONLY="yardstick")
    if threads:
        env["SDECK_BENCH_THREADS"] = str(threads)
    out = subprocess.run(
        ["cargo", "bench", "-q", "-p", "sdeck-simulate", "--bench", "throughput"],
        env=env, check=True, capture_output=True, text=True).stdout
    line = next(l for l in out.splitlines() if l.startswith("result "))
    return {k: float(v) for k, v in re.findall(r"(\w+)=([-\d.e]+)", line)}


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--paths", type=int, default=400_000)
    parser.add_argument("--steps", type=int, default=200)
    parser.add_argument("--rounds", type=int, default=3)
    parser.add_argument("--threads", type=int, default=None, help="Rust threads (default: all cores)")
    parser.add_argument("--rust-runs", type=int, default=5,
                        help="timed runs of the engine and of the floor in each round (about 0.1 s each)")
    args = parser.parse_args()
    numpy_euler(args.paths, 10, 1)  # warm-up
    best_numpy = best_engine = best_floor = float("inf")
    engine_rounds = []
    figures = {}
    for round_ in range(args.rounds):
        start = time.perf_counter()
        c = numpy_euler(args.paths, args.steps, 2026 + round_)
        best_numpy = min(best_numpy, time.perf_counter() - start)
        figures["numpy"] = (float(c.mean()), float(c.std(ddof=1)) / args.paths ** 0.5)
        rust = rust_run(args.paths, args.steps, args.threads, args.rust_runs)
        best_engine = min(best_engine, rust["engine_seconds"])
        engine_rounds.append(rust["engine_seconds"])
        best_floor = min(best_floor, rust["floor_seconds"])
        figures["sdeck"] = (rust["mean"], rust["se"])
        threads = int(rust["threads"])
        isa = "AVX2" if rust.get("avx2") else "baseline SSE2"
    path_steps = args.paths * args.steps
    print(f"logistic model, {args.paths} paths x {args.steps} steps, best of {args.rounds} rounds "
          f"(numpy once, engine and floor {args.rust_runs} times each per round); "
          f"numpy {np.__version__}, python {sys.version.split()[0]}; load average {os.getloadavg()[0]:.1f}")
    print(f"| run | seconds | ns per path-step | ratio |")
    print(f"|---|---:|---:|---:|")
    print(f"| numpy, vectorised (one core) | {best_numpy:.3f} | {best_numpy / path_steps * 1e9:.2f} | 1.0x |")
    print(f"| sdeck engine, {threads} threads, {isa} | {best_engine:.3f} | {best_engine / path_steps * 1e9:.2f} | "
          f"{best_numpy / best_engine:.1f}x faster than numpy |")
    print(f"| sampler floor, {threads} threads, {isa} | {best_floor:.3f} | {best_floor / path_steps * 1e9:.2f} | "
          f"engine / floor = {best_engine / best_floor:.2f} |")
    spread = ", ".join(f"{s / path_steps * 1e9:.2f}" for s in engine_rounds)
    print(f"engine ns per path-step, best of each round: {spread}")
    for name, (mean, se) in figures.items():
        print(f"mean c(1), {name}: {mean:.5f} +- {se:.5f}")


if __name__ == "__main__":
    main()
