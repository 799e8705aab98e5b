//! Property tests of sdeck-units: evaluation never panics on any tree a parser could
//! build, the exponent algebra obeys the laws of a group, suggested unit texts read back
//! exactly, and scales compose and change clocks the way the scale rule says.

mod common;

use common::unit;
use proptest::prelude::*;
use sdeck_syntax::ast::{Exponent, Ident, UnitExpr};
use sdeck_units::{
    eval_unit, suggest_unit_text, time_unit_years, Dimension, Rational, UnitValue, TIME_UNITS,
};

fn declares_eur_and_usd(name: &str) -> bool {
    name == "EUR" || name == "USD"
}

fn clock_years(name: &str) -> f64 {
    time_unit_years(name).unwrap_or(1.0)
}

fn any_clock() -> impl Strategy<Value = &'static str> {
    prop::sample::select(TIME_UNITS.to_vec())
}

/// Unit trees over known, unknown and reserved names with any `i64` exponents, as a
/// parser might hand them over from hostile text.
fn any_unit_tree() -> impl Strategy<Value = UnitExpr> {
    let names = prop::sample::select(vec![
        "year", "month", "week", "day", "bday", "EUR", "USD", "eur", "time", "yaer",
    ]);
    let leaf = prop_oneof![
        Just(UnitExpr::One { span: 0..1 }),
        names.prop_map(|name| UnitExpr::Name(Ident {
            name: name.to_string(),
            span: 0..name.len(),
        })),
    ];
    leaf.prop_recursive(4, 24, 2, |inner| {
        let exponent = prop_oneof![
            (-3i64..=3, 1i64..=3).prop_map(|(num, den)| Exponent { num, den }),
            (any::<i64>(), any::<i64>()).prop_map(|(num, den)| Exponent { num, den }),
        ];
        prop_oneof![
            (inner.clone(), inner.clone()).prop_map(|(lhs, rhs)| UnitExpr::Mul {
                lhs: Box::new(lhs),
                rhs: Box::new(rhs),
                span: 0..1,
            }),
            (inner.clone(), inner.clone()).prop_map(|(lhs, rhs)| UnitExpr::Div {
                lhs: Box::new(lhs),
                rhs: Box::new(rhs),
                span: 0..1,
            }),
            (inner.clone(), exponent).prop_map(|(base, exponent)| UnitExpr::Pow {
                base: Box::new(base),
                exponent,
                span: 0..1,
            }),
            inner.prop_map(|inner| UnitExpr::Sqrt {
                inner: Box::new(inner),
                span: 0..1,
            }),
        ]
    })
}

/// Unit trees over built-in and declared units with small exponents: always valid.
fn valid_unit_tree() -> impl Strategy<Value = UnitExpr> {
    let names = prop::sample::select(vec!["year", "month", "week", "day", "bday", "EUR"]);
    let leaf = names.prop_map(|name| {
        UnitExpr::Name(Ident {
            name: name.to_string(),
            span: 0..name.len(),
        })
    });
    leaf.prop_recursive(3, 12, 2, |inner| {
        prop_oneof![
            (inner.clone(), inner.clone()).prop_map(|(lhs, rhs)| UnitExpr::Mul {
                lhs: Box::new(lhs),
                rhs: Box::new(rhs),
                span: 0..1,
            }),
            (inner.clone(), inner.clone()).prop_map(|(lhs, rhs)| UnitExpr::Div {
                lhs: Box::new(lhs),
                rhs: Box::new(rhs),
                span: 0..1,
            }),
            (inner.clone(), -2i64..=2, 1i64..=2).prop_map(|(base, num, den)| {
                UnitExpr::Pow {
                    base: Box::new(base),
                    exponent: Exponent { num, den },
                    span: 0..1,
                }
            }),
            inner.prop_map(|inner| UnitExpr::Sqrt {
                inner: Box::new(inner),
                span: 0..1,
            }),
        ]
    })
}

/// Dimensions over two currencies and time with small rational exponents.
fn any_dimension() -> impl Strategy<Value = Dimension> {
    let factor = (
        prop::sample::select(vec!["EUR", "USD", "time"]),
        -4i64..=4,
        1i64..=3,
    );
    prop::collection::vec(factor, 0..5).prop_map(|factors| {
        let factors = factors
            .into_iter()
            .filter_map(|(name, num, den)| Rational::new(num, den).map(|e| (name, e)));
        Dimension::from_factors(factors).unwrap_or_default()
    })
}

fn eval(expr: &UnitExpr, clock: &str) -> Option<UnitValue> {
    eval_unit(expr, &declares_eur_and_usd, clock_years(clock)).ok()
}

fn close(left: f64, right: f64) -> bool {
    ((left - right) / right).abs() <= 1e-12
}

proptest! {
    #[test]
    fn evaluation_never_panics_and_scales_are_usable(
        tree in any_unit_tree(),
        clock in any_clock(),
        odd_clock in prop_oneof![Just(None), any::<f64>().prop_map(Some)],
    ) {
        let years = odd_clock.unwrap_or_else(|| clock_years(clock));
        if let Ok(value) = eval_unit(&tree, &declares_eur_and_usd, years) {
            prop_assert!(value.scale.is_finite() && value.scale > 0.0, "{value:?}");
            prop_assert!(!value.dimension.overflowed());
            // Whatever the dimension, its suggested text reads back to it.
            let text = suggest_unit_text(&value.dimension, clock);
            let reread = eval(&unit(&text), clock);
            prop_assert_eq!(reread.map(|v| v.dimension), Some(value.dimension));
        }
    }

    #[test]
    fn exponent_algebra_is_a_group(a in any_dimension(), b in any_dimension(),
                                   num in -3i64..=3, den in 1i64..=3) {
        prop_assert_eq!(a.mul(&b), b.mul(&a));
        prop_assert_eq!(a.mul(&b).div(&b), a.clone());
        prop_assert!(a.div(&a).is_dimensionless());
        prop_assert_eq!(a.sqrt().mul(&a.sqrt()), a.clone());
        if num != 0 {
            let e = Rational::new(num, den).unwrap_or(Rational::ONE);
            let inverse = Rational::new(den, num).unwrap_or(Rational::ONE);
            let there_and_back = a.pow(e).and_then(|p| p.pow(inverse));
            prop_assert_eq!(there_and_back, Some(a.clone()));
        }
    }

    #[test]
    fn suggested_text_reads_back_exactly_with_scale_one(d in any_dimension(),
                                                         clock in any_clock()) {
        let text = suggest_unit_text(&d, clock);
        let value = eval(&unit(&text), clock);
        prop_assert_eq!(value, Some(UnitValue { dimension: d, scale: 1.0 }), "[{}]", text);
    }

    #[test]
    fn scales_compose_like_the_units(a in valid_unit_tree(), b in valid_unit_tree(),
                                     clock in any_clock()) {
        let product = UnitExpr::Mul { lhs: Box::new(a.clone()), rhs: Box::new(b.clone()), span: 0..1 };
        let quotient = UnitExpr::Div { lhs: Box::new(a.clone()), rhs: Box::new(b.clone()), span: 0..1 };
        let (Some(a), Some(b)) = (eval(&a, clock), eval(&b, clock)) else {
            return Err(TestCaseError::fail("small exponents always evaluate"));
        };
        let (Some(product), Some(quotient)) = (eval(&product, clock), eval(&quotient, clock)) else {
            return Err(TestCaseError::fail("small exponents always evaluate"));
        };
        prop_assert!(close(product.scale, a.scale * b.scale));
        prop_assert!(close(quotient.scale, a.scale / b.scale));
        prop_assert_eq!(product.dimension, a.dimension.mul(&b.dimension));
        prop_assert_eq!(quotient.dimension, a.dimension.div(&b.dimension));
    }

    #[test]
    fn changing_the_clock_rescales_by_the_time_exponent(tree in valid_unit_tree(),
                                                        first in any_clock(),
                                                        second in any_clock()) {
        // A value with time exponent k in clock c1 is (c2 / c1)^k times its value in c2,
        // c1 and c2 being the clocks' lengths in years.
        let (Some(in_first), Some(in_second)) = (eval(&tree, first), eval(&tree, second)) else {
            return Err(TestCaseError::fail("small exponents always evaluate"));
        };
        let k = in_first.dimension.time_exponent().to_f64();
        let ratio = clock_years(second) / clock_years(first);
        prop_assert!(close(in_first.scale, in_second.scale * ratio.powf(k)),
            "{} vs {} * {}^{}", in_first.scale, in_second.scale, ratio, k);
    }
}
