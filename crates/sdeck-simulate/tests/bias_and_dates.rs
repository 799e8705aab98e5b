//! The cross-check that does not cry wolf: a square-root variance driving a log-price
//! (Feller condition met and broken), the bias of discretised schemes by step doubling,
//! several reporting dates, P(X < q) against closed-form laws, and degenerate sizes.

use sdeck_calculus::laws::{law_of, LawKind};
use sdeck_calculus::{derive, moments_at};
use sdeck_semantics::{FactorId, Model};
use sdeck_simulate::{
    check, closed_figures_at, plan, render_text, simulate_and_compare_below, simulate_paths,
    to_json, verdicts, ClosedFigures, ExactLaw, Plan, Scheme, SimulateError, SimulationOptions,
    SimulationResult,
};
use statrs::distribution::{ContinuousCDF, Normal};

mod common;
use common::{model, options};

/// A log index driven by a square-root variance with leverage; `xi` sets whether Feller's
/// condition 2·kappa·theta >= xi² holds (0.35: 0.225 >= 0.1225) or not (0.9: 0.225 < 0.81).
fn variance_driven(xi: f64) -> String {
    format!(
        "
clock year
param mu = 5% [1/year]
param kappa = 2.5 [1/year] > 0
param theta = 0.045 [1/year] >= 0
param xi = {xi} [1/year] > 0
shock W_x
shock W_v
corr W_x W_v = -0.65
factor x = 0
factor v = 0.05 [1/year] >= 0
dx = (mu - 0.5 * v) dt + sqrt(v) dW_x
dv = kappa * (theta - v) dt + xi * sqrt(v) dW_v
"
    )
}

fn simulated(
    model: &Model,
    options: &SimulationOptions,
    below: &[Option<f64>],
) -> SimulationResult {
    simulate_and_compare_below(model, &derive(model), options, below).unwrap()
}

#[test]
fn a_square_root_variance_is_sampled_exactly_and_drives_the_log_price_step() {
    for xi in [0.35, 0.9] {
        let model = model(&variance_driven(xi));
        let derivation = derive(&model);
        let plan = plan(&model, &derivation);
        assert!(
            matches!(plan.schemes[1], Scheme::Exact(ExactLaw::SquareRoot { .. })),
            "xi {xi}: {:?}",
            plan.schemes
        );
        let Scheme::VarianceDriven(driven) = &plan.schemes[0] else {
            panic!("xi {xi}: {:?}", plan.schemes);
        };
        assert_eq!(driven.variance, 1);
        assert!((driven.correlation + 0.65).abs() < 1e-12);
        assert!((driven.drift_slope + 0.5).abs() < 1e-12);

        let result = simulated(&model, &options(100_000, 20, &[0.5, 1.0], 7), &[]);
        let (disagreements, _) = verdicts(&result);
        assert!(
            disagreements.is_empty(),
            "xi {xi}: {disagreements:?}\n{}",
            render_text(&result)
        );
        for date in &result.dates {
            // The variance is exact: no bias estimate, and it is compared directly.
            assert!(date.states[1].bias.is_none());
            assert!(date.states[0].bias.is_some());
            assert!(date.states.iter().all(|s| s.closed_form.is_some()));
        }
        // The mean of the log index is the textbook one (Heston 1993 dynamics):
        // mu·t − (theta·t + (v0 − theta)(1 − e^{−kappa t})/kappa)/2.
        let t = 1.0;
        let expected = 0.05 * t - (0.045 * t + 0.005 * (1.0 - (-2.5f64 * t).exp()) / 2.5) / 2.0;
        let x = &result.states[0];
        let b = x.bias.as_ref().unwrap();
        let z = (b.mean_extrapolated - expected) / b.mean_extrapolated_se;
        assert!(
            z.abs() < 5.0,
            "xi {xi}: {} vs {expected}",
            b.mean_extrapolated
        );

        // A wrong closed form still fails: the mean shifted by 10 standard errors.
        let mut wrong = result.clone();
        let mut figures = closed_figures_at(&model, &derivation, 1.0, &[]);
        figures[0].mean = figures[0]
            .mean
            .map(|m| m + 10.0 * b.mean_extrapolated_se.max(x.mean_se));
        wrong.attach_closed_figures(1, &figures);
        let failures = check(&wrong);
        assert_eq!(failures.len(), 1, "xi {xi}: {failures:?}");
        assert_eq!(failures[0].figure, "mean");
    }
}

/// The same variance driving a price written as a price, S₀ = 100.
fn price_driven(xi: f64) -> String {
    variance_driven(xi)
        .replace("factor x = 0", "factor S = 100")
        .replace(
            "dx = (mu - 0.5 * v) dt + sqrt(v) dW_x",
            "dS = mu * S dt + sqrt(v) * S dW_x",
        )
}

#[test]
fn a_price_times_the_root_of_a_square_root_variance_takes_the_log_price_step() {
    for xi in [0.35, 0.9] {
        let model = model(&price_driven(xi));
        let derivation = derive(&model);
        let plan = plan(&model, &derivation);
        assert!(
            matches!(plan.schemes[1], Scheme::Exact(ExactLaw::SquareRoot { .. })),
            "xi {xi}: {:?}",
            plan.schemes
        );
        let Scheme::VarianceDriven(driven) = &plan.schemes[0] else {
            panic!("xi {xi}: {:?}", plan.schemes);
        };
        // ln S: drift mu + (0 − 1²/2) v by Itô's formula, loading 1.
        assert!(driven.price);
        assert!((driven.drift_constant - 0.05).abs() < 1e-12);
        assert!((driven.drift_slope + 0.5).abs() < 1e-12);
        assert!((driven.loading - 1.0).abs() < 1e-12);
        assert!(plan
            .describe_state(0)
            .starts_with("price by the log-price step"));

        let result = simulated(&model, &options(100_000, 20, &[0.5, 1.0], 11), &[]);
        let (disagreements, _) = verdicts(&result);
        assert!(
            disagreements.is_empty(),
            "xi {xi}: {disagreements:?}\n{}",
            render_text(&result)
        );
        // E[S_t] = S₀ e^{mu t}: the price less its drift is a martingale (Heston 1993).
        let expected = 100.0 * 0.05f64.exp();
        let s = &result.states[0];
        let b = s.bias.as_ref().unwrap();
        let z = (b.mean_extrapolated - expected) / b.mean_extrapolated_se;
        assert!(
            z.abs() < 5.0,
            "xi {xi}: {} vs {expected}",
            b.mean_extrapolated
        );
        // exp of the log-price step: the 1% quantile of the price stays above zero.
        assert!(s.quantiles[0].value > 0.0, "xi {xi}: {:?}", s.quantiles[0]);

        // A wrong closed form still fails.
        let mut wrong = result.clone();
        let mut figures = closed_figures_at(&model, &derivation, 1.0, &[]);
        figures[0].mean = figures[0]
            .mean
            .map(|m| m + 10.0 * b.mean_extrapolated_se.max(s.mean_se));
        wrong.attach_closed_figures(1, &figures);
        let failures = check(&wrong);
        assert_eq!(failures.len(), 1, "xi {xi}: {failures:?}");
        assert_eq!(failures[0].figure, "mean");
    }
}

/// A price whose start is not positive has no logarithm: it stays on Euler–Maruyama.
#[test]
fn a_price_starting_at_zero_keeps_euler() {
    let model = model(&price_driven(0.35).replace("factor S = 100", "factor S = 0"));
    let plan = plan(&model, &derive(&model));
    assert_eq!(plan.schemes[0], Scheme::Euler);
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

/// Vasicek 1977: mean θ + (r0 − θ)e^{−κt}, variance σ²(1 − e^{−2κt})/(2κ).
fn vasicek(t: f64) -> (f64, f64) {
    let (kappa, theta, sigma, r0) = (1.2, 0.04, 0.015, 0.01);
    let e = (-kappa * t).exp();
    (
        theta + (r0 - theta) * e,
        sigma * sigma * (1.0 - e * e) / (2.0 * kappa),
    )
}

#[test]
fn euler_bias_is_estimated_by_step_doubling_and_never_reported_as_a_disagreement() {
    let model = model(OU);
    let derivation = derive(&model);
    let euler = Plan::all_euler(&model);
    for steps in [2, 4, 8, 64] {
        let samples = simulate_paths(&model, &euler, &options(200_000, steps, &[2.0], 3)).unwrap();
        let mut result = SimulationResult::from_samples(&samples);
        result.attach_closed_figures(0, &closed_figures_at(&model, &derivation, 2.0, &[]));
        let (disagreements, undecided) = verdicts(&result);
        assert!(disagreements.is_empty(), "{steps} steps: {disagreements:?}");
        let state = &result.states[0];
        let bias = state.bias.as_ref().unwrap();
        // The Euler variance after n steps of Δ has a bias of order Δ (Kloeden & Platen
        // 1992, §14.1): once Δ is small against 1/κ, the estimate has the sign and the
        // size of the exact bias.
        let exact_bias = euler_ou_variance(steps, 2.0) - vasicek(2.0).1;
        if steps >= 64 {
            assert!(
                (bias.variance - exact_bias).abs() < 0.2 * exact_bias.abs(),
                "{steps} steps: {} vs {exact_bias}",
                bias.variance
            );
        }
        for u in &undecided {
            let needed = u.steps_needed.unwrap();
            assert!(needed > steps, "{u}");
            assert!(u.to_string().contains("--steps"));
        }
        if steps == 2 {
            // Without step doubling, the raw figure would be flagged: the bias is large.
            let z_raw = (state.variance - vasicek(2.0).1) / state.variance_se;
            assert!(z_raw.abs() > 4.0, "{z_raw}");
        }
    }
    // With enough steps for the bias to be below the standard error, a wrong closed form
    // still fails.
    let samples = simulate_paths(&model, &euler, &options(50_000, 512, &[2.0], 3)).unwrap();
    let mut result = SimulationResult::from_samples(&samples);
    let (mean, variance) = vasicek(2.0);
    let se = result.states[0].bias.as_ref().unwrap().mean_extrapolated_se;
    result.attach_closed_figures(
        0,
        &[ClosedFigures {
            mean: Some(mean + 10.0 * se),
            variance: Some(variance),
            below: None,
        }],
    );
    let (failures, undecided) = verdicts(&result);
    assert_eq!(failures.len(), 1, "{failures:?} {undecided:?}");
    assert_eq!(failures[0].figure, "mean");
}

/// Variance of the Euler scheme for dr = κ(θ − r)dt + σ dW after n steps of Δ:
/// Σ_{k<n} (1 − κΔ)^{2k} σ²Δ (a geometric sum; Kloeden & Platen 1992, §9.1).
fn euler_ou_variance(n: usize, t: f64) -> f64 {
    let (kappa, sigma) = (1.2, 0.015);
    let dt = t / n as f64;
    let a = (1.0 - kappa * dt).powi(2);
    (0..n).map(|k| a.powi(k as i32)).sum::<f64>() * sigma * sigma * dt
}

#[test]
fn several_dates_give_one_entry_each_against_vasicek() {
    let model = model(OU);
    let dates = [0.25, 0.5, 1.0];
    let result = simulated(&model, &options(40_000, 40, &dates, 11), &[Some(0.0)]);
    assert_eq!(result.dates.len(), 3);
    let json = to_json(&result);
    let entries = json["dates"].as_array().unwrap();
    assert_eq!(entries.len(), 3);
    for ((entry, date), t) in entries.iter().zip(&result.dates).zip(dates) {
        assert_eq!(entry["at"], t);
        let state = &date.states[0];
        let (mean, variance) = vasicek(t);
        assert!(((state.mean - mean) / state.mean_se).abs() < 5.0, "t {t}");
        assert!(
            ((state.variance - variance) / state.variance_se).abs() < 5.0,
            "t {t}"
        );
        // P(r < 0) from the normal law of the Vasicek rate.
        let p = Normal::new(mean, variance.sqrt()).unwrap().cdf(0.0);
        let below = state.below.as_ref().unwrap();
        assert!((below.probability - p).abs() < 5.0 * (p * (1.0 - p) / 40_000.0).sqrt());
        let closed = state.closed_form.as_ref().unwrap();
        assert!((closed.below.unwrap() - p).abs() < 1e-12);
        assert_eq!(entry["factors"][0]["below"]["threshold"], 0.0);
    }
    assert!(check(&result).is_empty());
}

#[test]
fn probabilities_below_match_the_lognormal_and_noncentral_chi_square_laws() {
    let gbm = model(
        "
clock year
param mu = 6% [1/year]
param sigma = 25% [1/sqrt(year)] > 0
shock W
factor s = 100 > 0
ds = mu * s dt + sigma * s dW
",
    );
    let derivation = derive(&gbm);
    // P(S_t < 100) = Φ((ln(100/100) − (μ − σ²/2)t)/(σ√t)) (Black & Scholes 1973).
    let law = law_of(&gbm, &derivation, FactorId::new(0), 1.0).unwrap();
    assert_eq!(law.kind(), LawKind::Lognormal);
    let expected = Normal::new(0.0, 1.0)
        .unwrap()
        .cdf(-(0.06 - 0.5 * 0.0625) / 0.25);
    assert!((law.cdf(100.0).unwrap() - expected).abs() < 1e-12);
    let result = simulated(&gbm, &options(40_000, 10, &[1.0], 5), &[Some(100.0)]);
    assert!(check(&result).is_empty(), "{}", render_text(&result));

    let cir = model(
        "
clock year
param kappa = 0.8 [1/year] > 0
param theta = 3% >= 0
param sigma = 20% [1/sqrt(year)] > 0
shock W
factor r = 2% >= 0
dr = kappa * (theta - r) dt + sigma * sqrt(r) dW
",
    );
    let derivation = derive(&cir);
    assert_eq!(
        law_of(&cir, &derivation, FactorId::new(0), 1.0).map(|l| l.kind()),
        Some(LawKind::NoncentralChiSquare)
    );
    let result = simulated(&cir, &options(40_000, 10, &[0.5, 1.0], 5), &[Some(0.01)]);
    assert!(check(&result).is_empty(), "{}", render_text(&result));
    // A wrong law fails: P shifted by 10 standard errors.
    let mut wrong = result.clone();
    let mut figures = closed_figures_at(&cir, &derivation, 1.0, &[Some(0.01)]);
    let below = wrong.states[0].below.as_ref().unwrap();
    figures[0].below = figures[0].below.map(|p| p + 10.0 * below.standard_error);
    wrong.attach_closed_figures(1, &figures);
    let failures = check(&wrong);
    assert_eq!(failures.len(), 1, "{failures:?}");
    assert!(failures[0].figure.starts_with("P(r < 0.01)"));
}

#[test]
fn one_path_gives_null_standard_errors_a_note_and_no_verdict() {
    let model = model(OU);
    let result = simulated(&model, &options(1, 10, &[1.0], 1), &[Some(0.0)]);
    let json = to_json(&result);
    let text = json.to_string();
    assert!(!text.contains("NaN") && !text.contains("inf"), "{text}");
    let state = &json["dates"][0]["factors"][0];
    assert!(state["mean"].is_number());
    assert!(state["mean_se"].is_null());
    assert!(state["variance"].is_null());
    assert!(json["notes"][0]
        .as_str()
        .unwrap()
        .contains("at least 2 paths"));
    let rendered = render_text(&result);
    assert!(
        !rendered.contains("NaN") && !rendered.contains("inf"),
        "{rendered}"
    );
    let (disagreements, undecided) = verdicts(&result);
    assert!(disagreements.is_empty());
    assert!(!undecided.is_empty());
}

#[test]
fn sizes_beyond_the_memory_limit_are_refused_before_simulating() {
    let model = model(OU);
    let options = SimulationOptions {
        paths: 1_000_000_000_000,
        memory_limit: Some(1 << 30),
        ..options(1, 10, &[0.5, 1.0], 1)
    };
    let error = simulate_paths(&model, &Plan::all_euler(&model), &options).unwrap_err();
    let SimulateError::TooLarge { max_paths, .. } = &error else {
        panic!("{error:?}");
    };
    assert!(*max_paths > 1_000 && *max_paths < 1 << 30);
    assert!(error.to_string().contains("use at most"), "{error}");
    let zero = SimulationOptions {
        paths: 0,
        ..options.clone()
    };
    assert_eq!(
        simulate_paths(&model, &Plan::all_euler(&model), &zero),
        Err(SimulateError::NoPaths)
    );
    let moments = moments_at(&model, &derive(&model), 1.0);
    assert!(moments.mean[0].is_some());
}
