//! Estimates against closed forms from the literature, coverage of the intervals on
//! synthetic series with known parameters, and the refusals.

use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, Normal};
use sdeck_fit::{fit, Fit, FitError, Problem, Series};
use sdeck_semantics::{analyze, FactorId, Model, ParamId};

fn model(text: &str) -> Model {
    let analysis = analyze(text, "test");
    assert!(
        !analysis.has_errors(),
        "test model has errors: {:?}",
        analysis.diagnostics
    );
    analysis.model
}

fn run(model: &Model, times: &[f64], values: &[f64]) -> Result<Fit, FitError> {
    let series = Series {
        times: times.to_vec(),
        values: vec![values.iter().map(|v| Some(*v)).collect()],
    };
    fit(&Problem {
        model,
        factors: &[FactorId::new(0)],
        fixed: &[],
        series: &series,
    })
}

fn estimate(fit: &Fit, model: &Model, name: &str) -> (f64, f64) {
    let index = model.param_id(name).expect("parameter exists");
    let e = fit
        .estimates
        .iter()
        .find(|e| e.param == index)
        .expect("parameter estimated");
    (e.estimate, e.se)
}

const OU: &str = "model rate\nclock year\n\
    param kappa = 1.0 [1/year] > 0\n\
    param level = 2%\n\
    param vol = 1% [1/sqrt(year)] > 0\n\
    shock W\n\
    factor r = 3%\n\
    dr = kappa * (level - r) dt + vol dW\n";

/// Exact OU path: X_{t+Δ} = θ + (x − θ) e^{−κΔ} + σ √((1 − e^{−2κΔ})/(2κ)) Z.
fn ou_path(seed: u64, n: usize, dt: f64, kappa: f64, theta: f64, sigma: f64) -> Vec<f64> {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let normal = Normal::new(0.0, 1.0).expect("standard normal");
    let decay = (-kappa * dt).exp();
    let sd = sigma * ((1.0 - decay * decay) / (2.0 * kappa)).sqrt();
    let mut x = theta;
    let mut out = Vec::with_capacity(n);
    for _ in 0..n {
        out.push(x);
        x = theta + (x - theta) * decay + sd * normal.sample(&mut rng);
    }
    out
}

/// Brigo, Dalessandro, Neugebauer & Triki (2007), "A stochastic processes toolkit for risk
/// management", §3.2.1: the exact MLE of the Vasicek/OU process with regular steps Δ,
/// conditional on the first value, is the AR(1) least-squares fit:
/// β = (n Sxy − Sx Sy)/(n Sxx − Sx²), θ = (Sy − β Sx)/(n (1 − β)), κ = −ln β / Δ,
/// σ² = 2κ V / (1 − β²) with V the mean squared residual.
#[test]
fn ornstein_uhlenbeck_matches_the_closed_form_with_regular_steps() {
    let m = model(OU);
    let dt = 1.0 / 52.0;
    let x = ou_path(11, 600, dt, 2.5, 0.03, 0.012);
    let times: Vec<f64> = (0..x.len()).map(|i| i as f64 * dt).collect();
    let fit = run(&m, &times, &x).expect("OU fits");
    let n = (x.len() - 1) as f64;
    let (prev, next) = (&x[..x.len() - 1], &x[1..]);
    let sx: f64 = prev.iter().sum();
    let sy: f64 = next.iter().sum();
    let sxx: f64 = prev.iter().map(|v| v * v).sum();
    let sxy: f64 = prev.iter().zip(next).map(|(a, b)| a * b).sum();
    let beta = (n * sxy - sx * sy) / (n * sxx - sx * sx);
    let theta = (sy - beta * sx) / (n * (1.0 - beta));
    let kappa = -beta.ln() / dt;
    let v = prev
        .iter()
        .zip(next)
        .map(|(a, b)| (b - beta * a - theta * (1.0 - beta)).powi(2))
        .sum::<f64>()
        / n;
    let sigma = (2.0 * kappa * v / (1.0 - beta * beta)).sqrt();
    for (name, expected) in [("kappa", kappa), ("level", theta), ("vol", sigma)] {
        let (got, _) = estimate(&fit, &m, name);
        assert!(
            ((got - expected) / expected).abs() < 1e-7,
            "{name}: {got} vs closed form {expected}"
        );
    }
    assert_eq!(fit.used, 600);
    // AIC = 2k − 2 ln L.
    assert!((fit.aic - (6.0 - 2.0 * fit.loglik)).abs() < 1e-9);
}

/// Arithmetic Brownian motion with irregular steps: the increments are independent
/// N(μΔ_i, σ²Δ_i), whose MLE is μ = ΣΔx/ΣΔt and σ² = mean((Δx − μΔt)²/Δt) (the weighted
/// normal MLE; e.g. Glasserman 2004, §3.1 for the law of the increments).
#[test]
fn brownian_motion_matches_the_closed_form_with_irregular_steps() {
    let m = model(
        "model spread\nclock year\nparam mu = 0.1 [1/year]\n\
         param sigma = 0.3 [1/sqrt(year)] > 0\nshock W\nfactor s = 1\n\
         ds = mu dt + sigma dW\n",
    );
    let mut rng = ChaCha8Rng::seed_from_u64(5);
    let normal = Normal::new(0.0, 1.0).expect("standard normal");
    let mut times = vec![0.0];
    let mut x = vec![1.0];
    for i in 1..300 {
        let dt: f64 = [1.0 / 365.0, 3.0 / 365.0, 1.0 / 52.0][i % 3];
        times.push(times[i - 1] + dt);
        x.push(x[i - 1] + 0.4 * dt + 0.25 * dt.sqrt() * normal.sample(&mut rng));
    }
    let fit = run(&m, &times, &x).expect("ABM fits");
    let total: f64 = times[times.len() - 1] - times[0];
    let mu = (x[x.len() - 1] - x[0]) / total;
    let var = (1..x.len())
        .map(|i| {
            let dt = times[i] - times[i - 1];
            (x[i] - x[i - 1] - mu * dt).powi(2) / dt
        })
        .sum::<f64>()
        / (x.len() - 1) as f64;
    let (got_mu, se_mu) = estimate(&fit, &m, "mu");
    let (got_sigma, se_sigma) = estimate(&fit, &m, "sigma");
    assert!(((got_mu - mu) / mu).abs() < 1e-7, "{got_mu} vs {mu}");
    assert!(((got_sigma - var.sqrt()) / var.sqrt()).abs() < 1e-7);
    // Observed information of the normal MLE: se(μ) = σ/√T, se(σ) = σ/√(2n).
    let n = (x.len() - 1) as f64;
    assert!(((se_mu - var.sqrt() / total.sqrt()) / se_mu).abs() < 1e-4);
    assert!(((se_sigma - var.sqrt() / (2.0 * n).sqrt()) / se_sigma).abs() < 1e-4);
}

/// Geometric Brownian motion: log returns are N((μ − σ²/2)Δ, σ²Δ) (Glasserman 2004,
/// §3.2.1), so σ² is the variance rate of the log returns and μ = m + σ²/2.
#[test]
fn geometric_brownian_motion_matches_the_closed_form() {
    let m = model(
        "model share\nclock year\nparam mu = 0.05 [1/year]\n\
         param sigma = 0.2 [1/sqrt(year)] > 0\nshock W\nfactor S = 100 > 0\n\
         dS = mu * S dt + sigma * S dW\n",
    );
    let mut rng = ChaCha8Rng::seed_from_u64(8);
    let normal = Normal::new(0.0, 1.0).expect("standard normal");
    let dt: f64 = 1.0 / 252.0;
    let mut x = vec![100.0_f64];
    for i in 1..500 {
        let step = (0.08 - 0.5 * 0.09) * dt + 0.3 * dt.sqrt() * normal.sample(&mut rng);
        x.push(x[i - 1] * step.exp());
    }
    let times: Vec<f64> = (0..x.len()).map(|i| i as f64 * dt).collect();
    let fit = run(&m, &times, &x).expect("GBM fits");
    let logs: Vec<f64> = x.iter().map(|v| v.ln()).collect();
    let n = (x.len() - 1) as f64;
    let mean = (logs[logs.len() - 1] - logs[0]) / (n * dt);
    let var = logs
        .windows(2)
        .map(|w| (w[1] - w[0] - mean * dt).powi(2) / dt)
        .sum::<f64>()
        / n;
    let (got_mu, _) = estimate(&fit, &m, "mu");
    let (got_sigma, _) = estimate(&fit, &m, "sigma");
    assert!(((got_sigma - var.sqrt()) / var.sqrt()).abs() < 1e-7);
    assert!(((got_mu - (mean + var / 2.0)) / got_mu).abs() < 1e-6);
}

/// 400 synthetic OU series with known parameters: each 95% interval covers the truth in
/// 95% ± 3% of them (the binomial sd at 400 is 1.1%, so ±3% is about 2.7 sd).
#[test]
fn intervals_cover_the_truth_at_their_level() {
    let m = model(OU);
    // A hundred years of monthly values: κT = 300 mean-reversion times, so that the
    // small-sample bias of κ (and through it the level's standard error) is negligible.
    let (kappa, theta, sigma) = (3.0, 0.03, 0.02);
    let dt = 1.0 / 12.0;
    let times: Vec<f64> = (0..1200).map(|i| i as f64 * dt).collect();
    let names = [("kappa", kappa), ("level", theta), ("vol", sigma)];
    let mut covered = [0usize; 3];
    let series = 400;
    for seed in 0..series {
        let x = ou_path(1000 + seed, times.len(), dt, kappa, theta, sigma);
        let fit = run(&m, &times, &x).expect("OU fits");
        for (j, (name, truth)) in names.iter().enumerate() {
            let index = m.param_id(name).expect("parameter exists");
            let e = fit
                .estimates
                .iter()
                .find(|e| e.param == index)
                .expect("estimated");
            let (lo, hi) = e.interval(0.95);
            if lo <= *truth && *truth <= hi {
                covered[j] += 1;
            }
        }
    }
    for (j, (name, _)) in names.iter().enumerate() {
        let rate = covered[j] as f64 / series as f64;
        eprintln!(
            "{name}: 95% interval covered the truth in {covered} of {series}",
            covered = covered[j]
        );
        assert!(
            (0.92..=0.98).contains(&rate),
            "{name}: the 95% interval covered the truth in {:.1}% of {series} series",
            rate * 100.0
        );
    }
}

/// Square-root factor: exact sampling of the transition (a scaled noncentral chi-square,
/// drawn as a Poisson mixture of gammas; Glasserman 2004, §3.4.1) and recovery of the
/// parameters within 4 standard errors.
#[test]
fn square_root_recovers_known_parameters() {
    use rand_distr::{Gamma, Poisson};
    let m = model(
        "model funding\nclock year\nparam kappa = 1 [1/year] > 0\n\
         param level = 3% > 0\nparam vol = 5% [1/sqrt(year)] > 0\nshock W\n\
         factor r = 3% >= 0\ndr = kappa * (level - r) dt + vol * sqrt(r) dW\n",
    );
    let (kappa, theta, sigma) = (1.5_f64, 0.04_f64, 0.1_f64);
    let dt = 1.0 / 52.0;
    let mut rng = ChaCha8Rng::seed_from_u64(3);
    let c = 2.0 * kappa / (sigma * sigma * (1.0 - (-kappa * dt).exp()));
    let degrees = 4.0 * kappa * theta / (sigma * sigma);
    let mut x = vec![theta];
    for i in 1..1500 {
        let lambda = 2.0 * c * x[i - 1] * (-kappa * dt).exp();
        let j = Poisson::new(lambda / 2.0)
            .expect("poisson")
            .sample(&mut rng);
        let chi = Gamma::new(degrees / 2.0 + j, 2.0)
            .expect("gamma")
            .sample(&mut rng);
        x.push(chi / (2.0 * c));
    }
    let times: Vec<f64> = (0..x.len()).map(|i| i as f64 * dt).collect();
    let fit = run(&m, &times, &x).expect("square-root fits");
    for (name, truth) in [("kappa", kappa), ("level", theta), ("vol", sigma)] {
        let (got, se) = estimate(&fit, &m, name);
        assert!(
            (got - truth).abs() < 4.0 * se,
            "{name}: {got} ± {se}, truth {truth}"
        );
    }
}

#[test]
fn a_coupled_fully_observed_system_is_fitted_jointly() {
    // Rate r reverts to a moving level m; both observed, correlated shocks.
    let m = model(
        "model pair\nclock year\nparam a = 2 [1/year] > 0\nparam b = 0.5 [1/year] > 0\n\
         param theta = 3%\nparam s1 = 1% [1/sqrt(year)] > 0\n\
         param s2 = 0.5% [1/sqrt(year)] > 0\nshock W1, W2\ncorr W1 W2 = 0.3\n\
         factor r = 3%\nfactor l = 3%\n\
         dr = a * (l - r) dt + s1 dW1\ndl = b * (theta - l) dt + s2 dW2\n",
    );
    let (a, b, theta, s1, s2, rho) = (3.0_f64, 0.8_f64, 0.04_f64, 0.015_f64, 0.006_f64, 0.3_f64);
    let drift = nalgebra::DMatrix::from_row_slice(2, 2, &[-a, a, 0.0, -b]);
    let system = sdeck_calculus::linear_system::AffineGaussian::new(
        drift,
        nalgebra::DVector::from_vec(vec![0.0, b * theta]),
        nalgebra::DMatrix::from_row_slice(2, 2, &[s1, 0.0, 0.0, s2]),
        nalgebra::DMatrix::from_row_slice(2, 2, &[1.0, rho, rho, 1.0]),
    )
    .expect("valid system");
    let dt = 1.0 / 52.0;
    let chol = system
        .covariance_at(dt)
        .cholesky()
        .expect("positive definite")
        .l();
    let mut rng = ChaCha8Rng::seed_from_u64(21);
    let normal = Normal::new(0.0, 1.0).expect("standard normal");
    let mut x = nalgebra::DVector::from_vec(vec![0.04, 0.04]);
    let (mut rs, mut ls, mut times) = (Vec::new(), Vec::new(), Vec::new());
    for i in 0..1500 {
        rs.push(Some(x[0]));
        ls.push(Some(x[1]));
        times.push(i as f64 * dt);
        let z = nalgebra::DVector::from_fn(2, |_, _| normal.sample(&mut rng));
        x = system.mean_at(&x, dt) + &chol * z;
    }
    let series = Series {
        times,
        values: vec![rs, ls],
    };
    let fit = fit(&Problem {
        model: &m,
        factors: &[FactorId::new(0), FactorId::new(1)],
        fixed: &[],
        series: &series,
    })
    .expect("linear system fits");
    assert_eq!(fit.families[0].as_str(), "linear-system");
    for (name, truth) in [("a", a), ("b", b), ("theta", theta), ("s1", s1), ("s2", s2)] {
        let (got, se) = estimate(&fit, &m, name);
        assert!(
            (got - truth).abs() < 4.0 * se,
            "{name}: {got} ± {se}, truth {truth}"
        );
    }
}

#[test]
fn families_without_an_exact_likelihood_are_refused() {
    let m = model(
        "model cubic\nclock year\nparam k = 1 [1/year] > 0\n\
         param vol = 0.1 [1/sqrt(year)] > 0\nshock W\nfactor x = 0\n\
         dx = -k * x^3 dt + vol dW\n",
    );
    let times: Vec<f64> = (0..20).map(|i| i as f64).collect();
    let values: Vec<f64> = (0..20).map(|i| (i as f64).sin()).collect();
    match run(&m, &times, &values) {
        Err(FitError::NoExactLikelihood { factor, reason }) => {
            assert_eq!(factor, "x");
            assert!(reason.contains("degree 3"), "{reason}");
        }
        other => panic!("expected a refusal, got {other:?}"),
    }
    // A square-root factor with a level that steps in time: its transition is not the
    // noncentral chi-square of constant coefficients, and no other law is exact.
    let stepped = model(
        "model funding\nclock year\nparam kappa = 1 [1/year] > 0\n\
         param level = 3% > 0\nparam vol = 5% [1/sqrt(year)] > 0\nshock W\n\
         factor r = 3% >= 0\n\
         dr = kappa * (step(t, level, 2 [year], 2 * level) - r) dt + vol * sqrt(r) dW\n",
    );
    let positive: Vec<f64> = (0..20).map(|i| 0.03 + 0.001 * (i as f64).sin()).collect();
    match run(&stepped, &times, &positive) {
        Err(FitError::NoExactLikelihood { factor, reason }) => {
            assert_eq!(factor, "r");
            assert!(reason.contains("depend on t"), "{reason}");
        }
        other => panic!("expected a refusal, got {other:?}"),
    }
}

#[test]
fn values_outside_the_domain_are_named() {
    let m = model(
        "model share\nclock year\nparam mu = 0.05 [1/year]\n\
         param sigma = 0.2 [1/sqrt(year)] > 0\nshock W\nfactor S = 100 > 0\n\
         dS = mu * S dt + sigma * S dW\n",
    );
    let times: Vec<f64> = (0..6).map(|i| i as f64).collect();
    let values = [100.0, 101.0, 0.0, 99.0, 98.0, 97.0];
    match run(&m, &times, &values) {
        Err(FitError::OutsideDomain {
            observation, value, ..
        }) => {
            assert_eq!(observation, 2);
            assert_eq!(value, 0.0);
        }
        other => panic!("expected a domain error, got {other:?}"),
    }
}

#[test]
fn too_few_observations_and_nothing_to_estimate() {
    let m = model(OU);
    let r = run(&m, &[0.0, 1.0, 2.0, 3.0], &[0.01, 0.02, 0.015, 0.02]);
    assert!(matches!(
        r,
        Err(FitError::TooFewObservations {
            have: 4,
            need: 5,
            ..
        })
    ));
    let series = Series {
        times: vec![0.0, 1.0, 2.0, 3.0, 4.0],
        values: vec![vec![Some(0.01); 5]],
    };
    let all = [0, 1, 2].map(ParamId::new);
    let r = fit(&Problem {
        model: &m,
        factors: &[FactorId::new(0)],
        fixed: &all,
        series: &series,
    });
    assert_eq!(r, Err(FitError::NothingToEstimate));
}

#[test]
fn fixed_parameters_keep_their_file_values() {
    let m = model(OU);
    let dt = 1.0 / 52.0;
    let x = ou_path(4, 300, dt, 2.0, 0.02, 0.01);
    let times: Vec<f64> = (0..x.len()).map(|i| i as f64 * dt).collect();
    let series = Series {
        times,
        values: vec![x.iter().map(|v| Some(*v)).collect()],
    };
    let level = m.param_id("level").expect("level");
    let fit = fit(&Problem {
        model: &m,
        factors: &[FactorId::new(0)],
        fixed: &[level],
        series: &series,
    })
    .expect("fits");
    assert_eq!(fit.estimates.len(), 2);
    assert!(fit.estimates.iter().all(|e| e.param != level));
}

#[test]
fn a_parameter_written_as_an_expression_follows_the_estimates_and_is_not_rewritten() {
    // level = base + gap: base is estimated (gap fixed), level follows; the OU closed form
    // for the level (Brigo et al. 2007, as in the test above) is then base + gap.
    let text = "model rate\nclock year\n\
        param kappa = 1.0 [1/year] > 0\n\
        param base = 1.5%\n\
        param gap = 50bp\n\
        param level = base + gap\n\
        param vol = 1% [1/sqrt(year)] > 0\n\
        shock W\n\
        factor r = level\n\
        dr = kappa * (level - r) dt + vol dW\n";
    let m = model(text);
    let dt = 1.0 / 52.0;
    let x = ou_path(11, 600, dt, 2.5, 0.03, 0.012);
    let times: Vec<f64> = (0..x.len()).map(|i| i as f64 * dt).collect();
    let series = Series {
        times: times.clone(),
        values: vec![x.iter().map(|v| Some(*v)).collect()],
    };
    let gap = m.param_id("gap").expect("gap");
    let fitted = fit(&Problem {
        model: &m,
        factors: &[FactorId::new(0)],
        fixed: &[gap],
        series: &series,
    })
    .expect("fits");
    let names: Vec<&str> = fitted
        .estimates
        .iter()
        .map(|e| m.params[e.param].name.as_str())
        .collect();
    assert_eq!(names, ["kappa", "base", "vol"]);
    // The same series with the level as a plain parameter.
    let plain = model(OU);
    let direct = run(&plain, &times, &x).expect("fits");
    let (base, _) = estimate(&fitted, &m, "base");
    let (level, _) = estimate(&direct, &plain, "level");
    assert!(
        (base + 0.005 - level).abs() < 1e-7,
        "{base} + 0.005 vs {level}"
    );
    // Write-back rewrites base and leaves `level = base + gap` as written.
    let rewrites: Vec<sdeck_fit::write::Rewrite> = fitted
        .estimates
        .iter()
        .map(|e| sdeck_fit::write::Rewrite {
            param: e.param,
            value: e.estimate,
            se: e.se,
        })
        .collect();
    let note = sdeck_fit::write::Note {
        date: "2026-12-02".to_string(),
        data: "rates.csv".to_string(),
    };
    let written = sdeck_fit::write::rewrite(text, "rate", &m, &rewrites, &note).expect("writes");
    assert!(written.contains("param level = base + gap\n"), "{written}");
    assert!(!written.contains("param base = 1.5%"), "{written}");
    // Asked to rewrite the expression itself, it refuses and writes nothing.
    let level_index = m.param_id("level").expect("level");
    let refused = sdeck_fit::write::rewrite(
        text,
        "rate",
        &m,
        &[sdeck_fit::write::Rewrite {
            param: level_index,
            value: 0.03,
            se: 0.001,
        }],
        &note,
    );
    assert!(refused.is_err_and(|e| e.contains("written as an expression")));
}
