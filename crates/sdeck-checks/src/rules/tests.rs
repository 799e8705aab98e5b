//! Tests of the rules that need the calculus, on small models.

use super::factor_domain::interval_keeps;
use super::{run_all, Context};
use sdeck_calculus::{derive, moments_at};
use sdeck_diagnostics::{rules, Diagnostic, Rule};
use sdeck_semantics::{Interval, Model};
use sdeck_units::number::{round_significant, significant_whole};

fn run(source: &str) -> (Model, Vec<Diagnostic>) {
    let analysis = sdeck_semantics::analyze(source, "test_model");
    let derivation = derive(&analysis.model);
    let diagnostics = run_all(&Context::new(source, &analysis, &derivation))
        .expect("a context that is never stale runs every rule");
    (analysis.model, diagnostics)
}

#[test]
fn a_stale_context_runs_no_rule_and_a_stale_check_is_abandoned() {
    let source = "param kappa = 2 [1/year] > 0\nparam unused_one = 3\nshock W\nfactor x = 0\n\
dx = -kappa * x dt + 0.1 [1/sqrt(year)] dW\nexpect mean(x, 1 year) > 5\n";
    let analysis = sdeck_semantics::analyze(source, "stale");
    let derivation = derive(&analysis.model);
    let stale = || true;
    let cx = Context::new(source, &analysis, &derivation).with_stale(&stale);
    assert_eq!(run_all(&cx), Err(crate::Abandoned));
    let settings = crate::RuleSettings::default();
    assert!(crate::check_unless_stale(source, "stale", &settings, &stale).is_err());
    // Turning stale after the derivation: the semantics and the calculus ran, the rules
    // did not (the third question is the one before the first rule).
    let asked = std::sync::atomic::AtomicUsize::new(0);
    let after_two = || asked.fetch_add(1, std::sync::atomic::Ordering::SeqCst) >= 2;
    assert!(crate::check_unless_stale(source, "stale", &settings, &after_two).is_err());
    assert_eq!(asked.load(std::sync::atomic::Ordering::SeqCst), 3);
    // Never stale: the same findings as `check` (an unused parameter, a failed
    // expectation).
    let full =
        crate::check_unless_stale(source, "stale", &settings, &|| false).expect("never stale");
    assert_eq!(
        full.diagnostics,
        crate::check(source, "stale", &settings).diagnostics
    );
    assert!(full.diagnostics.len() >= 2, "{:?}", full.diagnostics);
}

fn of_rule<'d>(diagnostics: &'d [Diagnostic], rule: &Rule) -> Vec<&'d Diagnostic> {
    diagnostics.iter().filter(|d| d.rule == rule.id).collect()
}

#[test]
fn a_rate_that_overflows_ends_quickly_and_says_why() {
    // Once 263 s of squaring in the matrix exponential; now no figure, and a note
    // naming the parameter.
    let (_, diagnostics) = run("clock year\nhorizon 1 year\nparam k = 1e308 [1/year]\n\
         param s = 0.1 [1/sqrt(year)]\nshock W\nshock V\nfactor x = 1\nfactor y = 1\n\
         dx = k * (y - x) dt + s dW\ndy = k * (x - y) dt + s dV\n\
         expect mean(x, 1 year) in [0, 2]\n");
    let found = of_rule(&diagnostics, &rules::EXPECTATION_FAILED);
    assert_eq!(found.len(), 1, "{diagnostics:?}");
    assert!(
        found[0].notes.iter().any(|n| n.contains("`k`")),
        "{:?}",
        found[0]
    );
}

#[test]
fn manual_examples_fire_exactly_once_and_their_fixes_not_at_all() {
    // Every rule of the registry.
    let mine: Vec<&Rule> = super::registered().map(|id| id.rule()).collect();
    for rule in mine {
        let (_, flawed) = run(super::manual(rule.id).flawed);
        assert_eq!(
            of_rule(&flawed, rule).len(),
            1,
            "{} on its flawed example: {flawed:#?}",
            rule.name
        );
        let (_, fixed) = run(super::manual(rule.id).fixed);
        assert!(
            of_rule(&fixed, rule).is_empty(),
            "{} on its fixed example: {fixed:#?}",
            rule.name
        );
    }
}

#[test]
fn moment_explosion_gives_the_time_from_which_the_variance_is_infinite() {
    let (model, diagnostics) = run(super::manual(rules::MOMENT_EXPLOSION.id).flawed);
    let found = of_rule(&diagnostics, &rules::MOMENT_EXPLOSION);
    assert_eq!(found.len(), 1);
    // Andersen & Piterbarg 2007, Prop. 3.1 with κ = 0.5, ξ = 0.3, ρ = 0.9, u = 2:
    // k = ρξu − κ = 0.04, D = k² − 2ξ² = −0.1784, T* = (2/√−D)·arctan(√−D/k).
    let root = 0.1784f64.sqrt();
    let expected = 2.0 / root * (root / 0.04).atan();
    assert!(
        found[0].message.contains(&significant_whole(expected, 4)),
        "{}",
        found[0].message
    );
    // Past that time the variance is reported infinite, and before it finite.
    let derivation = sdeck_calculus::derive(&model);
    let after = moments_at(&model, &derivation, expected + 0.5);
    let from = after.variance_infinite_from[0].expect("infinite");
    assert!((from - expected).abs() < 1e-8, "{from} vs {expected}");
    assert_eq!(after.variance[0], None);
    let before = moments_at(&model, &derivation, expected - 0.5);
    assert!(before.variance[0].is_some_and(f64::is_finite));
    assert_eq!(before.variance_infinite_from[0], None);
}

#[test]
fn feller_message_states_both_sides_and_the_mend() {
    // 2·0.5·0.0576 = 0.0576 < 0.3² = 0.09; raising kappa needs 0.09/(2·0.0576) =
    // 0.78125, lowering vol needs √0.0576 = 0.24.
    let source = "model pike\nparam kappa = 0.5 [1/year] > 0\nparam level = 5.76%\n\
                  param vol = 0.3 [1/sqrt(year)] > 0\nshock W\nfactor r = 2%\n\
                  dr = kappa * (level - r) dt + vol * sqrt(r) dW\n";
    let (model, diagnostics) = run(source);
    let feller = of_rule(&diagnostics, &rules::FELLER_CONDITION);
    assert_eq!(feller.len(), 1, "{diagnostics:#?}");
    let message = &feller[0].message;
    assert!(
        message.starts_with("2·kappa·level = 0.0576 < vol² = 0.09 (per year)"),
        "{message}"
    );
    // The mend is the help, not repeated in the message.
    let help = feller[0].help.clone().unwrap_or_default();
    assert!(!message.contains("raise"), "{message}");
    assert!(
        help.contains("raise kappa to at least 0.782 [1/year]"),
        "{help}"
    );
    assert!(
        help.contains("lower vol to at most 0.24 [1/sqrt(year)]"),
        "{help}"
    );
    let equation = model.factors[0].equation.as_ref().expect("equation");
    assert_eq!(feller[0].span, equation.span);
}

#[test]
fn feller_suggestion_is_in_the_written_unit() {
    // vol written per sqrt(day): the clock value is vol·√365, and the suggestion must
    // be converted back.
    let source = "model pike\nparam kappa = 0.5 [1/year] > 0\nparam level = 5.76%\n\
                  param vol = 0.0157 [1/sqrt(day)] > 0\nshock W\nfactor r = 2%\n\
                  dr = kappa * (level - r) dt + vol * sqrt(r) dW\n";
    let (_, diagnostics) = run(source);
    let feller = of_rule(&diagnostics, &rules::FELLER_CONDITION);
    assert_eq!(feller.len(), 1);
    // √0.0576 / √365 = 0.012562...
    let help = feller[0].help.clone().unwrap_or_default();
    assert!(
        help.contains("lower vol to at most 0.0125 [1/sqrt(day)]"),
        "{help}"
    );
}

#[test]
fn gaussian_state_under_a_square_root_is_reported() {
    let source = "model marl\nparam k = 1 [1/year]\nparam v = 0.1 [1/sqrt(year)]\n\
                  shock W, Z\nfactor r = 0.02\nfactor y = 1\n\
                  dr = -k * r dt + v dW\ndy = -k * y dt + v * sqrt(r) dZ\n";
    let (model, diagnostics) = run(source);
    let domain = of_rule(&diagnostics, &rules::FACTOR_DOMAIN);
    assert_eq!(domain.len(), 1, "{diagnostics:#?}");
    assert!(
        domain[0].message.contains("`sqrt` of r"),
        "{}",
        domain[0].message
    );
    let equation = model.factors[1].equation.as_ref().expect("equation");
    assert_eq!(domain[0].span, equation.span);
}

#[test]
fn log_of_a_square_root_state_that_reaches_zero() {
    // 2·0.5·0.02 = 0.02 < 0.2² = 0.04: zero is attainable, so log(v) is not safe.
    let source = "model fenby\nparam k = 0.5 [1/year]\nparam m = 0.02\n\
                  param s = 0.2 [1/sqrt(year)]\nparam c = 0.1 [1/sqrt(year)]\n\
                  shock W, Z\nfactor v = 0.02\nfactor y = 0\n\
                  dv = k * (m - v) dt + s * sqrt(v) dW\n\
                  dy = c * log(v) * k dt + c dZ\n";
    let (_, diagnostics) = run(source);
    let domain = of_rule(&diagnostics, &rules::FACTOR_DOMAIN);
    assert_eq!(domain.len(), 1, "{diagnostics:#?}");
    assert!(
        domain[0].message.contains("fails the Feller condition"),
        "{}",
        domain[0].message
    );
    assert_eq!(of_rule(&diagnostics, &rules::FELLER_CONDITION).len(), 1);
}

#[test]
fn impossible_starts_are_reported() {
    let gbm = "model quarry\nparam mu = 0.05 [1/year]\nparam s = 0.2 [1/sqrt(year)]\n\
               shock W\nfactor p = 0\ndp = mu * p dt + s * p dW\n";
    let (_, diagnostics) = run(gbm);
    let domain = of_rule(&diagnostics, &rules::FACTOR_DOMAIN);
    assert_eq!(domain.len(), 1, "{diagnostics:#?}");
    assert!(
        domain[0].message.contains("stays at zero"),
        "{}",
        domain[0].message
    );

    let square_root = "model quarry\nparam k = 1 [1/year]\nparam m = 0.05\n\
                       param s = 0.1 [1/sqrt(year)]\nshock W\nfactor h = -0.01\n\
                       dh = k * (m - h) dt + s * sqrt(h) dW\n";
    let (_, diagnostics) = run(square_root);
    let domain = of_rule(&diagnostics, &rules::FACTOR_DOMAIN);
    assert_eq!(domain.len(), 1, "{diagnostics:#?}");
    assert!(
        domain[0].message.contains("starts at -0.01"),
        "{}",
        domain[0].message
    );
}

#[test]
fn explosive_drift_states_coefficient_and_doubling_time() {
    // b = +0.8 per year: deviations double every ln 2/0.8 = 0.866 years.
    let (_, diagnostics) = run(
        "model osric\nparam kappa = 0.8 [1/year]\nparam level = 3%\n\
         param vol = 1% [1/sqrt(year)]\nshock W\nfactor s = 3%\n\
         ds = kappa * (s - level) dt + vol dW\n",
    );
    let found = of_rule(&diagnostics, &rules::NOT_MEAN_REVERTING);
    assert_eq!(found.len(), 1, "{diagnostics:#?}");
    assert!(
        found[0].message.contains("is kappa = +0.8 per year"),
        "{}",
        found[0].message
    );
    assert!(
        found[0].message.contains("every 0.866 years"),
        "{}",
        found[0].message
    );
}

#[test]
fn growth_of_a_geometric_brownian_is_not_explosive() {
    let (_, diagnostics) = run(
        "model ledger\nparam mu = 0.3 [1/year]\nparam s = 0.2 [1/sqrt(year)]\n\
         shock W\nfactor p = 10\ndp = mu * p dt + s * p dW\n",
    );
    assert!(of_rule(&diagnostics, &rules::NOT_MEAN_REVERTING).is_empty());
}

#[test]
fn coupled_drift_with_an_unstable_eigenvalue_is_reported_once() {
    // A = [[-0.1, 1], [1, -0.1]] has eigenvalues 0.9 and −1.1 (common practice, no
    // source: eigenvalues of a symmetric 2×2 matrix are a ± b).
    let (_, diagnostics) = run(
        "model tandem\nparam k = 0.1 [1/year]\nparam c = 1 [1/year]\n\
         param v = 0.01 [1/sqrt(year)]\nshock W, Z\nfactor x = 0\nfactor y = 0\n\
         dx = (-k * x + c * y) dt + v dW\ndy = (c * x - k * y) dt + v dZ\n",
    );
    let found = of_rule(&diagnostics, &rules::NOT_MEAN_REVERTING);
    assert_eq!(found.len(), 1, "{diagnostics:#?}");
    assert!(
        found[0].message.contains("eigenvalue 0.9 per year"),
        "{}",
        found[0].message
    );
    assert_eq!(found[0].related.len(), 1);
}

#[test]
fn an_explosive_block_in_a_model_too_large_for_the_system_engines() {
    // 30 decoupled states, then x and y with A = [[-0.1, 1], [1, -0.1]]: eigenvalue 0.9.
    let mut source = String::from(
        "model wide_tandem\nparam k = 0.1 [1/year]\nparam c = 1 [1/year]\n\
         param v = 0.01 [1/sqrt(year)]\nshock W, Z\n",
    );
    for i in 0..30 {
        source.push_str(&format!("factor q{i} = 0\ndq{i} = -k * q{i} dt + v dW\n"));
    }
    source.push_str(
        "factor x = 0\nfactor y = 0\ndx = (-k * x + c * y) dt + v dW\n\
         dy = (c * x - k * y) dt + v dZ\n",
    );
    let (_, diagnostics) = run(&source);
    let found = of_rule(&diagnostics, &rules::NOT_MEAN_REVERTING);
    assert_eq!(found.len(), 1, "{diagnostics:#?}");
    assert!(
        found[0].message.contains("coupled drift of x, y"),
        "{}",
        found[0].message
    );
}

#[test]
fn inconsistent_correlations_give_the_smallest_eigenvalue() {
    // [[1, .9, .9], [.9, 1, −.9], [.9, −.9, 1]]: eigenvalues 1.9, 1.9, −0.8 (numpy.linalg.eigvalsh).
    let (model, diagnostics) = run("model trio\nparam v = 0.01 [1/sqrt(year)]\nshock A, B, C\n\
         corr A B = 0.9\ncorr A C = 0.9\ncorr B C = -0.9\n\
         factor x = 0\nfactor y = 0\nfactor z = 0\n\
         dx = v dA\ndy = v dB\ndz = v dC\n");
    let found = of_rule(&diagnostics, &rules::CORRELATION_NOT_PSD);
    assert_eq!(found.len(), 1, "{diagnostics:#?}");
    assert!(
        found[0].message.contains("eigenvalue -0.8 < 0"),
        "{}",
        found[0].message
    );
    assert_eq!(found[0].span, model.correlations[0].span);
    assert_eq!(found[0].related.len(), 2);
}

#[test]
fn expectations_report_value_interval_and_missing_figures() {
    // OU mean at 1 year: 0.03 + (0.025 − 0.03)e^{−1.2} = 0.0284940 (Vasicek 1977).
    let source = "model pinned\nparam kappa = 1.2 [1/year] > 0\nparam level = 3%\n\
                  param vol = 0.8% [1/sqrt(year)] > 0\nshock W\nfactor r = 2.5%\n\
                  dr = kappa * (level - r) dt + vol dW\n\
                  expect mean(r, 1 year) in [2.9%, 3.3%]\n\
                  expect halflife(r) < 1 year\n";
    let (_, diagnostics) = run(source);
    let found = of_rule(&diagnostics, &rules::EXPECTATION_FAILED);
    assert_eq!(found.len(), 1, "{diagnostics:#?}");
    assert!(
        found[0]
            .message
            .starts_with("mean(r, 1 year) = 2.849%; expected in [2.9%, 3.3%]"),
        "{}",
        found[0].message
    );
    let missing = "model drifting\nparam mu = 0.01 [1/year]\nparam v = 0.1 [1/sqrt(year)]\n\
                   shock W\nfactor x = 0\ndx = mu dt + v dW\n\
                   expect stationary_mean(x) > 0\n";
    let (_, diagnostics) = run(missing);
    let found = of_rule(&diagnostics, &rules::EXPECTATION_FAILED);
    assert_eq!(found.len(), 1, "{diagnostics:#?}");
    assert!(
        found[0].message.contains("does not exist"),
        "{}",
        found[0].message
    );
    assert!(
        found[0].message.contains("arithmetic-brownian"),
        "{}",
        found[0].message
    );
}

#[test]
fn numbers_print_with_significant_digits() {
    assert_eq!(significant_whole(0.0576, 3), "0.0576");
    assert_eq!(significant_whole(0.09, 3), "0.09");
    assert_eq!(significant_whole(1386.29, 3), "1386");
    assert_eq!(round_significant(0.78125, 3, true), 0.782);
    assert_eq!(round_significant(0.2449, 2, false), 0.24);
}

#[test]
fn bound_containment() {
    let nonnegative = Interval {
        lower: Some((0.0, true)),
        upper: None,
    };
    assert!(!interval_keeps(&nonnegative, None));
    assert!(interval_keeps(&nonnegative, Some((0.0, true))));
    let positive = Interval {
        lower: Some((0.0, false)),
        upper: None,
    };
    assert!(!interval_keeps(&positive, Some((0.0, true))));
    assert!(interval_keeps(&positive, Some((0.0, false))));
}

#[test]
fn the_registry_runs_each_rule_once() {
    let registered: Vec<_> = super::registered().collect();
    let mut unique = registered.clone();
    unique.sort();
    unique.dedup();
    assert_eq!(unique.len(), registered.len(), "{registered:?}");
}

/// On each registered rule's flawed example, its preferred fixes clear it and bring no
/// rule that was not there before.
#[test]
fn preferred_fixes_clear_their_own_diagnostic_and_add_none() {
    let settings = crate::RuleSettings::default();
    let mut fixed_some = 0;
    for rule in super::registered().map(|id| id.rule()) {
        let flawed = super::manual(rule.id).flawed;
        let before = crate::check(flawed, "manual", &settings).diagnostics;
        let fixes: Vec<&sdeck_diagnostics::Fix> = before
            .iter()
            .filter(|d| d.rule == rule.id)
            .filter_map(|d| d.fixes.iter().find(|f| f.preferred))
            .collect();
        if fixes.is_empty() {
            continue;
        }
        fixed_some += 1;
        let text = sdeck_diagnostics::apply_fixes(flawed, &fixes)
            .unwrap_or_else(|e| panic!("{}: {e:?}", rule.name));
        let after = crate::check(&text, "manual", &settings).diagnostics;
        assert!(
            after.iter().all(|d| d.rule != rule.id),
            "{} still fires after its fix:\n{text}",
            rule.name
        );
        for d in &after {
            assert!(
                before.iter().any(|b| b.rule == d.rule),
                "{}'s fix brings {}: {}\n{text}",
                rule.name,
                d.rule,
                d.message
            );
        }
    }
    // feller-condition, correlation-not-psd, discount-measure and unused carry fixes.
    assert!(fixed_some >= 4, "{fixed_some}");
}
