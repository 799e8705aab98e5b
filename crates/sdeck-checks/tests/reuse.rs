//! What a new version of a document takes over from the checks of earlier versions: the
//! content keys of its factors move only with what each factor's figures rest on, and a
//! check with the document's `Reuse` recomputes only what changed, with the same result
//! as a check from nothing.

use sdeck_checks::reuse::{ContentKeys, Reuse, ReuseCounts};
use sdeck_checks::{check, check_reusing, FileCheck, RuleSettings};

/// Four spreads of the (fictional) Harrowgate Rates desk: x0 and x1 on their own, y
/// driven by x1, x2 on the first shock and a second one correlated with it.
fn model(comment: &str, kappa0: &str, rho: &str, interval: &str) -> String {
    format!(
        "# {comment}\nmodel harrowgate\nclock year\nhorizon 1 year\nshock M\nshock N\n\
         corr M N = {rho}\n\
         param kappa0 = {kappa0} [1/year] > 0\nparam kappa1 = 0.8 [1/year] > 0\n\
         param vol = 1% [1/sqrt(year)] > 0\nparam pull = 2 [1/year] > 0\n\
         factor x0 = 2%\ndx0 = kappa0 * (3% - x0) dt + vol dM\n\
         factor x1 = 2%\ndx1 = kappa1 * (3% - x1) dt + vol dM\n\
         factor y = 1%\ndy = pull * (x1 - y) dt + vol dM\n\
         factor x2 = 2%\ndx2 = kappa1 * (3% - x2) dt + vol dM + vol dN\n\
         expect sd(x0) in {interval}\nexpect sd(x1) in [0.5%, 0.9%]\n\
         expect mean(y) in [0, 5%]\nexpect sd(x2) in [0.8%, 1.5%]\n"
    )
}

const BASE: (&str, &str, &str, &str) = ("spreads", "0.5", "0.3", "[0.5%, 0.9%]");

fn text(change: impl FnOnce(&mut (&str, &str, &str, &str))) -> String {
    let mut parts = BASE;
    change(&mut parts);
    model(parts.0, parts.1, parts.2, parts.3)
}

fn keys(text: &str) -> ContentKeys {
    ContentKeys::of(&sdeck_semantics::analyze(text, "harrowgate").model)
}

fn run(reuse: &Reuse, text: &str) -> FileCheck {
    let fresh = check(text, "harrowgate", &RuleSettings::default());
    let reused = check_reusing(
        text,
        "harrowgate",
        &RuleSettings::default(),
        &|| false,
        reuse,
    )
    .expect("never stale");
    // Taking over changes nothing of the result.
    assert_eq!(reused.diagnostics, fresh.diagnostics);
    assert_eq!(reused.derivation, fresh.derivation);
    assert!(fresh.diagnostics.is_empty(), "{:?}", fresh.diagnostics);
    reused
}

#[test]
fn keys_move_with_what_a_factors_figures_rest_on_and_nothing_else() {
    let base = keys(&text(|_| {}));
    assert_eq!(base.factors.len(), 4);
    // A comment (every span after it moves) and an expectation's interval: no key moves.
    assert_eq!(keys(&text(|p| p.0 = "spreads, reviewed")), base);
    assert_eq!(keys(&text(|p| p.3 = "[0.4%, 0.9%]")), base);
    // x0's speed: x0's key and the derivation's move, no other.
    let speed = keys(&text(|p| p.1 = "0.6"));
    assert_ne!(speed.factors[0], base.factors[0]);
    assert_eq!(speed.factors[1..], base.factors[1..]);
    assert_ne!(speed.derivation, base.derivation);
    // The correlation of M and N touches x2 alone (x0, x1 and y load on M only), and
    // the derivation.
    let rho = keys(&text(|p| p.2 = "0.4"));
    assert_eq!(rho.factors[..3], base.factors[..3]);
    assert_ne!(rho.factors[3], base.factors[3]);
    assert_ne!(rho.derivation, base.derivation);
}

#[test]
fn a_factor_mentioned_by_another_moves_its_key() {
    let base = keys(&text(|_| {}));
    let other = model("spreads", "0.5", "0.3", "[0.5%, 0.9%]")
        .replace("param kappa1 = 0.8 [1/year]", "param kappa1 = 0.9 [1/year]");
    let moved = keys(&other);
    // kappa1 is read by x1 and x2, and y mentions x1.
    assert_eq!(moved.factors[0], base.factors[0]);
    assert!(moved.factors[1..]
        .iter()
        .zip(&base.factors[1..])
        .all(|(a, b)| a != b));
    // y's pull moves x1's key too: x1 and y are one coupled block, whose formulas and
    // matrices show both.
    let pull = keys(
        &model("spreads", "0.5", "0.3", "[0.5%, 0.9%]")
            .replace("param pull = 2 [1/year]", "param pull = 3 [1/year]"),
    );
    assert_eq!(pull.factors[0], base.factors[0]);
    assert_ne!(pull.factors[1], base.factors[1]);
    assert_ne!(pull.factors[2], base.factors[2]);
    assert_eq!(pull.factors[3], base.factors[3]);
    // Factors of one block still have keys of their own.
    assert_ne!(base.factors[1], base.factors[2]);
}

#[test]
fn a_comment_reuses_the_derivation_and_one_factor_recomputes_its_expectations_only() {
    let reuse = Reuse::default();
    run(&reuse, &text(|_| {}));
    assert_eq!(
        reuse.counts(),
        ReuseCounts {
            derivations: 1,
            derivations_reused: 0,
            expectations: 4,
            expectations_reused: 0
        }
    );
    // A comment: nothing is derived again.
    run(&reuse, &text(|p| p.0 = "spreads, reviewed"));
    assert_eq!(
        reuse.counts(),
        ReuseCounts {
            derivations: 1,
            derivations_reused: 1,
            expectations: 4,
            expectations_reused: 4
        }
    );
    // x0's speed: the model is derived again (the calculus derives whole models), and
    // only x0's expectation is evaluated again.
    let after = run(&reuse, &text(|p| p.1 = "0.6"));
    assert_eq!(
        reuse.counts(),
        ReuseCounts {
            derivations: 2,
            derivations_reused: 1,
            expectations: 5,
            expectations_reused: 7
        }
    );
    assert_eq!(after.keys, keys(&text(|p| p.1 = "0.6")));
}

#[test]
fn the_memo_keeps_one_versions_worth_of_values() {
    let reuse = Reuse::default();
    run(&reuse, &text(|_| {}));
    for (n, speed) in ["0.6", "0.7", "0.8", "0.9"].into_iter().enumerate() {
        run(&reuse, &text(|p| p.1 = speed));
        // One value per expectation of the last version: the earlier speeds' are gone.
        assert_eq!(reuse.kept_values(), 4, "after speed {speed}");
        assert_eq!(reuse.counts().expectations, 5 + n as u64);
    }
    // Back to the first speed, last used four versions ago: computed again.
    run(&reuse, &text(|_| {}));
    assert_eq!(reuse.counts().expectations, 9);
}
