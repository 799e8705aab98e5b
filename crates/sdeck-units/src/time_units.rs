//! The built-in time units and their lengths in years.
//!
//! A day is 1/365 of a year (the ACT/365 Fixed convention) and a business day 1/252 of a
//! year (252 trading days a year); both are common practice, no source. A month is 1/12
//! of a year and a week 7 days. A quarter is 1/4 of a year and an hour 1/24 of a day
//! (so 1/8760 of a year under ACT/365 Fixed): common practice, no source.

use crate::rational::Rational;

/// The built-in time units, longest first, each with its length in years as a fraction
/// (numerator, denominator): the one table every list of units is read from.
const TABLE: [(&str, i64, i64); 7] = [
    ("year", 1, 1),
    ("quarter", 1, 4),
    ("month", 1, 12),
    ("week", 7, 365),
    ("day", 1, 365),
    ("bday", 1, 252),
    ("hour", 1, 365 * 24),
];

/// The names of the built-in time units, longest first in length of time.
pub const TIME_UNITS: [&str; TABLE.len()] = {
    let mut out = [""; TABLE.len()];
    let mut i = 0;
    while i < TABLE.len() {
        out[i] = TABLE[i].0;
        i += 1;
    }
    out
};

/// The length of a built-in time unit in years, exactly: year 1, quarter 1/4, month 1/12,
/// week 7/365, day 1/365, bday 1/252, hour 1/8760. `None` for any other name.
pub fn time_unit_years_exact(name: &str) -> Option<Rational> {
    let &(_, num, den) = TABLE.iter().find(|(unit, _, _)| *unit == name)?;
    Rational::new(num, den)
}

/// The length of a built-in time unit in years, as the nearest `f64`: year 1;
/// quarter 1/4; month 1/12; week 7/365; day 1/365; bday 1/252; hour 1/8760. `None` for any other name.
pub fn time_unit_years(name: &str) -> Option<f64> {
    time_unit_years_exact(name).map(Rational::to_f64)
}

/// The most readable of year, month and day for a duration of `years` years: years from
/// one year up, months from one month up, days below (a half-life of 0.0759 year reads
/// 27.7 day, one of 0.38 year 4.56 month).
pub fn readable_time_unit(years: f64) -> &'static str {
    let years = years.abs();
    if years >= 1.0 {
        "year"
    } else if years >= 1.0 / 12.0 {
        "month"
    } else {
        "day"
    }
}

/// Whether `name` is a built-in time unit.
pub fn is_time_unit(name: &str) -> bool {
    TIME_UNITS.contains(&name)
}

/// The built-in unit whose length in years is exactly `years` (as computed by
/// [`time_unit_years`]), if any.
pub(crate) fn exact_years_of(years: f64) -> Option<Rational> {
    TIME_UNITS
        .iter()
        .filter_map(|name| time_unit_years_exact(name))
        .find(|exact| exact.to_f64() == years)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn lengths_in_years() {
        // ACT/365 Fixed day count and 252 business days per year: common practice, no
        // source. 12 months and 7 days a week: calendar facts. A quarter of a year and 24
        // hours a day: common practice, no source.
        let expected = [
            ("year", 1.0),
            ("quarter", 0.25),
            ("month", 1.0 / 12.0),
            ("week", 7.0 / 365.0),
            ("day", 1.0 / 365.0),
            ("bday", 1.0 / 252.0),
            ("hour", 1.0 / 8760.0),
        ];
        for (name, years) in expected {
            assert_eq!(time_unit_years(name), Some(years), "{name}");
            assert!(is_time_unit(name));
            assert_eq!(exact_years_of(years), time_unit_years_exact(name));
        }
        assert_eq!(time_unit_years("Year"), None);
        assert_eq!(time_unit_years("EUR"), None);
        assert!(!is_time_unit("days"));
        assert_eq!(exact_years_of(0.5), None);
    }

    #[test]
    fn the_docs_list_the_units_of_the_table() {
        let docs = include_str!("../../../docs/language.md");
        let section = docs
            .split("### 5.2 Time units")
            .nth(1)
            .and_then(|rest| rest.split("###").next())
            .unwrap_or("");
        let documented: Vec<&str> = section
            .lines()
            .filter_map(|line| line.strip_prefix("| `"))
            .filter_map(|rest| rest.split('`').next())
            .collect();
        assert_eq!(documented, TIME_UNITS);
    }
}
