"""`sdeck fit` against estimators outside the project.

- Ornstein–Uhlenbeck with regular steps: statsmodels' AR(1) fit (AutoReg, conditional
  maximum likelihood) of the same series, mapped to κ, θ, σ by the exact discretisation
  (Brigo, Dalessandro, Neugebauer & Triki 2007, §3.2.1).
- Square-root: scipy.optimize maximising scipy.stats.ncx2.logpdf of the same data
  (reference.py); parameters to 1e-6 relative, standard errors to 1e-3.
- Real data: statsmodels' macrodata quarterly 3-month Treasury bill rate (`tbilrate`,
  1959Q1–2009Q3), loaded from the installed package at test time, fitted as
  Ornstein–Uhlenbeck and as square-root on its dates (Δ = days/365), each compared with
  the scipy fit of the same likelihood.

Run with pytest; it builds nothing: set SDECK to the binary (default target/debug/sdeck).
"""

import datetime
import json
import os
import pathlib
import subprocess
import sys

import numpy as np
import pytest
from statsmodels.datasets import macrodata
from statsmodels.tsa.ar_model import AutoReg

sys.path.insert(0, str(pathlib.Path(__file__).resolve().parent))
import reference  # noqa: E402

ROOT = pathlib.Path(__file__).resolve().parents[2]

OU_MODEL = """model bill_rate
clock year
param kappa = 0.5 [1/year]        > 0
param level = 4%
param vol   = 1%  [1/sqrt(year)]  > 0
shock W
factor r = 3%
dr = kappa * (level - r) dt + vol dW
"""

CIR_MODEL = """model bill_rate
clock year
param kappa = 0.5 [1/year]        > 0
param level = 4%                  > 0
param vol   = 5%  [1/sqrt(year)]  > 0
shock W
factor r = 3% >= 0
dr = kappa * (level - r) dt + vol * sqrt(r) dW
"""


def sdeck_binary():
    return os.environ.get("SDECK", str(ROOT / "target" / "debug" / "sdeck"))


def sdeck_fit(tmp_path, model, rows, header="t"):
    """Runs `sdeck fit --format json` on `model` and rows of (time, value)."""
    model_path = tmp_path / "model.sde"
    data_path = tmp_path / "data.csv"
    model_path.write_text(model, encoding="utf-8")
    lines = [f"{header},r"] + [f"{float(a)!r},{float(b)!r}" for a, b in rows]
    data_path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    done = subprocess.run(
        [sdeck_binary(), "fit", str(model_path), str(data_path), "--format", "json"],
        capture_output=True,
        text=True,
        check=False,
    )
    assert done.returncode == 0, done.stderr
    report = json.loads(done.stdout)
    by_name = {p["name"]: p for p in report["params"]}
    estimates = np.array([by_name[n]["estimate"] for n in ("kappa", "level", "vol")])
    ses = np.array([by_name[n]["se"] for n in ("kappa", "level", "vol")])
    return report, estimates, ses


def assert_close(got, expected, rtol, what):
    got, expected = np.asarray(got), np.asarray(expected)
    assert np.all(np.abs(got - expected) <= rtol * np.abs(expected)), (
        f"{what}: sdeck {got} vs reference {expected} (relative {rtol})"
    )


def test_ornstein_uhlenbeck_matches_statsmodels_ar1(tmp_path):
    rng = np.random.default_rng(20261202)
    dt = 1 / 52
    x = reference.simulate_ou(rng, 800, dt, 1.8, 0.035, 0.011, 0.03)
    t = np.arange(len(x)) * dt
    _, est, _ = sdeck_fit(tmp_path, OU_MODEL, zip(t, x))
    ar = AutoReg(x, lags=1, trend="c").fit()
    intercept, slope = ar.params
    kappa = -np.log(slope) / dt
    theta = intercept / (1 - slope)
    sigma = np.sqrt(2 * kappa * ar.sigma2 / (1 - slope**2))
    assert_close(est, [kappa, theta, sigma], 1e-6, "OU against AutoReg")


def test_square_root_matches_scipy_ncx2(tmp_path):
    rng = np.random.default_rng(7)
    dt = 1 / 52
    x = reference.simulate_cir(rng, 600, dt, 1.2, 0.04, 0.08, 0.035)
    t = np.arange(len(x)) * dt
    _, est, se = sdeck_fit(tmp_path, CIR_MODEL, zip(t, x))
    start = reference.ar1_start(t, x)
    ref = reference.maximise(reference.cir_negloglik, t, x, start, square_root=True)
    ref_se = reference.standard_errors(reference.cir_negloglik, t, x, ref)
    assert_close(est, ref, 1e-6, "square-root estimates against scipy")
    assert_close(se, ref_se, 1e-3, "square-root standard errors against scipy")


@pytest.fixture(scope="module")
def tbill():
    """Quarterly 3-month T-bill rate: first day of each quarter, rate in percent."""
    data = macrodata.load_pandas().data
    dates = [
        datetime.date(int(y), 3 * (int(q) - 1) + 1, 1)
        for y, q in zip(data["year"], data["quarter"])
    ]
    rates = data["tbilrate"].to_numpy(dtype=float)
    t = np.array([(d - dates[0]).days / 365 for d in dates])
    return dates, rates, t


def tbill_rows(dates, rates):
    # Percent cells, as the data set gives them.
    return [(d.isoformat(), f"{r}%") for d, r in zip(dates, rates)]


def sdeck_fit_dates(tmp_path, model, dates, rates):
    model_path = tmp_path / "model.sde"
    data_path = tmp_path / "tbill.csv"
    model_path.write_text(model, encoding="utf-8")
    lines = ["date,r"] + [f"{d},{v}" for d, v in tbill_rows(dates, rates)]
    data_path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    done = subprocess.run(
        [sdeck_binary(), "fit", str(model_path), str(data_path), "--format", "json"],
        capture_output=True,
        text=True,
        check=False,
    )
    assert done.returncode == 0, done.stderr
    report = json.loads(done.stdout)
    by_name = {p["name"]: p for p in report["params"]}
    names = ("kappa", "level", "vol")
    return (
        report,
        np.array([by_name[n]["estimate"] for n in names]),
        np.array([by_name[n]["se"] for n in names]),
    )


@pytest.mark.parametrize(
    "model,negloglik,square_root",
    [
        (OU_MODEL, reference.ou_negloglik, False),
        (CIR_MODEL, reference.cir_negloglik, True),
    ],
    ids=["ornstein-uhlenbeck", "square-root"],
)
def test_treasury_bill_rate_matches_scipy(tmp_path, tbill, model, negloglik, square_root):
    dates, rates, t = tbill
    x = rates / 100
    report, est, se = sdeck_fit_dates(tmp_path, model, dates, rates)
    assert report["data"]["rows"] == len(x) == report["data"]["used"]
    assert report["data"]["from"] == "1959-01-01"
    ref = reference.maximise(negloglik, t, x, reference.ar1_start(t, x), square_root)
    ref_se = reference.standard_errors(negloglik, t, x, ref)
    assert_close(est, ref, 1e-6, "T-bill estimates against scipy")
    assert_close(se, ref_se, 1e-3, "T-bill standard errors against scipy")
    assert abs(report["loglik"] + negloglik(ref, t, x)) < 1e-6 * abs(report["loglik"])


STEP_OU_MODEL = """model policy_rate
clock year
param kappa  = 2   [1/year]        > 0
param before = 2%
param after  = 4%
param vol    = 1%  [1/sqrt(year)]  > 0
shock W
factor r = 2%
dr = kappa * (step(t, before, 1.53 [year], after) - r) dt + vol dW
"""

RAMP_ABM_MODEL = """model spread_drift
clock year
param early = 1%  [1/year]
param late  = -2% [1/year]
param vol   = 3%  [1/sqrt(year)]  > 0
shock W
factor r = 1%
dr = ramp(t, 0.71 [year], early, 2.37 [year], late) dt + vol dW
"""


def simulate_fine(rng, t, x0, drift, vol, substeps=20):
    """A path at the times `t`, by Euler steps of a twentieth of each interval: data for
    the comparison (the two likelihoods are compared on the same data, whatever made it)."""
    x = [x0]
    for t0, t1 in zip(t[:-1], t[1:]):
        h = (t1 - t0) / substeps
        value = x[-1]
        for j in range(substeps):
            s = t0 + j * h
            value += drift(s, value) * h + vol * np.sqrt(h) * rng.standard_normal()
        x.append(value)
    return np.array(x)


@pytest.mark.parametrize("case", ["step-level-ou", "ramp-drift-abm"])
def test_time_dependent_gaussian_matches_scipy_quad(tmp_path, case):
    """Levels and drifts written with `step` and `ramp`: the exact Gaussian likelihood
    against the same likelihood built with scipy.integrate.quad (knots as `points`) and
    maximised by scipy's Nelder–Mead (reference.gaussian_varying_negloglik)."""
    rng = np.random.default_rng(17)
    t = np.arange(160) / 40.0  # ten-day steps over four years; the knots fall inside steps
    if case == "step-level-ou":
        names = ("kappa", "before", "after", "vol")
        truth = (2.0, 0.02, 0.04, 0.01)
        level = lambda p, s: p[1] if s < 1.53 else p[2]
        x = simulate_fine(rng, t, 0.02, lambda s, r: 2.0 * (level(truth, s) - r), 0.01)
        negloglik = lambda p: reference.gaussian_varying_negloglik(
            lambda q, s: q[0] * level(q, s), p, t, x, [1.53],
            slope=lambda q: -q[0] if q[0] > 0 else np.nan, noise=lambda q: q[3] ** 2,
        )
        model, positive = STEP_OU_MODEL, [True, False, False, True]
    else:
        names = ("early", "late", "vol")
        truth = (0.01, -0.02, 0.03)

        def ramp(p, s):
            w = min(max((s - 0.71) / (2.37 - 0.71), 0.0), 1.0)
            return p[0] + (p[1] - p[0]) * w

        x = simulate_fine(rng, t, 0.01, lambda s, r: ramp(truth, s), 0.03)
        negloglik = lambda p: reference.gaussian_varying_negloglik(
            ramp, p, t, x, [0.71, 2.37], slope=lambda q: 0.0, noise=lambda q: q[2] ** 2,
        )
        model, positive = RAMP_ABM_MODEL, [False, False, True]
    model_path, data_path = tmp_path / "model.sde", tmp_path / "data.csv"
    model_path.write_text(model, encoding="utf-8")
    lines = ["t,r"] + [f"{a!r},{b!r}" for a, b in zip(t.tolist(), x.tolist())]
    data_path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    done = subprocess.run(
        [sdeck_binary(), "fit", str(model_path), str(data_path), "--format", "json"],
        capture_output=True, text=True, check=False,
    )
    assert done.returncode == 0, done.stderr
    report = json.loads(done.stdout)
    by_name = {p["name"]: p for p in report["params"]}
    est = np.array([by_name[n]["estimate"] for n in names])
    se = np.array([by_name[n]["se"] for n in names])
    ref = reference.maximise_plain(negloglik, truth, positive)
    ref_se = reference.hessian_errors(negloglik, ref)
    assert_close(est, ref, 1e-6, f"{case}: estimates against scipy quad")
    assert_close(se, ref_se, 1e-3, f"{case}: standard errors against scipy quad")
    assert abs(report["loglik"] + negloglik(ref)) < 1e-8 * abs(report["loglik"])
