//! Dimensions and clock conversion as a model sees them. Day counts: ACT/365 Fixed
//! (day = year/365) and the 252-business-day year (common practice, no source).

use sdeck_semantics::{analyze, Analysis};

/// The rules found by the analysis, by line, beside `unused` where the analysis records
/// a name as used by nothing (the rule itself is decided in sdeck-checks from that record).
fn rules_at_lines(text: &str) -> Vec<(usize, &'static str)> {
    let a = analyze(text, "test");
    let line = |offset: usize| text[..offset].matches('\n').count() + 1;
    let mut out: Vec<(usize, &'static str)> = a
        .diagnostics
        .iter()
        .filter(|d| d.rule.name() != "unit-scale")
        .map(|d| (line(d.span.start), d.rule.name()))
        .collect();
    let unused = |used: &[bool], i: usize| !used.get(i).copied().unwrap_or(true);
    let params = a.model.params.iter().enumerate();
    let shocks = a.model.shocks.iter().enumerate();
    let lets = a.model.lets.iter().enumerate();
    let unused_names = params
        .filter(|(i, _)| unused(&a.usage.params, *i))
        .map(|(_, p)| p.name_span.start)
        .chain(
            shocks
                .filter(|(i, _)| unused(&a.usage.shocks, *i))
                .map(|(_, s)| s.name_span.start),
        )
        .chain(
            lets.filter(|(i, _)| unused(&a.usage.lets, *i))
                .map(|(_, l)| l.name_span.start),
        );
    out.extend(unused_names.map(|start| (line(start), "unused")));
    out.sort();
    out
}

fn param(a: &Analysis, name: &str) -> f64 {
    a.model
        .params
        .iter()
        .find(|p| p.name == name)
        .map(|p| p.value)
        .unwrap_or(f64::NAN)
}

#[test]
fn a_yearly_diffusion_on_a_dimensionless_state_is_a_mismatch_at_the_equation() {
    let text = "param k = 1 [1/year]\nparam vol = 0.2 [1/year]\nshock W\nfactor x = 0\n\
                dx = -k * x dt + vol dW\n";
    assert_eq!(rules_at_lines(text), vec![(5, "dimension-mismatch")]);
    let a = analyze(text, "t");
    let d = a
        .diagnostics
        .iter()
        .find(|d| d.rule.name() == "dimension-mismatch");
    let message = d.map(|d| d.message.clone()).unwrap_or_default();
    assert!(message.contains("did you mean [1/sqrt(year)]"), "{message}");
    // The fix rewrites the unit of `vol`.
    let fix = d
        .and_then(|d| d.fixes.first())
        .map(|f| f.edits[0].new_text.clone());
    assert_eq!(fix.as_deref(), Some("1/sqrt(year)"));
}

#[test]
fn conversions_to_a_year_clock_follow_act365_and_252_business_days() {
    let text = "param a = 0.2 [1/sqrt(day)]\nparam b = 1 [1/day]\nparam c = 1 [1/bday]\n\
                param d = 1 [1/month]\nparam e = 1 [1/week]\nparam f = 2 [day]\n\
                param g = 0.01 [1/sqrt(bday)]\n";
    let a = analyze(text, "t");
    assert_eq!(param(&a, "a"), 0.2 * 365f64.sqrt());
    assert_eq!(param(&a, "b"), 365.0);
    assert_eq!(param(&a, "c"), 252.0);
    assert_eq!(param(&a, "d"), 12.0);
    assert!((param(&a, "e") - 365.0 / 7.0).abs() < 1e-12);
    assert!((param(&a, "f") - 2.0 / 365.0).abs() < 1e-15);
    assert!((param(&a, "g") - 0.01 * 252f64.sqrt()).abs() < 1e-15);
    // Each is announced as a `unit-scale` hint (sdeck-checks, tests/structural_rules.rs).
}

#[test]
fn a_daily_clock_converts_yearly_values_and_the_horizon() {
    let text =
        "clock day\nhorizon 6 month\nparam k = 3.65 [1/year]\nparam v = 0.365 [1/sqrt(year)]\n";
    let a = analyze(text, "t");
    assert_eq!(a.model.clock.unit, "day");
    assert!((a.model.horizon - 182.5).abs() < 1e-12);
    assert!((param(&a, "k") - 0.01).abs() < 1e-15);
    assert!((param(&a, "v") - 0.365 / 365f64.sqrt()).abs() < 1e-15);
}

#[test]
fn horizons_convert_to_the_clock() {
    let horizon = |text: &str| analyze(text, "t").model.horizon;
    assert_eq!(horizon("horizon 6 month\n"), 0.5);
    assert_eq!(horizon("horizon 2\n"), 2.0);
    assert_eq!(horizon("clock month\nhorizon 2 year\n"), 24.0);
    assert_eq!(horizon("horizon 126 bday\n"), 0.5);
    // A quarter is a year/4 and an hour a day/24: common practice, no source.
    assert_eq!(horizon("horizon 2 quarter\n"), 0.5);
    assert_eq!(horizon("horizon 3 [quarter]\n"), 0.75);
    assert_eq!(horizon("clock hour\nhorizon 1 day\n"), 24.0);
    assert_eq!(horizon("clock quarter\nhorizon 18 month\n"), 6.0);
    assert_eq!(horizon("clock day\nhorizon 36 hour\n"), 1.5);
}

#[test]
fn hours_and_quarters_convert_in_values_and_expectations() {
    let text = "param a = 0.2% [1/hour]\nparam b = 1 [1/quarter]\nparam c = 0.01 [1/sqrt(hour)]\n";
    let a = analyze(text, "t");
    assert!((param(&a, "a") - 0.002 * 8760.0).abs() < 1e-12);
    assert_eq!(param(&a, "b"), 4.0);
    assert!((param(&a, "c") - 0.01 * 8760f64.sqrt()).abs() < 1e-15);
}

#[test]
fn a_price_in_a_declared_currency_checks_clean() {
    let text = "unit EUR\nparam mu = 4% [1/year]\nparam sigma = 25% [1/sqrt(year)] > 0\n\
                param floor = 80 [EUR]\nshock W\nfactor S = 100 [EUR] > 0\n\
                dS = mu * S dt + sigma * S dW\nlet cushion = S - floor\n\
                expect mean(S, 1 year) in [100 EUR, 110 EUR]\n";
    let a = analyze(text, "t");
    let loud: Vec<_> = a
        .diagnostics
        .iter()
        .filter(|d| d.rule.name() != "unused")
        .map(|d| d.message.clone())
        .collect();
    assert!(loud.is_empty(), "{loud:?}");
}

#[test]
fn a_let_that_mixes_dimensions_is_an_error_at_the_let() {
    let text = "param k = 1 [1/year]\nparam v = 0.1 [1/sqrt(year)]\nlet bad = k + v\n\
                shock W\nfactor x = 0\ndx = -k * x dt + v dW\n";
    assert_eq!(
        rules_at_lines(text),
        vec![(3, "dimension-mismatch"), (3, "unused")]
    );
}

#[test]
fn a_sound_let_used_where_it_does_not_fit_is_an_error_at_the_use() {
    let text = "param k = 1 [1/year]\nlet speed = 2 * k\nshock W\nfactor x = 0\n\
                dx = -k * x dt + speed dW\n";
    let got = rules_at_lines(text);
    assert_eq!(got, vec![(5, "dimension-mismatch")]);
}

#[test]
fn exponents_need_constant_pure_numbers() {
    let text = "param k = 1 [1/year]\nparam v = 0.1 [1/sqrt(year)]\nshock W\nfactor x = 1\n\
                dx = -k * x^t dt + v dW\n";
    assert_eq!(rules_at_lines(text), vec![(5, "dimension-mismatch")]);
    let sound = "param k = 1 [1/year]\nparam v = 0.1 [1/sqrt(year)]\nshock W\nfactor x = 1\n\
                 dx = -k * x^3 dt + v * x^1.5 dW\n";
    assert_eq!(rules_at_lines(sound), vec![]);
}

#[test]
fn functions_need_dimensionless_arguments() {
    let text = "param freq = 1 [1/year]\nparam k = 1 [1/year]\nparam v = 0.1 [1/sqrt(year)]\n\
                shock W\nfactor x = 1\ndx = k * (sin(2 * pi * t) - x) dt + v dW\n";
    assert_eq!(
        rules_at_lines(text),
        vec![(1, "unused"), (6, "dimension-mismatch")]
    );
    let sound = text.replace("sin(2 * pi * t)", "sin(2 * pi * freq * t)");
    assert_eq!(rules_at_lines(&sound), vec![]);
}
