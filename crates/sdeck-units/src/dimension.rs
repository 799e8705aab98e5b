//! Dimensions: products of base units raised to exact rational powers, and the way they
//! are written for people.

use crate::rational::Rational;
use std::fmt;

/// The name of the base that every time unit (`year`, `day`, ...) shares.
///
/// It is not a unit anyone writes: [`crate::eval_unit`] refuses a user unit called
/// `time`, so a user base can never be confused with it.
pub const TIME_BASE: &str = "time";

/// A dimension: base names with non-zero rational exponents, sorted by base name.
///
/// The base [`TIME_BASE`] is shared by every time unit; a user unit declared with
/// `unit EUR` is a base named by itself. The empty dimension is dimensionless.
///
/// Exponent arithmetic is exact. When an operation's exponent would not fit in an `i64`
/// rational (only reachable with absurd exponents such as `year^(1/9223372036854775807)`),
/// the operations that cannot fail ([`Dimension::mul`], [`Dimension::div`],
/// [`Dimension::sqrt`]) return an *overflowed* dimension instead of panicking: it equals
/// no ordinary dimension, stays overflowed through further operations, and
/// [`Dimension::overflowed`] tells it apart. The `checked_` variants return `None`.
#[derive(Clone, Debug, PartialEq, Eq, Default, Hash)]
pub struct Dimension {
    /// Sorted by base name; no zero exponents.
    factors: Vec<(String, Rational)>,
    overflowed: bool,
}

impl Dimension {
    /// The dimension of pure numbers.
    pub fn dimensionless() -> Dimension {
        Dimension::default()
    }

    /// Time, to the power 1.
    pub fn time() -> Dimension {
        Dimension::base(TIME_BASE)
    }

    /// One base, to the power 1: `Dimension::base("EUR")`. `base("time")` is time.
    pub fn base(name: &str) -> Dimension {
        Dimension {
            factors: vec![(name.to_string(), Rational::ONE)],
            overflowed: false,
        }
    }

    /// A dimension from `(base, exponent)` pairs in any order; repeated bases add up and
    /// zero exponents vanish. `None` on exponent overflow.
    pub fn from_factors<'a>(
        factors: impl IntoIterator<Item = (&'a str, Rational)>,
    ) -> Option<Dimension> {
        let mut result = Dimension::dimensionless();
        for (name, exponent) in factors {
            let single = Dimension {
                factors: vec![(name.to_string(), exponent)],
                overflowed: false,
            };
            result = result.checked_mul(&single.without_zero_exponents())?;
        }
        Some(result)
    }

    pub fn is_dimensionless(&self) -> bool {
        self.factors.is_empty() && !self.overflowed
    }

    /// Whether an exponent overflowed while this dimension was computed.
    pub fn overflowed(&self) -> bool {
        self.overflowed
    }

    /// The bases and their exponents, sorted by base name.
    pub fn factors(&self) -> impl Iterator<Item = (&str, Rational)> + '_ {
        self.factors
            .iter()
            .map(|(name, exponent)| (name.as_str(), *exponent))
    }

    /// The exponent of `base`; zero when the base does not appear.
    pub fn exponent(&self, base: &str) -> Rational {
        self.factors
            .iter()
            .find(|(name, _)| name == base)
            .map(|(_, exponent)| *exponent)
            .unwrap_or(Rational::ZERO)
    }

    /// The exponent of time.
    pub fn time_exponent(&self) -> Rational {
        self.exponent(TIME_BASE)
    }

    /// The product of two dimensions (exponents add). Overflowed on exponent overflow.
    pub fn mul(&self, other: &Dimension) -> Dimension {
        self.checked_mul(other)
            .unwrap_or_else(Dimension::overflowed_value)
    }

    /// The quotient of two dimensions (exponents subtract). Overflowed on exponent
    /// overflow.
    pub fn div(&self, other: &Dimension) -> Dimension {
        self.checked_div(other)
            .unwrap_or_else(Dimension::overflowed_value)
    }

    /// `self^exponent`; `None` when an exponent overflows. An overflowed dimension stays
    /// overflowed, except that the power 0 of anything is dimensionless.
    pub fn pow(&self, exponent: Rational) -> Option<Dimension> {
        if exponent.is_zero() {
            return Some(Dimension::dimensionless());
        }
        if self.overflowed {
            return Some(self.clone());
        }
        let mut factors = Vec::with_capacity(self.factors.len());
        for (name, own) in &self.factors {
            factors.push((name.clone(), own.checked_mul(exponent)?));
        }
        Some(Dimension {
            factors,
            overflowed: false,
        })
    }

    /// The square root: every exponent halved. Overflowed on exponent overflow.
    pub fn sqrt(&self) -> Dimension {
        self.pow(Rational::HALF)
            .unwrap_or_else(Dimension::overflowed_value)
    }

    /// The product, or `None` when an exponent overflows.
    pub fn checked_mul(&self, other: &Dimension) -> Option<Dimension> {
        self.merge(other, Rational::checked_add)
    }

    /// The quotient, or `None` when an exponent overflows.
    pub fn checked_div(&self, other: &Dimension) -> Option<Dimension> {
        self.merge(other, Rational::checked_sub)
    }

    /// Human form in the clock's unit, the way a quant writes it inside brackets: `1`,
    /// `1/year`, `1/sqrt(year)`, `EUR`, `EUR/year`, `EUR/sqrt(year)`, `year^(3/2)`,
    /// `EUR^2/year`, `1/(EUR*year)`. Time is shown as `clock_unit`, placed after the user
    /// bases. The text parses back as a unit expression of the same dimension.
    pub fn display_in(&self, clock_unit: &str) -> String {
        if self.overflowed {
            return "(exponent overflow)".to_string();
        }
        let (numerator, denominator) = self.split(clock_unit);
        match (numerator.is_empty(), denominator.is_empty()) {
            (true, true) => "1".to_string(),
            (false, true) => numerator.join("*"),
            (true, false) => format!("1/{}", join_denominator(&denominator)),
            (false, false) => format!("{}/{}", numerator.join("*"), join_denominator(&denominator)),
        }
    }

    /// Words for messages: `dimensionless`, `time`, `1/time`, `1/sqrt(time)`, `EUR`,
    /// `EUR per time`, `EUR per sqrt(time)`, `EUR^2 per time`.
    pub fn describe(&self) -> String {
        if self.overflowed {
            return "a dimension whose exponents overflow".to_string();
        }
        let (numerator, denominator) = self.split(TIME_BASE);
        match (numerator.is_empty(), denominator.is_empty()) {
            (true, true) => "dimensionless".to_string(),
            (false, true) => numerator.join("*"),
            (true, false) => format!("1/{}", join_denominator(&denominator)),
            (false, false) => format!(
                "{} per {}",
                numerator.join("*"),
                join_denominator(&denominator)
            ),
        }
    }

    fn overflowed_value() -> Dimension {
        Dimension {
            factors: Vec::new(),
            overflowed: true,
        }
    }

    fn without_zero_exponents(mut self) -> Dimension {
        self.factors.retain(|(_, exponent)| !exponent.is_zero());
        self
    }

    /// Merges two sorted factor lists, combining the exponents of a base present in
    /// either with `combine` (a missing base counts as exponent zero).
    fn merge(
        &self,
        other: &Dimension,
        combine: fn(Rational, Rational) -> Option<Rational>,
    ) -> Option<Dimension> {
        if self.overflowed || other.overflowed {
            return Some(Dimension::overflowed_value());
        }
        let mut factors = Vec::with_capacity(self.factors.len() + other.factors.len());
        let mut left = self.factors.iter().peekable();
        let mut right = other.factors.iter().peekable();
        loop {
            let (name, exponent) = match (left.peek(), right.peek()) {
                (None, None) => break,
                (Some((name, exponent)), None) => {
                    left.next();
                    (name, combine(*exponent, Rational::ZERO)?)
                }
                (None, Some((name, exponent))) => {
                    right.next();
                    (name, combine(Rational::ZERO, *exponent)?)
                }
                (Some((left_name, left_exponent)), Some((right_name, right_exponent))) => {
                    match left_name.cmp(right_name) {
                        std::cmp::Ordering::Less => {
                            left.next();
                            (left_name, combine(*left_exponent, Rational::ZERO)?)
                        }
                        std::cmp::Ordering::Greater => {
                            right.next();
                            (right_name, combine(Rational::ZERO, *right_exponent)?)
                        }
                        std::cmp::Ordering::Equal => {
                            left.next();
                            right.next();
                            (left_name, combine(*left_exponent, *right_exponent)?)
                        }
                    }
                }
            };
            if !exponent.is_zero() {
                factors.push((name.clone(), exponent));
            }
        }
        Some(Dimension {
            factors,
            overflowed: false,
        })
    }

    /// The factors with positive and with negative exponents, each written with a
    /// positive exponent; user bases first (sorted), time last, shown as `time_name`.
    fn split(&self, time_name: &str) -> (Vec<String>, Vec<String>) {
        let user_bases = self.factors.iter().filter(|(name, _)| name != TIME_BASE);
        let time = self.factors.iter().filter(|(name, _)| name == TIME_BASE);
        let mut numerator = Vec::new();
        let mut denominator = Vec::new();
        for (name, exponent) in user_bases.chain(time) {
            let shown = if name == TIME_BASE {
                time_name
            } else {
                name.as_str()
            };
            match exponent.checked_abs() {
                Some(magnitude) if exponent.is_positive() => {
                    numerator.push(factor_text(shown, magnitude))
                }
                Some(magnitude) => denominator.push(factor_text(shown, magnitude)),
                // Only `i64::MIN` has no absolute value; write it as it is.
                None => numerator.push(format!("{shown}^({exponent})")),
            }
        }
        (numerator, denominator)
    }
}

/// `name`, `sqrt(name)`, `name^2`, `name^(3/2)` for a positive exponent.
fn factor_text(name: &str, exponent: Rational) -> String {
    if exponent == Rational::ONE {
        name.to_string()
    } else if exponent == Rational::HALF {
        format!("sqrt({name})")
    } else if exponent.is_integer() {
        format!("{name}^{exponent}")
    } else {
        format!("{name}^({exponent})")
    }
}

/// A denominator of several factors goes in parentheses: `1/(EUR*year)`.
fn join_denominator(factors: &[String]) -> String {
    if factors.len() == 1 {
        factors.join("*")
    } else {
        format!("({})", factors.join("*"))
    }
}

impl fmt::Display for Dimension {
    /// The words of [`Dimension::describe`].
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.describe())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn r(num: i64, den: i64) -> Rational {
        Rational::new(num, den).unwrap_or_else(|| panic!("{num}/{den} should be valid"))
    }

    fn eur() -> Dimension {
        Dimension::base("EUR")
    }

    #[test]
    fn half_powers_cancel_exactly() {
        let inverse_sqrt_time = Dimension::time().pow(r(-1, 2)).unwrap_or_default();
        let product = inverse_sqrt_time.mul(&Dimension::time().sqrt());
        assert!(product.is_dimensionless(), "{product:?}");
        assert_eq!(product, Dimension::dimensionless());
    }

    #[test]
    fn factors_stay_sorted_and_zeros_vanish() {
        let d = Dimension::time().mul(&eur()).mul(&Dimension::base("AUD"));
        let names: Vec<&str> = d.factors().map(|(name, _)| name).collect();
        assert_eq!(names, ["AUD", "EUR", "time"]);
        let back = d.div(&Dimension::base("AUD"));
        let names: Vec<&str> = back.factors().map(|(name, _)| name).collect();
        assert_eq!(names, ["EUR", "time"]);
        assert_eq!(back.exponent("AUD"), Rational::ZERO);
    }

    #[test]
    fn from_factors_adds_repeated_bases() {
        let d = Dimension::from_factors([
            ("time", r(1, 2)),
            ("EUR", Rational::ONE),
            ("time", r(-3, 2)),
            ("USD", Rational::ZERO),
        ]);
        assert_eq!(d, Some(eur().div(&Dimension::time())));
    }

    #[test]
    fn overflow_is_sticky_and_never_equal_to_a_real_dimension() {
        let tiny = Dimension::from_factors([("time", r(1, i64::MAX))]).unwrap_or_default();
        let other = Dimension::from_factors([("time", r(1, i64::MAX - 1))]).unwrap_or_default();
        assert_eq!(tiny.checked_mul(&other), None);
        let product = tiny.mul(&other);
        assert!(product.overflowed());
        assert!(!product.is_dimensionless());
        assert_ne!(product, Dimension::dimensionless());
        assert!(product.mul(&eur()).overflowed());
        assert!(eur().div(&product).overflowed());
        assert_eq!(
            product.pow(Rational::ZERO),
            Some(Dimension::dimensionless())
        );
        let huge = Dimension::from_factors([("EUR", Rational::from_int(i64::MAX))]);
        let huge = huge.unwrap_or_default();
        assert_eq!(huge.pow(Rational::from_int(2)), None);
        assert!(Dimension::from_factors([("EUR", r(1, i64::MAX))])
            .unwrap_or_default()
            .sqrt()
            .overflowed());
    }

    #[test]
    fn display_and_describe() {
        let time = Dimension::time();
        let inverse_time = Dimension::dimensionless().div(&time);
        let cases: Vec<(Dimension, &str, &str)> = vec![
            (Dimension::dimensionless(), "1", "dimensionless"),
            (time.clone(), "year", "time"),
            (inverse_time.clone(), "1/year", "1/time"),
            (inverse_time.sqrt(), "1/sqrt(year)", "1/sqrt(time)"),
            (eur(), "EUR", "EUR"),
            (eur().div(&time), "EUR/year", "EUR per time"),
            (
                eur().div(&time.sqrt()),
                "EUR/sqrt(year)",
                "EUR per sqrt(time)",
            ),
            (
                time.pow(r(3, 2)).unwrap_or_default(),
                "year^(3/2)",
                "time^(3/2)",
            ),
            (
                eur().pow(r(2, 1)).unwrap_or_default().div(&time),
                "EUR^2/year",
                "EUR^2 per time",
            ),
            (inverse_time.div(&eur()), "1/(EUR*year)", "1/(EUR*time)"),
            (eur().mul(&time), "EUR*year", "EUR*time"),
            (
                time.pow(r(-5, 3)).unwrap_or_default(),
                "1/year^(5/3)",
                "1/time^(5/3)",
            ),
        ];
        for (dimension, shown, words) in cases {
            assert_eq!(dimension.display_in("year"), shown, "{dimension:?}");
            assert_eq!(dimension.describe(), words, "{dimension:?}");
            assert_eq!(dimension.to_string(), words);
        }
        assert_eq!(inverse_time.sqrt().display_in("bday"), "1/sqrt(bday)");
    }
}
