//! The review document as one self-contained HTML file: no external asset, works offline,
//! prints to PDF from a browser. Every figure cell carries its full-precision value in
//! `data-value`, so a test can compare the page with `sdeck moments --format json`.

use crate::charts::{count, escape, heat_map_svg};
use crate::data::{Figures, ModelReport, QUANTILE_LEVELS};
use crate::mathml::math;
use crate::review::{fan_charts, CrossCheck, Review};
use crate::{formula_lines, DocumentInfo, CAUTION};
use sdeck_diagnostics::Severity;
use sdeck_units::number::{percent_or_unknown, plain, significant};
use std::fmt::Write as _;

const STYLE: &str = r#"
:root { --ink: #1d232b; --muted: #5b6572; --rule: #d5dae0; --accent: #2b5d9c; }
body { font-family: system-ui, -apple-system, "Segoe UI", sans-serif; color: var(--ink);
  margin: 0 auto; max-width: 62rem; padding: 1.5rem; line-height: 1.45; }
h1 { font-size: 1.6rem; margin: 0 0 .3rem; } h2 { font-size: 1.25rem; margin-top: 2rem;
  border-bottom: 2px solid var(--accent); padding-bottom: .2rem; }
h3 { font-size: 1.05rem; margin: 1.4rem 0 .3rem; }
.model + .model { border-top: 3px double var(--rule); margin-top: 3rem; }
dl.head { display: grid; grid-template-columns: max-content 1fr; gap: .1rem 1rem; margin: .5rem 0; }
dl.head dt { color: var(--muted); } dl.head dd { margin: 0; font-family: ui-monospace, monospace; word-break: break-all; }
.caution { border-left: 4px solid #c4531d; background: #fbf1ea; padding: .5rem .8rem; }
table { border-collapse: collapse; margin: .5rem 0; font-size: .9rem; }
th, td { border-bottom: 1px solid var(--rule); padding: .2rem .6rem; text-align: left; vertical-align: top; }
th { background: #f2f4f7; } td.num { text-align: right; font-variant-numeric: tabular-nums; white-space: nowrap; }
pre.source { font: .85rem/1.4 ui-monospace, monospace; background: #f7f8fa; padding: .5rem 0; overflow-x: auto; }
pre.source .ln { display: inline-block; width: 3.2em; color: var(--muted); text-align: right; padding-right: .8em; user-select: none; }
pre.source .finding { display: block; margin-left: 4em; padding: .1rem .5rem; white-space: pre-wrap; }
.error { background: #fde8e8; color: #8a1c1c; } .warning { background: #fff4d6; color: #6b4d00; }
.hint, .info { background: #e8f0fb; color: #1f4a7c; }
math { font-size: 1.1rem; }
.formula { display: grid; grid-template-columns: 7rem minmax(0, 1fr); align-items: center; margin: .3rem 0; }
.formula .math { overflow-x: auto; }
.formula .label { color: var(--muted); font-size: .85rem; }
.holds { color: #1d6b34; } .fails { color: #8a1c1c; font-weight: bold; }
svg { max-width: 100%; height: auto; display: block; margin: .5rem 0; }
.note { color: var(--muted); font-size: .9rem; }
@media print { body { max-width: none; padding: 0; } .model { break-before: page; }
  .model:first-of-type { break-before: auto; } svg, table, pre { break-inside: avoid; } }
"#;

fn cell(factor: &str, figure: &str, t: f64, value: Option<f64>) -> String {
    match value.filter(|v| v.is_finite()) {
        Some(v) => format!(
            r#"<td class="num" data-factor="{}" data-figure="{figure}" data-t="{t}" data-value="{v}">{}</td>"#,
            escape(factor),
            plain(v)
        ),
        None => r#"<td class="num">–</td>"#.to_string(),
    }
}

fn header(s: &mut String, review: &Review, info: &DocumentInfo) {
    let name = review
        .report
        .as_ref()
        .map_or_else(|| review.path.clone(), |r| r.model.clone());
    let _ = write!(
        s,
        r#"<header><h1>Model {}</h1><dl class="head"><dt>file</dt><dd>{}</dd><dt>SHA-256</dt><dd>{}</dd><dt>date</dt><dd>{}</dd><dt>sdeck</dt><dd>{}</dd>"#,
        escape(&name),
        escape(&review.path),
        review.hash,
        escape(&info.date),
        escape(&info.version)
    );
    if let Some(r) = &review.report {
        let _ = write!(
            s,
            "<dt>clock</dt><dd>{}</dd><dt>horizon</dt><dd>{} {}</dd>",
            escape(&r.clock),
            plain(r.horizon),
            escape(&r.clock)
        );
    }
    let _ = write!(
        s,
        r#"</dl><p class="caution">{}</p></header>"#,
        escape(CAUTION)
    );
}

fn source(s: &mut String, review: &Review) {
    let _ = write!(s, "<h2>Model text</h2>");
    let errors = review
        .findings
        .iter()
        .filter(|f| f.severity == Severity::Error)
        .count();
    let _ = write!(
        s,
        r#"<p class="note">{} finding(s), {} of them errors; each is shown under its line.</p><pre class="source">"#,
        review.findings.len(),
        errors
    );
    for (i, line) in review.source.lines().enumerate() {
        let _ = writeln!(s, r#"<span class="ln">{}</span>{}"#, i + 1, escape(line));
        for f in review.findings.iter().filter(|f| f.line == i + 1) {
            let _ = write!(
                s,
                r#"<span class="finding {}">{}:{} {} [{}]: {}{}</span>"#,
                f.severity.as_str(),
                f.line,
                f.column,
                f.severity.as_str(),
                f.rule,
                escape(&f.message),
                f.help
                    .as_ref()
                    .map(|h| format!(" Help: {}", escape(h)))
                    .unwrap_or_default()
            );
        }
    }
    s.push_str("</pre>");
}

fn params(s: &mut String, r: &ModelReport) {
    if r.params.is_empty() {
        return;
    }
    let _ = write!(
        s,
        "<h2>Parameters</h2><table><tr><th>name</th><th>as written</th><th>unit</th><th>in clock units ({})</th><th>bound (clock units)</th><th>description</th></tr>",
        escape(&r.clock)
    );
    for p in &r.params {
        let _ = write!(
            s,
            r#"<tr><td>{}</td><td class="num">{}</td><td>{}</td><td class="num" data-param="{}" data-value="{}">{}</td><td>{}</td><td>{}</td></tr>"#,
            escape(&p.name),
            escape(&p.written_text),
            escape(p.unit.as_deref().unwrap_or("")),
            escape(&p.name),
            p.value,
            plain(p.value),
            escape(p.bound.as_deref().unwrap_or("")),
            escape(p.description.as_deref().map(str::trim).unwrap_or(""))
        );
    }
    s.push_str("</table>");
}

fn grid_table(s: &mut String, r: &ModelReport, index: usize, grid: &[Vec<Figures>]) {
    let Some(factor) = r.factors.get(index) else {
        return;
    };
    let name = &factor.name;
    let signs = grid
        .iter()
        .any(|row| row.get(index).is_some_and(|f| f.sign_change.is_some()));
    let _ = write!(
        s,
        "<table><tr><th>t ({})</th><th>mean</th><th>sd</th>",
        escape(&r.clock)
    );
    for p in QUANTILE_LEVELS {
        let _ = write!(s, "<th>{}%</th>", plain(p * 100.0));
    }
    if signs {
        s.push_str("<th>P(sign differs from start)</th>");
    }
    s.push_str("</tr>");
    for row in grid {
        let Some(f) = row.get(index) else { continue };
        let _ = write!(s, r#"<tr><td class="num">{}</td>"#, plain(f.at));
        s.push_str(&cell(name, "mean", f.at, f.mean));
        s.push_str(&cell(name, "sd", f.at, f.sd));
        for p in QUANTILE_LEVELS {
            s.push_str(&cell(
                name,
                &format!("q{}", plain(p * 100.0)),
                f.at,
                f.quantile(p),
            ));
        }
        if signs {
            s.push_str(&cell(name, "sign_change", f.at, f.sign_change));
        }
        s.push_str("</tr>");
    }
    s.push_str("</table>");
}

fn factors(s: &mut String, r: &ModelReport, grid: &[Vec<Figures>]) {
    let _ = write!(s, "<h2>Factors</h2>");
    for (i, f) in r.factors.iter().enumerate() {
        let _ = write!(
            s,
            r#"<section class="factor"><h3>{} — {}</h3><p>{}. Figures by {}{}.</p>"#,
            escape(&f.name),
            f.family.as_str(),
            escape(&f.reason),
            f.method.as_str(),
            if f.exact { ", exact" } else { "" }
        );
        for (label, text) in formula_lines(&f.formulas) {
            let _ = write!(
                s,
                r#"<div class="formula"><span class="label">{label}</span><div class="math">{}</div></div>"#,
                math(text)
            );
        }
        grid_table(s, r, i, grid);
        s.push_str("<ul>");
        if let Some(law) = f.figures.law {
            let _ = write!(s, "<li>law at the horizon: {}</li>", law.as_str());
        }
        if let Some(from) = f.figures.variance_infinite_from {
            let _ = write!(
                s,
                "<li>the variance is infinite from t = {} {}</li>",
                plain(from),
                escape(&r.clock)
            );
        }
        match f.half_life {
            Some(h) => {
                let _ = write!(
                    s,
                    r#"<li>half-life: <span data-factor="{}" data-figure="half_life" data-value="{h}">{}</span> {}</li>"#,
                    escape(&f.name),
                    plain(h),
                    escape(&r.clock)
                );
            }
            None => s.push_str(
                "<li>no half-life (its drift has no constant negative slope of its own)</li>",
            ),
        }
        match &f.stationary {
            Some(st) => {
                let _ = write!(
                    s,
                    r#"<li>stationary law: {} with mean <span data-factor="{n}" data-figure="stationary_mean" data-value="{}">{}</span> and sd <span data-factor="{n}" data-figure="stationary_sd" data-value="{}">{}</span></li>"#,
                    escape(&st.law),
                    st.mean,
                    plain(st.mean),
                    st.sd,
                    plain(st.sd),
                    n = escape(&f.name)
                );
            }
            None => s.push_str("<li>no stationary law</li>"),
        }
        if f.figures.sign_change.is_none() && f.figures.quantiles_known() {
            s.push_str(
                "<li>its law allows no change of sign from its start, or it starts at zero</li>",
            );
        }
        s.push_str("</ul></section>");
    }
}

fn matrix(s: &mut String, title: &str, names: &[String], m: &[Vec<Option<f64>>], figure: &str) {
    let _ = write!(s, "<h3>{title}</h3><table><tr><th></th>");
    for n in names {
        let _ = write!(s, "<th>{}</th>", escape(n));
    }
    s.push_str("</tr>");
    for (i, row) in m.iter().enumerate() {
        let _ = write!(
            s,
            "<tr><th>{}</th>",
            escape(names.get(i).map_or("", String::as_str))
        );
        for (j, v) in row.iter().enumerate() {
            match v.filter(|v| v.is_finite()) {
                Some(v) => {
                    let _ = write!(
                        s,
                        r#"<td class="num" data-matrix="{figure}" data-i="{i}" data-j="{j}" data-value="{v}">{}</td>"#,
                        plain(v)
                    );
                }
                None => s.push_str(r#"<td class="num">–</td>"#),
            }
        }
        s.push_str("</tr>");
    }
    s.push_str("</table>");
}

/// The zero-coupon curve of a model with a `discount` line: chart and table.
fn yield_curve(s: &mut String, review: &Review) {
    let Some(derived) = &review.curve else {
        return;
    };
    s.push_str(r#"<section class="curve"><h2>Yield curve</h2>"#);
    match derived {
        Err(why) => {
            let _ = write!(s, "<p>No curve is derived: {}</p>", escape(why));
        }
        Ok(c) => {
            s.push_str(&c.svg);
            s.push_str(
                "<table><thead><tr><th>maturity (year)</th><th>price</th>\
                 <th>zero yield</th><th>forward</th></tr></thead><tbody>",
            );
            for p in &c.curve.points {
                let _ = write!(
                    s,
                    r#"<tr><td>{}</td><td data-figure="price">{}</td><td data-figure="yield">{}</td><td data-figure="forward">{}</td></tr>"#,
                    plain(p.maturity * c.years_per_clock),
                    significant(p.price, 8),
                    percent_or_unknown(p.yield_rate, 4),
                    percent_or_unknown(p.forward, 4),
                );
            }
            s.push_str("</tbody></table>");
            if let Some(y) = c.curve.long_yield {
                let _ = write!(s, "<p>Long yield: {}</p>", percent_or_unknown(y, 4));
            }
        }
    }
    s.push_str("</section>");
}

fn matrices(s: &mut String, r: &ModelReport) {
    if r.factors.len() < 2 {
        return;
    }
    let names: Vec<String> = r.factors.iter().map(|f| f.name.clone()).collect();
    let _ = write!(
        s,
        "<h2>Joint law at the horizon ({} {})</h2>",
        plain(r.at),
        escape(&r.clock)
    );
    matrix(s, "Covariance", &names, &r.covariance, "covariance");
    matrix(s, "Correlation", &names, &r.correlation, "correlation");
    if names.len() >= 3 {
        s.push_str(&heat_map_svg(&names, &r.correlation));
    }
}

fn cross_check(s: &mut String, r: &ModelReport, review: &Review) {
    s.push_str("<h2>Monte Carlo cross-check</h2>");
    let Some(CrossCheck { result, closed }) = &review.cross_check else {
        let _ = write!(
            s,
            r#"<p class="note">{}</p>"#,
            escape(
                review
                    .cross_check_note
                    .as_deref()
                    .unwrap_or("no simulation")
            )
        );
        return;
    };
    let _ = write!(
        s,
        r#"<p class="note">{} paths, {} steps to {} {}, seed {}. Simulated figures carry their standard errors; z is (simulated − closed form) / standard error, and |z| above 4 is a disagreement.</p>"#,
        count(result.paths),
        result.steps,
        plain(result.at),
        escape(&r.clock),
        result.seed
    );
    let units: Vec<Option<String>> = r.factors.iter().map(|f| f.unit.clone()).collect();
    for chart in fan_charts(result, closed, &units) {
        s.push_str(&chart);
    }
    s.push_str("<table><tr><th>factor</th><th>scheme</th><th>simulated mean</th><th>closed-form mean</th><th>z</th><th>simulated variance</th><th>closed-form variance</th><th>z</th><th>verdict</th></tr>");
    for st in &result.states {
        let (cm, cv, zm, zv, verdict) = match &st.closed_form {
            Some(c) => {
                let agree = c.z_mean.abs() <= sdeck_simulate::CHECK_THRESHOLD
                    && c.z_variance.abs() <= sdeck_simulate::CHECK_THRESHOLD;
                (
                    plain(c.mean),
                    plain(c.variance),
                    format!("{:.2}", c.z_mean),
                    format!("{:.2}", c.z_variance),
                    if agree { "agree" } else { "disagree" },
                )
            }
            None => (
                "–".into(),
                "–".into(),
                "–".into(),
                "–".into(),
                "no closed form",
            ),
        };
        let _ = write!(
            s,
            r#"<tr><td>{}</td><td>{}</td><td class="num">{} ± {}</td><td class="num">{cm}</td><td class="num">{zm}</td><td class="num">{} ± {}</td><td class="num">{cv}</td><td class="num">{zv}</td><td>{verdict}</td></tr>"#,
            escape(&st.name),
            escape(&st.scheme),
            plain(st.mean),
            significant(st.mean_se, 2),
            plain(st.variance),
            significant(st.variance_se, 2)
        );
    }
    s.push_str("</table>");
    for w in &result.warnings {
        let _ = write!(s, r#"<p class="note">Warning: {}</p>"#, escape(w));
    }
}

fn expectations(s: &mut String, r: &ModelReport) {
    if r.expectations.is_empty() {
        return;
    }
    s.push_str("<h2>Expectations</h2><table><tr><th>line</th><th>as written</th><th>derived value</th><th>admissible (clock units)</th><th>verdict</th></tr>");
    for e in &r.expectations {
        let (value, verdict) = match (e.value, e.holds) {
            (Some(v), Some(true)) => (plain(v), r#"<span class="holds">holds</span>"#),
            (Some(v), _) => (plain(v), r#"<span class="fails">fails</span>"#),
            (None, _) => ("–".into(), r#"<span class="fails">no such figure</span>"#),
        };
        let _ = write!(
            s,
            r#"<tr><td class="num">{}</td><td><code>{}</code></td><td class="num">{value}</td><td>{}</td><td>{verdict}</td></tr>"#,
            e.line,
            escape(&e.text),
            escape(&e.admissible)
        );
    }
    s.push_str("</table>");
}

/// The whole document.
pub fn html(reviews: &[Review], info: &DocumentInfo) -> String {
    let title = match reviews {
        [one] => one
            .report
            .as_ref()
            .map_or_else(|| one.path.clone(), |r| r.model.clone()),
        _ => format!("{} models", reviews.len()),
    };
    let mut s = format!(
        "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\"><meta name=\"viewport\" content=\"width=device-width, initial-scale=1\"><title>Review of {}</title><style>{STYLE}</style></head><body>",
        escape(&title)
    );
    for review in reviews {
        s.push_str(r#"<article class="model">"#);
        header(&mut s, review, info);
        source(&mut s, review);
        match &review.report {
            Some(r) => {
                params(&mut s, r);
                factors(&mut s, r, &review.grid);
                matrices(&mut s, r);
                yield_curve(&mut s, review);
                cross_check(&mut s, r, review);
                expectations(&mut s, r);
            }
            None => s.push_str(
                r#"<p class="caution">The model has errors: no figure is derived until they are mended.</p>"#,
            ),
        }
        s.push_str("</article>");
    }
    s.push_str("</body></html>\n");
    s
}
