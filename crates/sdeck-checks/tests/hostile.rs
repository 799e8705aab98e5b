//! Reproducers of unbounded work in the analysis: each is the smallest input that once
//! took minutes or aborted, and must now finish with the right findings.

use sdeck_checks::{check, RuleSettings};

fn rules(text: &str) -> Vec<&'static str> {
    let mut rules: Vec<&'static str> = check(text, "hostile", &RuleSettings::default())
        .diagnostics
        .iter()
        .map(|d| d.rule.name())
        .filter(|r| *r != "unused")
        .collect();
    rules.sort();
    rules
}

#[test]
fn twenty_thousand_shocks_with_one_contradictory_block_are_checked_per_block() {
    // The correlation matrix was built dense (20,000² numbers, 3.2 GB) and decomposed
    // whole (O(n³)); only the three correlated shocks matter. Their correlations
    // contradict each other: [[1, .9, .9], [.9, 1, -.9], [.9, -.9, 1]] has the
    // eigenvalues -0.8, 1.9, 1.9 (numpy.linalg.eigvalsh); with 0.8 in place of -0.9
    // they are 0.066, 0.2, 2.73.
    let mut text = String::from("clock year\nparam s = 0.1 [1/sqrt(year)]\n");
    for i in 0..20_000 {
        text.push_str(&format!("shock W{i}\n"));
    }
    text.push_str("corr W10 W500 = 0.9\ncorr W10 W19999 = 0.9\ncorr W500 W19999 = -0.9\n");
    text.push_str("factor x = 0\ndx = s dW10 + s dW500\n");
    assert_eq!(rules(&text), vec!["correlation-not-psd"]);
    // The same block with consistent correlations: nothing to report.
    let sound = text.replace("= -0.9", "= 0.8");
    assert_eq!(rules(&sound), Vec::<&str>::new());
}

/// Found by the `check` fuzz target: a value defined by itself indexed the parameter
/// list before the parameter was in it.
#[test]
fn a_parameter_whose_value_is_itself_is_an_error_not_a_panic() {
    for text in [
        "param k = k\n",
        "param k = 2 * k + 1%\nfactor x = k\ndx = k dt\n",
    ] {
        let result = check(text, "m", &RuleSettings::default());
        let own = result
            .diagnostics
            .iter()
            .find(|d| d.message.contains("uses `k` itself"))
            .unwrap_or_else(|| panic!("no diagnostic for {text:?}: {:?}", rules(text)));
        assert_eq!(own.rule.name(), "unknown-name");
        assert!(own.help.as_deref().unwrap_or("").contains("as a number"));
    }
}
