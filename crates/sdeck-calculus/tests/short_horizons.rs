//! Laws at very short horizons stay cheap and right. A log-price driven by a
//! square-root variance is nearly constant over an hour; its characteristic function
//! then decays only at very high frequencies, and inverting it once took minutes per
//! quantile (found by the `moments` fuzz target). The check: over a short horizon t the
//! log-price is, to leading order, its first Euler step, ln S₀ + (mu − v₀/2)·t +
//! √(v₀·t)·Z (Kloeden & Platen 1992, §14.1: the Euler scheme's one-step law), so each
//! quantile matches that normal law up to a relative O(√t) correction.

use sdeck_calculus::{derive, laws};
use statrs::distribution::{ContinuousCDF, Normal};

const MODEL: &str = "\
model short_horizon
clock year
param mu    = 3%   [1/year]
param kappa = 1.5  [1/year]   > 0
param theta = 0.04 [1/year]   > 0
param xi    = 0.5  [1/year]   > 0
shock Ws, Wv
corr Ws, Wv = -0.7
factor S = 100
factor v = 0.05 [1/year] >= 0
dS = mu * S dt + sqrt(v) * S dWs
dv = kappa * (theta - v) dt + xi * sqrt(v) dWv
";

#[test]
fn quantiles_of_a_variance_driven_price_over_an_hour_and_a_minute() {
    let analysis = sdeck_semantics::analyze(MODEL, "short_horizon");
    assert!(!analysis.has_errors(), "{:?}", analysis.diagnostics);
    let model = &analysis.model;
    let derivation = derive(model);
    let s = model.factor_id("S").expect("S");
    let z = Normal::new(0.0, 1.0).expect("standard normal");
    // One hour and about half a minute, in years.
    for t in [1.0 / (365.0 * 24.0), 1e-6] {
        let law = laws::law_of(model, &derivation, s, t).expect("an affine law");
        let (v0, mu) = (0.05, 0.03);
        let centre = 100f64.ln() + (mu - v0 / 2.0) * t;
        let sd = (v0 * t).sqrt();
        for p in [0.01, 0.5, 0.99] {
            let q = law.quantile(p).expect("a quantile");
            let euler = centre + sd * z.inverse_cdf(p);
            let gap = (q.ln() - euler).abs();
            assert!(
                gap < 5.0 * t.sqrt() * sd,
                "t = {t}, p = {p}: {q} vs {}",
                euler.exp()
            );
            let back = law.cdf(q).expect("a probability");
            assert!((back - p).abs() < 1e-8, "t = {t}: P(S ≤ q{p}) = {back}");
        }
    }
}

#[test]
fn a_nearly_constant_law_answers_or_says_unknown_but_never_stalls() {
    let analysis = sdeck_semantics::analyze(MODEL, "short_horizon");
    let model = &analysis.model;
    let derivation = derive(model);
    let s = model.factor_id("S").expect("S");
    // A thirtieth of a second: the budget of transform evaluations ends the search.
    let law = laws::law_of(model, &derivation, s, 1e-9).expect("an affine law");
    for p in [0.01, 0.5, 0.99] {
        if let Some(q) = law.quantile(p) {
            assert!((q / 100.0 - 1.0).abs() < 1e-3, "{q}");
        }
    }
}

/// A factor with no shock of its own that integrates a geometric one, dY = c·S dt: its
/// variance near t = 0 is about S₀²σ²c²t³/3, far below the raw second moment (S₀ c t)², so
/// it is computed about the mean path. The reference is the closed form
/// Var[Y] = 2S₀²c²/(μ + σ²)·((e^{(2μ+σ²)t} − 1)/(2μ + σ²) − (e^{μt} − 1)/μ) − (S₀c(e^{μt} − 1)/μ)²
/// (E[Y²] = 2∫₀ᵗ∫₀ᵘ E[S_v S_u] dv du with E[S_v S_u] = S₀² e^{μ(u−v)} e^{(2μ+σ²)v}), the
/// values from sympy's exact integration evaluated to 20 digits, written here to 17.
#[test]
fn an_integrated_geometric_factor_keeps_its_variance_at_tiny_times() {
    let analysis = sdeck_semantics::analyze(
        "model integ
param mu = 5% [1/year]
param sig = 20% [1/sqrt(year)]
param c = 1 [1/year]
shock W
factor S = 100
factor Y = 0
dS = mu*S dt + sig*S dW
dY = c*S dt
",
        "integ",
    );
    assert!(!analysis.has_errors(), "{:#?}", analysis.diagnostics);
    let d = sdeck_calculus::derive(&analysis.model);
    for (t, expected) in [
        (1e-6, 1.3333334300000038e-16),
        (1e-3, 1.3334300038734445e-07),
        (1.0, 143.39871252238495),
    ] {
        let m = sdeck_calculus::moments_at(&analysis.model, &d, t);
        let variance = m.variance[1].expect("variance of Y");
        assert!(
            ((variance - expected) / expected).abs() < 1e-12,
            "t = {t}: {variance:e} vs {expected:e}"
        );
    }
}
