//! The one number formatter of sdeck: every figure a face shows (CLI text, hover, the
//! report, the diff) is written by these functions, so the same number reads the same
//! everywhere.
//!
//! - [`plain`]: six significant digits, trailing zeros dropped, scientific notation
//!   outside 1e-4 ..= 1e6 (`0.0329858`, `1.5e-5`).
//! - [`significant`]: the same with a chosen number of significant digits.
//! - [`significant_whole`]: significant digits that never round the integer part, for
//!   the numbers in the rules' messages and fixes (`1386`).
//! - [`brief`]: four significant digits, for a figure read at a glance (`0.03299`).
//! - [`percent`] and [`basis_points`]: a rate as `3.3%` or `92.8bp`.
//! - [`with_unit`]: a figure followed by its unit (`0.385 year`, `2.4%` stays bare).
//!
//! ```
//! use sdeck_units::number::{basis_points, percent, plain, significant, with_unit};
//! assert_eq!(plain(0.032985), "0.032985");
//! assert_eq!(plain(1.5e-5), "1.5e-5");
//! assert_eq!(significant(0.0329858, 3), "0.033");
//! assert_eq!(percent(0.0329858, 3), "3.3%");
//! assert_eq!(basis_points(0.00928, 3), "92.8bp");
//! assert_eq!(with_unit(0.385, Some("year")), "0.385 year");
//! assert_eq!(with_unit(2.0, None), "2");
//! ```

/// `x` with `digits` significant digits (at least 1), trailing zeros dropped; scientific
/// notation below 1e-4 and from 1e6 on. Infinite and NaN values print as Rust prints them.
pub fn significant(x: f64, digits: u32) -> String {
    if x == 0.0 {
        return "0".to_string();
    }
    if !x.is_finite() {
        return format!("{x}");
    }
    let digits = digits.clamp(1, 17) as i32;
    let magnitude = x.abs().log10().floor() as i32;
    if !(-4..6).contains(&magnitude) {
        let s = format!("{:.*e}", (digits - 1) as usize, x);
        // Trim zeros in the mantissa: 1.50000e-5 -> 1.5e-5.
        if let Some((m, e)) = s.split_once('e') {
            let m = if m.contains('.') {
                m.trim_end_matches('0').trim_end_matches('.')
            } else {
                m
            };
            return format!("{m}e{e}");
        }
        return s;
    }
    let places = digits - 1 - magnitude;
    if places < 0 {
        // Fewer digits than the integer part has: round to tens, hundreds, ...
        let factor = 10f64.powi(-places);
        return format!("{:.0}", (x / factor).round() * factor);
    }
    let decimals = places.min(17) as usize;
    let s = format!("{x:.decimals$}");
    if s.contains('.') {
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        s
    }
}

/// `x` with `digits` significant digits in the fraction, but every digit of its integer
/// part (`1386` at 3 digits, where [`significant`] writes `1390`), trailing zeros
/// dropped; scientific notation below 1e-5 and from 1e9 on. The form of the numbers in
/// the rules' messages and fixes, where a rounded integer part would read as a
/// different value.
pub fn significant_whole(x: f64, digits: u32) -> String {
    if x == 0.0 || !x.is_finite() {
        return format!("{x}");
    }
    let digits = digits as i32;
    let magnitude = x.abs().log10().floor() as i32;
    if !(-5..=8).contains(&magnitude) {
        return format!("{:.*e}", (digits - 1).max(0) as usize, x);
    }
    let decimals = (digits - 1 - magnitude).max(0) as usize;
    let text = format!("{x:.decimals$}");
    if text.contains('.') {
        text.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        text
    }
}

/// `x` rounded up (`up`) or down to `digits` significant digits: a bound that must stay
/// on one side of a value when written short.
pub fn round_significant(x: f64, digits: u32, up: bool) -> f64 {
    if x == 0.0 || !x.is_finite() {
        return x;
    }
    let magnitude = x.abs().log10().floor() as i32;
    let factor = 10f64.powi(digits as i32 - 1 - magnitude);
    let scaled = x * factor;
    let rounded = if up { scaled.ceil() } else { scaled.floor() };
    rounded / factor
}

/// Six significant digits: the form of every figure in tables, hovers and messages.
pub fn plain(x: f64) -> String {
    significant(x, 6)
}

/// Four significant digits: a figure taken in at a glance (the editor's hover).
pub fn brief(x: f64) -> String {
    significant(x, 4)
}

/// A duration of `value` units of `unit` to four significant digits: `27.7 day`.
pub fn duration(value: f64, unit: &str) -> String {
    format!("{} {unit}", brief(value))
}

/// A figure that may be unknown or not finite: [`brief`], or `not known`.
pub fn brief_or_unknown(x: Option<f64>) -> String {
    match x {
        Some(v) if v.is_finite() => brief(v),
        _ => "not known".to_string(),
    }
}

/// A fraction as a percentage with `digits` significant digits: `0.0329858` → `3.3%`
/// with 2 digits.
pub fn percent(x: f64, digits: u32) -> String {
    format!("{}%", significant(x * 100.0, digits))
}

/// A rate as a percentage with `digits` significant digits, or `not known` when it is
/// not finite.
pub fn percent_or_unknown(x: f64, digits: u32) -> String {
    if x.is_finite() {
        percent(x, digits)
    } else {
        "not known".to_string()
    }
}

/// A fraction in basis points (1bp = 0.01%) with `digits` significant digits.
pub fn basis_points(x: f64, digits: u32) -> String {
    format!("{}bp", significant(x * 10_000.0, digits))
}

/// A figure and its unit as written in a model (`1/year`, `EUR`); bare when there is no
/// unit or the unit is `1`.
pub fn with_unit(x: f64, unit: Option<&str>) -> String {
    match unit.map(str::trim) {
        Some(u) if !u.is_empty() && u != "1" => format!("{} {u}", plain(x)),
        _ => plain(x),
    }
}

/// A figure that may be unknown or not finite: [`plain`], or `not known`.
pub fn or_unknown(x: Option<f64>) -> String {
    match x {
        Some(v) if v.is_finite() => plain(v),
        _ => "not known".to_string(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn six_digits_by_default_and_scientific_outside_the_middle() {
        assert_eq!(plain(0.0), "0");
        assert_eq!(plain(1.0 / 3.0), "0.333333");
        assert_eq!(plain(-2.5), "-2.5");
        assert_eq!(plain(123456.7), "123457");
        assert_eq!(plain(1234567.0), "1.23457e6");
        assert_eq!(plain(0.00012345678), "0.000123457");
        assert_eq!(plain(0.000012345678), "1.23457e-5");
        assert_eq!(plain(f64::INFINITY), "inf");
        assert_eq!(plain(f64::NAN), "NaN");
    }

    #[test]
    fn chosen_digits_percent_and_basis_points() {
        assert_eq!(significant(2.0f64.ln() / 1.6, 3), "0.433");
        assert_eq!(significant(9.4, 1), "9");
        assert_eq!(significant(96.0, 1), "100");
        assert_eq!(significant(1234.0, 2), "1200");
        assert_eq!(percent(0.034, 3), "3.4%");
        assert_eq!(basis_points(0.0051234, 3), "51.2bp");
        assert_eq!(or_unknown(None), "not known");
        assert_eq!(or_unknown(Some(f64::NAN)), "not known");
        assert_eq!(with_unit(3.0, Some("1")), "3");
        assert_eq!(brief(0.0329858), "0.03299");
        assert_eq!(percent_or_unknown(0.0329858, 4), "3.299%");
        assert_eq!(percent_or_unknown(f64::NAN, 4), "not known");
        assert_eq!(brief_or_unknown(Some(f64::INFINITY)), "not known");
        assert_eq!(brief_or_unknown(Some(-1234.56)), "-1235");
    }
}
