//! Family names that say what the law is: a positive slope is `linear`, not
//! Ornstein–Uhlenbeck; a factor that no shock drives is `deterministic`.

use sdeck_calculus::{derive, formulas, moments_at, Family};
use sdeck_semantics::analyze;
use sdeck_semantics::FactorId;

fn derived(source: &str) -> (sdeck_semantics::Model, sdeck_calculus::Derivation) {
    let analysis = analyze(source, "families");
    assert!(!analysis.has_errors(), "{:#?}", analysis.diagnostics);
    let derivation = derive(&analysis.model);
    (analysis.model, derivation)
}

fn assert_close(what: &str, actual: f64, expected: f64, relative: f64) {
    assert!(
        (actual - expected).abs() <= relative * expected.abs(),
        "{what}: {actual:e} vs {expected:e}"
    );
}

#[test]
fn a_positive_slope_is_linear_with_the_gaussian_closed_forms() {
    let (model, d) = derived(
        "
model runaway
param k = 0.35 [1/year]
param level = 1.2%
param vol = 0.6% [1/sqrt(year)]
shock W
factor x = 1.5%
dx = k * (x - level) dt + vol dW
",
    );
    let law = &d.states[0];
    assert_eq!(law.family, Family::Linear);
    assert!(law.reason.contains("positive slope"), "{}", law.reason);
    assert!(law.half_life.is_none());
    assert!(law.stationary.is_none());
    // Vasicek 1977, eqs. 23–25 with κ = −k: mean θ + (x0 − θ)e^{kt}, variance
    // σ²(e^{2kt} − 1)/(2k), for either sign of the slope.
    let (k, level, vol, x0, t): (f64, f64, f64, f64, f64) = (0.35, 0.012, 0.006, 0.015, 2.0);
    let m = moments_at(&model, &d, t);
    let mean = m.mean[0].expect("mean");
    let variance = m.variance[0].expect("variance");
    assert_close("mean", mean, level + (x0 - level) * (k * t).exp(), 1e-13);
    assert_close(
        "variance",
        variance,
        vol * vol * (2.0 * k * t).exp_m1() / (2.0 * k),
        1e-13,
    );
    let f = formulas(&model, &d, FactorId::new(0));
    assert!(f.stationary.is_none());
    assert_eq!(
        f.variance.as_deref(),
        Some("Var[x(t)] = vol²·(1 − e^(2·k·t))/(−2·k)")
    );
}

#[test]
fn a_factor_no_shock_drives_is_deterministic() {
    let (model, d) = derived(
        "
model accrual
unit GBP
param r = 2.5% [1/year]
param decay = 0.8 [1/year] > 0
param floor = 40 [GBP]
factor B = 1000 [GBP]
factor f = 120 [GBP]
dB = r * B dt
df = decay * (floor - f) dt
",
    );
    for law in &d.states {
        assert_eq!(law.family, Family::Deterministic, "{}", law.reason);
        assert!(law.reason.contains("no shock drives"), "{}", law.reason);
    }
    let t = 5.0_f64;
    let m = moments_at(&model, &d, t);
    assert_close(
        "B",
        m.mean[0].expect("mean"),
        1000.0 * (0.025 * t).exp(),
        1e-13,
    );
    assert_close(
        "f",
        m.mean[1].expect("mean"),
        40.0 + 80.0 * (-0.8 * t).exp(),
        1e-13,
    );
    assert_eq!(m.variance[0], Some(0.0));
    assert_eq!(m.variance[1], Some(0.0));
    // Growth has no half-life; decay towards the floor has ln 2/0.8.
    assert!(d.states[0].half_life.is_none());
    assert_close(
        "half-life",
        d.states[1].half_life.expect("half-life"),
        std::f64::consts::LN_2 / 0.8,
        1e-15,
    );
    let stationary = d.states[1].stationary.as_ref().expect("a fixed point");
    assert_eq!(stationary.law, "point mass at floor");
    assert_close("fixed point", stationary.mean, 40.0, 1e-15);
    let f = formulas(&model, &d, FactorId::new(0));
    assert_eq!(f.solution.as_deref(), Some("B(t) = B₀·e^(r·t)"));
    assert_eq!(f.variance.as_deref(), Some("Var[B(t)] = 0"));
    assert!(f.transition.is_none());
}

#[test]
fn a_deterministic_factor_with_a_moving_level_solves_its_equation() {
    let (model, d) = derived(
        "
model moving
param k = 2 [1/year]
factor x = 1%
dx = k * (ramp(t, 0 [year], 1%, 1 [year], 3%) - x) dt
",
    );
    assert_eq!(d.states[0].family, Family::Deterministic);
    // x' = k (L(t) − x) with L(t) = 0.01 + 0.02 t on [0, 1] and x(0) = L(0):
    // x(t) = L(t) − (0.02/k)(1 − e^{−kt}) (integrating factor, solved by hand).
    let t = 0.5_f64;
    let m = moments_at(&model, &d, t);
    let expected = 0.01 + 0.02 * t - 0.02 / 2.0 * (1.0 - (-2.0 * t).exp());
    assert_close("mean", m.mean[0].expect("mean"), expected, 1e-10);
    assert_eq!(m.variance[0], Some(0.0));
}

#[test]
fn a_general_factor_with_an_affine_drift_has_an_exact_mean_and_no_variance() {
    // The diffusion g·S·v is not affine in the factors: no family applies to S, but
    // E[S(t)] = S₀·e^{μt} from m′ = μ·m (Kloeden & Platen 1992, §4.2).
    let (model, d) = derived(
        "
model partial
param mu = 5% [1/year]
param k = 1.5 [1/year]
param theta = 4%
param xi = 30% [1/sqrt(year)]
param g = 4 [1/sqrt(year)]
shock W
shock B
factor S = 100
factor v = 4%
dv = k * (theta - v) dt + xi * sqrt(v) dB
dS = mu * S dt + g * S * v dW
",
    );
    let s = 0;
    assert_eq!(
        d.states[s].family,
        Family::General,
        "{}",
        d.states[s].reason
    );
    assert!(
        d.states[s].reason.contains("its mean follows from"),
        "{}",
        d.states[s].reason
    );
    let t = 2.0_f64;
    let m = moments_at(&model, &d, t);
    assert_close(
        "E[S]",
        m.mean[s].expect("mean"),
        100.0 * (0.05 * t).exp(),
        1e-14,
    );
    assert_eq!(m.variance[s], None);
    assert!(m.exact[s]);
}

#[test]
fn a_drift_that_is_not_affine_gives_no_mean() {
    let (model, d) = derived(
        "
model logistic
param r = 0.8 [1/year]
param s = 20% [1/sqrt(year)]
shock W
factor c = 0.3
dc = r * c * (1 - c) dt + s * c * (1 - c) dW
",
    );
    assert_eq!(d.states[0].family, Family::General);
    assert!(!d.states[0].reason.contains("its mean follows from"));
    let m = moments_at(&model, &d, 1.0);
    assert_eq!(m.mean[0], None);
    assert!(!m.exact[0]);
}

#[test]
fn a_factor_that_trails_a_general_one_has_an_exact_mean_from_the_linear_equations() {
    // S has no family (its diffusion caps the variance with `min`), q follows it with
    // dq = a·(S − q) dt. Both drifts are affine, so m′ = A·m + b gives
    // E[q(t)] = 15000/151·e^{t/25} − 202/151·e^{−6t} (sympy dsolve of
    // q′ = 6·(100·e^{0.04t} − q), q(0) = 98), evaluated to 20 digits.
    let (model, d) = derived(
        "
model trailing
param kappa = 1.5 [1/year]
param theta = 0.04 [1/year]
param xi = 0.3 [1/year]
param vmax = 0.09 [1/year]
param mu = 4% [1/year]
param a = 6 [1/year]
shock Wv, Ws
factor v = 0.05 [1/year]
factor S = 100
factor q = 98
dv = kappa * (theta - v) dt + xi * sqrt(v) dWv
dS = mu * S dt + S * sqrt(min(v, vmax)) dWs
dq = a * (S - q) dt
",
    );
    let q = model.factor_id("q").expect("q");
    assert_eq!(d.states[q].family, Family::General);
    assert!(
        d.states[q]
            .reason
            .contains("the drift of q is affine in the factors, and so are those of S"),
        "{}",
        d.states[q].reason
    );
    for (t, expected) in [(0.5, 101.277_901_407_887_61), (2.0, 107.611_289_893_996_58)] {
        let m = moments_at(&model, &d, t);
        assert_close(
            "E[q]",
            m.mean[q.index()].expect("mean of q"),
            expected,
            1e-13,
        );
        assert_eq!(m.variance[q.index()], None);
        assert!(m.exact[q.index()]);
        let one = sdeck_calculus::state_figures(&model, &d, q, t);
        assert_eq!(
            one.mean,
            m.mean[q.index()],
            "one factor alone gives the same mean"
        );
    }
}

#[test]
fn a_drift_that_reaches_a_non_affine_drift_gives_no_mean() {
    // q trails c, whose logistic drift is not affine: m′ = A·m + b does not close.
    let (model, d) = derived(
        "
model trailing_logistic
param r = 0.8 [1/year]
param s = 20% [1/sqrt(year)]
param a = 2 [1/year]
shock W, B
factor c = 0.3
factor q = 0.3
dc = r * c * (1 - c) dt + s * c * (1 - c) dW
dq = a * (c - q) dt + s * q * (1 - q) dB
",
    );
    let q = model.factor_id("q").expect("q");
    assert_eq!(d.states[q].family, Family::General);
    assert!(!d.states[q].reason.contains("its mean follows from"));
    assert_eq!(moments_at(&model, &d, 1.0).mean[q.index()], None);
}
