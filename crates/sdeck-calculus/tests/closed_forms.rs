//! Closed forms, classification and quantiles of one-state models, parsed from text and
//! checked against the published formulas and against scipy.

use sdeck_calculus::{autocovariance, derive, moments_at, quantile, Derivation, Family, Method};
use sdeck_semantics::FactorId;
use sdeck_semantics::{analyze, Model};

fn model(source: &str) -> Model {
    let analysis = analyze(source, "test_model");
    assert!(
        !analysis.has_errors(),
        "the test model analyses cleanly: {:#?}",
        analysis.diagnostics
    );
    analysis.model
}

fn derived(source: &str) -> (Model, Derivation) {
    let m = model(source);
    let d = derive(&m);
    (m, d)
}

fn close(actual: f64, expected: f64, relative: f64) -> bool {
    (actual - expected).abs() <= relative * expected.abs().max(f64::MIN_POSITIVE)
}

fn assert_close(what: &str, actual: f64, expected: f64, relative: f64) {
    assert!(
        close(actual, expected, relative),
        "{what}: {actual:e} vs expected {expected:e} (relative {:e})",
        ((actual - expected) / expected).abs()
    );
}

const VASICEK: &str = "
model brackenridge_rate
param kappa = 1.5 [1/year] > 0
param level = 4%
param vol = 1% [1/sqrt(year)] > 0
shock W
factor r = 2%
dr = kappa * (level - r) dt + vol dW
";

#[test]
fn ornstein_uhlenbeck_mean_and_variance_follow_vasicek() {
    // Vasicek 1977, J. Financial Economics 5, conditional moments of the rate:
    // E[r_t] = θ + (r₀ − θ) e^{−κt}, Var[r_t] = σ² (1 − e^{−2κt}) / (2κ).
    let (m, d) = derived(VASICEK);
    let law = &d.states[0];
    assert_eq!(law.family, Family::OrnsteinUhlenbeck);
    assert_eq!(law.method, Method::ClosedForm);
    assert!(law.reason.contains("negative slope"), "{}", law.reason);
    let (kappa, theta, sigma, r0) = (1.5_f64, 0.04_f64, 0.01_f64, 0.02_f64);
    for t in [0.1, 1.0, 2.0, 10.0] {
        let moments = moments_at(&m, &d, t);
        let mean = theta + (r0 - theta) * (-kappa * t).exp();
        let variance = sigma * sigma * (1.0 - (-2.0 * kappa * t).exp()) / (2.0 * kappa);
        assert_close("mean", moments.mean[0].expect("mean"), mean, 1e-13);
        assert_close(
            "variance",
            moments.variance[0].expect("variance"),
            variance,
            1e-13,
        );
    }
    // Half-life ln 2 / κ and the stationary law Normal(θ, σ²/(2κ)) (Vasicek 1977).
    assert_close(
        "half-life",
        law.half_life.expect("half-life"),
        2f64.ln() / kappa,
        1e-15,
    );
    let stationary = law.stationary.as_ref().expect("stationary law");
    assert_close("stationary mean", stationary.mean, theta, 1e-14);
    assert_close(
        "stationary variance",
        stationary.variance,
        sigma * sigma / (2.0 * kappa),
        1e-14,
    );
    assert_eq!(stationary.law, "Normal(level, vol²/(2·kappa))");
}

#[test]
fn ornstein_uhlenbeck_quantile_and_autocovariance() {
    let (m, d) = derived(VASICEK);
    // scipy.stats.norm.ppf(0.95, m, sqrt(v)) at t = 2 with the moments above.
    let q = quantile(&m, &d, FactorId::new(0), 2.0, 0.95).expect("Gaussian quantile");
    assert_close("95% quantile", q, 0.048489048355086946, 1e-12);
    // Cov(r_s, r_t) = σ²/(2κ) (e^{−κ(t−s)} − e^{−κ(t+s)}) (Vasicek 1977).
    let (kappa, sigma) = (1.5_f64, 0.01_f64);
    let (s, t) = (0.7, 1.9);
    let expected =
        sigma * sigma / (2.0 * kappa) * ((-kappa * (t - s)).exp() - (-kappa * (t + s)).exp());
    let value = autocovariance(&m, &d, FactorId::new(0), s, t).expect("autocovariance");
    assert_close("autocovariance", value, expected, 1e-13);
}

#[test]
fn ornstein_uhlenbeck_formulas_use_the_model_names() {
    let (m, d) = derived(VASICEK);
    let formulas = sdeck_calculus::formulas(&m, &d, FactorId::new(0));
    assert_eq!(
        formulas.solution.as_deref(),
        Some("r(t) = level + (r₀ − level)·e^(−kappa·t) + vol·∫₀ᵗ e^(−kappa·(t − s)) dW(s)")
    );
    assert_eq!(
        formulas.variance.as_deref(),
        Some("Var[r(t)] = vol²·(1 − e^(−2·kappa·t))/(2·kappa)")
    );
}

const SQUARE_ROOT: &str = "
model fenwick_hazard
param kappa = 0.8 [1/year] > 0
param level = 5%
param vol = 0.12 [1/sqrt(year)] > 0
shock W
factor h = 3% >= 0
dh = kappa * (level - h) dt + vol * sqrt(h) dW
";

#[test]
fn square_root_moments_and_law_follow_cox_ingersoll_ross() {
    let (m, d) = derived(SQUARE_ROOT);
    let law = &d.states[0];
    assert_eq!(law.family, Family::SquareRoot);
    let params = law.square_root.as_ref().expect("square-root parameters");
    assert_close("speed", params.speed, 0.8, 1e-15);
    assert_close("level", params.level, 0.05, 1e-14);
    assert_close("vol", params.vol, 0.12, 1e-15);
    // Mean and variance of the noncentral chi-square law scaled by 1/(2c), from
    // scipy.stats.ncx2.mean/var with df = 4κθ/σ², nc = 2c·x₀·e^{−κt},
    // c = 2κ/(σ²(1 − e^{−κt})) (Cox, Ingersoll & Ross 1985, Econometrica 53, eq. 18).
    let moments = moments_at(&m, &d, 1.5);
    assert_close(
        "mean",
        moments.mean[0].expect("mean"),
        0.04397611576175597,
        1e-12,
    );
    assert_close(
        "variance",
        moments.variance[0].expect("variance"),
        0.0003334054679155602,
        1e-11,
    );
    // Quantiles: scipy.stats.ncx2.ppf(p, df, nc) / (2c).
    let low = quantile(&m, &d, FactorId::new(0), 1.5, 0.01).expect("1% quantile");
    let high = quantile(&m, &d, FactorId::new(0), 1.5, 0.99).expect("99% quantile");
    assert_close("1% quantile", low, 0.012556501066211886, 1e-9);
    assert_close("99% quantile", high, 0.09680506387324582, 1e-9);
    // Gamma stationary law, shape 2κθ/σ², scale σ²/(2κ): mean θ, variance θσ²/(2κ)
    // (Cox, Ingersoll & Ross 1985, steady-state density).
    let stationary = law.stationary.as_ref().expect("stationary law");
    assert_close("stationary mean", stationary.mean, 0.05, 1e-14);
    assert_close(
        "stationary variance",
        stationary.variance,
        0.05 * 0.12 * 0.12 / 1.6,
        1e-13,
    );
    assert_eq!(
        stationary.law,
        "Gamma(shape 2·kappa·level/vol², scale vol²/(2·kappa))"
    );
}

#[test]
fn square_root_written_inside_the_root_is_the_same_family() {
    // sqrt(vol^2 * h) is vol·sqrt(h) for vol > 0.
    let text = SQUARE_ROOT.replace("vol * sqrt(h) dW", "sqrt(vol^2 * h) dW");
    let (m, d) = derived(&text);
    assert_eq!(d.states[0].family, Family::SquareRoot);
    let (m0, d0) = derived(SQUARE_ROOT);
    let a = moments_at(&m, &d, 0.75);
    let b = moments_at(&m0, &d0, 0.75);
    assert_eq!(a.mean, b.mean);
    assert_close(
        "variance",
        a.variance[0].expect("variance"),
        b.variance[0].expect("variance"),
        1e-14,
    );
}

const GEOMETRIC: &str = "
model tarrow_share
param mu = 7% [1/year]
param sigma = 25% [1/sqrt(year)] > 0
shock W
factor S = 40 > 0
dS = mu * S dt + sigma * S dW
";

#[test]
fn geometric_brownian_is_lognormal() {
    let (m, d) = derived(GEOMETRIC);
    assert_eq!(d.states[0].family, Family::GeometricBrownian);
    assert!(d.states[0].half_life.is_none());
    assert!(d.states[0].stationary.is_none());
    // Glasserman 2004, Monte Carlo Methods in Financial Engineering, §3.2.1:
    // E[S_t] = S₀ e^{μt}, Var[S_t] = S₀² e^{2μt}(e^{σ²t} − 1); values from
    // scipy.stats.lognorm(s = σ√t, scale = S₀ e^{(μ − σ²/2)t}).
    let moments = moments_at(&m, &d, 3.0);
    assert_close(
        "mean",
        moments.mean[0].expect("mean"),
        49.347122398269725,
        1e-13,
    );
    assert_close(
        "variance",
        moments.variance[0].expect("variance"),
        502.1992179589994,
        1e-12,
    );
    let q05 = quantile(&m, &d, FactorId::new(0), 3.0, 0.05).expect("quantile");
    let median = quantile(&m, &d, FactorId::new(0), 3.0, 0.5).expect("median");
    assert_close("5% quantile", q05, 22.040616172203706, 1e-12);
    assert_close("median", median, 44.93106624791335, 1e-13);
}

#[test]
fn linear_with_multiplicative_noise_follows_the_moment_equations() {
    // Kloeden & Platen 1992, Numerical Solution of SDEs, §4.2: for
    // dX = (a + bX) dt + (c + dX) dW, m' = a + b m and
    // v' = (c + d m)² + (2b + d²) v. Reference: scipy.integrate.solve_ivp (DOP853,
    // rtol 1e-13) on those equations with a = 0.02, b = −0.9, c = 0.01, d = 0.3.
    let source = "
model holloway_index
param a = 0.02 [1/year]
param b = -0.9 [1/year]
param c = 0.01 [1/sqrt(year)]
param d = 0.3 [1/sqrt(year)]
shock W
factor x = 0.05
dx = (a + b * x) dt + (c + d * x) dW
";
    let (m, d) = derived(source);
    let law = &d.states[0];
    assert_eq!(law.family, Family::Linear);
    assert_eq!(law.method, Method::MomentEquations);
    let moments = moments_at(&m, &d, 1.25);
    assert_close(
        "mean",
        moments.mean[0].expect("mean"),
        0.031240346315509707,
        1e-12,
    );
    assert_close(
        "variance",
        moments.variance[0].expect("variance"),
        0.00022385266252204387,
        1e-10,
    );
    // Stationary moments: m∞ = −a/b, v∞ = −(c + d m∞)²/(2b + d²) (fixed point of the
    // same equations).
    let stationary = law.stationary.as_ref().expect("stationary");
    let mean = 0.02 / 0.9;
    assert_close("stationary mean", stationary.mean, mean, 1e-14);
    let expected = (0.01 + 0.3 * mean).powi(2) / (1.8 - 0.09);
    assert_close("stationary variance", stationary.variance, expected, 1e-13);
}

#[test]
fn a_tiny_slope_gives_the_arithmetic_brownian_limit() {
    // As κ → 0 the OU mean and variance tend to x₀ + κθ t and σ² t; with expm1-based
    // forms there is no cancellation (common practice, no source).
    let source = "
model stillwater_drift
param kappa = 1e-13 [1/year]
param target = 2e11
param vol = 0.3 [1/sqrt(year)]
shock W
factor x = 1
dx = kappa * (target - x) dt + vol dW
";
    let (m, d) = derived(source);
    assert_eq!(d.states[0].family, Family::OrnsteinUhlenbeck);
    let t = 2.0;
    let moments = moments_at(&m, &d, t);
    let drift = 1e-13 * 2e11;
    // First-order corrections are of size κ t ≈ 2e-13 relative.
    assert_close(
        "mean",
        moments.mean[0].expect("mean"),
        1.0 + drift * t,
        1e-12,
    );
    assert_close(
        "variance",
        moments.variance[0].expect("variance"),
        0.09 * t,
        1e-12,
    );
}

#[test]
fn quadrature_agrees_with_the_closed_form() {
    // cos(0 * freq * t) is 1 but depends on t structurally, and a cosine is not one of
    // the elementary shapes, which forces the quadrature path.
    let forced = VASICEK
        .replace("vol dW", "vol * cos(0 * freq * t) dW")
        .replace("shock W", "param freq = 1 [1/year]\nshock W");
    let (m, d) = derived(&forced);
    assert_eq!(d.states[0].family, Family::Linear);
    assert_eq!(d.states[0].method, Method::Quadrature);
    let (m0, d0) = derived(VASICEK);
    for t in [0.3, 1.0, 4.0] {
        let a = moments_at(&m, &d, t);
        let b = moments_at(&m0, &d0, t);
        assert_eq!(a.method[0], Method::Quadrature);
        assert_close(
            "mean",
            a.mean[0].expect("mean"),
            b.mean[0].expect("mean"),
            1e-10,
        );
        assert_close(
            "variance",
            a.variance[0].expect("variance"),
            b.variance[0].expect("variance"),
            1e-10,
        );
    }
}

#[test]
fn elementary_time_dependence_has_a_closed_form() {
    // Level moving linearly and a volatility decaying like e^{−λt}:
    // m(t) = x₀e^{−κt} + ∫₀ᵗ e^{−κ(t−s)} κ(a + c s) ds
    //      = x₀e^{−κt} + (a − c/κ)(1 − e^{−κt}) + c t,
    // v(t) = σ² (e^{−2λt} − e^{−2κt}) / (2κ − 2λ)
    // (Kloeden & Platen 1992, §4.2, integrating factor; integrals by hand).
    let source = "
model rowan_drift
param kappa = 1.4 [1/year]
param base = 2%
param slope = 0.5% [1/year]
param sigma = 1% [1/sqrt(year)]
param lam = 0.3 [1/year]
shock W
factor x = 3%
dx = kappa * (base + slope * t - x) dt + sigma * exp(-lam * t) dW
";
    let (m, d) = derived(source);
    assert_eq!(d.states[0].family, Family::Linear);
    assert_eq!(d.states[0].method, Method::ClosedForm);
    let (kappa, a, c, sigma, lam, x0) = (1.4_f64, 0.02, 0.005, 0.01_f64, 0.3_f64, 0.03);
    for t in [0.25_f64, 2.0, 7.0] {
        let mean = x0 * (-kappa * t).exp() + (a - c / kappa) * (1.0 - (-kappa * t).exp()) + c * t;
        let variance = sigma * sigma * ((-2.0 * lam * t).exp() - (-2.0 * kappa * t).exp())
            / (2.0 * kappa - 2.0 * lam);
        let moments = moments_at(&m, &d, t);
        assert_eq!(moments.method[0], Method::ClosedForm);
        assert_close("mean", moments.mean[0].expect("mean"), mean, 1e-13);
        assert_close(
            "variance",
            moments.variance[0].expect("variance"),
            variance,
            1e-12,
        );
    }
    // The level moves but the slope −κ is constant: the half-life is still ln 2/κ.
    assert_close(
        "half-life",
        d.states[0].half_life.expect("half-life"),
        2f64.ln() / kappa,
        1e-15,
    );
    assert!(d.states[0].stationary.is_none());
}

#[test]
fn time_dependent_slope_agrees_with_the_integrated_moment_equations() {
    // b(t) = −(k + a·sin(2π f t)) varies, so the integrating factor is itself a
    // quadrature; the same moments come from integrating m' = c + b m and
    // v' = 2b v + σ(t)² with the Dormand–Prince integrator (Kloeden & Platen 1992, §4.2).
    let source = "
model tidewell_load
param k = 1.1 [1/year]
param a = 0.6 [1/year]
param f = 1 [1/year]
param c = 0.03 [1/year]
param s = 0.02 [1/sqrt(year)]
shock W
factor x = 0.01
dx = (c - (k + a * sin(2 * pi * f * t)) * x) dt + s * cos(pi * f * t) dW
";
    let (m, d) = derived(source);
    assert_eq!(d.states[0].family, Family::Linear);
    assert_eq!(d.states[0].method, Method::Quadrature);
    assert_eq!(d.states[0].half_life, None);
    let tau = 2.0 * std::f64::consts::PI;
    let pi = std::f64::consts::PI;
    let end = sdeck_calculus::ode::integrate(
        |t, y: &[f64], dy: &mut [f64]| {
            let b = -(1.1 + 0.6 * (tau * t).sin());
            let vol = 0.02 * (pi * t).cos();
            dy[0] = 0.03 + b * y[0];
            dy[1] = 2.0 * b * y[1] + vol * vol;
        },
        &[0.01, 0.0],
        0.0,
        1.7,
        1e-12,
        1e-18,
    )
    .expect("integrates");
    let moments = moments_at(&m, &d, 1.7);
    assert_close("mean", moments.mean[0].expect("mean"), end[0], 1e-9);
    assert_close(
        "variance",
        moments.variance[0].expect("variance"),
        end[1],
        1e-9,
    );
}

#[test]
fn two_correlated_noises_combine_their_variances() {
    // Var rate of s1 dW1 + s2 dW2 with dW1 dW2 = ρ dt is s1² + s2² + 2ρ s1 s2
    // (Itô isometry; common practice, no source).
    let source = "
model dunmore_rate
param kappa = 2 [1/year]
param s1 = 1% [1/sqrt(year)]
param s2 = 0.5% [1/sqrt(year)]
shock W1, W2
corr W1 W2 = -0.3
factor r = 1%
dr = -kappa * r dt + s1 dW1 + s2 dW2
";
    let (m, d) = derived(source);
    assert_eq!(d.states[0].family, Family::OrnsteinUhlenbeck);
    let rate = 0.01_f64.powi(2) + 0.005_f64.powi(2) - 2.0 * 0.3 * 0.01 * 0.005;
    let t: f64 = 0.8;
    let expected = rate * (1.0 - (-4.0 * t).exp()) / 4.0;
    let moments = moments_at(&m, &d, t);
    assert_close(
        "variance",
        moments.variance[0].expect("variance"),
        expected,
        1e-13,
    );
}

#[test]
fn families_are_recognised_structurally() {
    let cases = [
        ("dx = mu dt + vol dW", Family::ArithmeticBrownian),
        ("dx = mu * x dt + vol * x dW", Family::GeometricBrownian),
        ("dx = (mu - vol * x) dt + vol dW", Family::OrnsteinUhlenbeck),
        (
            "dx = mu * (1 - x) dt + vol * sqrt(x) dW",
            Family::SquareRoot,
        ),
        ("dx = (mu - x) dt + (vol + vol * x) dW", Family::Linear),
        ("dx = (mu - x) dt + vol * t dW", Family::Linear),
        ("dx = -x dt + sqrt(vol + vol * x^2) dW", Family::Polynomial),
        ("dx = -x^2 dt + vol dW", Family::General),
        ("dx = -x dt + vol * exp(x) dW", Family::General),
        ("dx = -x dt + vol * x^2 dW", Family::General),
    ];
    for (equation, family) in cases {
        let source = format!(
            "model kinds\nparam mu = 0.1 [1/year]\nparam vol = 0.2 [1/sqrt(year)]\n\
             shock W\nfactor x = 1\n{equation}\n"
        );
        // Dimension checks may object to some of these shapes; classification does not
        // depend on them, so only the model is used here.
        let analysis = analyze(&source, "kinds");
        let d = derive(&analysis.model);
        assert_eq!(
            d.states[0].family, family,
            "{equation}: {}",
            d.states[0].reason
        );
        if family == Family::General {
            assert_eq!(d.states[0].method, Method::None);
            assert!(
                d.states[0].reason.contains("no closed form"),
                "{}",
                d.states[0].reason
            );
        }
    }
}

#[test]
fn general_family_names_the_offending_term() {
    let analysis = analyze(
        "model odd\nparam k = 1 [1/year]\nshock W\nfactor x = 1\ndx = -k * x dt + exp(x) dW\n",
        "odd",
    );
    let d = derive(&analysis.model);
    assert_eq!(d.states[0].family, Family::General);
    assert!(
        d.states[0].reason.contains("exp(x)"),
        "{}",
        d.states[0].reason
    );
    // The drift −k·x is affine in x: the mean still follows from m′ = −k·m (a partial
    // result), the variance does not.
    let moments = moments_at(&analysis.model, &d, 1.0);
    let mean = moments.mean[0].expect("the mean of an affine drift");
    assert!((mean - (-1.0_f64).exp()).abs() < 1e-15, "{mean}");
    assert_eq!(moments.variance[0], None);
}

#[test]
fn unresolved_equation_is_general_without_figures() {
    let analysis = analyze(
        "model broken\nshock W\nfactor x = 1\ndx = -missing * x dt + dW\n",
        "broken",
    );
    let d = derive(&analysis.model);
    assert_eq!(d.states[0].family, Family::General);
    assert_eq!(d.states[0].method, Method::None);
    assert_eq!(d.states[0].reason, "the equation did not resolve");
}

#[test]
fn nonsense_times_and_probabilities_give_nothing() {
    let (m, d) = derived(VASICEK);
    let moments = moments_at(&m, &d, -1.0);
    assert_eq!(moments.mean[0], None);
    let moments = moments_at(&m, &d, f64::NAN);
    assert_eq!(moments.variance[0], None);
    assert_eq!(quantile(&m, &d, FactorId::new(0), 1.0, 1.5), None);
    assert_eq!(quantile(&m, &d, FactorId::new(7), 1.0, 0.5), None);
    assert_eq!(autocovariance(&m, &d, FactorId::new(3), 0.0, 1.0), None);
}

#[test]
fn the_exact_step_a_family_allows_is_the_law_it_derives() {
    // A factor with constant coefficients follows, from its start, the law of one step:
    // the law the calculus derives must be among those its family allows.
    use sdeck_calculus::laws::{law_of, LawKind};
    let cases = [
        ("dx = 0.02 dt + 0.1 dW", LawKind::Normal),
        ("dx = 1.5 * (0.03 - x) dt + 0.01 dW", LawKind::Normal),
        ("dx = 0.05 * x dt + 0.2 * x dW", LawKind::Lognormal),
        (
            "dx = 1.2 * (0.04 - x) dt + 0.1 * sqrt(x) dW",
            LawKind::NoncentralChiSquare,
        ),
    ];
    for (equation, kind) in cases {
        let source = format!("shock W\nfactor x = 0.03\n{equation}\n");
        let model = sdeck_semantics::analyze(&source, "step").model;
        let derivation = sdeck_calculus::derive(&model);
        let family = derivation.states[0].family;
        let law = law_of(&model, &derivation, FactorId::new(0), 0.5).map(|l| l.kind());
        assert_eq!(law, Some(kind), "{equation}");
        assert!(family.step_laws().contains(&kind), "{equation}: {family:?}");
    }
    // A family without a law in closed form allows no exact step.
    let source = "shock W\nfactor x = 1\ndx = -x^3 dt + 0.2 dW\n";
    let model = sdeck_semantics::analyze(source, "step").model;
    let family = sdeck_calculus::derive(&model).states[0].family;
    assert!(family.step_laws().is_empty(), "{family:?}");
}
