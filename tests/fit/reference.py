"""Reference maximum-likelihood fits made with scipy alone, for checking `sdeck fit`.

The likelihoods are written from the published transition laws with scipy's densities:
- Ornstein–Uhlenbeck (Vasicek 1977): X_{t+Δ} | x ~ N(θ + (x − θ)e^{−κΔ}, σ²(1 − e^{−2κΔ})/(2κ));
- square-root (Cox, Ingersoll & Ross 1985, eq. 18): with c = 2κ/(σ²(1 − e^{−κΔ})),
  2c X_{t+Δ} | x is noncentral chi-square with 4κθ/σ² degrees of freedom and
  noncentrality 2c x e^{−κΔ}, so ln p(y | x) = ln 2c + ncx2.logpdf(2c y).
scipy.optimize.minimize (Nelder–Mead, tight tolerances, on log κ and log σ) maximises
them; standard errors come from a central-difference Hessian of the negative
log-likelihood at the optimum.
"""

import numpy as np
from scipy import optimize, stats


def ou_negloglik(params, t, x):
    kappa, theta, sigma = params
    if kappa <= 0 or sigma <= 0:
        return np.inf
    dt = np.diff(t)
    decay = np.exp(-kappa * dt)
    mean = theta + (x[:-1] - theta) * decay
    var = sigma**2 * (1 - decay**2) / (2 * kappa)
    return -np.sum(stats.norm.logpdf(x[1:], loc=mean, scale=np.sqrt(var)))


def cir_negloglik(params, t, x):
    kappa, theta, sigma = params
    if kappa <= 0 or sigma <= 0 or theta <= 0:
        return np.inf
    dt = np.diff(t)
    c = 2 * kappa / (sigma**2 * (1 - np.exp(-kappa * dt)))
    df = 4 * kappa * theta / sigma**2
    nc = 2 * c * x[:-1] * np.exp(-kappa * dt)
    value = -np.sum(np.log(2 * c) + stats.ncx2.logpdf(2 * c * x[1:], df, nc))
    return value if np.isfinite(value) else np.inf


# Tolerances the search can meet: a log-likelihood of hundreds of terms is only exact to
# about 1e-12 of its size (hundreds to thousands here), so an absolute `fatol` of 1e-13
# was never met and every search ran to `maxfev` (80,000 evaluations, minutes). 1e-10 on
# the parameters (log κ, θ, log σ) is four orders inside the 1e-6 the tests compare at.
NELDER_MEAD = {"xatol": 1e-10, "fatol": 1e-9, "maxiter": 40000, "maxfev": 80000}


def restarted_nelder_mead(objective, u, restarts=3):
    """Nelder–Mead from `u`, restarted from its own result (a fresh simplex) until a
    restart no longer moves it, at most `restarts` times."""
    for _ in range(restarts):
        result = optimize.minimize(objective, u, method="Nelder-Mead", options=NELDER_MEAD)
        moved = np.max(np.abs(result.x - u)) > NELDER_MEAD["xatol"]
        u = result.x
        if not moved:
            break
    return u


def ar1_start(t, x):
    """κ, θ, σ from the AR(1) regression at the mean step (a moment estimate)."""
    dt = np.mean(np.diff(t))
    slope, intercept = np.polyfit(x[:-1], x[1:], 1)
    slope = min(max(slope, 1e-3), 1 - 1e-6)
    kappa = -np.log(slope) / dt
    theta = intercept / (1 - slope)
    resid = x[1:] - intercept - slope * x[:-1]
    sigma = np.sqrt(np.var(resid) * 2 * kappa / (1 - slope**2))
    return kappa, theta, sigma


def maximise(negloglik, t, x, start, square_root=False):
    """(κ, θ, σ) maximising the likelihood, searched on (ln κ, θ, ln σ)."""
    if square_root:
        # σ of a square-root factor is a vol per sqrt(level): rescale the Gaussian start.
        start = (start[0], start[1], start[2] / np.sqrt(max(np.mean(x), 1e-12)))

    def objective(u):
        return negloglik((np.exp(u[0]), u[1], np.exp(u[2])), t, x)

    u = np.array([np.log(start[0]), start[1], np.log(start[2])])
    u = restarted_nelder_mead(objective, u)
    return np.array([np.exp(u[0]), u[1], np.exp(u[2])])


def standard_errors(negloglik, t, x, theta_hat, step=1e-4):
    """sqrt of the diagonal of the inverse central-difference Hessian."""
    k = len(theta_hat)
    h = step * np.maximum(np.abs(theta_hat), 1e-8)
    f = lambda p: negloglik(p, t, x)
    hessian = np.zeros((k, k))
    for i in range(k):
        for j in range(k):
            def shifted(si, sj):
                p = np.array(theta_hat, dtype=float)
                p[i] += si * h[i]
                p[j] += sj * h[j]
                return f(p)

            hessian[i, j] = (
                shifted(1, 1) - shifted(1, -1) - shifted(-1, 1) + shifted(-1, -1)
            ) / (4 * h[i] * h[j])
    return np.sqrt(np.diag(np.linalg.inv(hessian)))


def simulate_cir(rng, n, dt, kappa, theta, sigma, x0):
    """Exact sampling of the square-root transition (Glasserman 2004, §3.4.1)."""
    x = np.empty(n)
    x[0] = x0
    c = 2 * kappa / (sigma**2 * (1 - np.exp(-kappa * dt)))
    df = 4 * kappa * theta / sigma**2
    for i in range(1, n):
        x[i] = rng.noncentral_chisquare(df, 2 * c * x[i - 1] * np.exp(-kappa * dt)) / (2 * c)
    return x


def simulate_ou(rng, n, dt, kappa, theta, sigma, x0):
    x = np.empty(n)
    x[0] = x0
    decay = np.exp(-kappa * dt)
    sd = sigma * np.sqrt((1 - decay**2) / (2 * kappa))
    for i in range(1, n):
        x[i] = theta + (x[i - 1] - theta) * decay + sd * rng.standard_normal()
    return x


def gaussian_varying_negloglik(drift, params, t, x, knots, slope, noise):
    """−Σ ln N(y; G x + M, V) for dX = (a(s) + b X) dt + √α dW with a time-dependent
    a(s) and constant slope b and noise α: G = e^{bΔ}, M = ∫ e^{b(t₁−s)} a(s) ds by
    scipy.integrate.quad with the knots of the schedule passed as `points` (so that each
    piece it integrates is smooth), V = α (e^{2bΔ} − 1)/(2b) (α Δ when b = 0)
    (Kloeden & Platen 1992, §4.2). `drift(params, s)`, `slope(params)` and
    `noise(params)` give a(s), b and α."""
    from scipy import integrate

    b, alpha = slope(params), noise(params)
    if not (alpha > 0 and np.isfinite(b)):
        return np.inf
    total = 0.0
    for t0, t1, x0, x1 in zip(t[:-1], t[1:], x[:-1], x[1:]):
        inside = [k for k in knots if t0 < k < t1]
        m, _ = integrate.quad(
            lambda s: np.exp(b * (t1 - s)) * drift(params, s),
            t0,
            t1,
            points=inside or None,
            epsabs=0.0,
            epsrel=1e-12,
        )
        dt = t1 - t0
        v = alpha * (np.expm1(2 * b * dt) / (2 * b) if b != 0 else dt)
        total += stats.norm.logpdf(x1, loc=np.exp(b * dt) * x0 + m, scale=np.sqrt(v))
    return -total


def maximise_plain(negloglik, start, positive):
    """Nelder–Mead with tight tolerances on the parameters, with ln of those marked
    `positive`; repeated from its own result until it stops moving."""
    start = np.asarray(start, dtype=float)
    positive = np.asarray(positive, dtype=bool)
    to_u = lambda p: np.where(positive, np.log(np.abs(p)), p)
    to_p = lambda u: np.where(positive, np.exp(u), u)
    u = to_u(start)
    return to_p(restarted_nelder_mead(lambda v: negloglik(to_p(v)), u))


def hessian_errors(negloglik, theta_hat, step=1e-4):
    """sqrt of the diagonal of the inverse central-difference Hessian of `negloglik`."""
    return standard_errors(lambda p, _t, _x: negloglik(p), None, None, theta_hat, step)
