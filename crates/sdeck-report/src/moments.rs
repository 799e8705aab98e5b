//! `sdeck moments`: the report at one time as text and as JSON.

use crate::data::{ModelReport, QUANTILE_LEVELS};
use sdeck_units::number::{or_unknown, plain};
use serde_json::{json, Value};

/// A finite number, or `null`.
pub fn num(x: Option<f64>) -> Value {
    match x {
        Some(v) if v.is_finite() => json!(v),
        _ => Value::Null,
    }
}

/// The JSON of `sdeck moments --format json`.
pub fn moments_json(report: &ModelReport) -> Value {
    let states: Vec<Value> = report
        .factors
        .iter()
        .map(|f| {
            json!({
                "name": f.name,
                "family": f.family.as_str(),
                "mean": num(f.figures.mean),
                "variance": num(f.figures.variance),
                "exact": f.exact,
                "formulas": {
                    "solution": f.formulas.solution,
                    "mean": f.formulas.mean,
                    "variance": f.formulas.variance,
                },
            })
        })
        .collect();
    let covariance: Vec<Value> = report
        .covariance
        .iter()
        .map(|row| Value::Array(row.iter().map(|x| num(*x)).collect()))
        .collect();
    json!({
        "model": report.model,
        "clock": report.clock,
        "at": report.at,
        "factors": states,
        "covariance": covariance,
    })
}

/// The text of `sdeck moments`, ending with `caution`.
pub fn moments_text(report: &ModelReport, caution: &str) -> String {
    let clock = &report.clock;
    let mut s = format!(
        "model {}   clock {}   at t = {} {}\n",
        report.model,
        clock,
        plain(report.at),
        clock
    );
    for f in &report.factors {
        s.push_str(&format!("\n{}: {}\n", f.name, f.family.as_str()));
        s.push_str(&format!("  {:<11} {}\n", "why", f.reason));
        s.push_str(&format!("  {:<11} {}\n", "method", f.method.as_str()));
        for (label, text) in crate::formula_lines(&f.formulas) {
            s.push_str(&format!("  {label:<11} {text}\n"));
        }
        let fig = &f.figures;
        s.push_str(&format!(
            "  E[{}(t)]   = {}\n",
            f.name,
            or_unknown(fig.mean)
        ));
        s.push_str(&format!(
            "  Var[{}(t)] = {}\n",
            f.name,
            or_unknown(fig.variance)
        ));
        s.push_str(&format!("  sd        = {}\n", or_unknown(fig.sd)));
        if let Some(quantiles) = &fig.quantiles {
            let parts: Vec<String> = QUANTILE_LEVELS
                .iter()
                .zip(quantiles)
                .map(|(p, q)| format!("{}% {}", plain(p * 100.0), plain(q.value)))
                .collect();
            s.push_str(&format!("  quantiles = {}\n", parts.join(", ")));
        }
        if let Some(h) = f.half_life {
            s.push_str(&format!("  half-life = {} {clock}\n", plain(h)));
        }
        if let Some(st) = &f.stationary {
            s.push_str(&format!(
                "  stationary: {} (mean {}, sd {})\n",
                st.law,
                plain(st.mean),
                plain(st.sd)
            ));
        }
    }
    if report.factors.len() > 1 {
        s.push_str("\ncovariance at t:\n");
        let width = report
            .factors
            .iter()
            .map(|f| f.name.chars().count())
            .max()
            .unwrap_or(1)
            .max(12);
        s.push_str(&format!("  {:width$}", ""));
        for f in &report.factors {
            s.push_str(&format!(" {:>width$}", f.name));
        }
        s.push('\n');
        for (f, row) in report.factors.iter().zip(&report.covariance) {
            s.push_str(&format!("  {:width$}", f.name));
            for x in row {
                s.push_str(&format!(" {:>width$}", or_unknown(*x)));
            }
            s.push('\n');
        }
    }
    s.push_str(&format!("\n{caution}\n"));
    s
}
