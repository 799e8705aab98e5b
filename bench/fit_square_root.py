"""Square-root exact MLE on 10,000 observations: `sdeck fit` against scipy maximising the
same likelihood (scipy.stats.ncx2.logpdf, scipy.optimize.minimize), for docs/benchmarks.md.

Both start from the same AR(1) moment estimates. The scipy side is the one-call script a
quant would write: Nelder–Mead on (ln κ, θ, ln σ) with scipy's default tolerances (a
looser optimum than sdeck's, so the comparison favours scipy), then a central-difference
Hessian for the standard errors. The sdeck side is the whole command: reading the CSV,
the search, the Newton polish and the Hessian. Prints both times, their ratio and the
largest relative difference of the estimates.

    cargo build --release
    pip install -r tests/fit/requirements.txt
    python3 bench/fit_square_root.py [OBSERVATIONS] [REPEATS]
"""

import json
import pathlib
import subprocess
import sys
import tempfile
import time

import numpy as np
from scipy import optimize

ROOT = pathlib.Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "tests" / "fit"))
import reference  # noqa: E402

MODEL = """model bench_funding
clock year
param kappa = 1 [1/year]        > 0
param level = 3%                > 0
param vol   = 5% [1/sqrt(year)] > 0
shock W
factor r = 3% >= 0
dr = kappa * (level - r) dt + vol * sqrt(r) dW
"""


def scipy_fit(t, x):
    start = reference.ar1_start(t, x)
    start = (start[0], start[1], start[2] / np.sqrt(np.mean(x)))

    def objective(u):
        return reference.cir_negloglik((np.exp(u[0]), u[1], np.exp(u[2])), t, x)

    u0 = np.array([np.log(start[0]), start[1], np.log(start[2])])
    result = optimize.minimize(objective, u0, method="Nelder-Mead")
    estimate = np.array([np.exp(result.x[0]), result.x[1], np.exp(result.x[2])])
    se = reference.standard_errors(reference.cir_negloglik, t, x, estimate)
    return estimate, se


def main():
    n = int(sys.argv[1]) if len(sys.argv) > 1 else 10_000
    repeats = int(sys.argv[2]) if len(sys.argv) > 2 else 3
    rng = np.random.default_rng(2026)
    dt = 1 / 252
    x = reference.simulate_cir(rng, n, dt, 1.5, 0.04, 0.1, 0.04)
    t = np.arange(n) * dt
    binary = ROOT / "target" / "release" / "sdeck"
    with tempfile.TemporaryDirectory() as folder:
        folder = pathlib.Path(folder)
        (folder / "model.sde").write_text(MODEL, encoding="utf-8")
        lines = ["t,r"] + [f"{a!r},{b!r}" for a, b in zip(t.tolist(), x.tolist())]
        (folder / "r.csv").write_text("\n".join(lines) + "\n", encoding="utf-8")
        command = [str(binary), "fit", str(folder / "model.sde"), str(folder / "r.csv"),
                   "--format", "json"]
        sdeck_times = []
        for _ in range(repeats):
            began = time.perf_counter()
            done = subprocess.run(command, capture_output=True, text=True, check=True)
            sdeck_times.append(time.perf_counter() - began)
        report = json.loads(done.stdout)
    sdeck_estimate = np.array([p["estimate"] for p in report["params"]])
    scipy_times = []
    for _ in range(repeats):
        began = time.perf_counter()
        estimate, _ = scipy_fit(t, x)
        scipy_times.append(time.perf_counter() - began)
    sdeck_best, scipy_best = min(sdeck_times), min(scipy_times)
    difference = np.max(np.abs(sdeck_estimate - estimate) / np.abs(estimate))
    print(f"observations: {n}")
    print(f"sdeck fit (release, whole command): {sdeck_best:.3f} s (best of {repeats})")
    print(f"scipy Nelder-Mead + Hessian:        {scipy_best:.3f} s (best of {repeats})")
    print(f"ratio: {scipy_best / sdeck_best:.1f}x")
    print(f"largest relative difference of the estimates: {difference:.1e}")


if __name__ == "__main__":
    main()
