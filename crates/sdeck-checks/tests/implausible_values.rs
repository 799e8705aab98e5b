//! `implausible-value`: each threshold fires on the slip it is for, stays quiet on the
//! values a desk means, and moves with the project's `[plausibility]`.

use sdeck_checks::{check, Plausibility, RuleSettings};
use sdeck_diagnostics::{Diagnostic, RuleId};

fn findings(source: &str, settings: &RuleSettings) -> Vec<Diagnostic> {
    check(source, "plausible", settings)
        .diagnostics
        .into_iter()
        .filter(|d| d.rule == RuleId::ImplausibleValue)
        .collect()
}

fn rate(vol: &str, speed: &str, level: &str) -> String {
    format!(
        "model r
param kappa = {speed}
param level = {level}
param vol = {vol}
shock W
factor r = 2%
dr = kappa * (level - r) dt + vol dW
"
    )
}

#[test]
fn a_daily_volatility_without_its_percent_sign_is_reported_with_the_fix() {
    let found = findings(
        &rate("0.9 [1/sqrt(day)]", "0.5 [1/year]", "3%"),
        &RuleSettings::default(),
    );
    assert_eq!(found.len(), 1, "{found:#?}");
    // 0.9·√365 = 17.19 a year.
    assert!(
        found[0].message.contains("1719% a year"),
        "{}",
        found[0].message
    );
    let fix = found[0].fixes.first().expect("a fix");
    assert_eq!(fix.edits[0].new_text, "0.9%");
}

#[test]
fn plausible_rate_models_are_not_reported() {
    for source in [
        rate("0.9% [1/sqrt(year)]", "0.5 [1/year]", "3%"),
        rate("4bp [1/sqrt(day)]", "0.5% [1/day]", "3.2%"),
    ] {
        assert!(
            findings(&source, &RuleSettings::default()).is_empty(),
            "{source}"
        );
    }
}

#[test]
fn half_lives_under_a_day_or_over_a_century_are_reported() {
    // ln 2/1000 per year = 0.25 day; ln 2/0.001 per year = 693 years.
    for (speed, words) in [
        ("1000 [1/year]", "0.253 day, under"),
        ("0.001 [1/year]", "693.1 year, over"),
    ] {
        let found = findings(
            &rate("0.9% [1/sqrt(year)]", speed, "3%"),
            &RuleSettings::default(),
        );
        assert_eq!(found.len(), 1, "{speed}: {found:#?}");
        assert!(found[0].message.contains(words), "{}", found[0].message);
    }
}

#[test]
fn a_level_written_without_its_percent_sign_is_reported_with_the_fix() {
    let found = findings(
        &rate("0.9% [1/sqrt(year)]", "0.5 [1/year]", "4"),
        &RuleSettings::default(),
    );
    assert_eq!(found.len(), 1, "{found:#?}");
    assert!(found[0].message.contains("400%"), "{}", found[0].message);
    assert_eq!(found[0].fixes[0].edits[0].new_text, "4%");
}

#[test]
fn a_relative_volatility_above_two_hundred_percent_is_reported_for_any_factor() {
    let source = "model s
unit EUR
param mu = 5% [1/year]
param sigma = 2.5 [1/sqrt(year)]
shock W
factor S = 4500 [EUR]
dS = mu * S dt + sigma * S dW
";
    let found = findings(source, &RuleSettings::default());
    assert_eq!(found.len(), 1, "{found:#?}");
    assert!(
        found[0].message.contains("relative volatility"),
        "{}",
        found[0].message
    );
    // The same share price with a 25% volatility is not reported.
    let sound = source.replace("sigma = 2.5", "sigma = 25%");
    assert!(findings(&sound, &RuleSettings::default()).is_empty());
}

#[test]
fn two_shocks_correlated_at_exactly_one_are_reported() {
    let source = "model c
param k = 1 [1/year]
param v = 1% [1/sqrt(year)]
shock W
shock B
corr W, B = -1
factor x = 1%
factor y = 2%
dx = -k * x dt + v dW
dy = -k * y dt + v dB
";
    let found = findings(source, &RuleSettings::default());
    assert_eq!(found.len(), 1, "{found:#?}");
    assert!(
        found[0].message.contains("exactly −1"),
        "{}",
        found[0].message
    );
    let near = source.replace("= -1", "= -0.99");
    assert!(findings(&near, &RuleSettings::default()).is_empty());
}

#[test]
fn the_project_moves_the_thresholds() {
    let source = rate("0.9 [1/sqrt(day)]", "0.5 [1/year]", "3%");
    let settings = RuleSettings {
        plausibility: Plausibility {
            max_volatility: 20.0,
            ..Plausibility::default()
        },
        ..RuleSettings::default()
    };
    assert!(findings(&source, &settings).is_empty());
}

#[test]
fn an_overflowing_volatility_is_not_reported_as_infinite_percent() {
    // v² = 1e400 overflows: no figure to quote, so no finding (and never "inf%").
    let found = findings(
        &rate("1e200 [1/sqrt(year)]", "0.5 [1/year]", "3%"),
        &RuleSettings::default(),
    );
    assert!(
        found.iter().all(|d| !d.message.contains("inf")),
        "{found:#?}"
    );
    assert!(found.is_empty(), "{found:#?}");
}
