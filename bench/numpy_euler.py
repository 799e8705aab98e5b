"""Euler–Maruyama on the double well dx = rate (x - x^3) dt + vol dW, vectorised over
paths with numpy: the reference point for crates/sdeck-simulate/benches/throughput.rs.

Same model, paths and steps as the Rust benchmark. Prints path-steps per second.

    pip install numpy threadpoolctl
    python3 bench/numpy_euler.py [PATHS] [STEPS]
"""

import sys
import time

import numpy as np

RATE = 1.0
VOL = 0.5
X0 = 0.1
AT = 1.0


def simulate(paths: int, steps: int, seed: int) -> np.ndarray:
    """In-place numpy updates, one normal draw per path per step (PCG64, ziggurat)."""
    rng = np.random.default_rng(seed)
    dt = AT / steps
    noise_scale = VOL * np.sqrt(dt)
    x = np.full(paths, X0)
    cube = np.empty(paths)
    normals = np.empty(paths)
    for _ in range(steps):
        rng.standard_normal(out=normals)
        np.multiply(x, x, out=cube)
        np.multiply(cube, x, out=cube)
        # x += rate (x - x^3) dt + vol sqrt(dt) Z
        np.subtract(x, cube, out=cube)
        cube *= RATE * dt
        normals *= noise_scale
        x += cube
        x += normals
    return x


def main() -> None:
    paths = int(sys.argv[1]) if len(sys.argv) > 1 else 100_000
    steps = int(sys.argv[2]) if len(sys.argv) > 2 else 1_000
    print(f"double well, numpy Euler–Maruyama: {paths} paths × {steps} steps (numpy {np.__version__})")
    simulate(paths, steps, 1)  # warm-up
    best = float("inf")
    mean = float("nan")
    standard_error = float("nan")
    for run in range(3):
        start = time.perf_counter()
        x = simulate(paths, steps, 2026 + run)
        best = min(best, time.perf_counter() - start)
        mean = float(x.mean())
        standard_error = float(x.std(ddof=1)) / paths ** 0.5
    rate = paths * steps / best
    print(f"best of 3: {best:.3f} s, {rate:.3e} path-steps/s (mean x(1) = {mean:.4f} ± {standard_error:.4f})")


if __name__ == "__main__":
    main()
