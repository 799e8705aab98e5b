//! Units as the parser hands them over: model files are parsed with `sdeck_syntax::parse`
//! and every written unit is evaluated in the file's clock, as the semantic layer does.

use sdeck_syntax::ast::{Quantity, SourceFile, StatementKind, UnitExpr};
use sdeck_units::{eval_unit, time_unit_years, UnitError, UnitValue};

/// The file's clock (default `year`), its declared units, and every `(name, unit)` of a
/// parameter, state or horizon (the horizon under the name `horizon`).
struct Units {
    clock: String,
    declared: Vec<String>,
    written: Vec<(String, UnitExpr)>,
}

fn units_of(file: &SourceFile) -> Units {
    let mut units = Units {
        clock: "year".to_string(),
        declared: Vec::new(),
        written: Vec::new(),
    };
    for statement in &file.statements {
        match &statement.kind {
            StatementKind::Clock { unit } => units.clock = unit.name.clone(),
            StatementKind::Unit { name } => units.declared.push(name.name.clone()),
            StatementKind::Param(declaration) | StatementKind::Factor(declaration) => {
                if let Some(unit) = declaration.unit() {
                    units
                        .written
                        .push((declaration.name.name.clone(), unit.clone()));
                }
            }
            StatementKind::Horizon { value } => {
                if let Quantity {
                    unit: Some(unit), ..
                } = &**value
                {
                    units.written.push(("horizon".to_string(), unit.clone()))
                }
            }
            _ => {}
        }
    }
    units
}

/// Parses `text` (which must parse cleanly) and evaluates the unit written for `name`.
fn eval_written(text: &str, name: &str) -> Result<UnitValue, UnitError> {
    let file = sdeck_syntax::parse(text);
    assert!(file.diagnostics.is_empty(), "{:?}", file.diagnostics);
    let units = units_of(&file);
    let clock_years = time_unit_years(&units.clock)
        .unwrap_or_else(|| panic!("clock `{}` is a time unit", units.clock));
    let unit = units
        .written
        .iter()
        .find(|(written_for, _)| written_for == name)
        .map(|(_, unit)| unit)
        .unwrap_or_else(|| panic!("`{name}` has a unit in {text}"));
    let declared = |candidate: &str| units.declared.iter().any(|unit| unit == candidate);
    eval_unit(unit, &declared, clock_years)
}

/// The language design's example: the (fictional) Larkspur Credit Union funding rate.
const LARKSPUR: &str = "\
model larkspur_funding
clock year
horizon 6 month
param kappa = 1.8   [1/year]        > 0   # speed of mean reversion
param level = 3.2%                  >= 0  # long-run level
param vol   = 6bp   [1/sqrt(day)]   > 0   # daily volatility of the rate
shock W
factor r = 2.75% >= 0
dr = kappa * (level - r) dt + vol * sqrt(r) dW
";

/// A scenario of our own: the price of a litre of milk at the (fictional) Harrow Vale
/// dairy cooperative, in euros, on a daily clock.
const HARROW_VALE: &str = "\
model harrow_vale_milk
clock day
horizon 6 month
unit EUR
param pull  = 0.9  [1/month]          > 0
param level = 0.42 [EUR]
param vol   = 0.03 [EUR/sqrt(month)]  > 0
param wobble = 0.001 [EUR/bday^(1/2)]
shock W
factor price = 0.40 [EUR] >= 0
dprice = pull * (level - price) dt + (vol + wobble) dW
";

#[test]
fn design_example_converts_to_a_year_clock() {
    // ACT/365 Fixed day count: common practice, no source.
    // sqrt(365) = 19.1049731745428 (Python math.sqrt).
    let cases = [
        ("kappa", 1.0, "1/year"),
        ("vol", 19.1049731745428, "1/sqrt(year)"),
        ("horizon", 1.0 / 12.0, "year"),
    ];
    for (name, scale, shown) in cases {
        let value = eval_written(LARKSPUR, name).unwrap_or_else(|e| panic!("{name}: {e}"));
        assert!((value.scale - scale).abs() < 1e-12, "{name}: {value:?}");
        assert_eq!(value.dimension.display_in("year"), shown, "{name}");
    }
    let vol = eval_written(LARKSPUR, "vol").map(|value| value.scale);
    assert_eq!(vol, Ok(365f64.sqrt()));
}

#[test]
fn a_daily_clock_converts_months_and_business_days() {
    // A month is 365/12 days and a business day 365/252 days (ACT/365 Fixed and 252
    // business days a year: common practice, no source). So a rate per month is 12/365
    // per day, a volatility per sqrt(month) sqrt(12/365) per sqrt(day), a volatility per
    // sqrt(bday) sqrt(252/365) per sqrt(day), and 6 months are 182.5 days.
    let cases = [
        ("pull", 12.0 / 365.0, "1/day"),
        ("level", 1.0, "EUR"),
        ("price", 1.0, "EUR"),
        ("vol", (12.0f64 / 365.0).sqrt(), "EUR/sqrt(day)"),
        ("wobble", (252.0f64 / 365.0).sqrt(), "EUR/sqrt(day)"),
        ("horizon", 365.0 / 12.0, "day"),
    ];
    for (name, scale, shown) in cases {
        let value = eval_written(HARROW_VALE, name).unwrap_or_else(|e| panic!("{name}: {e}"));
        assert!(
            ((value.scale - scale) / scale).abs() < 1e-14,
            "{name}: {} vs {scale}",
            value.scale
        );
        assert_eq!(value.dimension.display_in("day"), shown, "{name}");
    }
    let horizon = eval_written(HARROW_VALE, "horizon").map(|value| 6.0 * value.scale);
    assert_eq!(horizon, Ok(182.5));
}

#[test]
fn a_misspelt_unit_in_a_file_points_at_its_name() {
    let text = "unit EUR\nparam level = 0.42 [eur]\n";
    let error = eval_written(text, "level").err();
    let error = error.unwrap_or_else(|| panic!("`eur` is not declared"));
    assert_eq!(&text[error.span.clone()], "eur");
    assert_eq!(error.help.as_deref(), Some("did you mean `EUR`?"));
}
