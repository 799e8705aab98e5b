//! The structural rules decided on the finished analysis (`bound-violated` at a
//! declaration, `unit-scale`, `correlation-range`), as `check` reports them. Day counts:
//! ACT/365 Fixed (day = year/365) and the 252-business-day year (common practice, no
//! source).

use sdeck_checks::{check, RuleSettings};

/// (line, message) of every finding of `rule` in `text`.
fn findings_of(text: &str, rule: &str) -> Vec<(usize, String)> {
    check(text, "test", &RuleSettings::default())
        .diagnostics
        .iter()
        .filter(|d| d.rule.name() == rule)
        .map(|d| {
            (
                text[..d.span.start].matches('\n').count() + 1,
                d.message.clone(),
            )
        })
        .collect()
}

#[test]
fn the_bound_of_an_expression_value_is_checked_on_its_value() {
    let text = "param theta = 3%\nparam low = theta - 5% >= 0\n";
    let found = findings_of(text, "bound-violated");
    assert_eq!(found.len(), 1, "{found:?}");
    assert_eq!(found[0].0, 2);
    assert!(
        found[0].1.contains("`theta - 5%` = -0.02"),
        "{}",
        found[0].1
    );
    // The analysis counts it as an error: the model is not complete.
    assert!(sdeck_semantics::analyze(text, "test").has_errors());
}

#[test]
fn correlation_range_evaluates_the_expression() {
    let text = "param rho = 0.6\nshock W, B\ncorr W, B = 2 * rho\n";
    assert_eq!(
        findings_of(text, "correlation-range"),
        vec![(
            3,
            "the correlation of `W` and `B` is `2 * rho` = 1.2, outside [-1, 1]".to_string()
        )]
    );
    let a = sdeck_semantics::analyze(text, "test");
    assert!(a.model.correlations.is_empty());
    assert!(a.has_errors());
    // A shock correlated with itself is the same rule, at the statement.
    let itself = "shock W\ncorr W, W = 0.5\n";
    assert_eq!(
        findings_of(itself, "correlation-range"),
        vec![(2, "`W` is correlated with itself".to_string())]
    );
}

#[test]
fn bounds_are_in_the_unit_of_their_declaration() {
    // 0.02 per sqrt(day) is 0.38 per sqrt(year): inside a bound of (0, 0.05) written per day.
    let text = "param v = 0.02 [1/sqrt(day)] in (0, 0.05)\n";
    assert!(findings_of(text, "bound-violated").is_empty());
    let outside = "param v = 0.06 [1/sqrt(day)] in (0, 0.05)\n";
    assert_eq!(findings_of(outside, "bound-violated").len(), 1);
}

#[test]
fn an_infinite_end_on_the_wrong_side_is_a_bound_no_value_meets() {
    // `>= inf` and `< -inf` admit no number; an interval from inf down to -inf is empty.
    for bound in [
        ">= inf",
        "> inf",
        "< -inf",
        "<= -inf",
        "in [inf, -inf]",
        "in (inf, 5)",
    ] {
        let text = format!("param a = 1 [1/year] {bound}\n");
        let lines: Vec<usize> = findings_of(&text, "bound-violated")
            .into_iter()
            .map(|(line, _)| line)
            .collect();
        assert_eq!(lines, vec![1], "{bound}");
    }
    // On their own side the infinities bound nothing.
    for bound in ["> -inf", "<= inf", "in (-inf, inf)", "in [-inf, 5]"] {
        let text = format!("param a = 1 [1/year] {bound}\n");
        assert!(findings_of(&text, "bound-violated").is_empty(), "{bound}");
    }
}

#[test]
fn every_converted_value_is_announced_as_a_hint() {
    let text = "param a = 0.2 [1/sqrt(day)]\nparam b = 1 [1/day]\nparam c = 1 [1/bday]\n\
                param d = 1 [1/month]\nparam e = 1 [1/week]\nparam f = 2 [day]\n\
                param g = 0.01 [1/sqrt(bday)]\n";
    let hints = findings_of(text, "unit-scale");
    assert_eq!(hints.len(), 7, "{hints:?}");
    assert_eq!(
        hints[1].1,
        "`b` = 1 [1/day] is 365 [1/year] on the model's clock (×365)"
    );
    let hours = "param a = 0.2% [1/hour]\nparam b = 1 [1/quarter]\nparam c = 0.01 [1/sqrt(hour)]\n";
    assert_eq!(findings_of(hours, "unit-scale").len(), 3);
    // A value in clock units is not announced.
    assert!(findings_of("param a = 1 [1/year]\n", "unit-scale").is_empty());
}
