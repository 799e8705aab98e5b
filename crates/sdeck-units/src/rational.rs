//! Exact rational numbers for unit exponents, with checked arithmetic that reports
//! overflow instead of panicking.
//!
//! A small type rather than a general big-rational crate: exponents of units are tiny
//! (2, -1, 1/2, 3/2) and the only hard requirement is that nothing a user writes can make
//! the arithmetic panic. Intermediate products are taken in `i128`, where the product of
//! two `i64` always fits, and the result is reduced and narrowed back to `i64` with a
//! check.

use std::cmp::Ordering;
use std::fmt;

/// An exact rational `num/den`, always normalised: `gcd(num, den) == 1` and `den > 0`,
/// so that equal values compare and hash equal. Zero is `0/1`.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub struct Rational {
    num: i64,
    den: i64,
}

impl Rational {
    pub const ZERO: Rational = Rational { num: 0, den: 1 };
    pub const ONE: Rational = Rational { num: 1, den: 1 };
    /// `1/2`: the exponent that `sqrt` applies.
    pub const HALF: Rational = Rational { num: 1, den: 2 };

    /// `num/den` in lowest terms; `None` when `den` is zero or the normalised value does
    /// not fit in `i64` (only `i64::MIN` in the denominator can cause that).
    pub fn new(num: i64, den: i64) -> Option<Rational> {
        Rational::from_wide(i128::from(num), i128::from(den))
    }

    /// The integer `value` as a rational.
    pub fn from_int(value: i64) -> Rational {
        Rational { num: value, den: 1 }
    }

    /// The numerator, carrying the sign.
    pub fn num(self) -> i64 {
        self.num
    }

    /// The denominator, always positive.
    pub fn den(self) -> i64 {
        self.den
    }

    pub fn is_zero(self) -> bool {
        self.num == 0
    }

    pub fn is_integer(self) -> bool {
        self.den == 1
    }

    pub fn is_positive(self) -> bool {
        self.num > 0
    }

    pub fn is_negative(self) -> bool {
        self.num < 0
    }

    /// The nearest `f64` (exact for every exponent a unit realistically has).
    pub fn to_f64(self) -> f64 {
        self.num as f64 / self.den as f64
    }

    pub fn checked_add(self, other: Rational) -> Option<Rational> {
        let num = i128::from(self.num) * i128::from(other.den)
            + i128::from(other.num) * i128::from(self.den);
        Rational::from_wide(num, i128::from(self.den) * i128::from(other.den))
    }

    pub fn checked_sub(self, other: Rational) -> Option<Rational> {
        self.checked_add(other.checked_neg()?)
    }

    pub fn checked_mul(self, other: Rational) -> Option<Rational> {
        Rational::from_wide(
            i128::from(self.num) * i128::from(other.num),
            i128::from(self.den) * i128::from(other.den),
        )
    }

    /// `None` when `other` is zero or the result overflows.
    pub fn checked_div(self, other: Rational) -> Option<Rational> {
        Rational::from_wide(
            i128::from(self.num) * i128::from(other.den),
            i128::from(self.den) * i128::from(other.num),
        )
    }

    pub fn checked_neg(self) -> Option<Rational> {
        Rational::from_wide(-i128::from(self.num), i128::from(self.den))
    }

    pub fn checked_abs(self) -> Option<Rational> {
        if self.num < 0 {
            self.checked_neg()
        } else {
            Some(self)
        }
    }

    /// Reduces `num/den` given in `i128` and narrows it to `i64`.
    fn from_wide(num: i128, den: i128) -> Option<Rational> {
        if den == 0 {
            return None;
        }
        // gcd(0, d) = |d| >= 1, so the division below is safe and 0/d becomes 0/1.
        let divisor = gcd(num.unsigned_abs(), den.unsigned_abs());
        // Both magnitudes are below 2^127 here (products of two i64 plus one more i64
        // product), so the divisor fits in i128.
        let divisor = i128::try_from(divisor).ok()?;
        let mut num = num / divisor;
        let mut den = den / divisor;
        if den < 0 {
            num = num.checked_neg()?;
            den = den.checked_neg()?;
        }
        Some(Rational {
            num: i64::try_from(num).ok()?,
            den: i64::try_from(den).ok()?,
        })
    }
}

fn gcd(mut a: u128, mut b: u128) -> u128 {
    while b != 0 {
        let rest = a % b;
        a = b;
        b = rest;
    }
    a
}

impl From<i64> for Rational {
    fn from(value: i64) -> Rational {
        Rational::from_int(value)
    }
}

impl Default for Rational {
    fn default() -> Rational {
        Rational::ZERO
    }
}

impl Ord for Rational {
    fn cmp(&self, other: &Rational) -> Ordering {
        // Denominators are positive, so cross-multiplying keeps the order; the products
        // of two i64 fit in i128.
        let left = i128::from(self.num) * i128::from(other.den);
        let right = i128::from(other.num) * i128::from(self.den);
        left.cmp(&right)
    }
}

impl PartialOrd for Rational {
    fn partial_cmp(&self, other: &Rational) -> Option<Ordering> {
        Some(self.cmp(other))
    }
}

impl fmt::Display for Rational {
    /// `3`, `-1`, `1/2`, `-3/2`: the way an exponent is written inside `^( )`.
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        if self.den == 1 {
            write!(f, "{}", self.num)
        } else {
            write!(f, "{}/{}", self.num, self.den)
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn r(num: i64, den: i64) -> Rational {
        Rational::new(num, den).unwrap_or_else(|| panic!("{num}/{den} should be valid"))
    }

    #[test]
    fn new_normalises_sign_and_common_factors() {
        // (input, expected num, expected den): arithmetic of fractions, common practice.
        let cases = [
            ((2, 4), (1, 2)),
            ((-2, 4), (-1, 2)),
            ((2, -4), (-1, 2)),
            ((-2, -4), (1, 2)),
            ((0, -7), (0, 1)),
            ((6, 3), (2, 1)),
            ((i64::MAX, i64::MAX), (1, 1)),
            ((i64::MIN, i64::MIN), (1, 1)),
            ((i64::MIN, 2), (i64::MIN / 2, 1)),
        ];
        for ((num, den), (want_num, want_den)) in cases {
            let value = r(num, den);
            assert_eq!(
                (value.num(), value.den()),
                (want_num, want_den),
                "{num}/{den}"
            );
        }
    }

    #[test]
    fn new_rejects_zero_denominator_and_unrepresentable_values() {
        assert_eq!(Rational::new(1, 0), None);
        assert_eq!(Rational::new(0, 0), None);
        // 1/i64::MIN would need the denominator 2^63, one past i64::MAX.
        assert_eq!(Rational::new(1, i64::MIN), None);
        // i64::MIN/-1 = 2^63 does not fit either.
        assert_eq!(Rational::new(i64::MIN, -1), None);
    }

    #[test]
    fn arithmetic_is_exact() {
        assert_eq!(r(1, 2).checked_add(r(1, 3)), Some(r(5, 6)));
        assert_eq!(r(1, 2).checked_sub(r(1, 2)), Some(Rational::ZERO));
        assert_eq!(r(-1, 2).checked_add(r(1, 2)), Some(Rational::ZERO));
        assert_eq!(r(2, 3).checked_mul(r(3, 4)), Some(r(1, 2)));
        assert_eq!(r(2, 3).checked_div(r(4, 9)), Some(r(3, 2)));
        assert_eq!(r(-3, 2).checked_abs(), Some(r(3, 2)));
        assert_eq!(r(1, 2).checked_div(Rational::ZERO), None);
    }

    #[test]
    fn overflow_gives_none_not_a_panic() {
        let big = Rational::from_int(i64::MAX);
        assert_eq!(big.checked_add(Rational::ONE), None);
        assert_eq!(big.checked_mul(Rational::from_int(2)), None);
        assert_eq!(Rational::from_int(i64::MIN).checked_neg(), None);
        assert_eq!(Rational::from_int(i64::MIN).checked_abs(), None);
        // Denominators that are large coprime numbers: their lcm does not fit.
        let a = r(1, i64::MAX);
        let b = r(1, i64::MAX - 1);
        assert_eq!(a.checked_add(b), None);
        // ... but a result that reduces back into range is fine.
        assert_eq!(
            a.checked_mul(Rational::from_int(i64::MAX)),
            Some(Rational::ONE)
        );
    }

    #[test]
    fn order_and_display() {
        let mut values = [r(3, 2), r(-1, 1), r(1, 2), Rational::ZERO, r(-1, 2)];
        values.sort();
        let shown: Vec<String> = values.iter().map(|v| v.to_string()).collect();
        assert_eq!(shown, ["-1", "-1/2", "0", "1/2", "3/2"]);
        assert!(r(i64::MAX, 1) > r(i64::MAX - 1, 1));
        assert!(r(1, i64::MAX) < r(1, i64::MAX - 1));
    }
}
