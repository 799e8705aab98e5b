//! `expect prob(...)`, `quantile(...)`, `price(...)` and `yield(...)` against the "laws"
//! records of tests/reference/expected.json, computed independently in Python; each
//! record names its source (Vasicek 1977 and Cox, Ingersoll & Ross 1985 bond prices,
//! Brigo & Mercurio 2006 for the two-factor Gaussian price, scipy.stats norm, ncx2 and
//! lognorm, Heston 1993 with scipy quadrature of the Gil-Pelaez integral). Each record
//! becomes an `expect` line appended to its model file; the line goes through the whole
//! chain (grammar, units, calculus, the expectation rule).

use sdeck_checks::{check, FileCheck, RuleSettings};
use serde_json::Value;
use std::path::PathBuf;

fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../..")
}

fn run(text: &str) -> FileCheck {
    check(text, "reference", &RuleSettings::default())
}

fn failed(c: &FileCheck) -> Vec<String> {
    c.diagnostics
        .iter()
        .filter(|d| d.rule.name() == "expectation-failed")
        .map(|d| d.message.clone())
        .collect()
}

/// The value an `expect` line derives, through the public entry points.
fn derived(c: &FileCheck) -> f64 {
    let model = &c.analysis.model;
    let e = model.expectations.last().expect("the expectation resolves");
    sdeck_calculus::expectation_value(model, &c.derivation, e).expect("a value")
}

/// A band of ±`width` around `value`, written with enough digits.
fn band(value: f64, width: f64) -> String {
    format!("in [{:e}, {:e}]", value - width, value + width)
}

#[test]
fn pinned_laws_and_curves_agree_with_the_independent_reference() {
    let text = std::fs::read_to_string(root().join("tests/reference/expected.json"))
        .expect("tests/reference/expected.json is committed");
    let expected: Value = serde_json::from_str(&text).expect("valid JSON");
    let records = expected["laws"].as_array().expect("law records");
    let mut checked = 0;
    let mut failures = Vec::new();
    for record in records {
        let file = record["file"].as_str().expect("file");
        let source = std::fs::read_to_string(root().join(file)).expect("model file");
        let reference = record["value"].as_f64().expect("value");
        let tolerance = record["tolerance"].as_f64().expect("tolerance");
        let at = record["at"].as_f64();
        let factor = record["factor"].as_str();
        let argument = record["argument"].as_f64();
        // (the appended lines, the reference value of the figure, its scale)
        let cases: Vec<(String, f64, f64)> = match record["check"].as_str() {
            Some("bond_price") => {
                let names: Vec<&str> = record["rate"]
                    .as_array()
                    .expect("rate")
                    .iter()
                    .filter_map(Value::as_str)
                    .collect();
                let t = at.expect("maturity");
                let discount = format!("discount {}\n", names.join(" + "));
                vec![
                    (
                        format!("{discount}expect price({t} year)"),
                        reference,
                        reference,
                    ),
                    // The zero yield −ln P / T, an annual decimal (the clock is the year).
                    (
                        format!("{discount}expect yield({t} year)"),
                        -reference.ln() / t,
                        1.0 / t,
                    ),
                ]
            }
            Some("cdf") => {
                let (x, t, q) = (
                    factor.expect("factor"),
                    at.expect("at"),
                    argument.expect("level"),
                );
                vec![
                    (format!("expect prob({x} < {q:e}, {t})"), reference, 1.0),
                    (
                        format!("expect prob({x} > {q:e}, {t})"),
                        1.0 - reference,
                        1.0,
                    ),
                ]
            }
            Some("quantile") => {
                let (x, t, p) = (
                    factor.expect("factor"),
                    at.expect("at"),
                    argument.expect("probability"),
                );
                vec![(
                    format!("expect quantile({x}, {p}, {t} year)"),
                    reference,
                    reference,
                )]
            }
            _ => continue,
        };
        for (line, value, scale) in cases {
            let width = tolerance * scale.abs();
            let inside = format!("{source}\n{line} {}\n", band(value, 1e3 * width));
            let c = run(&inside);
            let ours = derived(&c);
            if (ours - value).abs() > width {
                failures.push(format!("{file}: {line}: ours {ours}, reference {value}"));
            }
            if !failed(&c).is_empty() {
                failures.push(format!("{file}: {line}: {:?}", failed(&c)));
            }
            // Moved off the reference by far more than the tolerance, it fails.
            let outside = format!("{source}\n{line} {}\n", band(value + 1e6 * width, width));
            if failed(&run(&outside)).len() != 1 {
                failures.push(format!("{file}: {line}: a wrong band does not fail"));
            }
            checked += 1;
        }
    }
    assert!(checked >= 40, "only {checked} figures checked");
    assert!(failures.is_empty(), "{}", failures.join("\n"));
}

const VASICEK: &str = "model stress\nclock month\nhorizon 1 year\n\
    param kappa = 0.8 [1/year]\nparam theta = 4%\nparam sigma = 1.5% [1/sqrt(year)]\n\
    shock W\nfactor r = 2.5%\ndr = kappa * (theta - r) dt + sigma dW\n";

#[test]
fn messages_give_probabilities_and_yields_in_percent_and_times_as_written() {
    // P(r₁ < 0) = scipy.stats.norm.cdf(0, m, s) = 8.461457e-4 with the Vasicek mean
    // m = θ + (r₀ − θ)e^{−κ} = 3.326007% and s² = σ²(1 − e^{−2κ})/(2κ), s = 1.059402%
    // (Vasicek 1977); shown as 0.08461%.
    let c = run(&format!("{VASICEK}expect prob(r < 0, 1 year) < 0.01%\n"));
    let messages = failed(&c);
    assert_eq!(messages.len(), 1, "{messages:?}");
    assert!(
        messages[0].starts_with("prob(r < 0, 1 year) = 0.08461%; "),
        "{}",
        messages[0]
    );
    assert!(
        messages[0].ends_with("; expected < 0.01%"),
        "{}",
        messages[0]
    );
    // The yield in % and the bound as written; no `discount` line is a clear failure.
    let c = run(&format!("{VASICEK}expect yield(10 year) in [2.5%, 3%]\n"));
    let messages = failed(&c);
    assert_eq!(messages.len(), 1);
    assert!(
        messages[0].contains("yield(10 year) does not exist: the model has no `discount` line"),
        "{}",
        messages[0]
    );
    let help = c
        .diagnostics
        .iter()
        .find(|d| d.rule.name() == "expectation-failed")
        .and_then(|d| d.help.clone())
        .unwrap_or_default();
    assert!(help.contains("discount r"), "{help}");
    let c = run(&format!(
        "{VASICEK}discount r\nexpect yield(10 year) in [2.5%, 3%]\n"
    ));
    let messages = failed(&c);
    assert_eq!(messages.len(), 1, "{messages:?}");
    assert!(
        messages[0].starts_with("yield(10 year) = 3.")
            && messages[0].ends_with("%; expected in [2.5%, 3%]"),
        "{}",
        messages[0]
    );
    // A quantile bound written in % is shown in %.
    let c = run(&format!("{VASICEK}expect quantile(r, 99%, 6 month) < 1%\n"));
    let messages = failed(&c);
    assert_eq!(messages.len(), 1);
    assert!(
        messages[0].starts_with("quantile(r, 99%, 6 month) = ")
            && messages[0].contains("%; expected < 1%"),
        "{}",
        messages[0]
    );
}

#[test]
fn rates_in_units_of_time_convert_and_bad_arguments_are_explained() {
    // 0.3% per month is 3.6% per year; the ten-year yield of this model is about 3.7%.
    let c = run(&format!(
        "{VASICEK}discount r\nexpect yield(10 year) in [0.3% [1/month], 0.33% [1/month]]\n"
    ));
    assert!(failed(&c).is_empty(), "{:?}", c.diagnostics);
    let e = &c.analysis.model.expectations[0];
    let lower = e.admissible.lower.expect("a lower end").0;
    assert!((lower - 0.036).abs() < 1e-15, "{lower}");
    for (line, rule, says) in [
        (
            "expect prob(r <= 0, 1 year) < 2%",
            "syntax",
            "the same with `<`",
        ),
        (
            "expect prob(r, 1 year) < 2%",
            "syntax",
            "prob(FACTOR < LEVEL",
        ),
        ("expect yield(r) < 2%", "syntax", "takes one maturity"),
        (
            "expect quantile(r, 1.5, 1 year) < 2%",
            "bound-violated",
            "strictly between 0 and 1",
        ),
        (
            "expect quantile(r, 50% [month], 1 year) < 2%",
            "dimension-mismatch",
            "a pure number",
        ),
        (
            "expect prob(r < 1 [month], 1 year) < 2%",
            "dimension-mismatch",
            "the level",
        ),
        (
            "expect price(0 year) > 0.5",
            "bound-violated",
            "positive time",
        ),
        ("expect prob(q < 0, 1 year) < 2%", "unknown-name", "q"),
    ] {
        let c = run(&format!("{VASICEK}discount r\n{line}\n"));
        let found: Vec<_> = c
            .diagnostics
            .iter()
            .filter(|d| d.rule.name() == rule)
            .collect();
        assert_eq!(found.len(), 1, "{line}: {:?}", c.diagnostics);
        let text = format!(
            "{} {}",
            found[0].message,
            found[0].help.clone().unwrap_or_default()
        );
        assert!(text.contains(says), "{line}: {text}");
    }
}

#[test]
fn failed_expectations_speak_in_the_units_the_bound_is_written_in() {
    // κ = 25 per year: half-life ln 2/25 year = 10.12 day; stationary-free OU figures
    // from Vasicek 1977: mean at 1 month 3% − 1%·e^{−25/12} = 2.875%, sd at 1 year
    // 1%·√((1 − e^{−50})/50) = 14.14bp.
    let model = "model exp\nclock year\nhorizon 1 year\nparam k = 25 [1/year]\n\
                 param level = 3%\nparam vol = 1% [1/sqrt(year)]\nshock W\nfactor s = 2%\n\
                 ds = k*(level - s) dt + vol dW\n";
    for (line, message) in [
        (
            "expect halflife(s) < 10 day",
            "halflife(s) = 10.12 day; expected < 10 day",
        ),
        (
            "expect mean(s, 1 month) in [2.5%, 2.6%]",
            "mean(s, 1 month) = 2.875%; expected in [2.5%, 2.6%]",
        ),
        (
            "expect sd(s) < 10bp",
            "sd(s, 1 year) = 14.14bp; expected < 10bp",
        ),
        (
            "expect halflife(s) >= 2 week",
            "halflife(s) = 1.446 week; expected ≥ 2 week",
        ),
    ] {
        let c = run(&format!("{model}{line}\n"));
        let messages = failed(&c);
        assert_eq!(messages, vec![message.to_string()], "{line}");
    }
}
