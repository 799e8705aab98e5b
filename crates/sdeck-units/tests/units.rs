//! Integration tests of sdeck-units through its public API: conversion tables for every
//! built-in unit in every clock, exact exponent algebra, human forms, and errors.
//!
//! Unit expressions are written as text and turned into syntax trees by a small reader
//! in `common` (`unit("1/sqrt(day)")`), so that the tables read like model files.

use sdeck_syntax::ast::{Exponent, UnitExpr};
use sdeck_units::{
    eval_unit, eval_unit_with_names, suggest_unit_text, time_unit_years, unit_expr_text, Dimension,
    Rational, UnitError, UnitValue, TIME_UNITS,
};

mod common;

use common::unit;

fn declares_eur_and_usd(name: &str) -> bool {
    name == "EUR" || name == "USD"
}

fn clock(name: &str) -> f64 {
    time_unit_years(name).unwrap_or_else(|| panic!("{name} is a built-in time unit"))
}

fn eval_in(text: &str, clock_unit: &str) -> UnitValue {
    eval_unit(&unit(text), &declares_eur_and_usd, clock(clock_unit))
        .unwrap_or_else(|error| panic!("[{text}] in a {clock_unit} clock: {error}"))
}

fn eval_error(text: &str) -> UnitError {
    match eval_unit(&unit(text), &declares_eur_and_usd, 1.0) {
        Ok(value) => panic!("[{text}] should not evaluate, got {value:?}"),
        Err(error) => error,
    }
}

fn r(num: i64, den: i64) -> Rational {
    Rational::new(num, den).unwrap_or_else(|| panic!("{num}/{den} is a valid rational"))
}

fn time_to(num: i64, den: i64) -> Dimension {
    Dimension::time()
        .pow(r(num, den))
        .unwrap_or_else(|| panic!("time^({num}/{den}) fits"))
}

fn eur() -> Dimension {
    Dimension::base("EUR")
}

fn assert_close(actual: f64, expected: f64, what: &str) {
    let relative = ((actual - expected) / expected).abs();
    assert!(
        relative <= 4.0 * f64::EPSILON,
        "{what}: {actual} vs {expected} (relative error {relative:e})"
    );
}

// ---------------------------------------------------------------------------------------
// Conversion tables.

/// `(unit, clock, p, q)`: one `unit` lasts `p/q` clock units.
///
/// ACT/365 Fixed day count and 252 business days per year: common practice, no source.
/// Quarter = year/4 and hour = day/24: common practice, no source.
/// With year = 1, quarter = 1/4, month = 1/12, week = 7/365, day = 1/365, bday = 1/252 and
/// hour = 1/8760 (in years), the ratios were worked by hand and cross-checked with Python's
/// `fractions.Fraction`.
const LENGTH_IN_CLOCK_UNITS: [(&str, &str, i64, i64); 49] = [
    ("year", "year", 1, 1),
    ("quarter", "year", 1, 4),
    ("month", "year", 1, 12),
    ("week", "year", 7, 365),
    ("day", "year", 1, 365),
    ("bday", "year", 1, 252),
    ("hour", "year", 1, 8760),
    ("year", "quarter", 4, 1),
    ("quarter", "quarter", 1, 1),
    ("month", "quarter", 1, 3),
    ("week", "quarter", 28, 365),
    ("day", "quarter", 4, 365),
    ("bday", "quarter", 1, 63),
    ("hour", "quarter", 1, 2190),
    ("year", "month", 12, 1),
    ("quarter", "month", 3, 1),
    ("month", "month", 1, 1),
    ("week", "month", 84, 365),
    ("day", "month", 12, 365),
    ("bday", "month", 1, 21),
    ("hour", "month", 1, 730),
    ("year", "week", 365, 7),
    ("quarter", "week", 365, 28),
    ("month", "week", 365, 84),
    ("week", "week", 1, 1),
    ("day", "week", 1, 7),
    ("bday", "week", 365, 1764),
    ("hour", "week", 1, 168),
    ("year", "day", 365, 1),
    ("quarter", "day", 365, 4),
    ("month", "day", 365, 12),
    ("week", "day", 7, 1),
    ("day", "day", 1, 1),
    ("bday", "day", 365, 252),
    ("hour", "day", 1, 24),
    ("year", "bday", 252, 1),
    ("quarter", "bday", 63, 1),
    ("month", "bday", 21, 1),
    ("week", "bday", 1764, 365),
    ("day", "bday", 252, 365),
    ("bday", "bday", 1, 1),
    ("hour", "bday", 21, 730),
    ("year", "hour", 8760, 1),
    ("quarter", "hour", 2190, 1),
    ("month", "hour", 730, 1),
    ("week", "hour", 168, 1),
    ("day", "hour", 24, 1),
    ("bday", "hour", 730, 21),
    ("hour", "hour", 1, 1),
];

#[test]
fn every_time_unit_converts_to_every_clock() {
    // The table covers each (unit, clock) pair once.
    for unit_name in TIME_UNITS {
        for clock_name in TIME_UNITS {
            let rows = LENGTH_IN_CLOCK_UNITS
                .iter()
                .filter(|(u, c, _, _)| *u == unit_name && *c == clock_name)
                .count();
            assert_eq!(rows, 1, "{unit_name} in a {clock_name} clock");
        }
    }
    for (unit_name, clock_name, p, q) in LENGTH_IN_CLOCK_UNITS {
        let (p, q) = (p as f64, q as f64);
        let cases = [
            // A duration in `unit` is p/q clock units; a rate per `unit` is q/p per clock
            // unit; a volatility per sqrt(unit) is sqrt(q/p) per sqrt(clock unit).
            (unit_name.to_string(), p / q, time_to(1, 1)),
            (format!("1/{unit_name}"), q / p, time_to(-1, 1)),
            (format!("{unit_name}^2"), (p * p) / (q * q), time_to(2, 1)),
            (format!("{unit_name}^(-1)"), q / p, time_to(-1, 1)),
        ];
        for (text, scale, dimension) in cases {
            let value = eval_in(&text, clock_name);
            assert_eq!(value.scale, scale, "[{text}] in a {clock_name} clock");
            assert_eq!(
                value.dimension, dimension,
                "[{text}] in a {clock_name} clock"
            );
        }
        let root_cases = [
            (format!("sqrt({unit_name})"), (p / q).sqrt(), time_to(1, 2)),
            (
                format!("1/sqrt({unit_name})"),
                (q / p).sqrt(),
                time_to(-1, 2),
            ),
            (
                format!("{unit_name}^(-1/2)"),
                (q / p).sqrt(),
                time_to(-1, 2),
            ),
            (
                format!("{unit_name}^(3/2)"),
                (p / q).powf(1.5),
                time_to(3, 2),
            ),
        ];
        for (text, scale, dimension) in root_cases {
            let value = eval_in(&text, clock_name);
            assert_close(
                value.scale,
                scale,
                &format!("[{text}] in a {clock_name} clock"),
            );
            assert_eq!(
                value.dimension, dimension,
                "[{text}] in a {clock_name} clock"
            );
        }
    }
}

#[test]
fn examples_of_the_scale_rule() {
    // The language design's examples; ACT/365 Fixed day count and 252 business days per
    // year: common practice, no source.
    let cases = [
        ("1/day", 365.0),
        ("day", 1.0 / 365.0),
        ("month", 1.0 / 12.0),
        ("1/bday", 252.0),
        ("EUR/year", 1.0),
        ("EUR", 1.0),
        ("1", 1.0),
        ("day/year", 1.0 / 365.0),
        ("year/day", 365.0),
        ("sqrt(day)*sqrt(day)", 1.0 / 365.0),
        ("day^(1/2)*day^(1/2)", 1.0 / 365.0),
        ("bday/day", 365.0 / 252.0),
        ("week/day", 7.0),
        ("month^2", 1.0 / 144.0),
    ];
    for (text, scale) in cases {
        assert_eq!(eval_in(text, "year").scale, scale, "[{text}]");
    }
}

#[test]
fn inverse_root_day_in_a_year_clock_is_exactly_root_365() {
    let value = eval_in("1/sqrt(day)", "year");
    assert_eq!(value.scale, 365f64.sqrt());
    // sqrt(365) = 19.1049731745428 (Python math.sqrt, outside the project).
    assert!((value.scale - 19.1049731745428).abs() < 1e-12);
    // The design's daily volatility `6bp [1/sqrt(day)]` is 0.0006 * sqrt(365) per
    // sqrt(year) = 0.01146298390472568 (Python: 0.0006 * math.sqrt(365)).
    assert!((0.0006 * value.scale - 0.01146298390472568).abs() < 1e-15);
    assert_eq!(eval_in("day^(-1/2)", "year").scale, 365f64.sqrt());
    assert_eq!(eval_in("EUR/sqrt(day)", "year").scale, 365f64.sqrt());
    assert_eq!(eval_in("sqrt(1/day)", "year").scale, 365f64.sqrt());
}

#[test]
fn a_clock_that_is_no_built_in_unit_still_converts() {
    // A half-year clock: a rate per year is half as large per half-year.
    let half_year = 0.5;
    let per_year = eval_unit(&unit("1/year"), &declares_eur_and_usd, half_year);
    assert_eq!(per_year.map(|value| value.scale), Ok(0.5));
    let days = eval_unit(&unit("day"), &declares_eur_and_usd, half_year);
    assert_eq!(days.map(|value| value.scale), Ok(2.0 / 365.0));
}

// ---------------------------------------------------------------------------------------
// Dimensions: exact exponents.

#[test]
fn dimensions_of_written_units() {
    let time = Dimension::time();
    let cases = [
        ("1", Dimension::dimensionless()),
        ("year", time.clone()),
        ("day/year", Dimension::dimensionless()),
        ("year^(-1/2)*sqrt(year)", Dimension::dimensionless()),
        ("sqrt(sqrt(day))^4", time.clone()),
        ("(day^(1/3))^3", time.clone()),
        ("EUR/sqrt(day)", eur().div(&time_to(1, 2))),
        ("EUR*EUR/year", eur().mul(&eur()).div(&time)),
        ("EUR/USD", eur().div(&Dimension::base("USD"))),
        ("EUR^0", Dimension::dimensionless()),
        ("sqrt(EUR^2*day)", eur().mul(&time_to(1, 2))),
        (
            "1/(EUR*year)",
            Dimension::dimensionless().div(&eur().mul(&time)),
        ),
    ];
    for (text, dimension) in cases {
        assert_eq!(eval_in(text, "year").dimension, dimension, "[{text}]");
        // The dimension does not depend on the clock.
        assert_eq!(eval_in(text, "bday").dimension, dimension, "[{text}] bday");
    }
}

#[test]
fn exponents_are_exact_rationals() {
    // (dimension, base, expected exponent), worked by hand.
    let time = Dimension::time();
    let third = time_to(1, 3);
    let cases = [
        (third.mul(&third).mul(&third), "time", r(1, 1)),
        (time.sqrt().sqrt(), "time", r(1, 4)),
        (time.sqrt().div(&third), "time", r(1, 6)),
        (eur().pow(r(-3, 2)).unwrap_or_default(), "EUR", r(-3, 2)),
        (eur().mul(&time), "USD", Rational::ZERO),
        (
            time_to(2, 3).pow(r(3, 2)).unwrap_or_default(),
            "time",
            r(1, 1),
        ),
    ];
    for (dimension, base, exponent) in cases {
        assert_eq!(dimension.exponent(base), exponent, "{dimension:?}");
    }
    assert!(third.mul(&third).mul(&third).div(&time).is_dimensionless());
    assert!(!third.is_dimensionless());
}

// ---------------------------------------------------------------------------------------
// Human forms.

#[test]
fn display_in_and_suggest_unit_text() {
    // (dimension, clock, text in that clock, words)
    let time = Dimension::time();
    let per_time = Dimension::dimensionless().div(&time);
    let cases = [
        (Dimension::dimensionless(), "year", "1", "dimensionless"),
        (per_time.clone(), "year", "1/year", "1/time"),
        (per_time.sqrt(), "year", "1/sqrt(year)", "1/sqrt(time)"),
        (per_time.sqrt(), "day", "1/sqrt(day)", "1/sqrt(time)"),
        (eur(), "month", "EUR", "EUR"),
        (eur().div(&time), "year", "EUR/year", "EUR per time"),
        (
            eur().div(&time.sqrt()),
            "bday",
            "EUR/sqrt(bday)",
            "EUR per sqrt(time)",
        ),
        (time_to(3, 2), "year", "year^(3/2)", "time^(3/2)"),
        (
            eur().mul(&eur()).div(&time),
            "year",
            "EUR^2/year",
            "EUR^2 per time",
        ),
        (time.clone(), "week", "week", "time"),
    ];
    for (dimension, clock_unit, text, words) in cases {
        assert_eq!(dimension.display_in(clock_unit), text, "{dimension:?}");
        assert_eq!(suggest_unit_text(&dimension, clock_unit), text);
        assert_eq!(dimension.describe(), words, "{dimension:?}");
    }
}

#[test]
fn suggested_text_reads_back_as_the_same_dimension_with_scale_one() {
    let dimensions = [
        Dimension::dimensionless(),
        Dimension::time(),
        time_to(-1, 2),
        time_to(3, 2),
        time_to(-5, 3),
        eur().div(&Dimension::time()),
        eur().mul(&Dimension::base("USD")).div(&time_to(1, 2)),
        Dimension::dimensionless().div(&eur().mul(&Dimension::time())),
    ];
    for clock_unit in TIME_UNITS {
        for dimension in &dimensions {
            let text = suggest_unit_text(dimension, clock_unit);
            let value = eval_in(&text, clock_unit);
            assert_eq!(
                &value.dimension, dimension,
                "[{text}] in a {clock_unit} clock"
            );
            // Written in the clock's own unit, nothing needs converting.
            assert_eq!(value.scale, 1.0, "[{text}] in a {clock_unit} clock");
        }
    }
}

#[test]
fn written_units_print_back_as_the_same_tree() {
    let texts = [
        "1",
        "1/sqrt(day)",
        "EUR/year",
        "year^(-1/2)",
        "year^(3/2)",
        "EUR*(1/year)",
        "(EUR*year)^2",
        "sqrt(EUR)^3",
        "1/(EUR/day)",
    ];
    for text in texts {
        let tree = unit(text);
        let printed = unit_expr_text(&tree);
        assert_eq!(printed, text);
        let reread = unit(&printed);
        assert_eq!(
            eval_in(&printed, "year"),
            eval_in(text, "year"),
            "{reread:?}"
        );
    }
}

// ---------------------------------------------------------------------------------------
// Errors.

#[test]
fn unknown_units_say_how_to_declare_and_suggest_a_close_name() {
    // (text, unknown name, expected help)
    let cases = [
        ("1/eur", "eur", Some("did you mean `EUR`?")),
        ("yaer", "yaer", Some("did you mean `year`?")),
        ("1/days", "days", Some("did you mean `day`?")),
        ("Year", "Year", Some("did you mean `year`?")),
        ("1/sqrt(yr)", "yr", Some("did you mean `year`?")),
        ("wk", "wk", Some("did you mean `week`?")),
        ("1/hr", "hr", Some("did you mean `hour`?")),
        ("qtr", "qtr", Some("did you mean `quarter`?")),
        ("furlong", "furlong", None),
        ("GBP/year", "GBP", None),
    ];
    for (text, name, help) in cases {
        let error = eval_error(text);
        assert_eq!(
            error.message,
            format!(
                "unit `{name}` is not declared; declare it with `unit {name}` or use a time \
                 unit (year, quarter, month, week, day, bday, hour)"
            ),
            "[{text}]"
        );
        assert_eq!(error.help.as_deref(), help, "[{text}]");
        // The span points at the unknown name itself.
        let start = text.find(name).unwrap_or(usize::MAX);
        assert_eq!(error.span, start..start + name.len(), "[{text}]");
    }
}

#[test]
fn declared_names_improve_suggestions() {
    let error = eval_unit_with_names(&unit("EUT"), &declares_eur_and_usd, &["EUR", "USD"], 1.0);
    let help = error.err().and_then(|error| error.help);
    assert_eq!(help.as_deref(), Some("did you mean `EUR`?"));
}

#[test]
fn time_is_not_a_unit_even_when_declared() {
    let declares_time = |name: &str| name == "time";
    let error = eval_unit(&unit("1/time"), &declares_time, 1.0);
    let error = error
        .err()
        .unwrap_or_else(|| panic!("[1/time] must be refused"));
    assert!(
        error.message.contains("`time` cannot be used as a unit"),
        "{error:?}"
    );
    assert_eq!(error.span, 2..6);
}

#[test]
fn exponent_overflow_is_an_error_not_a_panic() {
    let texts = [
        "year^9223372036854775807*year",
        "(year^9223372036854775807)^2",
        "EUR^9223372036854775807*EUR",
        "year^(1/9223372036854775807)*year^(1/9223372036854775806)",
        "year^(1/9223372036854775807)*day^(1/9223372036854775806)",
        "sqrt(day^(1/9223372036854775807))",
    ];
    for text in texts {
        let error = eval_error(text);
        assert!(
            error.message.contains("too large to compute exactly"),
            "[{text}]: {error:?}"
        );
        assert!(error.help.is_some(), "[{text}]");
    }
}

#[test]
fn malformed_exponents_are_errors() {
    let zero_denominator = UnitExpr::Pow {
        base: Box::new(unit("year")),
        exponent: Exponent { num: 1, den: 0 },
        span: 0..10,
    };
    let error = eval_unit(&zero_denominator, &declares_eur_and_usd, 1.0);
    let message = error.err().map(|error| error.message);
    assert_eq!(
        message.as_deref(),
        Some("the exponent 1/0 has a zero denominator")
    );
    let unrepresentable = UnitExpr::Pow {
        base: Box::new(unit("year")),
        exponent: Exponent {
            num: i64::MIN,
            den: -1,
        },
        span: 0..10,
    };
    assert!(eval_unit(&unrepresentable, &declares_eur_and_usd, 1.0).is_err());
}

#[test]
fn scale_out_of_floating_point_range_is_an_error() {
    // (1/365)^400 underflows to zero and 365^400 overflows to infinity.
    for text in ["day^400", "1/day^400", "day^(801/2)"] {
        let error = eval_error(text);
        assert!(
            error.message.contains("too large or too small"),
            "[{text}]: {error:?}"
        );
    }
    // The same exponent on the clock's own unit converts by exactly 1.
    assert_eq!(eval_in("year^400", "year").scale, 1.0);
}

#[test]
fn clock_length_must_be_positive_and_finite() {
    for clock_years in [0.0, -1.0, f64::NAN, f64::INFINITY] {
        let result = eval_unit(&unit("year"), &declares_eur_and_usd, clock_years);
        assert!(result.is_err(), "clock of {clock_years} years");
    }
}

#[test]
fn errors_become_diagnostics() {
    let error = eval_error("yaer");
    let diagnostic = error.to_diagnostic(&sdeck_diagnostics::rules::UNKNOWN_NAME);
    assert_eq!(diagnostic.rule.name(), "unknown-name");
    assert_eq!(diagnostic.message, error.message);
    assert_eq!(diagnostic.help.as_deref(), error.help.as_deref());
}
