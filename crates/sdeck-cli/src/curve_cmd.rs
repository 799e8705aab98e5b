//! `sdeck curve FILE`: zero-coupon prices, zero yields and forwards of the model's
//! `discount` rate.

use crate::moments::{load_sound_model, parse_time};
use clap::{Args, ValueEnum};
use sdeck_calculus::curve::{curve, Curve};
use sdeck_semantics::Model;
use sdeck_units::number;
use serde_json::{json, Value};
use std::fmt::Write as _;
use std::path::PathBuf;
use std::process::ExitCode;

#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum Format {
    Text,
    Json,
    Svg,
}

#[derive(Args)]
pub struct CurveArgs {
    /// The model file; it needs a `discount` line.
    file: PathBuf,
    /// Comma-separated maturities, each a number in clock units or with a time unit
    /// ("1 month,3 month,1 year"). Default: 1, 3, 6 months and 1, 2, 3, 5, 7, 10, 20,
    /// 30 years.
    #[arg(long, allow_hyphen_values = true)]
    maturities: Option<String>,
    #[arg(long, value_enum, default_value_t = Format::Text)]
    format: Format,
}

/// Parses a comma-separated list of positive times into clock units.
pub fn parse_maturities(text: &str, model: &Model) -> Result<Vec<f64>, String> {
    let mut out = Vec::new();
    for piece in text.split(',') {
        let t = parse_time(piece, model)?;
        if !(t.is_finite() && t > 0.0) {
            return Err(format!(
                "maturity `{}` must be a positive time",
                piece.trim()
            ));
        }
        out.push(t);
    }
    if out.is_empty() {
        return Err("--maturities needs at least one time".to_string());
    }
    Ok(out)
}

pub fn run(args: CurveArgs) -> ExitCode {
    let result = match load_sound_model(&args.file, "no curve is derived") {
        Ok((_, r)) => r,
        Err(code) => return code,
    };
    let model = &result.analysis.model;
    let Some(discount) = &model.discount else {
        eprintln!(
            "sdeck: {} has no `discount` line: add the short rate, affine in the factors, \
             e.g. `discount r` or `discount x + y + phi`",
            args.file.display()
        );
        return ExitCode::from(2);
    };
    let asked = match args.maturities.as_deref() {
        Some(text) => parse_maturities(text, model),
        None => Ok(sdeck_calculus::curve::default_maturities(model.clock.years)),
    };
    let maturities = match asked {
        Ok(m) => m,
        Err(message) => {
            eprintln!("sdeck: {message}");
            return ExitCode::from(2);
        }
    };
    let derived = match curve(model, &discount.rate, &maturities) {
        Ok(c) => c,
        Err(message) => {
            eprintln!("sdeck: no curve for {}: {message}", args.file.display());
            return ExitCode::from(1);
        }
    };
    let output = match args.format {
        Format::Json => {
            serde_json::to_string_pretty(&curve_json(model, &derived)).unwrap_or_default()
        }
        Format::Text => curve_text(model, &derived),
        Format::Svg => sdeck_report::curve_chart::yield_curve_svg(model, &derived),
    };
    outln!("{output}");
    ExitCode::SUCCESS
}

fn measure(model: &Model) -> Value {
    match &model.measure {
        Some(m) => json!(m.measure.as_str()),
        None => Value::Null,
    }
}

fn finite(x: f64) -> Value {
    if x.is_finite() {
        json!(x)
    } else {
        Value::Null
    }
}

pub fn curve_json(model: &Model, c: &Curve) -> Value {
    let points: Vec<Value> = c
        .points
        .iter()
        .map(|p| {
            json!({
                "maturity": p.maturity,
                "price": finite(p.price),
                "yield": finite(p.yield_rate),
                "forward": finite(p.forward),
            })
        })
        .collect();
    json!({
        "model": model.name,
        "clock": model.clock.unit,
        "measure": measure(model),
        "method": c.method.as_str(),
        "maturities": points,
        "long_yield": c.long_yield.map_or(Value::Null, finite),
    })
}

fn percent(x: f64) -> String {
    format!("{:.4}%", x * 100.0)
}

pub fn curve_text(model: &Model, c: &Curve) -> String {
    let clock = &model.clock.unit;
    let mut s = format!(
        "model {}   clock {}   measure {}   method {}\n\n",
        model.name,
        clock,
        model
            .measure
            .as_ref()
            .map_or("not stated", |m| m.measure.as_str()),
        c.method.as_str()
    );
    let _ = writeln!(
        s,
        "  {:>14}  {:>12}  {:>10}  {:>10}",
        format!("maturity ({clock})"),
        "price",
        "yield",
        "forward"
    );
    for p in &c.points {
        let _ = writeln!(
            s,
            "  {:>14}  {:>12.8}  {:>10}  {:>10}",
            number::plain(p.maturity),
            p.price,
            percent(p.yield_rate),
            percent(p.forward)
        );
    }
    match c.long_yield {
        Some(y) => {
            let _ = writeln!(s, "\n  long yield {}", percent(y));
        }
        None => s.push_str("\n  long yield: none (the yields do not settle)\n"),
    }
    s.push_str("  yields and forwards are continuously compounded, per year\n");
    if model.measure.as_ref().map(|m| m.measure.as_str()) != Some("risk-neutral") {
        s.push_str(
            "  note: the drifts are not stated to be risk-neutral; these are not \
             arbitrage-free prices\n",
        );
    }
    let _ = write!(s, "\n{}", crate::CAUTION);
    s
}
