//! Declared values and correlations written as constant expressions of parameters
//! (docs/language.md, "Declared values"): evaluated with units checked, and refused with
//! a message that says what is allowed when they use anything else.

use sdeck_semantics::{analyze, Analysis};

/// (line, rule, message) of every diagnostic but `unused` and `unit-scale`.
fn findings(text: &str) -> Vec<(usize, &'static str, String)> {
    let a = analyze(text, "test");
    let mut out: Vec<(usize, &'static str, String)> = a
        .diagnostics
        .iter()
        .filter(|d| d.rule.name() != "unit-scale" && d.rule.name() != "unused")
        .map(|d| {
            (
                text[..d.span.start].matches('\n').count() + 1,
                d.rule.name(),
                d.message.clone(),
            )
        })
        .collect();
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

const HEAD: &str = "param kappa = 1.2 [1/year] > 0\nparam theta = 3%\n\
                    param vol = 1% [1/sqrt(year)] > 0\nshock W\n";

#[test]
fn a_declared_value_may_be_an_expression_of_earlier_parameters() {
    let text = format!(
        "{HEAD}param stress = theta + 150bp\nfactor r = stress\n\
         dr = kappa * (theta - r) dt + vol dW\n"
    );
    let a = analyze(&text, "test");
    assert!(findings(&text).is_empty(), "{:?}", findings(&text));
    assert!((param(&a, "stress") - 0.045).abs() < 1e-15);
    assert!((a.model.factors[0].initial - 0.045).abs() < 1e-15);
    assert!(a.model.params[3].expr.is_some());
    assert!(a.model.factors[0].initial_expr.is_some());
    // A parameter used only in another's value is used.
    assert_eq!(a.usage.params.len(), a.model.params.len());
    assert!(a.usage.params.iter().all(|&used| used), "{:?}", a.usage);
}

#[test]
fn an_expression_value_carries_its_dimension_in_clock_units() {
    // 0.1 [1/month] is 1.2 per year; twice it is 2.4 per year, and it checks as a speed.
    let text = "param base = 0.1 [1/month] > 0\nparam fast = 2 * base > 0\n\
                param vol = 1% [1/sqrt(year)]\nshock W\nfactor x = 0\n\
                dx = -fast * x dt + vol dW\n";
    let a = analyze(text, "test");
    assert!(findings(text).is_empty(), "{:?}", findings(text));
    assert!((param(&a, "fast") - 2.4).abs() < 1e-12);
    assert_eq!(a.model.params[1].unit_text.as_deref(), Some("1/year"));
    // The same expression beside a plain number is a dimension mismatch.
    let wrong = "param base = 0.1 [1/month]\nparam off = base + 1\n";
    assert_eq!(findings(wrong)[0].1, "dimension-mismatch");
}

#[test]
fn a_forward_reference_says_to_move_the_parameter_above() {
    let text = "param a = later + 1\nparam later = 2\n";
    let found = findings(text);
    assert_eq!(found.len(), 1, "{found:?}");
    assert_eq!(found[0].1, "unknown-name");
    assert_eq!(
        found[0].2,
        "the value of parameter `a` uses `later`, which is declared after it"
    );
    let a = analyze(text, "test");
    let help = a.diagnostics[0].help.as_deref().unwrap_or("");
    assert!(
        help.contains(
            "only numbers and parameters declared before it: move `param later` above it"
        ),
        "{help}"
    );
}

#[test]
fn a_factor_a_let_or_time_in_a_declared_value_is_refused() {
    let text = "factor x = 0\nlet l = 2\nparam a = x\nparam b = l\nfactor y = 1 + t\n";
    let found = findings(text);
    let refused: Vec<(usize, String)> = found
        .iter()
        .filter(|f| f.1 == "unknown-name")
        .map(|f| (f.0, f.2.clone()))
        .collect();
    assert_eq!(
        refused,
        vec![
            (
                3,
                "the value of parameter `a` uses the factor `x`, whose value moves".to_string()
            ),
            (4, "the value of parameter `b` uses the let `l`".to_string()),
            (
                5,
                "the initial value of factor `y` uses the time `t`, but it is a constant"
                    .to_string()
            ),
        ]
    );
}

#[test]
fn a_parameter_that_moves_with_time_is_told_to_be_a_let() {
    let text = "param lvl = 2% + 0.5% [1/year] * t\n";
    let a = analyze(text, "test");
    let d = &a.diagnostics[0];
    assert_eq!(d.rule.name(), "unknown-name");
    assert_eq!(
        d.message,
        "a parameter is a constant, but `lvl` uses the time `t`: use `let` for a value that moves with time"
    );
    // The fix makes it a let, which then checks clean.
    let edit = &d.fixes[0].edits[0];
    let mut fixed = text.to_string();
    fixed.replace_range(edit.span.clone(), &edit.new_text);
    assert_eq!(fixed, "let lvl = 2% + 0.5% [1/year] * t\n");
    assert!(findings(&fixed).is_empty(), "{:?}", findings(&fixed));
    // With a bound, no fix: a let has none, and dropping it silently would lose it.
    let bounded = analyze("param lvl = 2% + 0.5% [1/year] * t > 0\n", "test");
    assert!(bounded.diagnostics[0].fixes.is_empty());
}

#[test]
fn a_correlation_may_be_an_expression_of_parameters() {
    let text = "param rho = -0.4 in [-1, 1]\nshock W, B\ncorr W, B = rho\n";
    let a = analyze(text, "test");
    assert!(findings(text).is_empty(), "{:?}", findings(text));
    assert_eq!(a.model.correlations[0].value, -0.4);
    assert!(a.model.correlations[0].expr.is_some());
    // The parameter is used by the correlation.
    assert_eq!(a.model.params[0].name, "rho");
    assert_eq!(*a.usage.params, [true]);
    // A plain number keeps no expression.
    let plain = analyze("shock W, B\ncorr W, B = -0.4\n", "test");
    assert_eq!(plain.model.correlations[0].value, -0.4);
    assert!(plain.model.correlations[0].expr.is_none());
}

#[test]
fn a_correlation_must_be_a_pure_constant() {
    let with_time = "param rho = 0.5\nshock W, B\ncorr W, B = rho * t\n";
    assert_eq!(findings(with_time)[0].1, "unknown-name");
    let with_unit = "param rho = 0.5 [1/year]\nshock W, B\ncorr W, B = rho\n";
    assert_eq!(findings(with_unit)[0].1, "dimension-mismatch");
}
