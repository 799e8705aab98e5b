//! End-to-end tests of the simulator on models written as text: exact schemes against
//! published moments, Euler–Maruyama against a known stationary law, reproducibility,
//! reports and the fan chart.

use sdeck_calculus::{derive, moments_at};
use sdeck_semantics::{analyze, Model};
use sdeck_simulate::isa::Isa;
use sdeck_simulate::{
    check, fan_chart_svg, plan, plan_from_model, render_text, simulate, simulate_paths,
    simulate_paths_on, to_json, ExactLaw, Plan, Scheme, SimulateError, SimulationOptions,
};
use statrs::distribution::{ContinuousCDF, Normal};

/// Tolerance on z-scores: a correct simulator exceeds 5 with probability below 6e-7.
const Z_LIMIT: f64 = 5.0;

fn model(source: &str) -> Model {
    let analysis = analyze(source, "test");
    assert!(!analysis.has_errors(), "{:#?}", analysis.diagnostics);
    analysis.model
}

fn planned(model: &Model) -> Plan {
    plan(model, &derive(model))
}

fn options(paths: usize, steps: usize, at: f64, seed: u64) -> SimulationOptions {
    SimulationOptions {
        paths,
        steps,
        at: Some(at),
        seed,
        threads: Some(2),
        ..Default::default()
    }
}

fn assert_z(simulated: f64, expected: f64, standard_error: f64, what: &str) {
    let z = (simulated - expected) / standard_error;
    assert!(
        z.abs() < Z_LIMIT,
        "{what}: simulated {simulated} ± {standard_error}, expected {expected} (z = {z:.2})"
    );
}

const OU: &str = "
clock year
param kappa = 1.2 [1/year] > 0
param theta = 4%
param sigma = 1.5% [1/sqrt(year)] > 0
shock W
factor r = 1%
dr = kappa * (theta - r) dt + sigma dW
";

#[test]
fn ornstein_uhlenbeck_exact_scheme_matches_vasicek_moments_and_quantiles() {
    let model = model(OU);
    let plan = planned(&model);
    assert_eq!(plan.schemes, vec![Scheme::Exact(ExactLaw::LinearGaussian)]);
    let t = 2.0;
    let result = simulate(&model, &plan, &options(100_000, 8, t, 42)).unwrap();
    let state = &result.states[0];
    // Vasicek 1977, J. Financial Economics 5, §4: mean θ + (r0 − θ)e^{−κt},
    // variance σ²(1 − e^{−2κt})/(2κ).
    let (kappa, theta, sigma, r0) = (1.2, 0.04, 0.015, 0.01);
    let mean = theta + (r0 - theta) * (-kappa * t).exp();
    let variance = sigma * sigma * (1.0 - (-2.0 * kappa * t).exp()) / (2.0 * kappa);
    assert_z(state.mean, mean, state.mean_se, "mean");
    assert_z(state.variance, variance, state.variance_se, "variance");
    // Gaussian quantiles from statrs.distribution.Normal.
    let law = Normal::new(mean, variance.sqrt()).unwrap();
    for q in &state.quantiles {
        assert_z(
            q.value,
            law.inverse_cdf(q.probability),
            q.standard_error,
            "quantile",
        );
    }
}

#[test]
fn geometric_brownian_exact_scheme_matches_lognormal_moments() {
    let model = model(
        "
        unit EUR
        param mu = 6% [1/year]
        param sigma = 25% [1/sqrt(year)] > 0
        shock W
        factor S = 84 [EUR] > 0
        dS = mu * S dt + sigma * S dW
        ",
    );
    let plan = planned(&model);
    assert!(matches!(
        plan.schemes[0],
        Scheme::Exact(ExactLaw::Lognormal { .. })
    ));
    let t = 1.5;
    let result = simulate(&model, &plan, &options(100_000, 3, t, 9)).unwrap();
    let state = &result.states[0];
    // Lognormal law of S_t: mean S0 e^{μt}, variance S0² e^{2μt}(e^{σ²t} − 1)
    // (Johnson, Kotz & Balakrishnan 1994, Continuous Univariate Distributions vol. 1,
    // ch. 14, eq. (14.8a–b)).
    let (mu, sigma, s0): (f64, f64, f64) = (0.06, 0.25, 84.0);
    let mean = s0 * (mu * t).exp();
    let variance = s0 * s0 * (2.0 * mu * t).exp() * ((sigma * sigma * t).exp() - 1.0);
    assert_z(state.mean, mean, state.mean_se, "mean");
    assert_z(state.variance, variance, state.variance_se, "variance");
    // Median S0 e^{(μ − σ²/2)t} (same source).
    let median = s0 * ((mu - 0.5 * sigma * sigma) * t).exp();
    assert_z(
        state.quantiles[2].value,
        median,
        state.quantiles[2].standard_error,
        "median",
    );
}

/// CIR moments at t (Cox, Ingersoll & Ross 1985, Econometrica 53(2), eq. (19)).
fn cir_moments(kappa: f64, theta: f64, sigma: f64, x0: f64, t: f64) -> (f64, f64) {
    let e = (-kappa * t).exp();
    let mean = theta + (x0 - theta) * e;
    let variance = x0 * sigma * sigma * e * (1.0 - e) / kappa
        + theta * sigma * sigma * (1.0 - e).powi(2) / (2.0 * kappa);
    (mean, variance)
}

const CIR_FELLER_VIOLATED: &str = "
param kappa = 0.8 [1/year] > 0
param theta = 2% >= 0
param sigma = 30% [1/sqrt(year)] > 0
shock W
factor r = 1.5% >= 0
dr = kappa * (theta - r) dt + sigma * sqrt(r) dW
";

#[test]
fn square_root_exact_scheme_matches_cir_moments_and_stays_non_negative() {
    // 2κθ = 0.032 < σ² = 0.09: zero is attainable, the Poisson-mixture branch is used.
    let model = model(CIR_FELLER_VIOLATED);
    let plan = planned(&model);
    assert!(matches!(
        plan.schemes[0],
        Scheme::Exact(ExactLaw::SquareRoot { .. })
    ));
    let t = 1.0;
    let samples = simulate_paths(&model, &plan, &options(100_000, 4, t, 3)).unwrap();
    assert!(samples.finals()[0].iter().all(|x| *x >= 0.0));
    let result = simulate(&model, &plan, &options(100_000, 4, t, 3)).unwrap();
    let (mean, variance) = cir_moments(0.8, 0.02, 0.3, 0.015, t);
    assert_z(
        result.states[0].mean,
        mean,
        result.states[0].mean_se,
        "mean",
    );
    assert_z(
        result.states[0].variance,
        variance,
        result.states[0].variance_se,
        "variance",
    );
}

#[test]
fn euler_with_full_truncation_converges_to_cir_moments() {
    // The same model forced onto Euler–Maruyama: full truncation keeps the reported
    // values at or above zero and its bias is small at 400 steps a year (Lord, Koekkoek &
    // van Dijk 2010, Quantitative Finance 10(2), §4).
    let model = model(
        "
        param kappa = 1.6 [1/year] > 0
        param theta = 3.4% >= 0
        param sigma = 9% [1/sqrt(year)] > 0
        shock W
        factor r = 2.9% >= 0
        dr = kappa * (theta - r) dt + sigma * sqrt(r) dW
        ",
    );
    let plan = Plan::all_euler(&model);
    assert_eq!(plan.truncated, vec![true]);
    let samples = simulate_paths(&model, &plan, &options(40_000, 400, 1.0, 8)).unwrap();
    assert!(samples.finals()[0].iter().all(|x| *x >= 0.0));
    let result = simulate(&model, &plan, &options(40_000, 400, 1.0, 8)).unwrap();
    let (mean, variance) = cir_moments(1.6, 0.034, 0.09, 0.029, 1.0);
    assert_z(
        result.states[0].mean,
        mean,
        result.states[0].mean_se,
        "mean",
    );
    assert_z(
        result.states[0].variance,
        variance,
        result.states[0].variance_se,
        "variance",
    );
}

#[test]
fn euler_on_a_cubic_drift_converges_to_the_stationary_law() {
    // dx = −x³ dt + σ dW has the stationary density ∝ exp(−x⁴/(2σ²)) (Gardiner 2009,
    // Stochastic Methods, §5.3: p ∝ exp(2∫drift/σ²)). With μ = 1/(2σ²),
    // E[x²] = μ^{−1/2} Γ(3/4)/Γ(1/4) (Gradshteyn & Ryzhik 2007, 3.478.1) and E[x] = 0.
    let model = model(
        "
        param sigma = 1 [1/sqrt(year)] > 0
        param rate = 1 [1/year] > 0
        shock W
        factor x = 1.5
        dx = -rate * x^3 dt + sigma dW
        ",
    );
    let plan = planned(&model);
    assert_eq!(plan.schemes, vec![Scheme::Euler]);
    let result = simulate(&model, &plan, &options(40_000, 1_000, 10.0, 21)).unwrap();
    let state = &result.states[0];
    let gamma = statrs::function::gamma::gamma;
    let mu: f64 = 0.5;
    let second_moment = mu.powf(-0.5) * gamma(0.75) / gamma(0.25);
    assert_z(state.mean, 0.0, state.mean_se, "stationary mean");
    assert_z(
        state.variance,
        second_moment,
        state.variance_se,
        "stationary variance",
    );
}

#[test]
fn correlated_gaussian_system_has_the_exact_covariance() {
    // Two OU states on noises correlated at ρ: Cov(x_t, y_t) =
    // ρσ1σ2(1 − e^{−(κ1+κ2)t})/(κ1+κ2) (Brigo & Mercurio 2006, Interest Rate Models, §4.2).
    let model = model(
        "
        param k1 = 0.9 [1/year] > 0
        param k2 = 0.2 [1/year] > 0
        param s1 = 1% [1/sqrt(year)] > 0
        param s2 = 0.8% [1/sqrt(year)] > 0
        shock A, B
        corr A B = -0.6
        factor x = 0
        factor y = 0
        dx = -k1 * x dt + s1 dA
        dy = -k2 * y dt + s2 dB
        ",
    );
    let plan = planned(&model);
    assert!(plan
        .schemes
        .iter()
        .all(|s| *s == Scheme::Exact(ExactLaw::LinearGaussian)));
    let t = 1.5;
    let samples = simulate_paths(&model, &plan, &options(80_000, 5, t, 4)).unwrap();
    let expected = -0.6 * 0.01 * 0.008 * (1.0 - (-(1.1f64) * t).exp()) / 1.1;
    let (covariance, se) = sample_covariance(&samples.finals()[0], &samples.finals()[1]);
    assert_z(covariance, expected, se, "covariance");
}

/// Sample covariance and its standard error √(Var[(x − x̄)(y − ȳ)]/N) (common practice,
/// no source).
fn sample_covariance(x: &[f64], y: &[f64]) -> (f64, f64) {
    let n = x.len() as f64;
    let mx = x.iter().sum::<f64>() / n;
    let my = y.iter().sum::<f64>() / n;
    let products: Vec<f64> = x.iter().zip(y).map(|(a, b)| (a - mx) * (b - my)).collect();
    let covariance = products.iter().sum::<f64>() / n;
    let spread = products
        .iter()
        .map(|p| (p - covariance).powi(2))
        .sum::<f64>()
        / n;
    (covariance, (spread / n).sqrt())
}

#[test]
fn euler_increments_carry_the_noise_correlation() {
    // Time-dependent loadings force Euler. Its law is exactly Gaussian with
    // Cov(x, y) = ρ σ1 σ2 Σ_k cos²(ω t_k) Δ (Itô isometry on the step grid; common practice,
    // no source).
    let model = model(
        "
        param s1 = 0.3 [1/sqrt(year)] > 0
        param s2 = 0.5 [1/sqrt(year)] > 0
        param w = 2 [1/year]
        shock A, B
        corr A B = 0.7
        factor x = 0
        factor y = 0
        dx = s1 * cos(w * t) dA
        dy = s2 * cos(w * t) dB
        ",
    );
    let plan = planned(&model);
    assert_eq!(plan.schemes, vec![Scheme::Euler, Scheme::Euler]);
    let (steps, at) = (20, 1.0);
    let samples = simulate_paths(&model, &plan, &options(80_000, steps, at, 13)).unwrap();
    let dt = at / steps as f64;
    let grid_sum: f64 = (0..steps)
        .map(|k| (2.0 * k as f64 * dt).cos().powi(2) * dt)
        .sum();
    let expected = 0.7 * 0.3 * 0.5 * grid_sum;
    let (covariance, se) = sample_covariance(&samples.finals()[0], &samples.finals()[1]);
    assert_z(covariance, expected, se, "covariance");
}

const MIXED: &str = "
param kappa = 1.6 [1/year] > 0
param theta = 3.4% >= 0
param sigma = 9% [1/sqrt(year)] > 0
param a = 0.5 [1/year] > 0
param b = 0.2 [1/sqrt(year)] > 0
param c = 2 [1/year]
shock W, V, U
factor r = 2.9% >= 0
factor y = 1
factor p = 0
dr = kappa * (theta - r) dt + sigma * sqrt(r) dW
dy = -a * y dt + b dV
dp = (c * y - a * p - c * p^3) dt + b * sqrt(1 + p^2) dU
";

#[test]
fn same_seed_gives_identical_output_on_one_and_two_threads() {
    let model = model(MIXED);
    let plan = planned(&model);
    assert!(matches!(
        plan.schemes[0],
        Scheme::Exact(ExactLaw::SquareRoot { .. })
    ));
    assert_eq!(plan.schemes[1], Scheme::Exact(ExactLaw::LinearGaussian));
    assert_eq!(plan.schemes[2], Scheme::Euler);
    let run = |threads: usize, seed: u64| {
        let options = SimulationOptions {
            threads: Some(threads),
            band_times: 10,
            ..options(3_001, 50, 1.0, seed)
        };
        let result = simulate(&model, &plan, &options).unwrap();
        (
            to_json(&result).to_string(),
            fan_chart_svg(&result, None).unwrap(),
        )
    };
    let (one_json, one_svg) = run(1, 77);
    let (two_json, two_svg) = run(2, 77);
    assert_eq!(one_json, two_json);
    assert_eq!(one_svg, two_svg);
    let (other_json, _) = run(2, 78);
    assert_ne!(one_json, other_json);
}

/// The engine's main paths in one model: an exact square root, a lognormal price under a
/// correlation, a general Euler program and a polynomial Euler factor, with a discount.
const EVERY_SCHEME: &str = "
clock year
measure risk-neutral
param kappa = 1.6 [1/year] > 0
param theta = 3.4% >= 0
param sigma = 9% [1/sqrt(year)] > 0
param a = 0.7 [1/year] > 0
param b = 0.2 [1/sqrt(year)] > 0
param mu = 3% [1/year]
param vol = 0.25 [1/sqrt(year)] > 0
param g = 1 [1/year] > 0
param q = 0.3 [1/sqrt(year)] > 0
shock W, V, U, S
corr V S = 0.4
factor r = 2.9% >= 0
factor y = 1
factor s = 100
factor p = 0
factor c = 0.1
dr = kappa * (theta - r) dt + sigma * sqrt(r) dW
dy = -a * y dt + b dV
ds = mu * s dt + vol * s dS
dp = g * (y - p - p^3) dt + q * sqrt(1 + p^2) dU
dc = 5 * g * c * (1 - c) dt + q * c * (1 - c) dU
discount r
";

#[test]
fn every_instruction_set_gives_the_same_bits() {
    // The block loop runs in a baseline (SSE2) copy and, on processors with AVX2, an AVX2
    // copy of the same source; the values, the coarse grid of step doubling, the discount
    // factors and the fan-chart bands must agree bit for bit.
    let model = model(EVERY_SCHEME);
    let plan = planned(&model);
    assert!(matches!(
        plan.schemes[0],
        Scheme::Exact(ExactLaw::SquareRoot { .. })
    ));
    assert!(matches!(
        plan.schemes[2],
        Scheme::Exact(ExactLaw::Lognormal { .. })
    ));
    assert_eq!(plan.schemes[3..], [Scheme::Euler, Scheme::Euler]);
    let options = SimulationOptions {
        step_doubling: true,
        band_times: 8,
        dates: vec![0.5, 1.0],
        ..options(1_000, 40, 1.0, 91)
    };
    let bits = |isa: Isa| {
        let samples = simulate_paths_on(&model, &plan, &options, isa).unwrap();
        let discount = samples.discount.as_ref().unwrap();
        let mut all: Vec<u64> = Vec::new();
        for values in [&samples.values, samples.coarse.as_ref().unwrap()] {
            all.extend(values.iter().flatten().flatten().map(|x| x.to_bits()));
        }
        all.extend(discount.values.iter().flatten().map(|x| x.to_bits()));
        all.extend(
            samples
                .band_values
                .iter()
                .flatten()
                .flatten()
                .map(|x| x.to_bits()),
        );
        all
    };
    let baseline = bits(Isa::Baseline);
    assert!(baseline.len() > 2 * 5 * 2 * 1_000);
    for isa in Isa::available() {
        assert_eq!(bits(isa), baseline, "{isa:?}");
    }
}

#[test]
fn json_report_has_the_documented_shape() {
    let model = model(OU);
    let plan = planned(&model);
    let mut result = simulate(&model, &plan, &options(2_000, 10, 1.0, 5)).unwrap();
    result.attach_closed_forms(&[Some((0.03, 1e-4))]);
    let json = to_json(&result);
    let keys = |v: &serde_json::Value| -> Vec<String> {
        let mut k: Vec<String> = v.as_object().unwrap().keys().cloned().collect();
        k.sort();
        k
    };
    assert_eq!(
        keys(&json),
        ["clock", "dates", "notes", "paths", "seed", "steps"]
    );
    assert_eq!(json["paths"], 2000);
    assert_eq!(json["steps"], 10);
    assert_eq!(json["seed"], 5);
    assert_eq!(json["clock"], "year");
    assert_eq!(json["dates"].as_array().unwrap().len(), 1);
    assert_eq!(json["dates"][0]["at"], 1.0);
    let state = &json["dates"][0]["factors"][0];
    assert_eq!(
        keys(state),
        [
            "below",
            "bias",
            "closed_form",
            "mean",
            "mean_se",
            "name",
            "quantiles",
            "quantiles_se",
            "scheme",
            "variance",
            "variance_se"
        ]
    );
    assert_eq!(state["name"], "r");
    assert_eq!(
        keys(&state["quantiles"]),
        ["0.01", "0.05", "0.5", "0.95", "0.99"]
    );
    assert_eq!(
        keys(&state["quantiles_se"]),
        ["0.01", "0.05", "0.5", "0.95", "0.99"]
    );
    assert_eq!(
        keys(&state["closed_form"]),
        [
            "below",
            "mean",
            "variance",
            "z_below",
            "z_mean",
            "z_variance"
        ]
    );
    // An exact scheme has no bias estimate; no threshold, no probability.
    assert!(state["bias"].is_null());
    assert!(state["below"].is_null());
    result.attach_closed_forms(&[None]);
    assert!(to_json(&result)["dates"][0]["factors"][0]["closed_form"].is_null());
}

#[test]
fn check_passes_against_the_calculus_and_flags_a_wrong_closed_form() {
    let model = model(OU);
    let derivation = derive(&model);
    let plan = plan(&model, &derivation);
    let t = 1.0;
    let mut result = simulate(&model, &plan, &options(50_000, 10, t, 12)).unwrap();
    let moments = moments_at(&model, &derivation, t);
    let closed: Vec<Option<(f64, f64)>> = moments
        .mean
        .iter()
        .zip(&moments.variance)
        .map(|(m, v)| m.zip(*v))
        .collect();
    assert!(closed[0].is_some());
    result.attach_closed_forms(&closed);
    assert!(check(&result).is_empty(), "{:?}", check(&result));

    // A mean off by ten standard errors is reported, and only the mean.
    let (mean, variance) = closed[0].unwrap();
    result.attach_closed_forms(&[Some((mean + 10.0 * result.states[0].mean_se, variance))]);
    let disagreements = check(&result);
    assert_eq!(disagreements.len(), 1);
    assert_eq!(disagreements[0].figure, "mean");
    assert!(disagreements[0].to_string().starts_with("mean of `r`"));
    let text = render_text(&result);
    assert!(
        text.starts_with("simulated 50000 paths, 10 steps to t = 1 year, seed 12"),
        "{text}"
    );
    assert!(text.contains("closed form: mean"));
    assert!(text.contains("q(0.99)"));
}

#[test]
fn fan_chart_is_well_formed_svg_with_one_panel_per_state() {
    let model = model(MIXED);
    let plan = planned(&model);
    let options = SimulationOptions {
        band_times: 25,
        ..options(2_000, 50, 1.0, 1)
    };
    let result = simulate(&model, &plan, &options).unwrap();
    let bands = result.bands.as_ref().unwrap();
    assert_eq!(bands.times.len(), 26);
    assert_eq!(bands.times[0], 0.0);
    assert!((bands.times[25] - 1.0).abs() < 1e-12);
    // At t = 0 every band collapses onto the initial value.
    assert_eq!(bands.quantiles[1][0], [1.0; 5]);
    let closed_means: Vec<Vec<Option<f64>>> = vec![
        vec![None; bands.times.len()],
        bands.times.iter().map(|t| Some((-0.5 * t).exp())).collect(),
        vec![None; bands.times.len()],
    ];
    let svg = fan_chart_svg(&result, Some(&closed_means)).unwrap();
    let document = roxmltree::Document::parse(&svg).expect("the chart is well-formed XML");
    assert_eq!(document.root_element().tag_name().name(), "svg");
    let count = |name: &str| {
        document
            .descendants()
            .filter(|n| n.tag_name().name() == name)
            .count()
    };
    // Two shaded bands per state.
    assert!(count("polygon") >= 6, "{} polygons", count("polygon"));
    let texts: Vec<&str> = document
        .descendants()
        .filter(|n| n.tag_name().name() == "text")
        .filter_map(|n| n.text())
        .map(str::trim)
        .collect();
    for name in ["r:", "y:", "p:"] {
        assert!(
            texts.iter().any(|t| t.starts_with(name)),
            "no caption for {name}"
        );
    }
    assert!(texts.contains(&"closed-form mean"));
    assert!(texts.contains(&"t (year)"));
}

#[test]
fn unusable_models_and_options_give_clear_errors() {
    let missing = analyze(
        "shock W\nfactor x = 1\nfactor y = 2\ndx = -x dt + 1 dW\n",
        "test",
    )
    .model;
    let plan = plan_from_model(&missing);
    let error = simulate(&missing, &plan, &options(10, 10, 1.0, 1)).unwrap_err();
    assert_eq!(error, SimulateError::MissingEquation { state: "y".into() });
    assert!(error.to_string().contains("`y` has no equation"));

    let unresolved = analyze(
        "shock W\nfactor x = 1\ndx = -nothing * x dt + 1 dW\n",
        "test",
    )
    .model;
    let plan = plan_from_model(&unresolved);
    let error = simulate(&unresolved, &plan, &options(10, 10, 1.0, 1)).unwrap_err();
    assert_eq!(
        error,
        SimulateError::UnresolvedEquation { state: "x".into() }
    );

    let ou = model(OU);
    let plan = plan_from_model(&ou);
    assert_eq!(
        simulate(&ou, &plan, &options(0, 10, 1.0, 1)).unwrap_err(),
        SimulateError::NoPaths
    );
    assert_eq!(
        simulate(&ou, &plan, &options(10, 0, 1.0, 1)).unwrap_err(),
        SimulateError::NoSteps
    );
    assert_eq!(
        simulate(&ou, &plan, &options(10, 10, -1.0, 1)).unwrap_err(),
        SimulateError::BadTime { at: -1.0 }
    );
    let empty = analyze("param a = 1\n", "test").model;
    assert_eq!(
        simulate(&empty, &plan_from_model(&empty), &options(10, 10, 1.0, 1)).unwrap_err(),
        SimulateError::NoStates
    );
}

#[test]
fn indefinite_correlation_is_repaired_with_a_warning() {
    let analysis = analyze(
        "
        shock A, B, C
        corr A B = -0.9
        corr A C = -0.9
        corr B C = -0.9
        factor x = 0
        factor y = 0
        factor z = 0
        dx = 0.1 * x^2 dt + 1 dA
        dy = 1 dB
        dz = 1 dC
        ",
        "test",
    );
    let model = analysis.model;
    let result = simulate(
        &model,
        &plan_from_model(&model),
        &options(4_000, 10, 1.0, 2),
    )
    .unwrap();
    assert!(result
        .warnings
        .iter()
        .any(|w| w.contains("not positive semi-definite")));
    assert!(result
        .states
        .iter()
        .all(|s| s.mean.is_finite() && s.variance.is_finite()));
}

#[test]
fn coupled_states_keep_exact_schemes_only_when_noises_are_not_shared() {
    // y is Ornstein–Uhlenbeck, but its noise drives the Euler state p too: an independent
    // Gaussian draw for y would lose the coupling, so y goes to Euler as well.
    let shared = model(
        "
        param a = 0.5 [1/year]
        param b = 0.2 [1/sqrt(year)]
        shock W
        factor y = 1
        factor p = 0
        dy = -a * y dt + b dW
        dp = -a * p^3 dt + b dW
        ",
    );
    assert_eq!(planned(&shared).schemes, vec![Scheme::Euler, Scheme::Euler]);
    let separate = model(
        "
        param a = 0.5 [1/year]
        param b = 0.2 [1/sqrt(year)]
        shock W, V
        factor y = 1
        factor p = 0
        dy = -a * y dt + b dW
        dp = -a * p^3 dt + b dV
        ",
    );
    assert_eq!(
        planned(&separate).schemes,
        vec![Scheme::Exact(ExactLaw::LinearGaussian), Scheme::Euler]
    );
}

#[test]
fn closed_form_means_on_the_band_grid_follow_vasicek() {
    let model = model(OU);
    let derivation = derive(&model);
    let times = [0.0, 0.5, 2.0];
    let means = sdeck_simulate::closed_form_means(&model, &derivation, &times);
    assert_eq!(means.len(), 1);
    for (t, mean) in times.iter().zip(&means[0]) {
        // Vasicek 1977, §4: θ + (r0 − θ)e^{−κt}.
        let expected = 0.04 + (0.01 - 0.04) * (-1.2 * t).exp();
        assert!((mean.unwrap() - expected).abs() < 1e-12, "t = {t}");
    }
}

#[test]
fn a_hand_made_plan_that_does_not_fit_the_model_is_refused() {
    let model = model(OU);
    let mut plan = plan_from_model(&model);
    plan.schemes.push(Scheme::Euler);
    assert!(matches!(
        simulate(&model, &plan, &options(10, 10, 1.0, 1)),
        Err(SimulateError::InconsistentPlan(_))
    ));
    let mut plan = plan_from_model(&model);
    plan.gaussian_group = None;
    assert!(matches!(
        simulate(&model, &plan, &options(10, 10, 1.0, 1)),
        Err(SimulateError::InconsistentPlan(_))
    ));
}

#[test]
fn truncation_applies_to_roots_of_non_negative_states_only() {
    // v under sqrt: truncated. p under sqrt(1 + p^2): the argument is positive anyway and
    // p may be negative, so it is left alone. S under sqrt(v * S) with a declared domain
    // S > 0: truncated to keep to that domain.
    let model = model(
        "
        param k = 1 [1/year]
        param level = 4%
        param b = 0.2 [1/sqrt(year)]
        param c = 1 [1/year]
        shock W, V, U
        factor v = 4% >= 0
        factor p = 0
        factor S = 1 > 0
        dv = k * (level - v) dt + b * sqrt(v) dW
        dp = -k * p dt + b * sqrt(1 + p^2) dV
        dS = k * S dt + sqrt(c * v * S) dU
        ",
    );
    let plan = Plan::all_euler(&model);
    assert_eq!(plan.truncated, vec![true, false, true]);
    let samples = simulate_paths(&model, &plan, &options(2_000, 50, 1.0, 3)).unwrap();
    assert!(
        samples.finals()[1].iter().any(|p| *p < 0.0),
        "p must keep its negative values"
    );
}
