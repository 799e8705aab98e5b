//! Several states: drift matrix, coupled and decoupled families, covariances between
//! states, and agreement of the different engines on the same model.

use sdeck_calculus::linear_system::AffineGaussian;
use sdeck_calculus::{autocovariance, derive, moments_at, quantile, Family, Method};
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

fn assert_close(what: &str, actual: f64, expected: f64, relative: f64) {
    let gap = (actual - expected).abs();
    assert!(
        gap <= relative * expected.abs().max(f64::MIN_POSITIVE),
        "{what}: {actual:e} vs expected {expected:e} (gap {gap:e})"
    );
}

const TRIANGULAR: &str = "
model pemberton_rate_spread
param kr = 0.8 [1/year]
param mr = 3%
param vr = 0.9% [1/sqrt(year)]
param ks = 1.5 [1/year]
param ms = 1.2%
param beta = -0.25 [1/year]
param vs = 0.6% [1/sqrt(year)]
shock Wr, Ws
corr Wr Ws = -0.4
factor r = 2.6%
factor s = 1.5%
dr = kr * (mr - r) dt + vr dWr
ds = (ks * (ms - s) + beta * (r - mr)) dt + vs dWs
";

#[test]
fn drift_matrix_and_families_of_a_triangular_system() {
    let m = model(TRIANGULAR);
    let d = derive(&m);
    assert_eq!(d.system_family, Family::LinearSystem);
    // r mentions no other state: it keeps its own family; s is coupled to r.
    assert_eq!(d.states[0].family, Family::OrnsteinUhlenbeck);
    assert!(d.states[0].depends_on.is_empty());
    assert_eq!(d.states[1].family, Family::LinearSystem);
    assert_eq!(d.states[1].depends_on, vec![FactorId::new(0)]);
    assert_eq!(d.states[1].half_life, None);
    let a = d.drift_matrix.as_ref().expect("constant drift matrix");
    assert_eq!(a, &vec![vec![-0.8, 0.0], vec![-0.25, -1.5]]);
    // A triangular matrix has its diagonal as eigenvalues (common practice, no source).
    let mut eigen = d.drift_eigenvalues.clone().expect("eigenvalues");
    eigen.sort_by(|x, y| x.0.total_cmp(&y.0));
    assert_close("slow eigenvalue", eigen[0].0, -1.5, 1e-14);
    assert_close("fast eigenvalue", eigen[1].0, -0.8, 1e-14);
}

#[test]
fn figures_of_one_state_or_pair_agree_with_the_whole_matrix() {
    let m = model(TRIANGULAR);
    let d = derive(&m);
    let t = 1.3;
    let whole = moments_at(&m, &d, t);
    for i in 0..2 {
        let one = sdeck_calculus::state_moments(&m, &d, FactorId::new(i), t);
        assert_eq!(one.mean, whole.mean[i]);
        assert_eq!(one.variance, whole.variance[i]);
        assert_eq!(one.method, whole.method[i]);
        for j in 0..2 {
            assert_eq!(
                sdeck_calculus::covariance(&m, &d, FactorId::new(i), FactorId::new(j), t),
                whole.covariance[i][j]
            );
        }
    }
    assert!(whole.covariance[0][1].is_some());
}

#[test]
fn coupled_autocovariance_matches_the_engine_cross_covariance() {
    let m = model(TRIANGULAR);
    let d = derive(&m);
    let engine = AffineGaussian::new(
        nalgebra::DMatrix::from_row_slice(2, 2, &[-0.8, 0.0, -0.25, -1.5]),
        nalgebra::DVector::from_vec(vec![0.8 * 0.03, 1.5 * 0.012 + 0.25 * 0.03]),
        nalgebra::DMatrix::from_row_slice(2, 2, &[0.009, 0.0, 0.0, 0.006]),
        nalgebra::DMatrix::from_row_slice(2, 2, &[1.0, -0.4, -0.4, 1.0]),
    )
    .expect("valid system");
    let (s, t) = (0.6, 1.7);
    let expected = engine.cross_covariance(s, t)[(1, 1)];
    let value = autocovariance(&m, &d, FactorId::new(1), s, t).expect("coupled autocovariance");
    assert_close("Cov(s_s, s_t)", value, expected, 1e-12);
    // At s = t the autocovariance is the variance.
    let moments = moments_at(&m, &d, t);
    let at_same = autocovariance(&m, &d, FactorId::new(1), t, t).expect("autocovariance");
    assert_close(
        "Cov(s_t, s_t)",
        at_same,
        moments.variance[1].expect("variance"),
        1e-12,
    );
    // A linear system with state-free noise is Gaussian: the median is the mean.
    let median = quantile(&m, &d, FactorId::new(1), t, 0.5).expect("median");
    assert_close("median", median, moments.mean[1].expect("mean"), 1e-14);
}

#[test]
fn time_dependent_linear_system_integrates_to_the_constant_answer() {
    // exp(0 * f * t) is 1 but depends on t: the moment equations are integrated with
    // the adaptive integrator instead of the Van Loan exponential; both must agree.
    let forced = TRIANGULAR
        .replace("vs dWs", "vs * exp(0 * f * t) dWs")
        .replace("shock Wr, Ws", "param f = 1 [1/year]\nshock Wr, Ws");
    let m = model(&forced);
    let d = derive(&m);
    let m0 = model(TRIANGULAR);
    let d0 = derive(&m0);
    let moving = moments_at(&m, &d, 2.0);
    let constant = moments_at(&m0, &d0, 2.0);
    assert_eq!(moving.method[1], Method::MomentEquations);
    assert_eq!(constant.method[1], Method::ClosedForm);
    for i in 0..2 {
        assert_close(
            "mean",
            moving.mean[i].expect("mean"),
            constant.mean[i].expect("mean"),
            1e-9,
        );
        for j in 0..2 {
            assert_close(
                "covariance",
                moving.covariance[i][j].expect("covariance"),
                constant.covariance[i][j].expect("covariance"),
                1e-8,
            );
        }
    }
}

#[test]
fn two_correlated_ornstein_uhlenbeck_states() {
    // Cov(X_t, Y_t) = ρ σ₁ σ₂ (1 − e^{−(κ₁+κ₂)t}) / (κ₁ + κ₂) for independent-drift OU
    // states on correlated noises (Itô isometry; Gardiner, Handbook of Stochastic
    // Methods, §4.4.6, from memory).
    let source = "
model twin_rates
param k1 = 1.2 [1/year]
param k2 = 0.4 [1/year]
param s1 = 1% [1/sqrt(year)]
param s2 = 2% [1/sqrt(year)]
shock A, B
corr A B = 0.55
factor x = 1%
factor y = 2%
dx = -k1 * x dt + s1 dA
dy = k2 * (0.03 - y) dt + s2 dB
";
    let m = model(source);
    let d = derive(&m);
    assert_eq!(d.states[0].family, Family::OrnsteinUhlenbeck);
    assert_eq!(d.states[1].family, Family::OrnsteinUhlenbeck);
    let t: f64 = 1.3;
    let expected = 0.55 * 0.01 * 0.02 * (1.0 - (-1.6 * t).exp()) / 1.6;
    let moments = moments_at(&m, &d, t);
    assert_close(
        "Cov(x, y)",
        moments.covariance[0][1].expect("cov"),
        expected,
        1e-12,
    );
    assert_eq!(moments.covariance[0][1], moments.covariance[1][0]);
}

#[test]
fn two_correlated_geometric_brownians() {
    // E[XY] = x₀y₀ e^{(μ₁+μ₂+ρσ₁σ₂)t}, so Cov = x₀y₀ e^{(μ₁+μ₂)t}(e^{ρσ₁σ₂t} − 1)
    // (Glasserman 2004, §3.2.3, multivariate geometric Brownian motion).
    let source = "
model pair_shares
param m1 = 5% [1/year]
param m2 = 2% [1/year]
param v1 = 30% [1/sqrt(year)]
param v2 = 20% [1/sqrt(year)]
shock A, B
corr A B = -0.35
factor p = 50
factor q = 20
dp = m1 * p dt + v1 * p dA
dq = m2 * q dt + v2 * q dB
";
    let m = model(source);
    let d = derive(&m);
    assert_eq!(d.system_family, Family::Polynomial);
    assert_eq!(d.states[0].family, Family::GeometricBrownian);
    let t: f64 = 2.0;
    let rho_sigma = -0.35 * 0.3 * 0.2;
    let expected = 50.0 * 20.0 * (0.07 * t).exp() * (rho_sigma * t).exp_m1();
    let moments = moments_at(&m, &d, t);
    assert_close(
        "Cov(p, q)",
        moments.covariance[0][1].expect("cov"),
        expected,
        1e-11,
    );
}

#[test]
fn covariance_of_decoupled_states_in_a_general_system() {
    // A general third state stops the system engines; the covariance of the OU state x
    // and the geometric state y then comes from the pair equation
    // K' = (b₁ + b₂) K + ρ σ₁ σ₂ m_y(t), giving
    // K(t) = ρ σ₁ σ₂ y₀ e^{(μ − κ)t} (e^{κt} − 1)/κ (Itô's product rule; common practice).
    let source = "
model mixed_desk
param k = 0.9 [1/year]
param s1 = 1% [1/sqrt(year)]
param mu = 4% [1/year]
param s2 = 25% [1/sqrt(year)]
param c = 0.1 [1/year]
shock A, B, C
corr A B = 0.3
factor x = 1%
factor y = 10
factor z = 1
dx = -k * x dt + s1 dA
dy = mu * y dt + s2 * y dB
dz = -c * z^3 dt + s1 dC
";
    let m = model(source);
    let d = derive(&m);
    assert_eq!(d.system_family, Family::General);
    assert_eq!(d.states[2].family, Family::General);
    let t: f64 = 1.5;
    let expected = 0.3 * 0.01 * 0.25 * 10.0 * ((0.04 - 0.9) * t).exp() * (0.9 * t).exp_m1() / 0.9;
    let moments = moments_at(&m, &d, t);
    assert_close(
        "Cov(x, y)",
        moments.covariance[0][1].expect("cov"),
        expected,
        1e-10,
    );
    assert_eq!(moments.covariance[0][2], None);
    assert_eq!(moments.mean[2], None);
}

#[test]
fn time_dependent_polynomial_system_integrates_to_the_constant_answer() {
    // cos(0 * f * t) is 1 but depends on t: the moment equations of the polynomial system
    // are integrated step by step instead of through the generator's exponential.
    let constant = WEXLEY.to_string();
    let forced = WEXLEY
        .replace("xi * sqrt(v) dWv", "xi * cos(0 * f * t) * sqrt(v) dWv")
        .replace("shock Wx, Wv", "param f = 1 [1/year]\nshock Wx, Wv");
    let (m0, m1) = (model(&constant), model(&forced));
    let (d0, d1) = (derive(&m0), derive(&m1));
    let (a, b) = (moments_at(&m0, &d0, 0.8), moments_at(&m1, &d1, 0.8));
    assert_eq!(b.method[0], Method::MomentEquations);
    for i in 0..2 {
        assert_close(
            "mean",
            b.mean[i].expect("mean"),
            a.mean[i].expect("mean"),
            1e-9,
        );
        for j in 0..2 {
            assert_close(
                "covariance",
                b.covariance[i][j].expect("covariance"),
                a.covariance[i][j].expect("covariance"),
                1e-8,
            );
        }
    }
}

const WEXLEY: &str = "
model wexley_log_price
param mu = 5% [1/year]
param kappa = 2.0 [1/year] > 0
param theta = 0.04 [1/year] >= 0
param xi = 0.3 [1/year] > 0
shock Wx, Wv
corr Wx Wv = -0.6
factor x = 0.2
factor v = 0.05 [1/year] >= 0
dx = (mu - 0.5 * v) dt + sqrt(v) dWx
dv = kappa * (theta - v) dt + xi * sqrt(v) dWv
";

#[test]
fn coupled_polynomial_state_has_moments_but_no_named_law() {
    let source = "
model wexley_log_price
param mu = 5% [1/year]
param kappa = 2.0 [1/year] > 0
param theta = 0.04 [1/year] >= 0
param xi = 0.3 [1/year] > 0
shock Wx, Wv
corr Wx Wv = -0.6
factor x = 0.2
factor v = 0.05 [1/year] >= 0
dx = (mu - 0.5 * v) dt + sqrt(v) dWx
dv = kappa * (theta - v) dt + xi * sqrt(v) dWv
";
    let m = model(source);
    let d = derive(&m);
    assert_eq!(d.states[0].family, Family::Polynomial);
    assert_eq!(d.states[1].family, Family::SquareRoot);
    let t: f64 = 0.5;
    let moments = moments_at(&m, &d, t);
    // E[x_t] = x₀ + μt − ½∫₀ᵗ E[v_s] ds with E[v_s] = θ + (v₀ − θ)e^{−κs}
    // (Heston 1993, Review of Financial Studies 6, the log-price drift).
    let integral_v = 0.04 * t + (0.05 - 0.04) * (1.0 - (-2.0 * t).exp()) / 2.0;
    let expected_mean = 0.2 + 0.05 * t - 0.5 * integral_v;
    assert_close(
        "mean of x",
        moments.mean[0].expect("mean"),
        expected_mean,
        1e-12,
    );
    assert_eq!(quantile(&m, &d, FactorId::new(0), t, 0.5), None);
    let same = autocovariance(&m, &d, FactorId::new(0), t, t).expect("autocovariance");
    assert_close(
        "Cov(x_t, x_t)",
        same,
        moments.variance[0].expect("variance"),
        1e-10,
    );
}
