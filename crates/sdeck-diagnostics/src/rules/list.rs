//! The one list of sdeck's rules, in the manual's order (the order of `RuleId`, of
//! `rules::ALL`, of SARIF's rule index and of findings at one place). Each line is
//!
//! ```text
//! Variant => CONSTANT, module, "name", Severity, "summary"[, checked];
//! ```
//!
//! `for_each_rule!(callback)` hands the list to a macro: `sdeck-diagnostics` builds from
//! it the catalogue (`RuleId` and the constant); `sdeck-checks` builds its registry and
//! its manuals from it: a rule marked `checked` is decided by `run` in
//! `crates/sdeck-checks/src/rules/module.rs`, and every rule's manual and examples are
//! `crates/sdeck-checks/src/rules/module.md`, beside its module. The rules not marked
//! `checked` arise while the text is parsed, names resolved or units inferred, or from
//! suppression comments.

/// Invokes `$callback! { ... }` with the one list of rules (see the module documentation).
#[macro_export]
macro_rules! for_each_rule {
    ($callback:ident) => {
        $callback! {
            Syntax => SYNTAX, syntax, "syntax", Error,
                "The text does not parse.";
            UnknownName => UNKNOWN_NAME, unknown_name, "unknown-name", Error,
                "A name is used but never declared.";
            DuplicateName => DUPLICATE_NAME, duplicate_name, "duplicate-name", Error,
                "A name is declared twice.";
            MissingEquation => MISSING_EQUATION, missing_equation, "missing-equation", Error,
                "A factor has no equation, or an equation names no factor.", checked;
            NoFactor => NO_FACTOR, no_factor, "no-factor", Warning,
                "The model declares no factor, so nothing is derived or checked beyond its names.", checked;
            DuplicateTerm => DUPLICATE_TERM, duplicate_term, "duplicate-term", Error,
                "Two dt terms, or two terms for one shock, in one equation.", checked;
            DimensionMismatch => DIMENSION_MISMATCH, dimension_mismatch, "dimension-mismatch", Error,
                "Dimensions disagree (drift, diffusion, sums, function arguments, bounds).";
            BoundViolated => BOUND_VIOLATED, bound_violated, "bound-violated", Error,
                "A value lies outside its declared bound.", checked;
            CorrelationRange => CORRELATION_RANGE, correlation_range, "correlation-range", Error,
                "A correlation outside [-1, 1], or a shock correlated with itself.", checked;
            CorrelationNotPsd => CORRELATION_NOT_PSD, correlation_not_psd, "correlation-not-psd", Error,
                "The correlation matrix of the shocks is not positive semi-definite.", checked;
            FellerCondition => FELLER_CONDITION, feller_condition, "feller-condition", Warning,
                "A square-root diffusion with 2·speed·level < vol²: zero is attainable.", checked;
            FactorDomain => FACTOR_DOMAIN, factor_domain, "factor-domain", Warning,
                "A factor can leave its declared domain, or the domain of sqrt/log applied to it.", checked;
            NotMeanReverting => NOT_MEAN_REVERTING, not_mean_reverting, "not-mean-reverting", Warning,
                "A linear drift that pushes away from its level (explosive).", checked;
            ImplausibleValue => IMPLAUSIBLE_VALUE, implausible_value, "implausible-value", Warning,
                "A volatility, half-life, rate level or correlation a desk almost never means.", checked;
            MomentExplosion => MOMENT_EXPLOSION, moment_explosion, "moment-explosion", Warning,
                "A price whose variance becomes infinite before the horizon.", checked;
            DiscountMeasure => DISCOUNT_MEASURE, discount_measure, "discount-measure", Warning,
                "A `discount` rate whose drifts are not stated to be risk-neutral.", checked;
            Unused => UNUSED, unused, "unused", Warning,
                "A parameter, shock or let that nothing uses.", checked;
            UnitScale => UNIT_SCALE, unit_scale, "unit-scale", Hint,
                "A value is converted to the clock's units.", checked;
            ExpectationFailed => EXPECTATION_FAILED, expectation_failed, "expectation-failed", Error,
                "A pinned expectation on a derived figure does not hold.", checked;
            UnusedSuppression => UNUSED_SUPPRESSION, unused_suppression, "unused-suppression", Warning,
                "A suppression comment that suppresses nothing.";
        }
    };
}
