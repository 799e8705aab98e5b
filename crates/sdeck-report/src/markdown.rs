//! The review document as GitHub-flavoured Markdown: the same content as tables, no
//! images, for a wiki page or a pull-request comment.

use crate::data::{FactorReport, ModelReport, QUANTILE_LEVELS};
use crate::review::Review;
use crate::{formula_lines, DocumentInfo, CAUTION};
use sdeck_units::number::{or_unknown, percent_or_unknown, plain, significant};
use std::fmt::Write as _;

/// Escapes the characters that would break a table cell or start markup.
pub fn cell(text: &str) -> String {
    text.replace('\\', "\\\\")
        .replace('|', "\\|")
        .replace('\n', " ")
        .replace('*', "\\*")
        .replace('_', "\\_")
}

fn code(text: &str) -> String {
    format!("`{}`", text.replace('`', "'").replace('|', "\\|"))
}

fn table(s: &mut String, head: &[&str], rows: &[Vec<String>]) {
    let _ = writeln!(s, "| {} |", head.join(" | "));
    let _ = writeln!(s, "|{}", "---|".repeat(head.len()));
    for row in rows {
        let _ = writeln!(s, "| {} |", row.join(" | "));
    }
    s.push('\n');
}

/// The sections of one model: parameters, each factor, the matrices at the horizon,
/// the cross-check, the curve and the expectations.
fn model(s: &mut String, review: &Review, r: &ModelReport) {
    params(s, r);
    for (i, f) in r.factors.iter().enumerate() {
        factor(s, review, r, i, f);
    }
    matrices(s, r);
    cross_check(s, review);
    curve(s, review);
    expectations(s, r);
}

fn params(s: &mut String, r: &ModelReport) {
    if !r.params.is_empty() {
        let _ = writeln!(s, "### Parameters\n");
        let rows: Vec<Vec<String>> = r
            .params
            .iter()
            .map(|p| {
                vec![
                    code(&p.name),
                    code(&p.written_text),
                    cell(p.unit.as_deref().unwrap_or("")),
                    plain(p.value),
                    cell(p.bound.as_deref().unwrap_or("")),
                    cell(p.description.as_deref().map(str::trim).unwrap_or("")),
                ]
            })
            .collect();
        let clock_head = format!("in clock units ({})", r.clock);
        table(
            s,
            &[
                "name",
                "as written",
                "unit",
                &clock_head,
                "bound",
                "description",
            ],
            &rows,
        );
    }
}

/// Factor `i`: its family and why, its formulas, its figures over the grid and its
/// long-run behaviour.
fn factor(s: &mut String, review: &Review, r: &ModelReport, i: usize, f: &FactorReport) {
    let _ = writeln!(
        s,
        "### Factor {} — {}\n\n{}. Figures by {}{}.\n",
        code(&f.name),
        f.family.as_str(),
        cell(&f.reason),
        f.method.as_str(),
        if f.exact { ", exact" } else { "" }
    );
    let rows: Vec<Vec<String>> = formula_lines(&f.formulas)
        .into_iter()
        .map(|(label, text)| vec![label.to_string(), code(text)])
        .collect();
    if !rows.is_empty() {
        table(s, &["", "formula"], &rows);
    }
    let signs = review
        .grid
        .iter()
        .any(|row| row.get(i).is_some_and(|g| g.sign_change.is_some()));
    let mut head: Vec<String> = vec![format!("t ({})", r.clock), "mean".into(), "sd".into()];
    head.extend(
        QUANTILE_LEVELS
            .iter()
            .map(|p| format!("{}%", plain(p * 100.0))),
    );
    if signs {
        head.push("P(sign differs from start)".into());
    }
    let rows: Vec<Vec<String>> = review
        .grid
        .iter()
        .filter_map(|row| row.get(i))
        .map(|g| {
            let mut cells = vec![plain(g.at), or_unknown(g.mean), or_unknown(g.sd)];
            cells.extend(QUANTILE_LEVELS.iter().map(|p| or_unknown(g.quantile(*p))));
            if signs {
                cells.push(or_unknown(g.sign_change));
            }
            cells
        })
        .collect();
    let head_refs: Vec<&str> = head.iter().map(String::as_str).collect();
    table(s, &head_refs, &rows);
    if let Some(law) = f.figures.law {
        let _ = writeln!(s, "- law at the horizon: {}", law.as_str());
    }
    if let Some(from) = f.figures.variance_infinite_from {
        let _ = writeln!(
            s,
            "- the variance is infinite from t = {} {}",
            plain(from),
            r.clock
        );
    }
    match f.half_life {
        Some(h) => {
            let _ = writeln!(s, "- half-life: {} {}", plain(h), r.clock);
        }
        None => s.push_str("- no half-life\n"),
    }
    match &f.stationary {
        Some(st) => {
            let _ = writeln!(
                s,
                "- stationary law: {} with mean {} and sd {}",
                code(&st.law),
                plain(st.mean),
                plain(st.sd)
            );
        }
        None => s.push_str("- no stationary law\n"),
    }
    s.push('\n');
}

/// The covariance and correlation of several factors at the horizon.
fn matrices(s: &mut String, r: &ModelReport) {
    if r.factors.len() > 1 {
        let names: Vec<String> = r.factors.iter().map(|f| code(&f.name)).collect();
        for (title, m) in [
            ("Covariance", &r.covariance),
            ("Correlation", &r.correlation),
        ] {
            let _ = writeln!(
                s,
                "### {title} at the horizon ({} {})\n",
                plain(r.at),
                r.clock
            );
            let mut head = vec![""];
            head.extend(names.iter().map(String::as_str));
            let rows: Vec<Vec<String>> = m
                .iter()
                .zip(&names)
                .map(|(row, n)| {
                    let mut cells = vec![n.clone()];
                    cells.extend(row.iter().map(|v| or_unknown(*v)));
                    cells
                })
                .collect();
            table(s, &head, &rows);
        }
    }
}

fn cross_check(s: &mut String, review: &Review) {
    if let Some(cc) = &review.cross_check {
        let _ = writeln!(
            s,
            "### Monte Carlo cross-check\n\n{} paths, {} steps, seed {}; z = (simulated − closed form) / standard error.\n",
            cc.result.paths, cc.result.steps, cc.result.seed
        );
        let rows: Vec<Vec<String>> = cc
            .result
            .states
            .iter()
            .map(|st| {
                let (cm, zm, cv, zv) = match &st.closed_form {
                    Some(c) => (
                        plain(c.mean),
                        format!("{:.2}", c.z_mean),
                        plain(c.variance),
                        format!("{:.2}", c.z_variance),
                    ),
                    None => ("–".into(), "–".into(), "–".into(), "–".into()),
                };
                vec![
                    code(&st.name),
                    cell(&st.scheme),
                    format!("{} ± {}", plain(st.mean), significant(st.mean_se, 2)),
                    cm,
                    zm,
                    format!(
                        "{} ± {}",
                        plain(st.variance),
                        significant(st.variance_se, 2)
                    ),
                    cv,
                    zv,
                ]
            })
            .collect();
        table(
            s,
            &[
                "factor",
                "scheme",
                "simulated mean",
                "closed-form mean",
                "z",
                "simulated variance",
                "closed-form variance",
                "z",
            ],
            &rows,
        );
    } else if let Some(note) = &review.cross_check_note {
        let _ = writeln!(s, "### Monte Carlo cross-check\n\n{}\n", cell(note));
    }
}

fn curve(s: &mut String, review: &Review) {
    if let Some(derived) = &review.curve {
        let _ = writeln!(s, "### Yield curve\n");
        match derived {
            Err(why) => {
                let _ = writeln!(s, "No curve is derived: {}\n", cell(why));
            }
            Ok(c) => {
                let rows: Vec<Vec<String>> = c
                    .curve
                    .points
                    .iter()
                    .map(|p| {
                        vec![
                            plain(p.maturity * c.years_per_clock),
                            significant(p.price, 8),
                            percent_or_unknown(p.yield_rate, 4),
                            percent_or_unknown(p.forward, 4),
                        ]
                    })
                    .collect();
                table(
                    s,
                    &["maturity (year)", "price", "zero yield", "forward"],
                    &rows,
                );
                if let Some(y) = c.curve.long_yield {
                    let _ = writeln!(s, "Long yield: {}\n", percent_or_unknown(y, 4));
                }
            }
        }
    }
}

fn expectations(s: &mut String, r: &ModelReport) {
    if !r.expectations.is_empty() {
        let _ = writeln!(s, "### Expectations\n");
        let rows: Vec<Vec<String>> = r
            .expectations
            .iter()
            .map(|e| {
                vec![
                    e.line.to_string(),
                    code(&e.text),
                    or_unknown(e.value),
                    cell(&e.admissible),
                    match e.holds {
                        Some(true) => "holds".into(),
                        Some(false) => "**fails**".into(),
                        None => "**no such figure**".into(),
                    },
                ]
            })
            .collect();
        table(
            s,
            &[
                "line",
                "as written",
                "derived value",
                "admissible",
                "verdict",
            ],
            &rows,
        );
    }
}

/// The whole document.
pub fn markdown(reviews: &[Review], info: &DocumentInfo) -> String {
    let mut s = String::new();
    for review in reviews {
        let name = review
            .report
            .as_ref()
            .map_or_else(|| review.path.clone(), |r| r.model.clone());
        let _ = writeln!(s, "## Model {}\n", code(&name));
        let _ = writeln!(
            s,
            "| | |\n|---|---|\n| file | {} |\n| SHA-256 | `{}` |\n| date | {} |\n| sdeck | {} |\n",
            code(&review.path),
            review.hash,
            cell(&info.date),
            cell(&info.version)
        );
        let _ = writeln!(s, "> {CAUTION}\n");
        if review.findings.is_empty() {
            s.push_str("No findings.\n\n");
        } else {
            let _ = writeln!(s, "### Findings\n");
            let rows: Vec<Vec<String>> = review
                .findings
                .iter()
                .map(|f| {
                    vec![
                        format!("{}:{}", f.line, f.column),
                        f.severity.as_str().to_string(),
                        code(f.rule),
                        cell(&f.message),
                    ]
                })
                .collect();
            table(&mut s, &["line:col", "severity", "rule", "message"], &rows);
        }
        match &review.report {
            Some(r) => model(&mut s, review, r),
            None => {
                s.push_str("The model has errors: no figure is derived until they are mended.\n\n")
            }
        }
    }
    s
}
