//! `sdeck curve FILE`: zero-coupon prices, zero yields and forwards of the model's
//! `discount` rate.

use crate::moments::{load_sound_model, parse_time};
use clap::{Args, ValueEnum};
use sdeck_calculus::curve::{curve, Curve};
use sdeck_semantics::{fmt_num, Model};
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

/// Maturities reported when none are asked for.
pub const DEFAULT_MATURITIES: &str =
    "1 month,3 month,6 month,1 year,2 year,3 year,5 year,7 year,10 year,20 year,30 year";

#[derive(Args)]
pub struct CurveArgs {
    /// The model file; it needs a `discount` line.
    file: PathBuf,
    /// Comma-separated maturities, each a number in clock units or with a time unit
    /// ("1 month,3 month,1 year"). Default: 1, 3, 6 months and 1, 2, 3, 5, 7, 10, 20,
    /// 30 years.
    #[arg(long)]
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
    let text = args.maturities.as_deref().unwrap_or(DEFAULT_MATURITIES);
    let maturities = match parse_maturities(text, model) {
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
        Format::Svg => curve_svg(model, &derived),
    };
    println!("{output}");
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
            fmt_num(p.maturity),
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

/// A line chart of yields and forwards (per cent per year) against maturity in years.
pub fn curve_svg(model: &Model, c: &Curve) -> String {
    let (width, height) = (720.0, 420.0);
    let (left, right, top, bottom) = (80.0, 30.0, 40.0, 60.0);
    let years = model.clock.years;
    let xs: Vec<f64> = c.points.iter().map(|p| p.maturity * years).collect();
    let values: Vec<f64> = c
        .points
        .iter()
        .flat_map(|p| [p.yield_rate * 100.0, p.forward * 100.0])
        .filter(|v| v.is_finite())
        .collect();
    let x_max = xs.iter().copied().fold(0.0, f64::max).max(1e-9);
    let mut y_min = values.iter().copied().fold(f64::INFINITY, f64::min);
    let mut y_max = values.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    if !(y_min.is_finite() && y_max.is_finite()) {
        (y_min, y_max) = (0.0, 1.0);
    }
    let pad = ((y_max - y_min) * 0.08).max(0.05);
    let (y_min, y_max) = (y_min - pad, y_max + pad);
    let px = |x: f64| left + x / x_max * (width - left - right);
    let py = |y: f64| top + (y_max - y) / (y_max - y_min) * (height - top - bottom);
    let line = |pick: &dyn Fn(usize) -> f64| -> String {
        xs.iter()
            .enumerate()
            .filter(|(i, _)| pick(*i).is_finite())
            .map(|(i, x)| format!("{:.2},{:.2}", px(*x), py(pick(i))))
            .collect::<Vec<_>>()
            .join(" ")
    };
    let yields = line(&|i| c.points[i].yield_rate * 100.0);
    let forwards = line(&|i| c.points[i].forward * 100.0);
    let mut s = String::new();
    let _ = writeln!(
        s,
        r#"<svg xmlns="http://www.w3.org/2000/svg" width="{width}" height="{height}" viewBox="0 0 {width} {height}" font-family="sans-serif" font-size="12">"#
    );
    let _ = writeln!(s, r#"<rect width="100%" height="100%" fill="white"/>"#);
    let _ = writeln!(
        s,
        r#"<text x="{left}" y="24" font-size="14">{} — zero yields and forwards{}</text>"#,
        escape(&model.name),
        model
            .measure
            .as_ref()
            .map_or(String::new(), |m| format!(" ({})", m.measure.as_str()))
    );
    let (x0, x1, y0, y1) = (left, width - right, top, height - bottom);
    let _ = writeln!(
        s,
        r#"<path d="M{x0},{y0} L{x0},{y1} L{x1},{y1}" fill="none" stroke="black"/>"#
    );
    for k in 0..=5 {
        let v = y_min + (y_max - y_min) * k as f64 / 5.0;
        let _ = writeln!(
            s,
            r#"<text x="{:.1}" y="{:.1}" text-anchor="end">{:.2}</text>"#,
            x0 - 6.0,
            py(v) + 4.0,
            v
        );
        let x = x_max * k as f64 / 5.0;
        let _ = writeln!(
            s,
            r#"<text x="{:.1}" y="{:.1}" text-anchor="middle">{}</text>"#,
            px(x),
            y1 + 18.0,
            fmt_num((x * 100.0).round() / 100.0)
        );
    }
    let _ = writeln!(
        s,
        r#"<text x="{:.1}" y="{:.1}" text-anchor="middle">maturity (year)</text>"#,
        (x0 + x1) / 2.0,
        height - 16.0
    );
    let _ = writeln!(
        s,
        r#"<text x="18" y="{:.1}" text-anchor="middle" transform="rotate(-90 18 {:.1})">rate (% per year, continuously compounded)</text>"#,
        (y0 + y1) / 2.0,
        (y0 + y1) / 2.0
    );
    let _ = writeln!(
        s,
        r##"<polyline points="{yields}" fill="none" stroke="#1f54a0" stroke-width="2"/>"##
    );
    let _ = writeln!(
        s,
        r##"<polyline points="{forwards}" fill="none" stroke="#c8461e" stroke-width="2" stroke-dasharray="6 4"/>"##
    );
    let _ = writeln!(
        s,
        r##"<text x="{:.1}" y="{:.1}" fill="#1f54a0">zero yield</text><text x="{:.1}" y="{:.1}" fill="#c8461e">forward</text>"##,
        x1 - 150.0,
        y0 + 14.0,
        x1 - 70.0,
        y0 + 14.0
    );
    s.push_str("</svg>");
    s
}

fn escape(text: &str) -> String {
    text.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
}
