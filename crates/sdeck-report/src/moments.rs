//! `sdeck moments`: the report at one time as text and as JSON.

use crate::data::{FactorReport, ModelReport};
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
            let g = &f.figures;
            json!({
                "name": f.name,
                "family": f.family.as_str(),
                "mean": num(g.mean),
                "variance": num(g.variance),
                "variance_infinite_from": num(g.variance_infinite_from),
                "sd": num(g.sd),
                "law": g.law.map(|k| k.as_str()),
                "quantiles": g.quantiles.iter().map(|q| json!({"p": q.probability, "value": num(q.value)})).collect::<Vec<_>>(),
                "below": g.below.iter().map(|b| json!({"value": b.level, "probability": num(b.probability)})).collect::<Vec<_>>(),
                "halflife": num(f.half_life),
                "stationary": f.stationary.as_ref().map(|st| json!({
                    "law": st.law,
                    "mean": num(Some(st.mean)),
                    "variance": num(Some(st.variance)),
                })),
                "exact": {
                    "mean": g.exact.mean,
                    "variance": g.exact.variance,
                    "sd": g.exact.variance,
                    "quantiles": g.exact.law,
                    "below": g.exact.law,
                },
                "outside_domain": f.outside_domain,
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

/// Which figures are exact, in words: `all figures`, `none`, or the exact ones named
/// (with the unknown ones when every known figure is exact).
fn exactness_text(fig: &crate::data::Figures) -> String {
    let e = fig.exact;
    // (known, exact, name)
    let figures = [
        (fig.mean.is_some(), e.mean, "mean"),
        (fig.variance.is_some(), e.variance, "variance, sd"),
        (fig.quantiles_known(), e.law, "quantiles"),
    ];
    let exact: Vec<&str> = figures
        .iter()
        .filter(|(_, exact, _)| *exact)
        .map(|(_, _, name)| *name)
        .collect();
    let unknown: Vec<&str> = figures
        .iter()
        .filter(|(known, _, _)| !*known)
        .map(|(_, _, name)| *name)
        .collect();
    if exact.is_empty() {
        "none".to_string()
    } else if !figures.iter().all(|(known, exact, _)| *exact || !*known) {
        exact.join(", ")
    } else if unknown.is_empty() {
        "all figures".to_string()
    } else {
        // A partial result: say what is exact and what is missing, never "all".
        format!("{} ({} not known)", exact.join(", "), unknown.join(", "))
    }
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
        factor_text(&mut s, f, clock);
    }
    if report.factors.len() > 1 {
        covariance_text(&mut s, report);
    }
    s.push_str(&format!("\n{caution}\n"));
    s
}

/// One factor: family, why, method, formulas and figures at t.
fn factor_text(s: &mut String, f: &FactorReport, clock: &str) {
    s.push_str(&format!("\n{}: {}\n", f.name, f.family.as_str()));
    s.push_str(&format!("  {:<11} {}\n", "why", f.reason));
    s.push_str(&format!("  {:<11} {}\n", "method", f.method.as_str()));
    for (label, text) in crate::formula_lines(&f.formulas) {
        s.push_str(&format!("  {label:<11} {text}\n"));
    }
    let fig = &f.figures;
    if let Some(why) = &f.outside_domain {
        s.push_str(&format!("  not defined: {why}\n"));
    }
    s.push_str(&format!(
        "  E[{}(t)]   = {}\n",
        f.name,
        or_unknown(fig.mean)
    ));
    match fig.variance_infinite_from {
        Some(from) => s.push_str(&format!(
            "  Var[{}(t)] = infinite (from t = {} {clock})\n",
            f.name,
            plain(from)
        )),
        None => s.push_str(&format!(
            "  Var[{}(t)] = {}\n",
            f.name,
            or_unknown(fig.variance)
        )),
    }
    s.push_str(&format!(
        "  sd        = {}\n",
        if fig.variance_infinite_from.is_some() {
            "infinite".to_string()
        } else {
            or_unknown(fig.sd)
        }
    ));
    if let Some(kind) = fig.law {
        s.push_str(&format!("  law       = {}\n", kind.as_str()));
    }
    if fig.quantiles_known() {
        let parts: Vec<String> = fig
            .quantiles
            .iter()
            .map(|q| format!("{}% {}", plain(q.probability * 100.0), or_unknown(q.value)))
            .collect();
        s.push_str(&format!("  quantiles = {}\n", parts.join(", ")));
    }
    for b in &fig.below {
        s.push_str(&format!(
            "  P({} < {}) = {}\n",
            f.name,
            plain(b.level),
            or_unknown(b.probability)
        ));
    }
    if let Some(h) = f.half_life {
        s.push_str(&format!("  half-life = {} {clock}\n", plain(h)));
    }
    if let Some(st) = &f.stationary {
        s.push_str(&format!(
            "  stationary: {} (mean {}, variance {}, sd {})\n",
            st.law,
            plain(st.mean),
            plain(st.variance),
            plain(st.sd)
        ));
    }
    s.push_str(&format!("  exact     = {}\n", exactness_text(fig)));
}

/// The covariance matrix of several factors at t, in aligned columns.
fn covariance_text(s: &mut String, report: &ModelReport) {
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
