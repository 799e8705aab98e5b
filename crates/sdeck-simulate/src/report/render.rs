//! The JSON and text renderings of a simulation's figures.

use super::verdict::DISCOUNT_NAME;
use super::{DiscountEstimate, SimulationResult, StateResult};
use serde_json::{json, Map, Value};
use std::fmt::Write as _;

/// A JSON number, or null when not finite (JSON has no NaN).
fn number(x: f64) -> Value {
    if x.is_finite() {
        json!(x)
    } else {
        Value::Null
    }
}

/// The key of a probability in the JSON output: "0.01", "0.5", ...
fn probability_key(p: f64) -> String {
    format!("{p}")
}

/// The figures of one state as JSON.
fn state_json(state: &StateResult) -> Value {
    let mut quantiles = Map::new();
    let mut quantiles_se = Map::new();
    for q in &state.quantiles {
        quantiles.insert(probability_key(q.probability), number(q.value));
        quantiles_se.insert(probability_key(q.probability), number(q.standard_error));
    }
    let closed_form = match &state.closed_form {
        Some(c) => json!({
            "mean": number(c.mean),
            "variance": number(c.variance),
            "z_mean": number(c.z_mean),
            "z_variance": number(c.z_variance),
            "below": c.below.map_or(Value::Null, number),
            "z_below": c.z_below.map_or(Value::Null, number),
        }),
        None => Value::Null,
    };
    let bias = match &state.bias {
        Some(b) => json!({
            "mean": number(b.mean),
            "variance": number(b.variance),
            "mean_extrapolated": number(b.mean_extrapolated),
            "mean_extrapolated_se": number(b.mean_extrapolated_se),
            "variance_extrapolated": number(b.variance_extrapolated),
            "variance_extrapolated_se": number(b.variance_extrapolated_se),
        }),
        None => Value::Null,
    };
    let below = match &state.below {
        Some(b) => json!({
            "threshold": number(b.threshold),
            "probability": number(b.probability),
            "se": number(b.standard_error),
            "bias": b.bias.map_or(Value::Null, |x| number(x.0)),
            "extrapolated": b.bias.map_or(Value::Null, |x| number(x.1)),
            "extrapolated_se": b.bias.map_or(Value::Null, |x| number(x.2)),
        }),
        None => Value::Null,
    };
    json!({
        "name": state.name,
        "scheme": state.scheme,
        "mean": number(state.mean),
        "mean_se": number(state.mean_se),
        "variance": number(state.variance),
        "variance_se": number(state.variance_se),
        "quantiles": quantiles,
        "quantiles_se": quantiles_se,
        "bias": bias,
        "below": below,
        "closed_form": closed_form,
    })
}

/// The bond price of one date as JSON.
fn discount_json(discount: &DiscountEstimate) -> Value {
    json!({
        "price": number(discount.price),
        "se": number(discount.standard_error),
        "order": discount.order,
        "bias": discount.bias.map_or(Value::Null, |x| number(x.0)),
        "extrapolated": discount.bias.map_or(Value::Null, |x| number(x.1)),
        "extrapolated_se": discount.bias.map_or(Value::Null, |x| number(x.2)),
        "closed_form": discount.closed_form.map_or(Value::Null, number),
        "z": discount.z.map_or(Value::Null, number),
    })
}

/// The JSON report: `{"paths", "steps", "seed", "clock", "dates": [{"at", "factors":
/// [{"name", "scheme", "mean", "mean_se", "variance", "variance_se", "quantiles": {"0.01":
/// ..}, "quantiles_se": {..}, "bias": {..} | null, "below": {..} | null, "closed_form":
/// {..} | null}], "discount": {"price", "se", "order", "bias", "extrapolated",
/// "extrapolated_se", "closed_form", "z"} | null}], "notes": [..]}`. Numbers that are not
/// finite are null.
pub fn to_json(result: &SimulationResult) -> Value {
    let dates: Vec<Value> = result
        .dates
        .iter()
        .map(|date| {
            json!({
                "at": number(date.at),
                "factors": date.states.iter().map(state_json).collect::<Vec<_>>(),
                "discount": date.discount.as_ref().map_or(Value::Null, discount_json),
            })
        })
        .collect();
    json!({
        "paths": result.paths,
        "steps": result.steps,
        "seed": result.seed,
        "clock": result.clock_unit,
        "dates": dates,
        "notes": result.warnings,
    })
}

/// A number with 6 significant digits, plain or scientific as fits.
pub fn format_number(x: f64) -> String {
    if !x.is_finite() {
        return format!("{x}");
    }
    if x == 0.0 {
        return "0".to_string();
    }
    let magnitude = x.abs().log10().floor();
    if (-4.0..6.0).contains(&magnitude) {
        let decimals = (5.0 - magnitude).max(0.0) as usize;
        let text = format!("{x:.decimals$}");
        if text.contains('.') {
            text.trim_end_matches('0').trim_end_matches('.').to_string()
        } else {
            text
        }
    } else {
        format!("{x:.5e}")
    }
}

/// A number for the text report: "n/a" when not finite.
fn shown(x: f64) -> String {
    if x.is_finite() {
        format_number(x)
    } else {
        "n/a".to_string()
    }
}

/// The text report: per date, one block per state with figures, standard errors, the
/// bias estimate and the closed forms.
pub fn render_text(result: &SimulationResult) -> String {
    let mut out = String::new();
    let _ = writeln!(
        out,
        "simulated {} paths, {} steps to t = {} {}, seed {}",
        result.paths,
        result.steps,
        format_number(result.at),
        result.clock_unit,
        result.seed
    );
    let several = result.dates.len() > 1;
    for date in &result.dates {
        if several {
            let _ = writeln!(out);
            let _ = writeln!(out, "t = {} {}", format_number(date.at), result.clock_unit);
        }
        for state in &date.states {
            render_state(&mut out, state);
        }
        if let Some(discount) = &date.discount {
            render_discount(&mut out, discount);
        }
    }
    for warning in &result.warnings {
        let _ = writeln!(out);
        let _ = write!(out, "note: {warning}");
    }
    if !result.warnings.is_empty() {
        let _ = writeln!(out);
    }
    out
}

/// The text block of one state at one date.
fn render_state(out: &mut String, state: &StateResult) {
    let _ = writeln!(out);
    let _ = writeln!(out, "{}  ({})", state.name, state.scheme);
    let line = |out: &mut String, label: &str, value: f64, se: f64| {
        let _ = writeln!(out, "  {:<10} {:>14} ± {}", label, shown(value), shown(se));
    };
    line(out, "mean", state.mean, state.mean_se);
    line(out, "variance", state.variance, state.variance_se);
    for q in &state.quantiles {
        line(
            out,
            &format!("q({})", q.probability),
            q.value,
            q.standard_error,
        );
    }
    if let Some(below) = &state.below {
        line(
            out,
            &format!("P(< {})", format_number(below.threshold)),
            below.probability,
            below.standard_error,
        );
        if let Some((bias, extrapolated, se)) = below.bias {
            let _ = writeln!(
                out,
                "  {:<10} bias {}, extrapolated {} ± {}",
                "",
                shown(bias),
                shown(extrapolated),
                shown(se)
            );
        }
    }
    if let Some(bias) = &state.bias {
        let _ = writeln!(
            out,
            "  step doubling: bias of the mean {}, of the variance {}; extrapolated mean {} ± {}, variance {} ± {}",
            shown(bias.mean),
            shown(bias.variance),
            shown(bias.mean_extrapolated),
            shown(bias.mean_extrapolated_se),
            shown(bias.variance_extrapolated),
            shown(bias.variance_extrapolated_se)
        );
    }
    if let Some(closed) = &state.closed_form {
        let _ = write!(
            out,
            "  closed form: mean {} (z = {}), variance {} (z = {})",
            shown(closed.mean),
            shown_z(closed.z_mean),
            shown(closed.variance),
            shown_z(closed.z_variance)
        );
        if let (Some(p), Some(z)) = (closed.below, closed.z_below) {
            let _ = write!(out, ", P {} (z = {})", shown(p), shown_z(z));
        }
        let _ = writeln!(out);
    }
}

/// The text block of the bond price at one date.
fn render_discount(out: &mut String, discount: &DiscountEstimate) {
    let _ = writeln!(out);
    let _ = writeln!(
        out,
        "{DISCOUNT_NAME}  (E[exp(-integral of r dt)], the integral by the trapezoid rule on the step grid, weak order {})",
        discount.order
    );
    let _ = writeln!(
        out,
        "  {:<10} {:>14} ± {}",
        "P(0, t)",
        shown(discount.price),
        shown(discount.standard_error)
    );
    if let Some((bias, extrapolated, se)) = discount.bias {
        let _ = writeln!(
            out,
            "  step doubling: bias {}; extrapolated {} ± {}",
            shown(bias),
            shown(extrapolated),
            shown(se)
        );
    }
    if let (Some(price), Some(z)) = (discount.closed_form, discount.z) {
        let _ = writeln!(
            out,
            "  curve: P(0, t) {} (z = {})",
            shown(price),
            shown_z(z)
        );
    }
}

fn shown_z(z: f64) -> String {
    if z.is_finite() {
        format!("{z:.2}")
    } else if z.is_nan() {
        "n/a".to_string()
    } else if z > 0.0 {
        "+inf".to_string()
    } else {
        "-inf".to_string()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbers_print_with_six_significant_digits() {
        assert_eq!(format_number(0.0321234567), "0.0321235");
        assert_eq!(format_number(1234.5), "1234.5");
        assert_eq!(format_number(1.0), "1");
        assert_eq!(format_number(2.5e-7), "2.50000e-7");
        assert_eq!(format_number(0.0), "0");
        assert_eq!(format_number(f64::NAN), "NaN");
    }
}
