//! Bond prices along the paths of a model with a `discount` line: P(0, t) = E[exp(−∫₀ᵗ r ds)]
//! estimated by the trapezoid rule on the step grid, against the textbook closed forms
//! (Vasicek 1977, Cox, Ingersoll & Ross 1985), against the calculus layer's curve, and a
//! wrong curve that must fail the check.

use sdeck_calculus::derive;
use sdeck_semantics::Model;
use sdeck_simulate::report::{DISCOUNT_FIGURE, DISCOUNT_NAME};
use sdeck_simulate::{check, render_text, simulate_and_compare, to_json, verdicts};

mod common;
use common::{model, options};

const VASICEK: &str = "
clock year
measure risk-neutral
param kappa = 0.8 [1/year] > 0
param theta = 4%
param sigma = 1.5% [1/sqrt(year)] > 0
shock W
factor r = 2%
dr = kappa * (theta - r) dt + sigma dW
discount r
";

/// Vasicek 1977 (Journal of Financial Economics 5, eq. 27): P(0, T) = A e^{−B r₀} with
/// B = (1 − e^{−κT})/κ and ln A = (θ − σ²/(2κ²))(B − T) − σ²B²/(4κ).
fn vasicek_price(kappa: f64, theta: f64, sigma: f64, r0: f64, t: f64) -> f64 {
    let b = (1.0 - (-kappa * t).exp()) / kappa;
    let log_a = (theta - sigma * sigma / (2.0 * kappa * kappa)) * (b - t)
        - sigma * sigma * b * b / (4.0 * kappa);
    (log_a - b * r0).exp()
}

/// Cox, Ingersoll & Ross 1985 (Econometrica 53, eq. 23): P(0, T) = A e^{−B r₀} with
/// h = √(κ² + 2σ²), A = [2h e^{(κ+h)T/2} / (2h + (κ+h)(e^{hT} − 1))]^{2κθ/σ²} and
/// B = 2(e^{hT} − 1) / (2h + (κ+h)(e^{hT} − 1)).
fn cir_price(kappa: f64, theta: f64, sigma: f64, r0: f64, t: f64) -> f64 {
    let h = (kappa * kappa + 2.0 * sigma * sigma).sqrt();
    let grow = (h * t).exp() - 1.0;
    let denominator = 2.0 * h + (kappa + h) * grow;
    let a = (2.0 * h * ((kappa + h) * t / 2.0).exp() / denominator)
        .powf(2.0 * kappa * theta / (sigma * sigma));
    a * (-2.0 * grow / denominator * r0).exp()
}

#[test]
fn vasicek_bond_prices_along_the_paths_match_the_closed_form() {
    let model = model(VASICEK);
    let derivation = derive(&model);
    let dates = [0.5, 1.0, 2.0, 5.0];
    let result =
        simulate_and_compare(&model, &derivation, &options(100_000, 100, &dates, 11)).unwrap();
    let (disagreements, undecided) = verdicts(&result);
    assert!(
        disagreements.is_empty(),
        "{disagreements:?}\n{}",
        render_text(&result)
    );
    assert!(undecided.is_empty(), "{undecided:?}");
    for date in &result.dates {
        let expected = vasicek_price(0.8, 0.04, 0.015, 0.02, date.at);
        let discount = date.discount.as_ref().unwrap();
        // The calculus layer's curve is the textbook one to rounding.
        let curve = discount.closed_form.unwrap();
        assert!((curve - expected).abs() < 1e-12, "{curve} vs {expected}");
        // The exact Gaussian step makes the trapezoid the only error: weak order 2.
        assert_eq!(discount.order, 2);
        let (_, extrapolated, se) = discount.bias.unwrap();
        assert!(se > 0.0 && se < 1e-3, "{se}");
        let z = (extrapolated - expected) / se;
        assert!(
            z.abs() < 4.0,
            "t {}: {extrapolated} vs {expected} (z {z})",
            date.at
        );
        assert!(discount.z.unwrap().abs() < 4.0);
    }
}

#[test]
fn a_coarse_grid_shows_the_trapezoid_bias_and_richardson_removes_it() {
    // Four steps over five years: the trapezoid's bias is many standard errors, the
    // extrapolation of weak order 2 takes it away.
    let model = model(VASICEK);
    let derivation = derive(&model);
    let result =
        simulate_and_compare(&model, &derivation, &options(200_000, 4, &[5.0], 3)).unwrap();
    let discount = result.dates[0].discount.as_ref().unwrap();
    let expected = vasicek_price(0.8, 0.04, 0.015, 0.02, 5.0);
    let raw_z = (discount.price - expected) / discount.standard_error;
    assert!(raw_z.abs() > 10.0, "raw z {raw_z}");
    let (bias, extrapolated, se) = discount.bias.unwrap();
    // The bias estimate has the sign and size of the error of the raw price.
    let error = discount.price - expected;
    assert!(
        (bias - error).abs() < 0.2 * error.abs(),
        "bias {bias} vs error {error}"
    );
    assert!(((extrapolated - expected) / se).abs() < 4.0);
    assert!(check(&result).is_empty(), "{}", render_text(&result));
}

#[test]
fn cir_bond_prices_along_the_paths_match_the_closed_form() {
    let source = "
clock year
measure risk-neutral
param kappa = 0.5 [1/year] > 0
param theta = 5%
param sigma = 10% [1/sqrt(year)] > 0
shock W
factor r = 3% >= 0
dr = kappa * (theta - r) dt + sigma * sqrt(r) dW
discount r
";
    let model = model(source);
    let derivation = derive(&model);
    let dates = [1.0, 3.0, 10.0];
    let result =
        simulate_and_compare(&model, &derivation, &options(100_000, 100, &dates, 5)).unwrap();
    assert_eq!(result.states[0].scheme, "exact (noncentral chi-square)");
    let (disagreements, _) = verdicts(&result);
    assert!(
        disagreements.is_empty(),
        "{disagreements:?}\n{}",
        render_text(&result)
    );
    for date in &result.dates {
        let expected = cir_price(0.5, 0.05, 0.1, 0.03, date.at);
        let discount = date.discount.as_ref().unwrap();
        assert!((discount.closed_form.unwrap() - expected).abs() < 1e-10);
        let (_, extrapolated, se) = discount.bias.unwrap();
        let z = (extrapolated - expected) / se;
        assert!(
            z.abs() < 4.0,
            "t {}: {extrapolated} vs {expected} (z {z})",
            date.at
        );
    }
}

#[test]
fn a_month_clock_gives_the_same_prices_as_a_year_clock() {
    // The rate is written per year; the month clock integrates it per month.
    let source = VASICEK.replace("clock year", "clock month");
    let model = model(&source);
    let derivation = derive(&model);
    let result =
        simulate_and_compare(&model, &derivation, &options(50_000, 60, &[24.0], 9)).unwrap();
    let discount = result.dates[0].discount.as_ref().unwrap();
    let expected = vasicek_price(0.8, 0.04, 0.015, 0.02, 2.0);
    assert!((discount.closed_form.unwrap() - expected).abs() < 1e-12);
    let (_, extrapolated, se) = discount.bias.unwrap();
    assert!(((extrapolated - expected) / se).abs() < 4.0);
}

fn demo(name: &str) -> Model {
    let path = std::path::Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("../../demo-models")
        .join(name);
    model(&std::fs::read_to_string(path).unwrap())
}

#[test]
fn the_two_factor_demo_bank_prices_agree_with_its_curve_and_a_wrong_curve_fails() {
    // Brigo & Mercurio 2006 (Interest Rate Models, 2nd ed., §4.2, G2++): the calculus
    // layer prices this curve through the mean and variance of ∫(x + y) (checked against
    // the book in the calculus tests); the paths price it independently.
    let model = demo("kestrel_bank_short_rate.sde");
    let derivation = derive(&model);
    let dates = [0.25, 1.0, 5.0, 10.0];
    let result =
        simulate_and_compare(&model, &derivation, &options(100_000, 200, &dates, 2026)).unwrap();
    let (disagreements, undecided) = verdicts(&result);
    assert!(
        disagreements.is_empty(),
        "{disagreements:?}\n{}",
        render_text(&result)
    );
    assert!(undecided.is_empty(), "{undecided:?}");
    let last = result.dates.last().unwrap().discount.clone().unwrap();
    assert!(last.closed_form.is_some() && last.z.is_some());
    // The ten-year yield the model pins is in [3.1%, 3.35%].
    let yield_10 = -last.price.ln() / 10.0;
    assert!((0.031..0.0335).contains(&yield_10), "{yield_10}");

    // JSON: one discount entry per date.
    let json = to_json(&result);
    let entries = json["dates"].as_array().unwrap();
    assert_eq!(entries.len(), dates.len());
    for entry in entries {
        let discount = &entry["discount"];
        assert!(discount["price"].as_f64().unwrap() > 0.0);
        assert!(discount["se"].as_f64().unwrap() > 0.0);
        assert!(discount["closed_form"].as_f64().is_some());
        assert!(discount["extrapolated"].as_f64().is_some());
    }

    // A wrong curve fails: the ten-year price shifted by 10 standard errors.
    let mut wrong = result.clone();
    let (_, _, se) = last.bias.unwrap();
    let shifted = last.closed_form.unwrap() + 10.0 * se.max(last.standard_error);
    wrong.attach_closed_price(dates.len() - 1, Some(shifted));
    let failures = check(&wrong);
    assert_eq!(failures.len(), 1, "{failures:?}");
    assert_eq!(failures[0].figure, DISCOUNT_FIGURE);
    assert_eq!(failures[0].state, DISCOUNT_NAME);
    assert!(failures[0].to_string().contains("bond price"));
}

#[test]
fn a_model_without_a_discount_line_reports_no_bond_price() {
    let model = model(&VASICEK.replace("discount r", ""));
    let derivation = derive(&model);
    let result = simulate_and_compare(&model, &derivation, &options(1_000, 10, &[1.0], 1)).unwrap();
    assert!(result.dates[0].discount.is_none());
    assert!(to_json(&result)["dates"][0]["discount"].is_null());
    assert!(!render_text(&result).contains("P(0, t)"));
}
