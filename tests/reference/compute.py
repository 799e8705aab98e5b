#!/usr/bin/env python3
"""Independent reference figures for the models in tests/reference/models/.

Each model file is transcribed here by hand, next to its file name: parameters as
written (literal and unit), factors, shocks, correlations, and the drift and diffusion
of every equation. The script converts the values to the model's clock itself, then
computes at the horizon, for every factor, the mean, the variance, the half-life and the
stationary mean and variance, and the covariance matrix of all factors.

Every figure is computed twice, by methods that share no code:
  * a primary method chosen by family: Van Loan's block matrix exponential for
    Gaussian linear systems, the log-normal law for geometric Brownian motion, the
    scaled non-central chi-square law for square-root processes, quadrature of the
    integrating-factor integrals for time-dependent linear equations, and the
    exponential of the generator on monomials (built with sympy) for polynomial
    models;
  * the moment equations of all monomials of degree <= 2, integrated with solve_ivp.
The two must agree to 1e-9 (relative to the scale of each figure) or the script stops.
One-factor Ornstein-Uhlenbeck figures, and the elementary time-dependent model, are also
derived symbolically with sympy and compared.

Usage:
  python3 tests/reference/compute.py           # writes tests/reference/expected.json
  python3 tests/reference/compute.py --check   # recomputes, compares with the
                                               # committed file to 1e-12, exit 1 on change
"""

from __future__ import annotations

import argparse
import dataclasses
import json
import math
import platform
import re
import sys
from dataclasses import dataclass, field
from fractions import Fraction
from pathlib import Path

import numpy as np
import scipy
import sympy as sp
from scipy import integrate, linalg, stats

REFERENCE_DIR = Path(__file__).resolve().parent
REPO_ROOT = REFERENCE_DIR.parent.parent
MODELS_DIR = REFERENCE_DIR / "models"
EXPECTED_PATH = REFERENCE_DIR / "expected.json"

# Length of each built-in time unit in years, as the language design defines them:
# quarter = year/4, month = year/12, week = 7 day, day = year/365, bday = year/252,
# hour = day/24.
TIME_UNIT_YEARS = {
    "year": Fraction(1),
    "quarter": Fraction(1, 4),
    "hour": Fraction(1, 365 * 24),
    "month": Fraction(1, 12),
    "week": Fraction(7, 365),
    "day": Fraction(1, 365),
    "bday": Fraction(1, 252),
}

# Two independent methods must agree to this (relative to the figure's scale).
METHOD_AGREEMENT = 1e-9
# The committed expected.json must be reproduced to this (relative).
CHECK_TOLERANCE = 1e-12
# Tolerance published for the project's own figures: tight for closed forms and
# matrix exponentials, looser where the reference itself is a quadrature.
TOLERANCE_EXACT = 1e-9
TOLERANCE_QUADRATURE = 1e-7
# Models with schedules of time (step, ramp) and kinks (min, max, abs of t): the project's
# figures must agree to 1e-10 relative, so the two reference methods must agree to a
# tenth of that.
TOLERANCE_SCHEDULE = 1e-10
# Closed forms evaluated exactly (symbolic or 50-digit): the project's figures must agree
# to 1e-12 relative.
TOLERANCE_CLOSED_FORM = 1e-12

FAMILIES = (
    "deterministic",
    "arithmetic-brownian",
    "geometric-brownian",
    "ornstein-uhlenbeck",
    "square-root",
    "linear",
    "linear-system",
    "polynomial",
    "general",
)

SOURCE_VASICEK = (
    "Vasicek 1977, An equilibrium characterization of the term structure, "
    "J. Financial Economics 5, 177-188 (conditional mean and variance of the "
    "Ornstein-Uhlenbeck short rate; section from memory)"
)
SOURCE_CIR = (
    "Cox, Ingersoll & Ross 1985, A theory of the term structure of interest rates, "
    "Econometrica 53, 385-407, eq. (18)-(19): non-central chi-square transition law "
    "and its moments (equation numbers from memory)"
)
SOURCE_KLOEDEN_PLATEN = (
    "Kloeden & Platen 1992, Numerical Solution of Stochastic Differential Equations, "
    "sections 4.2-4.4: linear SDEs, their solution by integrating factor and their "
    "moment equations"
)
SOURCE_VAN_LOAN = (
    "Van Loan 1978, Computing integrals involving the matrix exponential, "
    "IEEE Trans. Automatic Control 23, 395-404 (block-matrix exponential for "
    "int_0^T e^{As} Q e^{A's} ds)"
)
SOURCE_GARDINER = (
    "Gardiner, Handbook of Stochastic Methods, section 4.4.6: stationary covariance of "
    "the multivariate Ornstein-Uhlenbeck process from A S + S A' + B B' = 0"
)
SOURCE_LOGNORMAL = (
    "Kloeden & Platen 1992, section 4.4: geometric Brownian motion is log-normal with "
    "log-mean log(S0) + (mu - sigma^2/2) T and log-variance sigma^2 T (from memory)"
)
SOURCE_POLYNOMIAL = (
    "Cuchiero, Keller-Ressel & Teichmann 2012, Polynomial processes and their "
    "applications to mathematical finance, Finance and Stochastics 16, 711-740: "
    "moments from the exponential of the generator on polynomials of bounded degree"
)
SOURCE_HESTON = (
    "Heston 1993, A closed-form solution for options with stochastic volatility, "
    "Review of Financial Studies 6, 327-343 (log price with square-root variance)"
)
SOURCE_INTEGRATED_GEOMETRIC = (
    "A = c int_0^t S du with S geometric: E[A] = c S0 (e^{mu t} - 1)/mu and "
    "E[A^2] = 2 c^2 S0^2 int_0^t int_0^u e^{mu (u - v)} e^{(2 mu + sigma^2) v} dv du "
    "(E[S_v S_u] for v <= u by the Markov property; Kloeden & Platen 1992, section 4.4), "
    "integrated exactly by sympy"
)
SOURCE_PARTIAL_MEAN = (
    "Kloeden & Platen 1992, section 4.2: with drifts affine in the factors, "
    "m' = A m + b whatever the diffusion (the stochastic integrals being martingales)"
)
SOURCE_GAMMA = (
    "Cox, Ingersoll & Ross 1985, Econometrica 53: stationary law of the square-root "
    "process is a gamma law with shape 2 kappa level / vol^2 and scale vol^2 / (2 kappa) "
    "(from memory)"
)


# --------------------------------------------------------------------------------------
# Model transcriptions
# --------------------------------------------------------------------------------------


@dataclass(frozen=True)
class Quantity:
    """A `param` or `state` as written in the file: name, number literal, unit text."""

    name: str
    literal: str
    unit: str | None = None


@dataclass(frozen=True)
class StateSpec:
    name: str
    literal: str
    unit: str | None
    family: str


@dataclass
class ModelSpec:
    """A model file transcribed by hand. Expressions use Python/sympy syntax."""

    file: str
    clock: str
    horizon: tuple[str, str | None]
    params: list[Quantity]
    factors: list[StateSpec]
    shocks: list[str]
    correlations: dict[tuple[str, str], str]
    drift: dict[str, str]
    diffusion: dict[str, dict[str, str]]
    sources: list[str]
    # Whether the time-dependent integrals are elementary, so sympy can do them too.
    elementary_time_dependence: bool = False
    lets: dict[str, str] = field(default_factory=dict)
    # Times (clock units) where a coefficient bends other than at a step or ramp knot
    # (the kink of max(t - 1 year, 0) at t = 1): quadratures are split there too.
    kinks: list[float] = field(default_factory=list)
    # Further times (clock units) at which mean and covariance are also recorded.
    also_at: list[float] = field(default_factory=list)
    # Tolerance published for the project's figures, when tighter than the default.
    tolerance: float | None = None
    # Compute the moments in 50-digit arithmetic (mpmath) and check them against a
    # symbolic closed form named here (see HIGH_PRECISION_CHECKS): for figures that
    # cancel in double precision, such as the variance of an integral near t = 0.
    high_precision_check: str | None = None
    # How closely the two methods must agree, when not a tenth of the tolerance (a
    # deterministic model, whose solve_ivp covariance is round-off of size 1e-13 of the
    # squared mean around an exact zero).
    agreement: float | None = None

    @property
    def path(self) -> Path:
        return MODELS_DIR / self.file

    @property
    def relative_path(self) -> str:
        return f"tests/reference/models/{self.file}"


def P(name: str, literal: str, unit: str | None = None) -> Quantity:
    return Quantity(name, literal, unit)


def S(name: str, literal: str, family: str, unit: str | None = None) -> StateSpec:
    return StateSpec(name, literal, unit, family)


SOURCE_SCHEDULES = (
    "scipy.integrate.quad and quad_vec with points= at the knots of step and ramp and at "
    "the kinks of max: the integrating-factor integrals split where the coefficients jump "
    "or bend (QUADPACK, Piessens et al. 1983)"
)

MODELS: list[ModelSpec] = [
    ModelSpec(
        file="abm_harrowgate_spread.sde",
        clock="year",
        horizon=("9", "month"),
        params=[P("widening", "20bp", "1/year"), P("vol", "35bp", "1/sqrt(year)")],
        factors=[S("s", "145bp", "arithmetic-brownian")],
        shocks=["W"],
        correlations={},
        drift={"s": "widening"},
        diffusion={"s": {"W": "vol"}},
        sources=[SOURCE_KLOEDEN_PLATEN, SOURCE_VAN_LOAN],
    ),
    ModelSpec(
        file="gbm_osterlund_share.sde",
        clock="year",
        horizon=("2", "year"),
        params=[P("mu", "6%", "1/year"), P("sigma", "22%", "1/sqrt(year)")],
        factors=[S("S", "84.5", "geometric-brownian", "VDM")],
        shocks=["W"],
        correlations={},
        drift={"S": "mu * S"},
        diffusion={"S": {"W": "sigma * S"}},
        sources=[SOURCE_LOGNORMAL, "scipy.stats.lognorm", SOURCE_POLYNOMIAL],
    ),
    ModelSpec(
        file="ou_quillon_overnight_daily_units.sde",
        clock="year",
        horizon=("6", "month"),
        params=[
            P("kappa", "0.5%", "1/day"),
            P("level", "3.2%"),
            P("vol", "4bp", "1/sqrt(day)"),
        ],
        factors=[S("r", "2.75%", "ornstein-uhlenbeck")],
        shocks=["W"],
        correlations={},
        drift={"r": "kappa * (level - r)"},
        diffusion={"r": {"W": "vol"}},
        sources=[SOURCE_VASICEK, SOURCE_VAN_LOAN, SOURCE_GARDINER],
    ),
    ModelSpec(
        file="ou_marrowind_inflation_month_clock.sde",
        clock="month",
        horizon=("1", "year"),
        params=[
            P("speed", "0.15", "1/month"),
            P("target", "1.4%"),
            P("vol", "30bp", "1/sqrt(year)"),
        ],
        factors=[S("x", "0.9%", "ornstein-uhlenbeck")],
        shocks=["W"],
        correlations={},
        drift={"x": "speed * (target - x)"},
        diffusion={"x": {"W": "vol"}},
        sources=[SOURCE_VASICEK, SOURCE_VAN_LOAN, SOURCE_GARDINER],
    ),
    ModelSpec(
        file="ou_brindle_repo_18_months.sde",
        clock="year",
        horizon=("18", "month"),
        params=[
            P("kappa", "2%", "1/week"),
            P("level", "2.1%"),
            P("premium", "15bp"),
            P("vol", "5bp", "1/sqrt(bday)"),
        ],
        lets={"target": "level + premium"},
        factors=[S("r", "2.6%", "ornstein-uhlenbeck")],
        shocks=["W"],
        correlations={},
        drift={"r": "kappa * (target - r)"},
        diffusion={"r": {"W": "vol"}},
        sources=[SOURCE_VASICEK, SOURCE_VAN_LOAN, SOURCE_GARDINER],
    ),
    ModelSpec(
        file="cir_fennimore_hazard_feller_ok.sde",
        clock="year",
        horizon=("1", "year"),
        params=[
            P("kappa", "0.9", "1/year"),
            P("level", "3.5%", "1/year"),
            P("vol", "8%", "1/year"),
        ],
        factors=[S("h", "2.5%", "square-root", "1/year")],
        shocks=["W"],
        correlations={},
        drift={"h": "kappa * (level - h)"},
        diffusion={"h": {"W": "vol * sqrt(h)"}},
        sources=[SOURCE_CIR, "scipy.stats.ncx2", SOURCE_GAMMA, "scipy.stats.gamma"],
    ),
    ModelSpec(
        file="cir_gorsedene_hazard_feller_violated.sde",
        clock="year",
        horizon=("2", "year"),
        params=[
            P("kappa", "0.3", "1/year"),
            P("level", "2%", "1/year"),
            P("vol", "15%", "1/year"),
        ],
        factors=[S("h", "1.2%", "square-root", "1/year")],
        shocks=["W"],
        correlations={},
        drift={"h": "kappa * (level - h)"},
        diffusion={"h": {"W": "vol * sqrt(h)"}},
        sources=[SOURCE_CIR, "scipy.stats.ncx2", SOURCE_GAMMA, "scipy.stats.gamma"],
    ),
    ModelSpec(
        file="linear_ashcombe_multiplicative_noise.sde",
        clock="year",
        horizon=("1", "year"),
        params=[
            P("speed", "1.1", "1/year"),
            P("level", "2.4%"),
            P("base_vol", "0.6%", "1/sqrt(year)"),
            P("prop_vol", "25%", "1/sqrt(year)"),
        ],
        factors=[S("x", "1.9%", "linear")],
        shocks=["W"],
        correlations={},
        drift={"x": "speed * (level - x)"},
        diffusion={"x": {"W": "base_vol + prop_vol * x"}},
        sources=[SOURCE_KLOEDEN_PLATEN, SOURCE_POLYNOMIAL],
    ),
    ModelSpec(
        file="linear_thornbury_time_dependent.sde",
        clock="year",
        horizon=("2", "year"),
        params=[
            P("kappa", "1.4", "1/year"),
            P("base", "2%"),
            P("slope", "0.5%", "1/year"),
            P("sigma", "1.2%", "1/sqrt(year)"),
            P("lam", "0.7", "1/year"),
        ],
        lets={"level": "base + slope * t"},
        factors=[S("x", "1.5%", "linear")],
        shocks=["W"],
        correlations={},
        drift={"x": "kappa * (level - x)"},
        diffusion={"x": {"W": "sigma * exp(-lam * t)"}},
        sources=[SOURCE_KLOEDEN_PLATEN, "scipy.integrate.quad", "sympy.integrate"],
        elementary_time_dependence=True,
    ),
    ModelSpec(
        file="linear_brackwater_seasonal.sde",
        clock="year",
        horizon=("1", "year"),
        params=[
            P("kappa", "3.0", "1/year"),
            P("base", "0.35"),
            P("amp", "0.08"),
            P("freq", "1", "1/year"),
            P("sigma", "0.4", "1/sqrt(year)"),
            P("eta", "0.5"),
        ],
        lets={"season": "2 * pi * freq * t"},
        factors=[S("x", "0.3", "linear")],
        shocks=["W"],
        correlations={},
        drift={"x": "kappa * (base + amp * sin(season) - x)"},
        diffusion={"x": {"W": "sigma * exp(eta * cos(season))"}},
        sources=[SOURCE_KLOEDEN_PLATEN, "scipy.integrate.quad"],
    ),
    ModelSpec(
        file="ou_tamsworth_two_shocks.sde",
        clock="year",
        horizon=("1", "year"),
        params=[
            P("κ", "2.2", "1/year"),
            P("θ", "1.1%"),
            P("σ_local", "0.5%", "1/sqrt(year)"),
            P("σ_global", "0.8%", "1/sqrt(year)"),
        ],
        factors=[S("x", "1.4%", "ornstein-uhlenbeck")],
        shocks=["W_local", "W_global"],
        correlations={("W_local", "W_global"): "0.35"},
        drift={"x": "κ * (θ - x)"},
        diffusion={"x": {"W_local": "σ_local", "W_global": "σ_global"}},
        sources=[SOURCE_VASICEK, SOURCE_VAN_LOAN, SOURCE_GARDINER],
    ),
    ModelSpec(
        file="system_pemberly_rate_spread.sde",
        clock="year",
        horizon=("2", "year"),
        params=[
            P("kr", "0.8", "1/year"),
            P("mr", "3%"),
            P("vr", "0.9%", "1/sqrt(year)"),
            P("ks", "1.5", "1/year"),
            P("ms", "1.2%"),
            P("beta", "-0.25", "1/year"),
            P("vs", "0.6%", "1/sqrt(year)"),
        ],
        # r depends on no other state: its law is exactly Ornstein-Uhlenbeck, as the
        # variance of the polynomial model keeps "square-root".
        factors=[S("r", "2.6%", "ornstein-uhlenbeck"), S("s", "1.5%", "linear-system")],
        shocks=["Wr", "Ws"],
        correlations={("Wr", "Ws"): "-0.4"},
        drift={"r": "kr * (mr - r)", "s": "ks * (ms - s) + beta * (r - mr)"},
        diffusion={"r": {"Wr": "vr"}, "s": {"Ws": "vs"}},
        sources=[SOURCE_VAN_LOAN, SOURCE_GARDINER, SOURCE_KLOEDEN_PLATEN],
    ),
    ModelSpec(
        file="system_ostmarch_three_factors.sde",
        clock="year",
        horizon=("1", "year"),
        params=[
            P("a_r", "0.9", "1/year"),
            P("r_bar", "2.5%"),
            P("g_ri", "0.4", "1/year"),
            P("a_i", "1.3", "1/year"),
            P("i_bar", "2%"),
            P("g_ir", "0.5", "1/year"),
            P("g_iu", "-0.3", "1/year"),
            P("a_u", "0.6", "1/year"),
            P("g_ur", "0.2", "1/year"),
            P("v_r", "0.7%", "1/sqrt(year)"),
            P("v_i", "0.9%", "1/sqrt(year)"),
            P("v_u", "1.1%", "1/sqrt(year)"),
        ],
        factors=[
            S("r", "3%", "linear-system"),
            S("infl", "2.4%", "linear-system"),
            S("gap", "0.5%", "linear-system"),
        ],
        shocks=["Wr", "Wi", "Wu"],
        correlations={("Wr", "Wi"): "0.3", ("Wr", "Wu"): "-0.2", ("Wi", "Wu"): "-0.25"},
        drift={
            "r": "a_r * (r_bar - r) + g_ri * (infl - i_bar)",
            "infl": "a_i * (i_bar - infl) - g_ir * (r - r_bar) + g_iu * gap",
            "gap": "g_ur * (r - r_bar) - a_u * gap",
        },
        diffusion={"r": {"Wr": "v_r"}, "infl": {"Wi": "v_i"}, "gap": {"Wu": "v_u"}},
        sources=[SOURCE_VAN_LOAN, SOURCE_GARDINER, SOURCE_KLOEDEN_PLATEN],
    ),
    ModelSpec(
        file="polynomial_wexcombe_log_price_variance.sde",
        clock="year",
        horizon=("6", "month"),
        params=[
            P("mu", "5%", "1/year"),
            P("kappa", "2.0", "1/year"),
            P("theta", "0.04", "1/year"),
            P("xi", "0.3", "1/year"),
        ],
        factors=[
            S("x", "0.2", "polynomial"),
            S("v", "0.05", "square-root", "1/year"),
        ],
        shocks=["Wx", "Wv"],
        correlations={("Wx", "Wv"): "-0.6"},
        drift={"x": "mu - 0.5 * v", "v": "kappa * (theta - v)"},
        diffusion={"x": {"Wx": "sqrt(v)"}, "v": {"Wv": "xi * sqrt(v)"}},
        sources=[SOURCE_HESTON, SOURCE_POLYNOMIAL, SOURCE_CIR, "scipy.stats.ncx2"],
    ),
    ModelSpec(
        file="polynomial_pelham_quadratic_diffusion.sde",
        clock="year",
        horizon=("1", "year"),
        params=[
            P("kappa", "1.5", "1/year"),
            P("level", "0.6"),
            P("a", "0.01", "1/year"),
            P("b", "0.09", "1/year"),
        ],
        factors=[S("x", "0.5", "polynomial")],
        shocks=["W"],
        correlations={},
        drift={"x": "kappa * (level - x)"},
        diffusion={"x": {"W": "sqrt(a + b * x**2)"}},
        sources=[SOURCE_POLYNOMIAL, SOURCE_KLOEDEN_PLATEN],
    ),
    ModelSpec(
        file="schedule_kestrel_policy_step.sde",
        clock="year",
        horizon=("8", "quarter"),
        params=[
            P("kappa", "1.5", "1/year"),
            P("sigma", "0.9%", "1/sqrt(year)"),
            P("speed", "2.0", "1/year"),
            P("beta", "0.3", "1/year"),
            P("vol_s", "0.4%", "1/sqrt(year)"),
        ],
        lets={
            "policy": "step(t, 0.02, 6 * month, 0.03)",
            "relief": "ramp(t, 18 * month, 0, 18 * month + 12 * hour, -0.005)",
            "calm": "step(t, 1, 1 * year, 0.6)",
        },
        factors=[S("r", "2.2%", "linear"), S("s", "1.1%", "linear-system")],
        shocks=["W", "B"],
        correlations={("W", "B"): "-0.4"},
        drift={"r": "kappa * (policy + relief - r)", "s": "speed * (0.01 - s) + beta * (r - policy)"},
        diffusion={"r": {"W": "sigma * calm"}, "s": {"B": "vol_s"}},
        sources=[SOURCE_KLOEDEN_PLATEN, SOURCE_SCHEDULES, "scipy.integrate.solve_ivp"],
        also_at=[1.0, 4.0],
        tolerance=TOLERANCE_SCHEDULE,
    ),
    ModelSpec(
        file="kink_calloway_deposit_lag.sde",
        clock="year",
        horizon=("3", "year"),
        params=[
            P("kappa", "0.8", "1/year"),
            P("extra", "0.5", "1/year^2"),
            P("sigma", "0.6%", "1/sqrt(year)"),
        ],
        lets={"target": "0.02 + 0.004 * t", "pull": "kappa + extra * Max(t - 1, 0)"},
        factors=[S("d", "1.8%", "linear")],
        shocks=["W"],
        correlations={},
        drift={"d": "pull * (target - d)"},
        diffusion={"d": {"W": "sigma"}},
        sources=[SOURCE_KLOEDEN_PLATEN, SOURCE_SCHEDULES, "scipy.integrate.solve_ivp"],
        kinks=[1.0],
        also_at=[0.5, 2.0],
        tolerance=TOLERANCE_SCHEDULE,
    ),
    ModelSpec(
        file="decoupled_larkspur_desk.sde",
        clock="year",
        horizon=("6", "month"),
        params=[
            P("kappa_r", "1.2", "1/year"),
            P("level_r", "3%"),
            P("vol_r", "0.8%", "1/sqrt(year)"),
            P("trend_s", "-10bp", "1/year"),
            P("vol_s", "40bp", "1/sqrt(year)"),
            P("mu_p", "4%", "1/year"),
            P("vol_p", "12%", "1/sqrt(year)"),
            P("kappa_h", "0.7", "1/year"),
            P("level_h", "1.8%", "1/year"),
            P("vol_h", "6%", "1/year"),
        ],
        factors=[
            S("r", "2.8%", "ornstein-uhlenbeck"),
            S("s", "90bp", "arithmetic-brownian"),
            S("p", "100", "geometric-brownian"),
            S("h", "2%", "square-root", "1/year"),
        ],
        shocks=["Wr", "Ws", "Wp", "Wh"],
        correlations={("Wr", "Ws"): "0.3"},
        drift={
            "r": "kappa_r * (level_r - r)",
            "s": "trend_s",
            "p": "mu_p * p",
            "h": "kappa_h * (level_h - h)",
        },
        diffusion={
            "r": {"Wr": "vol_r"},
            "s": {"Ws": "vol_s"},
            "p": {"Wp": "vol_p * p"},
            "h": {"Wh": "vol_h * sqrt(h)"},
        },
        sources=[
            SOURCE_VASICEK,
            SOURCE_VAN_LOAN,
            SOURCE_LOGNORMAL,
            "scipy.stats.lognorm",
            SOURCE_CIR,
            "scipy.stats.ncx2",
            SOURCE_GAMMA,
        ],
    ),
    # Declared values written as expressions of earlier parameters: the script evaluates
    # them itself (sympy, on the clock values of the parameters before them).
    ModelSpec(
        file="expr_wrenfield_stressed_level.sde",
        clock="month",
        horizon=("2", "year"),
        params=[
            P("kappa", "1.2", "1/year"),
            P("theta", "3%"),
            P("stress", "theta + 150bp"),
            P("fast", "2 * kappa"),
            P("sigma", "0.8%", "1/sqrt(year)"),
            P("vol_s", "sigma / 2"),
        ],
        factors=[S("r", "stress", "ornstein-uhlenbeck"), S("s", "theta - 50bp", "ornstein-uhlenbeck")],
        shocks=["W"],
        correlations={},
        drift={"r": "kappa * (theta - r)", "s": "fast * (stress - s)"},
        diffusion={"r": {"W": "sigma"}, "s": {"W": "vol_s"}},
        sources=[SOURCE_VASICEK, SOURCE_VAN_LOAN, "sympy (the declared expressions)"],
        # Issue 10 asks 1e-10 relative of these models.
        tolerance=1e-10,
    ),
    # Correlations written as expressions of parameters.
    ModelSpec(
        file="corr_dunmore_three_shocks.sde",
        clock="year",
        horizon=("18", "month"),
        params=[
            P("rho", "-0.4"),
            P("share", "0.5"),
            P("k_x", "0.9", "1/year"),
            P("k_y", "1.6", "1/year"),
            P("m_y", "1.2%"),
            P("v_x", "0.7%", "1/sqrt(year)"),
            P("v_g", "0.3%", "1/sqrt(year)"),
            P("v_y", "0.5%", "1/sqrt(year)"),
        ],
        factors=[S("x", "2.8%", "ornstein-uhlenbeck"), S("y", "1%", "ornstein-uhlenbeck")],
        shocks=["W", "B", "G"],
        correlations={("W", "B"): "rho", ("B", "G"): "rho * share", ("W", "G"): "-(share / 2)"},
        drift={"x": "-k_x * x", "y": "k_y * (m_y - y)"},
        diffusion={"x": {"W": "v_x", "G": "v_g"}, "y": {"B": "v_y"}},
        sources=[SOURCE_VASICEK, SOURCE_VAN_LOAN, "sympy (the correlation expressions)"],
        # Issue 10 asks 1e-10 relative of these models.
        tolerance=1e-10,
    ),
    # A positive slope: the Gaussian closed forms hold, the factor is `linear`, not
    # Ornstein-Uhlenbeck (no mean reversion, no stationary law, no half-life).
    ModelSpec(
        file="linear_fernhollow_explosive_spread.sde",
        clock="year",
        horizon=("2", "year"),
        params=[P("k", "0.35", "1/year"), P("level", "1.2%"), P("vol", "0.6%", "1/sqrt(year)")],
        factors=[S("x", "1.5%", "linear")],
        shocks=["W"],
        correlations={},
        drift={"x": "k * (x - level)"},
        diffusion={"x": {"W": "vol"}},
        sources=[SOURCE_VASICEK, SOURCE_VAN_LOAN, SOURCE_KLOEDEN_PLATEN],
        tolerance=TOLERANCE_CLOSED_FORM,
    ),
    # No shock: each path is the solution of an ordinary differential equation, its
    # variance 0 (the mean by the matrix exponential and by solve_ivp).
    ModelSpec(
        file="deterministic_hartwell_accrual.sde",
        clock="year",
        horizon=("5", "year"),
        params=[P("r", "2.5%", "1/year"), P("decay", "0.8", "1/year"), P("floor", "40", "GBP")],
        factors=[S("B", "1000", "deterministic", "GBP"), S("f", "120", "deterministic", "GBP")],
        shocks=[],
        correlations={},
        drift={"B": "r * B", "f": "decay * (floor - f)"},
        diffusion={"B": {}, "f": {}},
        sources=[SOURCE_KLOEDEN_PLATEN, "scipy.linalg.expm and scipy.integrate.solve_ivp"],
        tolerance=TOLERANCE_CLOSED_FORM,
        agreement=4e-13,
    ),
    # Names that formulas like to use as their own letters (s, b, A, L, R, t0).
    ModelSpec(
        file="names_quarrington_letters.sde",
        clock="year",
        horizon=("1", "year"),
        params=[
            P("b", "0.9", "1/year"),
            P("A", "1.4", "1/year"),
            P("L", "0.8%", "1/sqrt(year)"),
            P("R", "0.5%", "1/sqrt(year)"),
            P("t0", "2.5%"),
        ],
        factors=[S("s", "3%", "ornstein-uhlenbeck"), S("X", "1%", "linear-system")],
        shocks=["W", "B"],
        correlations={("W", "B"): "0.35"},
        drift={"s": "b * (t0 - s)", "X": "A * (s - t0 - X)"},
        diffusion={"s": {"W": "L"}, "X": {"B": "R"}},
        sources=[SOURCE_VASICEK, SOURCE_VAN_LOAN],
        tolerance=TOLERANCE_CLOSED_FORM,
    ),
    ModelSpec(
        file="polynomial_saltmarsh_fuel_average.sde",
        clock="year",
        horizon=("1", "year"),
        params=[P("mu", "3%", "1/year"), P("sigma", "35%", "1/sqrt(year)"), P("c", "1", "1/year")],
        factors=[S("S", "80", "geometric-brownian"), S("A", "0", "polynomial")],
        shocks=["W"],
        correlations={},
        drift={"S": "mu * S", "A": "c * S"},
        diffusion={"S": {"W": "sigma * S"}, "A": {}},
        sources=[SOURCE_POLYNOMIAL, SOURCE_INTEGRATED_GEOMETRIC, "mpmath.expm at 50 digits",
                 "sympy.integrate (exact double integral)"],
        also_at=[1e-6, 1e-3],
        tolerance=TOLERANCE_CLOSED_FORM,
        high_precision_check="integrated-geometric",
    ),
    ModelSpec(
        file="partial_ketterby_capped_variance.sde",
        clock="year",
        horizon=("2", "year"),
        params=[
            P("kappa", "1.5", "1/year"),
            P("theta", "0.04", "1/year"),
            P("xi", "0.3", "1/year"),
            P("vmax", "0.09", "1/year"),
            P("mu", "4%", "1/year"),
            P("a", "6", "1/year"),
        ],
        factors=[
            S("v", "0.05", "square-root", "1/year"),
            S("S", "100", "general", "KMC"),
            S("q", "98", "general", "KMC"),
        ],
        shocks=["Wv", "Ws"],
        correlations={("Wv", "Ws"): "-0.5"},
        drift={"v": "kappa * (theta - v)", "S": "mu * S", "q": "a * (S - q)"},
        diffusion={"v": {"Wv": "xi * sqrt(v)"}, "S": {"Ws": "S * sqrt(Min(v, vmax))"}, "q": {}},
        sources=[SOURCE_PARTIAL_MEAN, SOURCE_CIR, "scipy.stats.ncx2",
                 "scipy.linalg.expm of the augmented mean equations", "sympy Matrix.exp (exact)"],
        also_at=[0.5],
        tolerance=TOLERANCE_CLOSED_FORM,
    ),
]


# --------------------------------------------------------------------------------------
# Literals, units, and the cross-check against the file text
# --------------------------------------------------------------------------------------


class ReferenceError(Exception):
    """A transcription or a computation is inconsistent; the message says where."""


def parse_literal(literal: str) -> float:
    """A number as the language writes it: `12`, `0.5`, `1e-3`, `3.5%`, `25bp`."""
    text = literal.strip()
    if text.endswith("%"):
        return float(text[:-1]) / 100.0
    if text.endswith("bp"):
        return float(text[:-2]) / 10000.0
    return float(text)


NUMBER_WITH_SUFFIX = re.compile(r"(\d+(?:\.\d*)?(?:[eE][+-]?\d+)?)(%|bp)")


def is_literal(text: str) -> bool:
    return re.fullmatch(r"-?[0-9.eE+\-]+(?:%|bp)?", text.strip()) is not None


def constant_value(text: str, values: dict[str, sp.Expr]) -> float:
    """A declared value or correlation: a number as written, or a constant expression of
    parameters (their clock values in `values`), with `%` and `bp` read as /100, /10000."""
    if is_literal(text):
        return parse_literal(text)
    python = NUMBER_WITH_SUFFIX.sub(
        lambda m: f"({m.group(1)}/{100 if m.group(2) == '%' else 10000})", text
    )
    expression = sp.sympify(python, locals=dict(values))
    if expression.free_symbols:
        raise ReferenceError(f"`{text}` uses {expression.free_symbols}, which are not parameters")
    return float(expression)


def unit_scale(unit: str | None, clock: str) -> float:
    """Factor that turns a value in `unit` into clock units.

    Every time unit is replaced by its length measured in clock units; any other unit
    name (a declared currency) is a base dimension with factor 1.
    """
    if unit is None:
        return 1.0
    names = set(re.findall(r"[^\W\d]\w*", unit)) - {"sqrt"}
    clock_years = TIME_UNIT_YEARS[clock]
    substitutions = {}
    for name in names:
        if name in TIME_UNIT_YEARS:
            length = TIME_UNIT_YEARS[name] / clock_years
            substitutions[name] = sp.Rational(length.numerator, length.denominator)
        else:
            substitutions[name] = sp.Integer(1)
    expression = sp.sympify(unit.replace("^", "**"), locals=substitutions)
    return float(expression)


def horizon_in_clock(spec: ModelSpec) -> float:
    literal, unit = spec.horizon
    value = parse_literal(literal)
    if unit is None:
        return value
    length = TIME_UNIT_YEARS[unit] / TIME_UNIT_YEARS[spec.clock]
    return value * float(length)


def strip_comment(line: str) -> str:
    return line.split("#", 1)[0].strip()


def normalise_unit(text: str | None) -> str | None:
    return None if text is None else re.sub(r"\s+", "", text)


def cross_check_file_text(spec: ModelSpec) -> None:
    """Compares the hand transcription with the file's declarations.

    Reads only the simple, line-shaped declarations (clock, horizon, param, factor,
    shock, corr, and which factors have an equation); the equations themselves are
    transcribed by hand above and not parsed here.
    """
    if not spec.path.is_file():
        raise ReferenceError(f"{spec.relative_path}: file not found")
    lines = [strip_comment(line) for line in spec.path.read_text(encoding="utf-8").splitlines()]
    declaration = re.compile(
        r"^(param|factor)\s+([^\W\d]\w*)\s*=\s*(-?[0-9.eE+\-]+(?:%|bp)?)\s*(?:\[([^\]]*)\])?"
        r"\s*(?:(?:>=|<=|>|<|in\b).*)?$"
    )
    # A value written as an expression (no unit of its own), up to its bound.
    expression_declaration = re.compile(
        r"^(param|factor)\s+([^\W\d]\w*)\s*=\s*(.+?)\s*(?:(?:>=|<=|>|<|\bin\b).*)?$"
    )
    params: list[Quantity] = []
    factors: list[Quantity] = []
    shocks: list[str] = []
    correlations: dict[tuple[str, str], str] = {}
    equations: list[str] = []
    clock = "year"
    horizon: tuple[str, str | None] = ("1", None)
    for line in lines:
        if not line:
            continue
        match = declaration.match(line)
        if match:
            kind, name, literal, unit = match.groups()
            target = params if kind == "param" else factors
            target.append(Quantity(name, literal, normalise_unit(unit)))
            continue
        match = expression_declaration.match(line)
        if match:
            kind, name, text = match.groups()
            target = params if kind == "param" else factors
            target.append(Quantity(name, " ".join(text.split()), None))
            continue
        if m := re.match(r"^clock\s+(\w+)$", line):
            clock = m.group(1)
        elif m := re.match(r"^horizon\s+([0-9.eE+\-]+)\s*(\w+)?$", line):
            horizon = (m.group(1), m.group(2))
        elif m := re.match(r"^shock\s+(.+)$", line):
            shocks.extend(part.strip() for part in m.group(1).split(","))
        elif m := re.match(r"^corr\s+(\w+)\s*,?\s*(\w+)\s*=\s*(.+)$", line):
            correlations[(m.group(1), m.group(2))] = " ".join(m.group(3).split())
        elif m := re.match(r"^d([^\W\d]\w*)\s*=", line):
            equations.append(m.group(1))
    where = spec.relative_path
    if clock != spec.clock:
        raise ReferenceError(f"{where}: clock is {clock}, transcribed as {spec.clock}")
    if horizon != spec.horizon:
        raise ReferenceError(f"{where}: horizon is {horizon}, transcribed as {spec.horizon}")
    expected_params = [Quantity(p.name, p.literal, normalise_unit(p.unit)) for p in spec.params]
    if params != expected_params:
        raise ReferenceError(f"{where}: params {params} differ from transcription {expected_params}")
    expected_states = [Quantity(s.name, s.literal, normalise_unit(s.unit)) for s in spec.factors]
    if factors != expected_states:
        raise ReferenceError(f"{where}: factors {factors} differ from transcription {expected_states}")
    if shocks != spec.shocks:
        raise ReferenceError(f"{where}: shocks {shocks} differ from transcription {spec.shocks}")
    if correlations != spec.correlations:
        raise ReferenceError(f"{where}: correlations {correlations} differ from {spec.correlations}")
    if equations != [s.name for s in spec.factors]:
        raise ReferenceError(f"{where}: equations for {equations}, factors {[s.name for s in spec.factors]}")


# --------------------------------------------------------------------------------------
# The numeric model
# --------------------------------------------------------------------------------------

TIME = sp.Symbol("t", real=True)


@dataclass
class NumericModel:
    """A transcription with every value converted to clock units and substituted."""

    spec: ModelSpec
    # Knots of step and ramp and the kinks the transcription names, in clock units.
    breaks: list[float]
    horizon: float
    symbols: list[sp.Symbol]
    initial: np.ndarray
    drift: list[sp.Expr]
    # diffusion[i][k]: coefficient of noise k in the equation of state i.
    diffusion: sp.Matrix
    correlation: np.ndarray
    # diffusion_covariance[i][j] = sum_kl diffusion[i][k] R[k][l] diffusion[j][l].
    diffusion_covariance: sp.Matrix

    @property
    def size(self) -> int:
        return len(self.symbols)

    def depends_on_time(self, indices: list[int] | None = None) -> bool:
        rows = range(self.size) if indices is None else indices
        for i in rows:
            if self.drift[i].has(TIME) or any(self.diffusion[i, k].has(TIME) for k in range(self.diffusion.shape[1])):
                return True
        return False


def build_numeric_model(spec: ModelSpec) -> NumericModel:
    cross_check_file_text(spec)
    for state in spec.factors:
        if state.family not in FAMILIES:
            raise ReferenceError(f"{spec.relative_path}: unknown family {state.family}")
    values: dict[str, sp.Expr] = {}
    for param in spec.params:
        # An expression of earlier parameters is in clock units already (their values
        # are); a number is in its declared unit.
        scaled = constant_value(param.literal, values) * unit_scale(param.unit, spec.clock)
        values[param.name] = sp.Float(scaled, 17)
    symbols = [sp.Symbol(state.name, real=True) for state in spec.factors]
    knots: list[float] = []

    def step(x, first, *pairs):
        """v0 before t1, vk from tk on (right-continuous), as a sympy Piecewise."""
        pieces = []
        values = [first] + list(pairs[1::2])
        times = [sp.nsimplify(k) for k in pairs[0::2]]
        knots.extend(float(k) for k in times)
        for k in range(len(times), 0, -1):
            pieces.append((values[k], x >= times[k - 1]))
        pieces.append((values[0], True))
        return sp.Piecewise(*pieces)

    def ramp(x, *pairs):
        """Linear between the knots, flat outside them, as a sympy Piecewise."""
        times = [sp.nsimplify(k) for k in pairs[0::2]]
        values = list(pairs[1::2])
        knots.extend(float(k) for k in times)
        pieces = [(values[0], x <= times[0])]
        for k in range(1, len(times)):
            slope = (values[k] - values[k - 1]) / (times[k] - times[k - 1])
            pieces.append((values[k - 1] + slope * (x - times[k - 1]), x <= times[k]))
        pieces.append((values[-1], True))
        return sp.Piecewise(*pieces)

    namespace: dict[str, object] = {"t": TIME, "pi": sp.pi, "sqrt": sp.sqrt, "exp": sp.exp,
                                    "log": sp.log, "sin": sp.sin, "cos": sp.cos, "abs": sp.Abs,
                                    "Max": sp.Max, "Min": sp.Min, "step": step, "ramp": ramp}
    # Time units, for the knots of schedules: their length in clock units.
    for unit_name, years in TIME_UNIT_YEARS.items():
        length = years / TIME_UNIT_YEARS[spec.clock]
        namespace[unit_name] = sp.Rational(length.numerator, length.denominator)
    namespace.update({s.name: sym for s, sym in zip(spec.factors, symbols)})
    namespace.update(values)
    for name, text in spec.lets.items():
        namespace[name] = sp.sympify(text, locals=namespace)

    def parse(text: str) -> sp.Expr:
        return sp.sympify(text, locals=namespace)

    initial = np.array(
        [constant_value(s.literal, values) * unit_scale(s.unit, spec.clock) for s in spec.factors]
    )
    drift = [sp.expand(parse(spec.drift[s.name])) for s in spec.factors]
    diffusion = sp.zeros(len(spec.factors), len(spec.shocks))
    for i, state in enumerate(spec.factors):
        for noise, text in spec.diffusion[state.name].items():
            diffusion[i, spec.shocks.index(noise)] = parse(text)
    correlation = np.eye(len(spec.shocks))
    for (first, second), literal in spec.correlations.items():
        a, b = spec.shocks.index(first), spec.shocks.index(second)
        correlation[a, b] = correlation[b, a] = constant_value(literal, values)
    if correlation.size and np.linalg.eigvalsh(correlation).min() < -1e-12:
        raise ReferenceError(f"{spec.relative_path}: correlation matrix is not positive semi-definite")
    correlation_sym = sp.Matrix(correlation.tolist()).applyfunc(lambda v: sp.Float(v, 17))
    diffusion_covariance = (diffusion * correlation_sym * diffusion.T).applyfunc(sp.expand)
    return NumericModel(
        spec=spec,
        breaks=sorted(set(knots) | set(spec.kinks)),
        horizon=horizon_in_clock(spec),
        symbols=symbols,
        initial=initial,
        drift=drift,
        diffusion=diffusion,
        correlation=correlation,
        diffusion_covariance=diffusion_covariance,
    )


def as_float(expression: sp.Expr) -> float:
    if expression.free_symbols:
        raise ReferenceError(f"expected a constant, got {expression}")
    return float(expression)


# --------------------------------------------------------------------------------------
# Moment equations of the monomials of degree <= 2 (the generator on polynomials)
# --------------------------------------------------------------------------------------


def monomial_exponents(size: int) -> list[tuple[int, ...]]:
    """1, x_i, x_i x_j (i <= j), in a fixed order."""
    exponents = [tuple([0] * size)]
    for i in range(size):
        e = [0] * size
        e[i] = 1
        exponents.append(tuple(e))
    for i in range(size):
        for j in range(i, size):
            e = [0] * size
            e[i] += 1
            e[j] += 1
            exponents.append(tuple(e))
    return exponents


@dataclass
class MomentSystem:
    """d/dt E[m(Y)] = G(t) E[m(Y)] for the monomials m of Y = X - shift, in `indices`."""

    indices: list[int]
    shift: np.ndarray
    exponents: list[tuple[int, ...]]
    generator: sp.Matrix  # entries may contain t

    def position(self, exponent: tuple[int, ...]) -> int:
        return self.exponents.index(exponent)


def moment_system(model: NumericModel, indices: list[int], shift: np.ndarray) -> MomentSystem:
    """Applies the generator L f = sum b_i f_i + 1/2 sum a_ij f_ij to each monomial.

    Works in the shifted variables y = x - shift, which keeps the second moments close
    to the variances and so avoids cancellation when the variance is small beside the
    squared mean.
    """
    local = [model.symbols[i] for i in indices]
    ys = [sp.Symbol(f"y{k}", real=True) for k in range(len(indices))]
    back = {x: y + float(c) for x, y, c in zip(local, ys, shift)}
    drift = [sp.expand(model.drift[i].subs(back)) for i in indices]
    covariance = [[sp.expand(model.diffusion_covariance[i, j].subs(back)) for j in indices] for i in indices]
    for expression in drift + [c for row in covariance for c in row]:
        if expression.free_symbols - set(ys) - {TIME}:
            raise ReferenceError(
                f"{model.spec.relative_path}: factors {indices} are not a closed subsystem"
            )
    exponents = monomial_exponents(len(indices))
    generator = sp.zeros(len(exponents), len(exponents))
    for row, exponent in enumerate(exponents):
        monomial = sp.Mul(*[y**e for y, e in zip(ys, exponent)])
        image = sum(drift[i] * sp.diff(monomial, ys[i]) for i in range(len(ys)))
        image += sp.Rational(1, 2) * sum(
            covariance[i][j] * sp.diff(monomial, ys[i], ys[j])
            for i in range(len(ys))
            for j in range(len(ys))
        )
        image = sp.expand(image)
        if image == 0:
            continue
        polynomial = sp.Poly(image, *ys)
        for term_exponent, coefficient in polynomial.terms():
            if sum(term_exponent) > 2:
                raise ReferenceError(
                    f"{model.spec.relative_path}: the generator maps {monomial} to degree "
                    f"{sum(term_exponent)}: moments are not closed at degree 2"
                )
            generator[row, exponents.index(tuple(term_exponent))] += coefficient
    return MomentSystem(indices, np.asarray(shift, dtype=float), exponents, generator)


def moments_to_mean_covariance(system: MomentSystem, moments: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    n = len(system.indices)
    shifted_mean = np.zeros(n)
    for i in range(n):
        e = [0] * n
        e[i] = 1
        shifted_mean[i] = moments[system.position(tuple(e))]
    covariance = np.zeros((n, n))
    for i in range(n):
        for j in range(n):
            e = [0] * n
            e[i] += 1
            e[j] += 1
            covariance[i, j] = moments[system.position(tuple(e))] - shifted_mean[i] * shifted_mean[j]
    return shifted_mean + system.shift, covariance


def moments_by_solve_ivp(model: NumericModel) -> tuple[np.ndarray, np.ndarray]:
    """Integrates the moment equations of all factors with an explicit Runge-Kutta."""
    indices = list(range(model.size))
    system = moment_system(model, indices, model.initial)
    matrix = sp.lambdify(TIME, system.generator, modules="numpy")

    moments = np.zeros(len(system.exponents))
    moments[0] = 1.0  # E[1] = 1; every shifted monomial starts at 0
    # One solve_ivp per smooth piece between the breaks; on each the coefficients are
    # read strictly inside the piece, so a step is seen on the piece's own side.
    for low, high in pieces(model):
        margin = 1e-14 * max(1.0, abs(high))

        def rhs(t: float, m: np.ndarray, low=low, high=high, margin=margin) -> np.ndarray:
            return np.asarray(matrix(min(max(t, low + margin), high - margin)), dtype=float) @ m

        solution = integrate.solve_ivp(
            rhs, (low, high), moments, method="DOP853", rtol=1e-13, atol=1e-22
        )
        if not solution.success:
            raise ReferenceError(f"{model.spec.relative_path}: solve_ivp failed: {solution.message}")
        moments = solution.y[:, -1]
    return moments_to_mean_covariance(system, moments)


def pieces(model: NumericModel) -> list[tuple[float, float]]:
    """Consecutive (low, high) between 0, the breaks before the horizon, and the horizon."""
    points = [0.0] + [b for b in model.breaks if 0.0 < b < model.horizon] + [model.horizon]
    return list(zip(points[:-1], points[1:]))


def inner_breaks(model: NumericModel) -> list[float]:
    """The breaks strictly inside (0, horizon), for scipy's `points=`."""
    return [b for b in model.breaks if 0.0 < b < model.horizon]


def moments_by_generator_expm(model: NumericModel, indices: list[int]) -> tuple[np.ndarray, np.ndarray]:
    """E[m(X_T)] = expm(G T) m(X_0) for a time-homogeneous closed subsystem."""
    shift = model.initial[indices]
    system = moment_system(model, indices, shift)
    if system.generator.has(TIME):
        raise ReferenceError(f"{model.spec.relative_path}: generator depends on t")
    generator = np.array(system.generator.tolist(), dtype=float)
    start = np.zeros(len(system.exponents))
    start[0] = 1.0
    moments = linalg.expm(generator * model.horizon) @ start
    return moments_to_mean_covariance(system, moments)


def stationary_by_long_run_expm(model: NumericModel, indices: list[int]) -> tuple[np.ndarray, np.ndarray]:
    """Moments after a time so long that every mode has decayed by e^-80.

    A second route to the stationary moments, by the limit in time rather than by
    solving the fixed-point equations; only called when those say the limit exists.
    """
    system = moment_system(model, indices, model.initial[indices])
    generator = np.array(system.generator.tolist(), dtype=float)
    slowest = -np.linalg.eigvals(generator[1:, 1:]).real.max()
    start = np.zeros(len(system.exponents))
    start[0] = 1.0
    moments = linalg.expm(generator * (80.0 / slowest)) @ start
    return moments_to_mean_covariance(system, moments)


def stationary_by_generator(model: NumericModel, indices: list[int]) -> tuple[np.ndarray, np.ndarray] | None:
    """Fixed point of the moment equations, when every non-constant mode decays."""
    if model.depends_on_time(indices):
        return None
    system = moment_system(model, indices, np.zeros(len(indices)))
    generator = np.array(system.generator.tolist(), dtype=float)
    decaying = generator[1:, 1:]
    if np.linalg.eigvals(decaying).real.max() >= -1e-12:
        return None
    moments = np.concatenate([[1.0], -np.linalg.solve(decaying, generator[1:, 0])])
    return moments_to_mean_covariance(system, moments)


# --------------------------------------------------------------------------------------
# Primary methods, one per family
# --------------------------------------------------------------------------------------


def affine_parts(model: NumericModel, indices: list[int]) -> tuple[np.ndarray, np.ndarray]:
    """Drift = A x + c on the block; fails unless affine with constant coefficients."""
    local = [model.symbols[i] for i in indices]
    a = np.zeros((len(indices), len(indices)))
    c = np.zeros(len(indices))
    for row, i in enumerate(indices):
        polynomial = sp.Poly(model.drift[i], *local)
        for exponent, coefficient in polynomial.terms():
            if sum(exponent) > 1:
                raise ReferenceError(f"{model.spec.relative_path}: drift of state {i} is not affine")
            if sum(exponent) == 0:
                c[row] = as_float(coefficient)
            else:
                a[row, exponent.index(1)] = as_float(coefficient)
    return a, c


def gaussian_by_van_loan(model: NumericModel, indices: list[int]) -> tuple[np.ndarray, np.ndarray]:
    """Mean by the augmented exponential, covariance by Van Loan's block exponential."""
    a, c = affine_parts(model, indices)
    q = np.array([[as_float(model.diffusion_covariance[i, j]) for j in indices] for i in indices])
    n = len(indices)
    augmented = np.zeros((n + 1, n + 1))
    augmented[:n, :n] = a
    augmented[:n, n] = c
    state = np.append(model.initial[indices], 1.0)
    mean = (linalg.expm(augmented * model.horizon) @ state)[:n]
    block = np.zeros((2 * n, 2 * n))
    block[:n, :n] = -a
    block[:n, n:] = q
    block[n:, n:] = a.T
    exponential = linalg.expm(block * model.horizon)
    transition = exponential[n:, n:].T
    covariance = transition @ exponential[:n, n:]
    return mean, (covariance + covariance.T) / 2.0


def gaussian_stationary_by_lyapunov(model: NumericModel, indices: list[int]) -> tuple[np.ndarray, np.ndarray] | None:
    a, c = affine_parts(model, indices)
    if np.linalg.eigvals(a).real.max() >= -1e-12:
        return None
    q = np.array([[as_float(model.diffusion_covariance[i, j]) for j in indices] for i in indices])
    mean = -np.linalg.solve(a, c)
    covariance = linalg.solve_continuous_lyapunov(a, -q)
    return mean, (covariance + covariance.T) / 2.0


def scalar_coefficients(model: NumericModel, i: int) -> tuple[float, float, float, float, float, float]:
    """For one state: drift = c0 + c1 x, squared diffusion = q0 + q1 x + q2 x^2."""
    x = model.symbols[i]
    drift = sp.Poly(model.drift[i], x)
    squared = sp.Poly(model.diffusion_covariance[i, i], x)
    if drift.degree() > 1 or squared.degree() > 2:
        raise ReferenceError(f"{model.spec.relative_path}: state {x} is not affine-polynomial")
    c0, c1 = (as_float(drift.coeff_monomial(x**k)) for k in range(2))
    q0, q1, q2 = (as_float(squared.coeff_monomial(x**k)) for k in range(3))
    return c0, c1, q0, q1, q2, float(model.initial[i])


def geometric_by_lognormal(model: NumericModel, i: int) -> tuple[float, float]:
    c0, mu, q0, q1, sigma2, s0 = scalar_coefficients(model, i)
    if c0 != 0.0 or q0 != 0.0 or q1 != 0.0:
        raise ReferenceError(f"{model.spec.relative_path}: state {i} is not geometric")
    horizon = model.horizon
    law = stats.lognorm(s=math.sqrt(sigma2 * horizon), scale=s0 * math.exp((mu - sigma2 / 2.0) * horizon))
    return float(law.mean()), float(law.var())


def square_root_by_ncx2(model: NumericModel, i: int) -> tuple[float, float]:
    """X_T = Y / (2c) with Y non-central chi-square (CIR 1985)."""
    c0, c1, q0, sigma2, q2, x0 = scalar_coefficients(model, i)
    if q0 != 0.0 or q2 != 0.0 or c1 >= 0.0:
        raise ReferenceError(f"{model.spec.relative_path}: state {i} is not a mean-reverting square root")
    kappa = -c1
    level = c0 / kappa
    decay = math.exp(-kappa * model.horizon)
    c = 2.0 * kappa / (sigma2 * (1.0 - decay))
    law = stats.ncx2(df=4.0 * kappa * level / sigma2, nc=2.0 * c * x0 * decay)
    return float(law.mean()) / (2.0 * c), float(law.var()) / (2.0 * c) ** 2


def square_root_stationary_by_gamma(model: NumericModel, i: int) -> tuple[float, float]:
    c0, c1, _q0, sigma2, _q2, _x0 = scalar_coefficients(model, i)
    kappa = -c1
    level = c0 / kappa
    law = stats.gamma(a=2.0 * kappa * level / sigma2, scale=sigma2 / (2.0 * kappa))
    return float(law.mean()), float(law.var())


def time_dependent_by_quadrature(model: NumericModel, i: int) -> tuple[float, float]:
    """Integrating factor, X_T = x0 e^{B(T)} + int e^{B(T)-B(s)} a(s) ds + int e^{B(T)-B(s)} sigma(s) dW
    with B(t) = int_0^t b: scipy.integrate.quad with `points=` at the knots and kinks."""
    x = model.symbols[i]
    polynomial = sp.Poly(model.drift[i], x)
    if polynomial.degree() > 1 or model.diffusion_covariance[i, i].has(x):
        raise ReferenceError(f"{model.spec.relative_path}: state {x} is not linear with additive noise")
    slope = polynomial.coeff_monomial(x)
    level_term = sp.lambdify(TIME, polynomial.coeff_monomial(1), modules="math")
    noise_rate = sp.lambdify(TIME, model.diffusion_covariance[i, i], modules="math")
    horizon = model.horizon
    options = dict(epsabs=0.0, epsrel=1e-13, limit=200)
    if slope.has(TIME):
        slope_at = sp.lambdify(TIME, slope, modules="math")

        def growth(s: float) -> float:
            """B(T) - B(s), split at the breaks between s and T."""
            inside = [b for b in model.breaks if s < b < horizon]
            value, _ = integrate.quad(slope_at, s, horizon, points=inside or None, **options)
            return value
    else:
        b = as_float(slope)

        def growth(s: float) -> float:
            return b * (horizon - s)

    points = inner_breaks(model) or None
    drift_integral, _ = integrate.quad(lambda s: math.exp(growth(s)) * level_term(s), 0.0, horizon,
                                       points=points, **options)
    variance, _ = integrate.quad(lambda s: math.exp(2.0 * growth(s)) * noise_rate(s), 0.0, horizon,
                                 points=points, **options)
    mean = float(model.initial[i]) * math.exp(growth(0.0)) + drift_integral
    return mean, variance


def gaussian_time_dependent_by_quad_vec(model: NumericModel, indices: list[int]) -> tuple[np.ndarray, np.ndarray]:
    """A Gaussian block dX = (A X + c(t)) dt + L(t) dW with constant A:
    mean e^{AT} m0 + int e^{A(T-s)} c(s) ds, covariance int e^{A(T-s)} Q(s) e^{A'(T-s)} ds,
    by scipy.integrate.quad_vec with `points=` at the knots and kinks."""
    local = [model.symbols[k] for k in indices]
    n = len(indices)
    a = np.zeros((n, n))
    constant_terms = []
    for row, k in enumerate(indices):
        polynomial = sp.Poly(model.drift[k], *local)
        constant = sp.Integer(0)
        for exponent, coefficient in polynomial.terms():
            if sum(exponent) > 1:
                raise ReferenceError(f"{model.spec.relative_path}: drift of state {k} is not affine")
            if sum(exponent) == 0:
                constant = coefficient
            else:
                a[row, exponent.index(1)] = as_float(coefficient)
        constant_terms.append(constant)
    constant_at = [sp.lambdify(TIME, term, modules="math") for term in constant_terms]
    covariance_at = [[sp.lambdify(TIME, model.diffusion_covariance[k, l], modules="math") for l in indices]
                     for k in indices]

    def c(s: float) -> np.ndarray:
        return np.array([f(s) for f in constant_at], dtype=float)

    def q(s: float) -> np.ndarray:
        return np.array([[f(s) for f in row] for row in covariance_at], dtype=float)
    horizon = model.horizon
    points = inner_breaks(model) or None
    options = dict(epsabs=0.0, epsrel=1e-13, norm="max", limit=2000)

    def mean_integrand(s: float) -> np.ndarray:
        return linalg.expm(a * (horizon - s)) @ np.asarray(c(s), dtype=float).ravel()

    def covariance_integrand(s: float) -> np.ndarray:
        propagator = linalg.expm(a * (horizon - s))
        return propagator @ np.asarray(q(s), dtype=float) @ propagator.T

    forced, _ = integrate.quad_vec(mean_integrand, 0.0, horizon, points=points, **options)
    covariance, _ = integrate.quad_vec(covariance_integrand, 0.0, horizon, points=points, **options)
    mean = linalg.expm(a * horizon) @ model.initial[indices] + forced
    return mean, (covariance + covariance.T) / 2.0


# --------------------------------------------------------------------------------------
# Symbolic checks with sympy
# --------------------------------------------------------------------------------------

_SYMBOLIC_OU: tuple | None = None


def symbolic_ou_forms():
    """Solves m' = kappa (level - m), v' = -2 kappa v + q with sympy's dsolve."""
    global _SYMBOLIC_OU
    if _SYMBOLIC_OU is None:
        kappa, q = sp.symbols("kappa q", positive=True)
        level, x0 = sp.symbols("level x0", real=True)
        time = sp.Symbol("tau", positive=True)
        m, v = sp.Function("m"), sp.Function("v")
        mean = sp.dsolve(sp.Eq(m(time).diff(time), kappa * (level - m(time))), m(time), ics={m(0): x0}).rhs
        variance = sp.dsolve(sp.Eq(v(time).diff(time), -2 * kappa * v(time) + q), v(time), ics={v(0): 0}).rhs
        stationary_mean = sp.limit(mean, time, sp.oo)
        stationary_variance = sp.limit(variance, time, sp.oo)
        _SYMBOLIC_OU = (kappa, q, level, x0, time, mean, variance, stationary_mean, stationary_variance)
    return _SYMBOLIC_OU


def ou_by_sympy(model: NumericModel, i: int) -> tuple[float, float, float, float]:
    c0, c1, q0, q1, q2, x0 = scalar_coefficients(model, i)
    if q1 != 0.0 or q2 != 0.0 or c1 >= 0.0:
        raise ReferenceError(f"{model.spec.relative_path}: state {i} is not Ornstein-Uhlenbeck")
    kappa, q, level, start, time, mean, variance, s_mean, s_variance = symbolic_ou_forms()
    values = {kappa: -c1, q: q0, level: c0 / -c1, start: x0, time: model.horizon}
    return tuple(float(expr.subs(values).evalf(30)) for expr in (mean, variance, s_mean, s_variance))


def time_dependent_by_sympy(model: NumericModel, i: int) -> tuple[float, float]:
    """The integrating-factor integrals done symbolically (elementary integrands only)."""
    x = model.symbols[i]
    polynomial = sp.Poly(model.drift[i], x)
    b = sp.nsimplify(polynomial.coeff_monomial(x), rational=True)
    level_term = sp.nsimplify(polynomial.coeff_monomial(1), rational=True)
    noise_rate = sp.nsimplify(model.diffusion_covariance[i, i], rational=True)
    s, horizon = sp.Symbol("s", real=True), sp.nsimplify(model.horizon, rational=True)
    mean = sp.nsimplify(float(model.initial[i]), rational=True) * sp.exp(b * horizon) + sp.integrate(
        sp.exp(b * (horizon - s)) * level_term.subs(TIME, s), (s, 0, horizon)
    )
    variance = sp.integrate(sp.exp(2 * b * (horizon - s)) * noise_rate.subs(TIME, s), (s, 0, horizon))
    if mean.has(sp.Integral) or variance.has(sp.Integral):
        raise ReferenceError(f"{model.spec.relative_path}: sympy found no elementary integral")
    return float(mean.evalf(30)), float(variance.evalf(30))


# --------------------------------------------------------------------------------------
# Putting a model together
# --------------------------------------------------------------------------------------


def dependency_closure(model: NumericModel, i: int) -> list[int]:
    """States whose equations the law of state i depends on, i included."""
    closure = {i}
    pending = [i]
    while pending:
        k = pending.pop()
        used = model.drift[k].free_symbols.union(*[model.diffusion[k, n].free_symbols for n in range(model.diffusion.shape[1])])
        for j, symbol in enumerate(model.symbols):
            if symbol in used and j not in closure:
                closure.add(j)
                pending.append(j)
    return sorted(closure)


def coupled_blocks(model: NumericModel) -> list[list[int]]:
    """Groups of factors that share a drift dependency or correlated shocks."""
    parent = list(range(model.size))

    def find(k: int) -> int:
        while parent[k] != k:
            parent[k] = parent[parent[k]]
            k = parent[k]
        return k

    for i in range(model.size):
        for j in dependency_closure(model, i):
            parent[find(i)] = find(j)
        for j in range(model.size):
            if model.diffusion_covariance[i, j] != 0:
                parent[find(i)] = find(j)
    groups: dict[int, list[int]] = {}
    for i in range(model.size):
        groups.setdefault(find(i), []).append(i)
    return sorted(groups.values())


def is_gaussian(model: NumericModel, indices: list[int]) -> bool:
    local = set(model.symbols[i] for i in indices)
    for i in indices:
        if model.drift[i].has(TIME) or sp.Poly(model.drift[i], *local).total_degree() > 1:
            return False
        for k in range(model.diffusion.shape[1]):
            if model.diffusion[i, k].free_symbols:
                return False
    return True


def is_gaussian_time_dependent(model: NumericModel, indices: list[int]) -> bool:
    """Affine drift whose slopes are constants, diffusion free of the states."""
    local = set(model.symbols[i] for i in indices)
    for i in indices:
        polynomial = sp.Poly(model.drift[i], *local)
        for exponent, coefficient in polynomial.terms():
            if sum(exponent) > 1 or (sum(exponent) == 1 and coefficient.has(TIME)):
                return False
        for k in range(model.diffusion.shape[1]):
            if model.diffusion[i, k].free_symbols & local:
                return False
    return True


def half_life(model: NumericModel, i: int) -> float | None:
    """ln 2 / |b| when the drift is b x + c(t) with a constant b < 0 and no other state."""
    x = model.symbols[i]
    drift = model.drift[i]
    others = drift.free_symbols - {x, TIME}
    if others:
        return None
    polynomial = sp.Poly(drift, x)
    if polynomial.degree() != 1:
        return None
    b = polynomial.coeff_monomial(x)
    if b.has(TIME):
        return None
    b_value = as_float(b)
    return math.log(2.0) / abs(b_value) if b_value < 0.0 else None


@dataclass
class Figures:
    mean: np.ndarray
    covariance: np.ndarray
    half_lives: list[float | None]
    stationary: list[tuple[float, float] | None]
    method: str
    quadrature: bool


# Largest scaled gap seen by each agreement check, printed by --verbose.
AGREEMENT_GAPS: list[tuple[str, str, float]] = []


def assert_agree(where: str, what: str, first: np.ndarray, second: np.ndarray, scale: np.ndarray, tolerance: float) -> None:
    difference = np.abs(np.asarray(first, dtype=float) - np.asarray(second, dtype=float))
    scale = np.maximum(np.asarray(scale, dtype=float), 1e-300)
    limit = tolerance * scale
    AGREEMENT_GAPS.append((where, what, float((difference / scale).max())))
    if np.any(difference > limit):
        raise ReferenceError(
            f"{where}: {what} disagree beyond {tolerance}: {first!r} vs {second!r} "
            f"(largest gap {difference.max():.3e})"
        )


def covariance_scale(covariance: np.ndarray, mean: np.ndarray | None = None) -> np.ndarray:
    """sd_i sd_j; for a factor that no shock drives (variance 0) the scale of its raw
    second moment, |m_i m_j|, from which a moment-equation solver subtracts m_i m_j."""
    sd = np.sqrt(np.abs(np.diag(covariance)))
    scale = np.outer(sd, sd)
    if mean is not None:
        still = sd == 0.0
        raw = np.abs(np.outer(mean, mean))
        scale = np.where(np.logical_or.outer(still, still), raw, scale)
    return np.maximum(scale, 1e-300)


def compute_figures(model: NumericModel) -> Figures:
    if model.spec.high_precision_check is not None:
        return high_precision_figures(model)
    if any(state.family == "general" for state in model.spec.factors):
        return partial_figures(model)
    where = model.spec.relative_path
    # Two methods must agree well inside the tolerance published for the project.
    agreement = METHOD_AGREEMENT if model.spec.tolerance is None else model.spec.tolerance / 10.0
    if model.spec.agreement is not None:
        agreement = model.spec.agreement
    n = model.size
    mean = np.zeros(n)
    covariance = np.zeros((n, n))
    methods: list[str] = []
    quadrature = False
    for block in coupled_blocks(model):
        families = {model.spec.factors[i].family for i in block}
        if model.depends_on_time(block) and len(block) > 1:
            if not is_gaussian_time_dependent(model, block):
                raise ReferenceError(f"{where}: time-dependent coupled block {block} is not Gaussian")
            block_mean, block_cov = gaussian_time_dependent_by_quad_vec(model, block)
            methods.append("integrating-factor quadrature of the Gaussian block (scipy.integrate.quad_vec)")
            quadrature = True
        elif model.depends_on_time(block):
            block_mean, block_variance = time_dependent_by_quadrature(model, block[0])
            block_mean, block_cov = np.array([block_mean]), np.array([[block_variance]])
            methods.append("integrating-factor quadrature (scipy.integrate.quad)")
            quadrature = True
            if model.spec.elementary_time_dependence:
                exact_mean, exact_variance = time_dependent_by_sympy(model, block[0])
                assert_agree(where, "quad and sympy.integrate", [block_mean[0], block_variance],
                             [exact_mean, exact_variance], [abs(exact_mean), exact_variance], METHOD_AGREEMENT)
        elif is_gaussian(model, block):
            block_mean, block_cov = gaussian_by_van_loan(model, block)
            methods.append("Van Loan block exponential (scipy.linalg.expm)")
        elif families == {"geometric-brownian"} and len(block) == 1:
            m, v = geometric_by_lognormal(model, block[0])
            block_mean, block_cov = np.array([m]), np.array([[v]])
            methods.append("log-normal law (scipy.stats.lognorm)")
        elif families == {"square-root"} and len(block) == 1:
            m, v = square_root_by_ncx2(model, block[0])
            block_mean, block_cov = np.array([m]), np.array([[v]])
            methods.append("scaled non-central chi-square law (scipy.stats.ncx2)")
        else:
            block_mean, block_cov = moments_by_generator_expm(model, block)
            methods.append("generator on monomials of degree <= 2 (sympy, scipy.linalg.expm)")
            for i in block:
                if model.spec.factors[i].family == "square-root" and dependency_closure(model, i) == [i]:
                    m, v = square_root_by_ncx2(model, i)
                    k = block.index(i)
                    assert_agree(where, f"generator and ncx2 for state {i}", [block_mean[k], block_cov[k, k]],
                                 [m, v], [abs(m), v], METHOD_AGREEMENT)
        mean[block] = block_mean
        covariance[np.ix_(block, block)] = block_cov

    check_mean, check_covariance = moments_by_solve_ivp(model)
    scale = np.sqrt(np.abs(np.diag(covariance)))
    assert_agree(where, "means (primary vs solve_ivp)", mean, check_mean,
                 np.maximum(np.abs(mean), scale), agreement)
    assert_agree(where, "covariances (primary vs solve_ivp)", covariance, check_covariance,
                 covariance_scale(covariance, mean), agreement)

    half_lives, stationary = half_lives_and_stationary_laws(model, mean, covariance)
    method = "; ".join(dict.fromkeys(methods)) + "; checked against solve_ivp on the moment equations"
    return Figures(mean, (covariance + covariance.T) / 2.0, half_lives, stationary, method, quadrature)


def half_lives_and_stationary_laws(
    model: NumericModel, mean: np.ndarray, covariance: np.ndarray, unknown: frozenset[int] = frozenset()
) -> tuple[list[float | None], list[tuple[float, float] | None]]:
    """Half-life and stationary law of every factor, each checked two ways; none for the
    factors in `unknown` (no law known) and those whose laws depend on them."""
    where = model.spec.relative_path
    n = model.size
    half_lives = [half_life(model, i) for i in range(n)]
    stationary: list[tuple[float, float] | None] = []
    for i in range(n):
        closure = dependency_closure(model, i)
        if unknown & set(closure):
            stationary.append(None)
            continue
        by_generator = stationary_by_generator(model, closure)
        family = model.spec.factors[i].family
        if by_generator is None:
            stationary.append(None)
            continue
        position = closure.index(i)
        generic = (by_generator[0][position], by_generator[1][position, position])
        if is_gaussian(model, closure):
            lyapunov = gaussian_stationary_by_lyapunov(model, closure)
            if lyapunov is None:
                raise ReferenceError(f"{where}: Lyapunov and generator disagree on stationarity of {i}")
            primary = (lyapunov[0][position], lyapunov[1][position, position])
        elif family == "square-root" and closure == [i]:
            primary = square_root_stationary_by_gamma(model, i)
        else:
            long_run = stationary_by_long_run_expm(model, closure)
            primary = (long_run[0][position], long_run[1][position, position])
        # A stationary variance of 0 (no shock) is compared on the scale of the mean's
        # square, as the covariances are.
        variance_scale = primary[1] if primary[1] > 0 else primary[0] ** 2
        assert_agree(where, f"stationary law of state {i}", primary, generic,
                     [max(abs(primary[0]), math.sqrt(primary[1])), variance_scale], METHOD_AGREEMENT)
        stationary.append((float(primary[0]), float(primary[1])))

    # One-state Ornstein-Uhlenbeck factors: the sympy closed forms must match too.
    for i in range(n):
        if model.spec.factors[i].family == "ornstein-uhlenbeck" and dependency_closure(model, i) == [i]:
            s_mean, s_variance, s_stat_mean, s_stat_variance = ou_by_sympy(model, i)
            assert_agree(where, f"sympy closed form for state {i}", [mean[i], covariance[i, i]],
                         [s_mean, s_variance], [abs(s_mean), s_variance], METHOD_AGREEMENT)
            if stationary[i] is None:
                raise ReferenceError(f"{where}: an OU state without stationary law")
            assert_agree(where, f"sympy stationary law for state {i}", list(stationary[i]),
                         [s_stat_mean, s_stat_variance], [abs(s_stat_mean), s_stat_variance], METHOD_AGREEMENT)
            expected_half_life = math.log(2.0) / (-scalar_coefficients(model, i)[1])
            if half_lives[i] is None or abs(half_lives[i] - expected_half_life) > 1e-15 * expected_half_life:
                raise ReferenceError(f"{where}: half-life of OU state {i} is {half_lives[i]}")
    return half_lives, stationary


def moments_in_high_precision(model: NumericModel, digits: int = 50) -> tuple[list, list]:
    """Mean and covariance of all factors from expm(G T) of the generator on monomials of
    degree <= 2 (built with sympy), in `digits`-digit arithmetic (mpmath): the centring
    E[X_i X_j] - E[X_i] E[X_j] then loses nothing a double would keep."""
    import mpmath

    indices = list(range(model.size))
    system = moment_system(model, indices, model.initial)
    if system.generator.has(TIME):
        raise ReferenceError(f"{model.spec.relative_path}: generator depends on t")
    with mpmath.workdps(digits):
        generator = mpmath.matrix([[mpmath.mpf(sp.Float(e, digits)) for e in row]
                                   for row in system.generator.tolist()])
        moments = mpmath.expm(generator * mpmath.mpf(model.horizon))
        first = [moments[system.position(tuple(int(k == i) for k in indices)), 0] for i in indices]
        covariance = [[moments[system.position(tuple(int(k == i) + int(k == j) for k in indices)), 0]
                       - first[i] * first[j] for j in indices] for i in indices]
        mean = [first[i] + mpmath.mpf(float(system.shift[i])) for i in indices]
        return ([float(m) for m in mean], [[float(c) for c in row] for row in covariance])


def integrated_geometric_by_sympy(model: NumericModel) -> tuple[list, list]:
    """S geometric, A = c int S: exact mean and covariance of (S, A) by sympy.integrate
    (SOURCE_INTEGRATED_GEOMETRIC), evaluated to 50 digits."""
    values = {q.name: q for q in model.spec.params}
    mu, sigma, c = (sp.nsimplify(sp.Float(constant_value(values[k].literal, {}) * unit_scale(values[k].unit, model.spec.clock), 17), rational=True)
                    for k in ("mu", "sigma", "c"))
    s0 = sp.nsimplify(sp.Float(model.initial[0], 17), rational=True)
    a0 = sp.nsimplify(sp.Float(model.initial[1], 17), rational=True)
    t, u, v = sp.symbols("t u v", positive=True)
    mean_s = s0 * sp.exp(mu * t)
    mean_a = a0 + c * sp.integrate(s0 * sp.exp(mu * u), (u, 0, t))
    # E[S_v S_u] = S0^2 e^{mu (u - v)} e^{(2 mu + sigma^2) v} for v <= u.
    second_a = 2 * c**2 * sp.integrate(
        sp.integrate(s0**2 * sp.exp(mu * (u - v)) * sp.exp((2 * mu + sigma**2) * v), (v, 0, u)), (u, 0, t))
    var_a = second_a - (mean_a - a0) ** 2
    var_s = s0**2 * sp.exp(2 * mu * t) * (sp.exp(sigma**2 * t) - 1)
    # E[S_t A_t] - E[S_t] E[A_t]: c int_0^t (E[S_u S_t] - E[S_u] E[S_t]) du.
    cov_sa = c * sp.integrate(s0**2 * sp.exp(mu * (t - u)) * sp.exp(2 * mu * u) * (sp.exp(sigma**2 * u) - 1), (u, 0, t))
    at = sp.nsimplify(sp.Float(model.horizon, 17), rational=True)
    value = lambda e: float(sp.N(e.subs(t, at), 50))
    return ([value(mean_s), value(mean_a)],
            [[value(var_s), value(cov_sa)], [value(cov_sa), value(var_a)]])


HIGH_PRECISION_CHECKS = {"integrated-geometric": integrated_geometric_by_sympy}


def high_precision_figures(model: NumericModel) -> Figures:
    """Moments in 50-digit arithmetic, checked against a symbolic closed form."""
    where = model.spec.relative_path
    mean, covariance = (np.array(x) for x in moments_in_high_precision(model))
    check = HIGH_PRECISION_CHECKS[model.spec.high_precision_check]
    check_mean, check_covariance = (np.array(x) for x in check(model))
    scale = np.sqrt(np.abs(np.diag(covariance)))
    # Both are exact to far below a double's precision: they must agree to rounding.
    assert_agree(where, "means (50-digit expm vs sympy)", mean, check_mean,
                 np.maximum(np.abs(mean), scale), 1e-14)
    assert_agree(where, "covariances (50-digit expm vs sympy)", covariance, check_covariance,
                 covariance_scale(covariance, mean), 1e-14)
    half_lives, stationary = half_lives_and_stationary_laws(model, mean, covariance)
    method = ("generator on monomials of degree <= 2 (sympy), mpmath.expm at 50 digits; "
              "checked against the closed form integrated by sympy")
    return Figures(mean, (covariance + covariance.T) / 2.0, half_lives, stationary, method, False)


def affine_drift_equations(model: NumericModel, indices: list[int]) -> tuple[sp.Matrix, sp.Matrix]:
    """m' = A m + b for the factors `indices`, whose drifts must be affine in them with
    constant coefficients: (A, b) as exact rationals of the double parameters."""
    local = [model.symbols[i] for i in indices]
    a = sp.zeros(len(indices), len(indices))
    b = sp.zeros(len(indices), 1)
    exact = lambda e: sp.nsimplify(sp.Float(as_float(e), 17), rational=True)
    for row, i in enumerate(indices):
        drift = model.drift[i]
        if drift.has(TIME) or drift.free_symbols - set(local):
            raise ReferenceError(f"{model.spec.relative_path}: drift of {local[row]} is not closed")
        polynomial = sp.Poly(drift, *local)
        if polynomial.total_degree() > 1:
            raise ReferenceError(f"{model.spec.relative_path}: drift of {local[row]} is not affine")
        b[row] = exact(polynomial.coeff_monomial(1))
        for column, symbol in enumerate(local):
            a[row, column] = exact(polynomial.coeff_monomial(symbol))
    return a, b


def drift_closure(model: NumericModel, i: int) -> list[int]:
    """The factors that factor i's drift reaches, i included."""
    closure = {i}
    pending = [i]
    while pending:
        k = pending.pop()
        for j, symbol in enumerate(model.symbols):
            if symbol in model.drift[k].free_symbols and j not in closure:
                closure.add(j)
                pending.append(j)
    return sorted(closure)


def partial_figures(model: NumericModel) -> Figures:
    """A model with factors of no known law ("general") whose drifts are affine: their
    means from the linear mean equations (SOURCE_PARTIAL_MEAN), by scipy's expm of the
    augmented matrix and by sympy's exact Matrix.exp; their variances and covariances
    unknown (NaN). The other factors get the figures of their own family."""
    where = model.spec.relative_path
    n = model.size
    general = frozenset(i for i in range(n) if model.spec.factors[i].family == "general")
    mean = np.full(n, np.nan)
    covariance = np.full((n, n), np.nan)
    methods: list[str] = []
    for i in range(n):
        closure = dependency_closure(model, i)
        if i not in general and not general & set(closure):
            block_mean, block_cov = moments_by_generator_expm(model, closure)
            k = closure.index(i)
            if model.spec.factors[i].family == "square-root" and closure == [i]:
                m, v = square_root_by_ncx2(model, i)
                assert_agree(where, f"generator and ncx2 for state {i}", [block_mean[k], block_cov[k, k]],
                             [m, v], [abs(m), v], METHOD_AGREEMENT)
                methods.append("scaled non-central chi-square law (scipy.stats.ncx2)")
            mean[i] = block_mean[k]
            for j in closure:
                if j not in general:
                    covariance[i, j] = covariance[j, i] = block_cov[k, closure.index(j)]
            continue
        members = drift_closure(model, i)
        a, b = affine_drift_equations(model, members)
        m0 = np.array([model.initial[k] for k in members])
        size = len(members)
        augmented = np.zeros((size + 1, size + 1))
        augmented[:size, :size] = np.array(a.tolist(), dtype=float) * model.horizon
        augmented[:size, size] = np.array(b.tolist(), dtype=float)[:, 0] * model.horizon
        augmented[size, size] = 0.0
        position = members.index(i)
        by_expm = (linalg.expm(augmented) @ np.append(m0, 1.0))[position]
        t = sp.nsimplify(sp.Float(model.horizon, 17), rational=True)
        exact_start = sp.Matrix([sp.nsimplify(sp.Float(x, 17), rational=True) for x in m0])
        exact_augmented = sp.zeros(size + 1, size + 1)
        exact_augmented[:size, :size] = a * t
        exact_augmented[:size, size] = b * t
        by_sympy = float(sp.N((exact_augmented.exp() * exact_start.col_join(sp.Matrix([1])))[position], 30))
        assert_agree(where, f"mean of state {i} (expm vs sympy Matrix.exp)", [by_expm], [by_sympy],
                     [abs(by_sympy)], 1e-14)
        mean[i] = by_sympy
        methods.append("linear mean equations m' = A m + b (scipy.linalg.expm, sympy Matrix.exp)")
    half_lives, stationary = half_lives_and_stationary_laws(model, mean, covariance, general)
    for i in general:
        half_lives[i] = None
    method = "; ".join(dict.fromkeys(methods)) + "; variances of the general factors unknown"
    return Figures(mean, covariance, half_lives, stationary, method, False)


# A mean smaller than this fraction of its standard deviation is round-off around an
# exact zero (e.g. the stationary output gap); it is written as 0 so that the file does
# not depend on the sign of the last bit.
ROUND_OFF_ZERO = 1e-14


def snap_zero(value: float, scale: float) -> float:
    return 0.0 if abs(value) <= ROUND_OFF_ZERO * scale else float(value)


def unknown_as_null(matrix: np.ndarray) -> list[list[float | None]]:
    """A matrix for the JSON file, with an unknown entry (NaN) written as null."""
    return [[None if math.isnan(v) else float(v) for v in row] for row in matrix]


def model_record(spec: ModelSpec) -> dict:
    model = build_numeric_model(spec)
    figures = compute_figures(model)
    factors = []
    for i, state in enumerate(spec.factors):
        stationary = figures.stationary[i]
        variance = float(figures.covariance[i, i])
        known_variance = None if math.isnan(variance) else variance
        factors.append({
            "name": state.name,
            "family": state.family,
            "mean": snap_zero(figures.mean[i], math.sqrt(known_variance or 0.0)),
            "variance": known_variance,
            "half_life": figures.half_lives[i],
            "stationary_mean": None if stationary is None else snap_zero(stationary[0], math.sqrt(stationary[1])),
            "stationary_variance": None if stationary is None else stationary[1],
        })
    record = {
        "file": spec.relative_path,
        "at": model.horizon,
        "tolerance": spec.tolerance or (TOLERANCE_QUADRATURE if figures.quadrature else TOLERANCE_EXACT),
        "method": figures.method,
        "sources": list(spec.sources),
        "factors": factors,
        "covariance": unknown_as_null(figures.covariance),
    }
    if spec.also_at:
        also = []
        for at in spec.also_at:
            other = compute_figures(dataclasses.replace(model, horizon=at))
            also.append({
                "at": at,
                "mean": [None if math.isnan(m) else snap_zero(m, math.sqrt(abs(np.nan_to_num(other.covariance[k, k]))))
                         for k, m in enumerate(other.mean)],
                "covariance": unknown_as_null(other.covariance),
            })
        record["also_at"] = also
    return record


# --------------------------------------------------------------------------------------
# Laws, bond prices and explosion times of affine models
# --------------------------------------------------------------------------------------

SOURCE_VASICEK_BOND = "Vasicek 1977, J. Financial Economics 5, eq. 27 (Brigo & Mercurio 2006, eq. 3.8)"
SOURCE_CIR_BOND = "Cox, Ingersoll & Ross 1985, Econometrica 53, eq. 23"
SOURCE_G2_BOND = "Brigo & Mercurio 2006, Interest Rate Models, 2nd ed., eq. 4.10 with constant phi"
SOURCE_HESTON = ("Heston 1993, Review of Financial Studies 6, eq. 17 (little-trap form of "
                 "Albrecher et al. 2007); Gil-Pelaez 1951 by scipy.integrate.quad")
SOURCE_NORM = "scipy.stats.norm with the Vasicek mean and variance"
SOURCE_LOGNORM = "scipy.stats.lognorm, s = sigma sqrt(T), scale = S0 exp((mu - sigma^2/2) T)"
SOURCE_NCX2 = "scipy.stats.ncx2, Cox, Ingersoll & Ross 1985, eq. 18"
SOURCE_EXPLOSION = "Andersen & Piterbarg 2007, Finance and Stochastics 11, Prop. 3.1"

# Transcriptions of the affine models: parameter literals as written in each file (the
# file must contain each `param NAME = LITERAL`), values in the clock (year).
AFFINE_MODELS = {
    "affine_alderley_vasicek_rate.sde": {"kappa": "0.8", "theta": "4%", "sigma": "1.5%", "r0": "2.5%"},
    "affine_bramble_cir_rate.sde": {"kappa": "0.6", "theta": "5%", "sigma": "0.12", "r0": "3%"},
    "affine_corrin_two_factor_rate.sde": {"a": "0.5", "b": "0.08", "sigma": "1%", "eta": "0.7%",
                                          "phi": "3%", "rho": "-0.6", "x0": "0.4%", "y0": "-0.2%"},
    "affine_dunmore_index_variance.sde": {"mu": "3%", "kappa": "1.5", "theta": "0.04", "xi": "0.5",
                                          "rho": "-0.7", "S0": "100", "v0": "0.05"},
    "affine_fallow_explosive_variance.sde": {"mu": "3%", "kappa": "1.5", "theta": "0.04", "xi": "0.9",
                                             "rho": "0.5", "S0": "100", "v0": "0.05"},
}


def affine_parameters(file: str) -> dict[str, float]:
    text = (MODELS_DIR / file).read_text(encoding="utf-8")
    values = {}
    for name, literal in AFFINE_MODELS[file].items():
        if re.fullmatch(r"[a-zA-Z]+", name) and len(name) > 0 and not name.endswith("0") and name != "rho":
            if not re.search(rf"param\s+{name}\s*=\s*{re.escape(literal)}(?=\s|$)", text):
                raise ReferenceError(f"{file}: the transcription of {name} = {literal} does not match the file")
        values[name] = parse_literal(literal)
    return values


def vasicek_log_price(p: dict[str, float], t: float) -> float:
    k, th, s, r0 = p["kappa"], p["theta"], p["sigma"], p["r0"]
    b = (1 - math.exp(-k * t)) / k
    return (th - s * s / (2 * k * k)) * (b - t) - s * s * b * b / (4 * k) - b * r0


def cir_log_price(p: dict[str, float], t: float) -> float:
    k, th, s, r0 = p["kappa"], p["theta"], p["sigma"], p["r0"]
    h = math.sqrt(k * k + 2 * s * s)
    grow = math.expm1(h * t)
    denominator = 2 * h + (k + h) * grow
    b = 2 * grow / denominator
    ln_a = 2 * k * th / (s * s) * math.log(2 * h * math.exp((k + h) * t / 2) / denominator)
    return ln_a - b * r0


def g2_log_price(p: dict[str, float], t: float) -> float:
    a, b, s, e, rho = p["a"], p["b"], p["sigma"], p["eta"], p["rho"]

    def part(k: float, v: float) -> float:
        return v * v / (k * k) * (t + 2 / k * math.exp(-k * t) - 1 / (2 * k) * math.exp(-2 * k * t) - 3 / (2 * k))

    var = part(a, s) + part(b, e) + 2 * rho * s * e / (a * b) * (
        t + math.expm1(-a * t) / a + math.expm1(-b * t) / b - math.expm1(-(a + b) * t) / (a + b))
    return -p["phi"] * t - p["x0"] * (1 - math.exp(-a * t)) / a - p["y0"] * (1 - math.exp(-b * t)) / b + 0.5 * var


def heston_log_characteristic(p: dict[str, float], u: float, t: float) -> complex:
    mu, k, th, xi, rho, s0, v0 = (p[n] for n in ("mu", "kappa", "theta", "xi", "rho", "S0", "v0"))
    i = 1j
    d = np.sqrt((rho * xi * i * u - k) ** 2 + xi * xi * (i * u + u * u))
    g = (k - rho * xi * i * u - d) / (k - rho * xi * i * u + d)
    e = np.exp(-d * t)
    c = i * u * (math.log(s0) + mu * t) + k * th / (xi * xi) * (
        (k - rho * xi * i * u - d) * t - 2 * np.log((1 - g * e) / (1 - g)))
    dd = (k - rho * xi * i * u - d) / (xi * xi) * (1 - e) / (1 - g * e)
    return complex(c + dd * v0)


def heston_probability_below(p: dict[str, float], level: float, t: float) -> float:
    z = math.log(level)

    def integrand(u: float) -> float:
        return (np.exp(heston_log_characteristic(p, u, t) - 1j * u * z)).imag / u

    value, _ = integrate.quad(integrand, 0.0, np.inf, epsabs=1e-13, epsrel=1e-12, limit=500)
    return 0.5 - value / math.pi


def explosion_time(p: dict[str, float], u: float) -> float:
    k = p["rho"] * p["xi"] * u - p["kappa"]
    d = k * k - p["xi"] ** 2 * u * (u - 1)
    if d < 0:
        root = math.sqrt(-d)
        return 2 / root * ((math.pi if k < 0 else 0.0) + math.atan(root / k))
    if k > 0:
        root = math.sqrt(d)
        return math.log((k + root) / (k - root)) / root
    return math.inf


def law_records() -> list[dict]:
    records: list[dict] = []

    def add(file: str, check: str, factor: str | None, at: float | None, argument, value: float,
            source: str, rate: list[str] | None = None) -> None:
        records.append({"file": f"tests/reference/models/{file}", "check": check, "factor": factor,
                        "at": at, "argument": argument, "value": float(value), "source": source,
                        "rate": rate, "tolerance": TOLERANCE_EXACT})

    maturities = [0.25, 1.0, 5.0, 10.0, 30.0]
    f = "affine_alderley_vasicek_rate.sde"
    p = affine_parameters(f)
    for t in maturities:
        add(f, "bond_price", None, t, None, math.exp(vasicek_log_price(p, t)), SOURCE_VASICEK_BOND, ["r"])
    t = 1.0
    mean = p["theta"] + (p["r0"] - p["theta"]) * math.exp(-p["kappa"] * t)
    sd = math.sqrt(p["sigma"] ** 2 * (1 - math.exp(-2 * p["kappa"] * t)) / (2 * p["kappa"]))
    for q in (0.0, 0.02, 0.05):
        add(f, "cdf", "r", t, q, stats.norm.cdf(q, mean, sd), SOURCE_NORM)
    for prob in (0.01, 0.5, 0.99):
        add(f, "quantile", "r", t, prob, stats.norm.ppf(prob, mean, sd), SOURCE_NORM)

    f = "affine_bramble_cir_rate.sde"
    p = affine_parameters(f)
    for t in maturities:
        add(f, "bond_price", None, t, None, math.exp(cir_log_price(p, t)), SOURCE_CIR_BOND, ["r"])
    t = 2.0
    c = 2 * p["kappa"] / (p["sigma"] ** 2 * (1 - math.exp(-p["kappa"] * t)))
    df = 4 * p["kappa"] * p["theta"] / p["sigma"] ** 2
    nc = 2 * c * p["r0"] * math.exp(-p["kappa"] * t)
    for q in (0.01, 0.03, 0.08):
        add(f, "cdf", "r", t, q, stats.ncx2.cdf(2 * c * q, df, nc), SOURCE_NCX2)
    for prob in (0.01, 0.5, 0.99):
        add(f, "quantile", "r", t, prob, stats.ncx2.ppf(prob, df, nc) / (2 * c), SOURCE_NCX2)

    f = "affine_corrin_two_factor_rate.sde"
    p = affine_parameters(f)
    for t in maturities:
        add(f, "bond_price", None, t, None, math.exp(g2_log_price(p, t)), SOURCE_G2_BOND, ["x", "y", "phi"])

    f = "affine_dunmore_index_variance.sde"
    p = affine_parameters(f)
    t = 1.0
    for level in (80.0, 100.0, 120.0):
        add(f, "cdf", "S", t, level, heston_probability_below(p, level, t), SOURCE_HESTON)
    for prob in (0.05, 0.5, 0.95):
        from scipy.optimize import brentq
        level = brentq(lambda x: heston_probability_below(p, x, t) - prob, 20.0, 400.0, xtol=1e-13, rtol=1e-15)
        add(f, "quantile", "S", t, prob, level, SOURCE_HESTON)

    f = "affine_fallow_explosive_variance.sde"
    p = affine_parameters(f)
    for u in (2.0, 3.0):
        add(f, "explosion_time", "S", None, u, explosion_time(p, u), SOURCE_EXPLOSION)
    f = "gbm_osterlund_share.sde"
    mu, sigma, s0, t = 0.06, 0.22, 84.5, 2.0
    lognormal = stats.lognorm(s=sigma * math.sqrt(t), scale=s0 * math.exp((mu - sigma ** 2 / 2) * t))
    for level in (60.0, 84.5, 120.0):
        add(f, "cdf", "S", t, level, lognormal.cdf(level), SOURCE_LOGNORM)
    for prob in (0.01, 0.99):
        add(f, "quantile", "S", t, prob, lognormal.ppf(prob), SOURCE_LOGNORM)
    return records


def compute_all(errors: dict[str, str] | None = None) -> dict:
    """All records. With `errors`, a model that fails is noted there and skipped;
    without it, the first failure raises."""
    records = []
    for spec in MODELS:
        try:
            records.append(model_record(spec))
        except (ReferenceError, ArithmeticError, ValueError) as error:
            if errors is None:
                raise
            errors[spec.relative_path] = str(error)
    records.sort(key=lambda r: r["file"])
    return {
        "generated_by": "tests/reference/compute.py",
        "python": platform.python_version(),
        "scipy": scipy.__version__,
        "sympy": sp.__version__,
        "models": records,
        "laws": law_records(),
    }


def render(document: dict) -> str:
    # json writes floats with repr, so the output is exact and byte-for-byte stable.
    return json.dumps(document, indent=2, sort_keys=True, ensure_ascii=False, allow_nan=False) + "\n"


# --------------------------------------------------------------------------------------
# --check: recompute and compare with the committed file
# --------------------------------------------------------------------------------------


def compare_documents(expected: dict, actual: dict) -> list[str]:
    """Every difference between two documents, as readable lines."""
    problems: list[str] = []

    def compare(path: str, old, new, scale: float | None = None) -> None:
        if isinstance(old, dict) and isinstance(new, dict):
            for key in sorted(set(old) | set(new)):
                if key not in old:
                    problems.append(f"{path}.{key}: new entry {new[key]!r}")
                elif key not in new:
                    problems.append(f"{path}.{key}: missing (was {old[key]!r})")
                else:
                    compare(f"{path}.{key}", old[key], new[key], scale)
        elif isinstance(old, list) and isinstance(new, list):
            if len(old) != len(new):
                problems.append(f"{path}: length {len(old)} -> {len(new)}")
                return
            for k, (a, b) in enumerate(zip(old, new)):
                compare(f"{path}[{k}]", a, b, scale)
        elif isinstance(old, (int, float)) and isinstance(new, (int, float)) \
                and not isinstance(old, bool) and not isinstance(new, bool):
            bound = CHECK_TOLERANCE * max(abs(old), abs(new), scale or 0.0)
            if abs(old - new) > bound:
                problems.append(f"{path}: {old!r} -> {new!r} (relative change {abs(old - new) / max(abs(old), abs(new)):.3e})")
        elif old != new:
            problems.append(f"{path}: {old!r} -> {new!r}")

    for key in ("generated_by", "laws"):
        compare(key, expected.get(key), actual.get(key))
    old_models = {m.get("file"): m for m in expected.get("models", [])}
    new_models = {m["file"]: m for m in actual["models"]}
    for name in sorted(set(old_models) | set(new_models)):
        if name not in old_models:
            problems.append(f"{name}: not in expected.json")
            continue
        if name not in new_models:
            problems.append(f"{name}: in expected.json but no longer computed")
            continue
        old, new = old_models[name], new_models[name]
        # Covariance entries are compared on the scale of sd_i * sd_j, so that an
        # entry that is zero in exact arithmetic does not demand 1e-12 of itself.
        variances = [s.get("variance") or 0.0 for s in new.get("factors", [])]
        for key in sorted(set(old) | set(new)):
            if key == "factors" and isinstance(old.get(key), list) and len(old[key]) == len(new[key]):
                # A mean is compared on the scale of its standard deviation as well.
                for k, (state_old, state_new) in enumerate(zip(old[key], new[key])):
                    for field_name in sorted(set(state_old) | set(state_new)):
                        scale = None
                        if field_name == "mean":
                            scale = math.sqrt(abs(state_new.get("variance") or 0.0))
                        elif field_name == "stationary_mean":
                            scale = math.sqrt(abs(state_new.get("stationary_variance") or 0.0))
                        compare(f"{name}.factors[{k}].{field_name}", state_old.get(field_name),
                                state_new.get(field_name), scale)
            elif key == "covariance" and key in old and key in new:
                rows_old, rows_new = old[key], new[key]
                if len(rows_old) != len(rows_new):
                    problems.append(f"{name}.covariance: size changed")
                    continue
                for i, (row_old, row_new) in enumerate(zip(rows_old, rows_new)):
                    for j, (a, b) in enumerate(zip(row_old, row_new)):
                        scale = math.sqrt(abs(variances[i] * variances[j])) if i < len(variances) and j < len(variances) else 0.0
                        compare(f"{name}.covariance[{i}][{j}]", a, b, scale)
            else:
                compare(f"{name}.{key}", old.get(key), new.get(key))
    return problems


def run_check() -> int:
    try:
        expected = json.loads(EXPECTED_PATH.read_text(encoding="utf-8"))
    except (OSError, json.JSONDecodeError) as error:
        print(f"reference: cannot read {EXPECTED_PATH}: {error}", file=sys.stderr)
        return 1
    errors: dict[str, str] = {}
    actual = compute_all(errors)
    for key in ("python", "scipy", "sympy"):
        if expected.get(key) != actual[key]:
            print(f"note: expected.json was made with {key} {expected.get(key)}, this run has {actual[key]}")
    failed_models: set[str] = set()
    for file, message in sorted(errors.items()):
        print(f"failed: {message}")
        failed_models.add(file)
    # A model that could not be computed is reported above, not as "no longer computed".
    expected_without_errors = dict(expected)
    expected_without_errors["models"] = [m for m in expected.get("models", []) if m.get("file") not in errors]
    problems = compare_documents(expected_without_errors, actual)
    for problem in problems:
        print(f"changed: {problem}")
        failed_models.add(problem.split(".sde", 1)[0] + ".sde" if ".sde" in problem else problem.split(":")[0])
    total = len({m.get("file") for m in expected.get("models", [])} | {m["file"] for m in actual["models"]} | set(errors))
    failed = len(failed_models)
    print(f"reference: {total - failed} passed, {failed} failed")
    return 1 if failed_models else 0


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--check", action="store_true",
                        help="recompute and compare with the committed expected.json (exit 1 on change)")
    parser.add_argument("--verbose", action="store_true",
                        help="print the largest scaled gap of every agreement between two methods")
    arguments = parser.parse_args(argv)
    try:
        if arguments.check:
            status = run_check()
        else:
            status = None
            text = render(compute_all())
    except ReferenceError as error:
        print(f"reference: {error}", file=sys.stderr)
        return 1
    if arguments.verbose:
        for where, what, gap in AGREEMENT_GAPS:
            print(f"{gap:9.2e}  {where.removeprefix('tests/reference/models/')}: {what}")
    if status is not None:
        return status
    EXPECTED_PATH.write_text(text, encoding="utf-8")
    print(f"wrote {EXPECTED_PATH.relative_to(REPO_ROOT)}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
