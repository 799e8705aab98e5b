//! Hover: the derived law of a state, the converted value and role of a param, the
//! correlations of a noise, the scale of a unit. A factor's hover renders its report
//! (`sdeck_report::FactorReport`), the data `sdeck moments` prints; every number is
//! written by the one formatter, `sdeck_units::number`.

use crate::analysis::{Analyzed, Role, HORIZON_QUANTILES};
use crate::documents::PositionEncoding;
use crate::durations::{half_life_unit, TimeUnit};
use sdeck_semantics::{FactorId, Model, ParamId, SymbolKind};
use sdeck_syntax::ast::{DeclaredValue, Expr, Quantity, StatementKind, UnitExpr};
use sdeck_units::number::{brief, brief_or_unknown, plain};
use tower_lsp::lsp_types::{Hover, HoverContents, MarkupContent, MarkupKind, Position};

mod doc;
pub use doc::{fit_columns, Doc, COLUMNS};

/// The hover at `position`, in Markdown or in plain text as the client asked.
pub fn hover(
    a: &Analyzed,
    encoding: PositionEncoding,
    position: Position,
    format: MarkupKind,
) -> Option<Hover> {
    let converter = a.converter(encoding);
    let offset = converter.offset(position);
    let model = &a.check.analysis.model;
    let (doc, span) = if let Some(symbol) = a.symbol_at(offset) {
        let doc = match symbol.kind {
            SymbolKind::Factor => state_doc(a, model.factor_id(&symbol.name)?),
            SymbolKind::Param => Doc::text(param_text(a, model.param_id(&symbol.name)?)),
            SymbolKind::Shock => Doc::text(noise_text(model, &symbol.name)?),
            SymbolKind::Let => Doc::text(let_text(model, &symbol.name)?),
            SymbolKind::Unit => Doc::text(unit_text(model, &symbol.name)),
        };
        let span = a
            .occurrences(symbol)
            .into_iter()
            .find(|s| s.start <= offset && offset <= s.end)
            .unwrap_or(symbol.name_span.clone());
        (doc, span)
    } else if let Some((doc, span)) = discount_at(a, offset) {
        (doc, span)
    } else if let Some((text, span)) = expectation_at(a, offset) {
        (Doc::text(text), span)
    } else {
        let (name, span) = unit_name_at(a, offset)?;
        (Doc::text(unit_text(model, &name)), span)
    };
    let value = if format == MarkupKind::PlainText {
        doc.plain()
    } else {
        doc.markdown()
    };
    Some(Hover {
        contents: HoverContents::Markup(MarkupContent {
            kind: format,
            value: fit_columns(&value, COLUMNS),
        }),
        range: Some(converter.range(&span)),
    })
}

/// Hover on the figure of an `expect` line: what it is, how it is written, and its
/// derived value in the reader's units with the verdict.
fn expectation_at(a: &Analyzed, offset: usize) -> Option<(String, sdeck_diagnostics::Span)> {
    let (statement, x) = a
        .check
        .analysis
        .file
        .statements
        .iter()
        .find_map(|s| match &s.kind {
            StatementKind::Expect(x)
                if x.figure_span.start <= offset && offset <= x.figure_span.end =>
            {
                Some((s, x))
            }
            _ => None,
        })?;
    let model = &a.check.analysis.model;
    let mut s = format!(
        "**{}** · {}

`{}`
",
        x.figure.keyword(),
        x.figure.meaning(),
        x.figure.form()
    );
    if let Some(e) = model.expectations.iter().find(|e| e.span == statement.span) {
        match sdeck_calculus::expectation_value(model, &a.check.derivation, e) {
            Ok(v) => s.push_str(&format!(
                "
Derived: {} ({}).
",
                e.shown.show(v),
                if e.admissible.contains(v) {
                    "as expected"
                } else {
                    "outside the expected values"
                }
            )),
            Err(why) => s.push_str(&format!(
                "
Not derived: {why}.
"
            )),
        }
    }
    Some((s, x.figure_span.clone()))
}

/// Hover on the `discount` keyword: how the rate is read and the curve at a few maturities.
fn discount_at(a: &Analyzed, offset: usize) -> Option<(Doc, sdeck_diagnostics::Span)> {
    let statement = a.check.analysis.file.statements.iter().find(|s| {
        matches!(s.kind, StatementKind::Discount { .. })
            && s.span.start <= offset
            && offset <= s.span.start + "discount".len()
    })?;
    let model = &a.check.analysis.model;
    let discount = model.discount.as_ref()?;
    let mut s = "**discount** · the short rate\n\n".to_string();
    s.push_str(if discount.per_year {
        "A dimensionless rate, read as a rate per year (the trade's convention).\n"
    } else {
        "A rate with the dimension 1/time, converted to the clock.\n"
    });
    s.push_str(&format!(
        "Measure: {}.\n",
        model
            .measure
            .as_ref()
            .map_or("not stated", |m| m.measure.as_str())
    ));
    let years: [f64; 4] = [1.0, 2.0, 5.0, 10.0];
    let maturities: Vec<f64> = years.iter().map(|y| y / model.clock.years).collect();
    let mut doc = Doc::default();
    match sdeck_calculus::curve::curve(model, &discount.rate, &maturities) {
        Ok(c) => {
            s.push('\n');
            doc.push_text(s);
            let rows = c
                .points
                .iter()
                .zip(years)
                .map(|(p, y)| {
                    vec![
                        format!("{} year", plain(y)),
                        plain(p.price),
                        format!("{}%", plain(p.yield_rate * 100.0)),
                        format!("{}%", plain(p.forward * 100.0)),
                    ]
                })
                .collect();
            doc.push_table(&["maturity", "price", "zero yield", "forward"], rows, true);
        }
        Err(why) => {
            s.push_str(&format!("\nNo curve: {why}.\n"));
            doc.push_text(s);
        }
    }
    let start = statement.span.start;
    Some((doc, start..start + "discount".len()))
}

/// The unit the horizon was written in (`horizon 18 month`), else the clock's.
fn horizon_unit(a: &Analyzed) -> TimeUnit {
    let model = &a.check.analysis.model;
    a.check
        .analysis
        .file
        .statements
        .iter()
        .find_map(|s| match &s.kind {
            StatementKind::Horizon { value } => match &value.unit {
                Some(UnitExpr::Name(ident)) => TimeUnit::of(model, &ident.name),
                _ => None,
            },
            _ => None,
        })
        .unwrap_or_else(|| TimeUnit::clock(model))
}

/// The figures a reader wants first (mean, sd, quantiles at the horizon, half-life),
/// then why the family, the description and the formulas: the factor's report at the
/// horizon, as `sdeck moments` derives it.
fn state_doc(a: &Analyzed, i: FactorId) -> Doc {
    let mut doc = Doc::default();
    let model = &a.check.analysis.model;
    let (Some(state), Some(report)) = (model.factors.by_id(i), a.horizon_report(i)) else {
        return doc;
    };
    let figures = &report.figures;
    doc.push_text(format!(
        "**factor `{}`** · {}\n\nAt the horizon, t = {}:\n\n",
        report.name,
        report.family.as_str(),
        horizon_unit(a).show(figures.at)
    ));
    let mut rows: Vec<Vec<String>> = Vec::new();
    let mut row = |label: String, value: String| rows.push(vec![label, value]);
    row("mean".into(), brief_or_unknown(figures.mean));
    row("sd".into(), brief_or_unknown(figures.sd));
    if let [Some(low), Some(mid), Some(high)] = HORIZON_QUANTILES.map(|p| figures.quantile(p)) {
        row(
            "5% · 50% · 95%".into(),
            format!("{} · {} · {}", brief(low), brief(mid), brief(high)),
        );
    }
    if let Some(h) = report.half_life {
        row("half-life".into(), half_life_unit(a, i, h).show(h));
    }
    row("variance".into(), brief_or_unknown(figures.variance));
    if let Some(kind) = figures.law {
        row("law".into(), kind.as_str().to_string());
        let below_zero = figures
            .below
            .iter()
            .find(|b| b.level == 0.0)
            .and_then(|b| b.probability)
            .filter(|p| kind.on_whole_line() && *p > 0.0 && *p < 1.0);
        if let Some(p) = below_zero {
            row(format!("P({} < 0)", report.name), brief(p));
        }
    }
    if let Some(st) = &report.stationary {
        row(
            "stationary".into(),
            format!("{}, mean {}, sd {}", st.law, brief(st.mean), brief(st.sd)),
        );
    }
    doc.push_table(&["figure", "value"], rows, false);
    let mut s = format!("\n{}\n", report.reason);
    if let Some(description) = &report.description {
        s.push_str(&format!("\n_{}_\n", description.trim()));
    }
    if state.initial_expr.is_some() {
        if let Some(d) = a.declaration(SymbolKind::Factor, &state.name) {
            s.push_str(&format!(
                "\ninitial value `{}` = {} [{}]\n",
                a.text.get(d.value_span()).unwrap_or("").trim(),
                plain(report.initial),
                state.dimension.display_in(&model.clock.unit)
            ));
        }
    }
    let lines: Vec<String> = sdeck_report::formula_lines(&report.formulas)
        .into_iter()
        .map(|(label, text)| format!("{label:<10} {text}"))
        .collect();
    if !lines.is_empty() {
        s.push('\n');
        doc.push_text(std::mem::take(&mut s));
        doc.push_code(lines);
    }
    if a.check.analysis.has_errors() {
        s.push_str("\n_The model has errors: these figures rest on what could be resolved._\n");
    }
    if !s.is_empty() {
        doc.push_text(s);
    }
    doc
}

/// Value in the clock's units, bound, description and role.
fn param_text(a: &Analyzed, i: ParamId) -> String {
    let model = &a.check.analysis.model;
    let Some(p) = model.params.by_id(i) else {
        return String::new();
    };
    let clock = &model.clock.unit;
    let written_unit = p
        .unit_text
        .as_ref()
        .map(|u| format!(" [{u}]"))
        .unwrap_or_default();
    let declaration = a.declaration(SymbolKind::Param, &p.name);
    let written = match declaration.map(|d| &d.value) {
        Some(DeclaredValue::Literal { number, .. }) => number.text.clone(),
        Some(DeclaredValue::Expr(e)) => format!("`{}`", a.text.get(e.span()).unwrap_or("").trim()),
        None => plain(p.written),
    };
    let mut s = format!("**param `{}`** = {written}{written_unit}\n", p.name);
    if p.scale.is_finite() && p.scale != 1.0 {
        s.push_str(&format!(
            "\n= {} [{}] on the model's clock ({} × {})\n",
            plain(p.value),
            p.dimension.display_in(clock),
            written,
            plain(p.scale)
        ));
    } else {
        s.push_str(&format!(
            "\nvalue {} [{}]\n",
            plain(p.value),
            p.dimension.display_in(clock)
        ));
    }
    if let Some(bound) = declaration.and_then(|d| d.bound.as_ref()) {
        if let Some(text) = a.text.get(bound.span.clone()) {
            s.push_str(&format!("\nbound: `{}`\n", text.trim()));
        }
    }
    if let Some(description) = &p.description {
        s.push_str(&format!("\n_{}_\n", description.trim()));
    }
    for role in a.roles_of_param(i).iter().cloned() {
        match role {
            Role::Speed { state, half_life } => {
                let name = model
                    .factors
                    .by_id(state)
                    .map(|s| s.name.as_str())
                    .unwrap_or("?");
                match half_life {
                    Some(h) => s.push_str(&format!(
                        "\nspeed of mean reversion of `{name}`: half-life {}\n",
                        half_life_unit(a, state, h).show(h)
                    )),
                    None => s.push_str(&format!("\nspeed of mean reversion of `{name}`\n")),
                }
            }
            Role::Volatility { state } => {
                let name = model
                    .factors
                    .by_id(state)
                    .map(|s| s.name.as_str())
                    .unwrap_or("?");
                s.push_str(&format!(
                    "\nvolatility of the square-root factor `{name}`\n"
                ));
            }
        }
    }
    s
}

fn noise_text(model: &Model, name: &str) -> Option<String> {
    let index = model.shocks.find_id(|n| n.name == name)?;
    let noise = &model.shocks[index];
    let mut s = format!("**shock `{}`** · standard Brownian motion\n", noise.name);
    if let Some(description) = &noise.description {
        s.push_str(&format!("\n_{}_\n", description.trim()));
    }
    let mut lines = Vec::new();
    for c in &model.correlations {
        let other = if c.first == index {
            c.second
        } else if c.second == index {
            c.first
        } else {
            continue;
        };
        let other = model
            .shocks
            .by_id(other)
            .map(|n| n.name.as_str())
            .unwrap_or("?");
        lines.push(format!("- ρ({}, {other}) = {}", noise.name, plain(c.value)));
    }
    if lines.is_empty() {
        s.push_str("\nindependent of every other shock\n");
    } else {
        s.push_str(&format!("\ncorrelations:\n\n{}\n", lines.join("\n")));
    }
    Some(s)
}

fn let_text(model: &Model, name: &str) -> Option<String> {
    let l = model.lets.iter().find(|l| l.name == name)?;
    let mut s = format!("**let `{}`**\n", l.name);
    let constant = !sdeck_calculus::algebra::expr_mentions_states(&l.value)
        && !sdeck_calculus::algebra::expr_mentions_time(&l.value);
    if constant {
        let value = l.value.eval(&model.param_values(), &[], 0.0);
        if value.is_finite() {
            let unit = l
                .dimension
                .as_ref()
                .map(|d| format!(" [{}]", d.display_in(&model.clock.unit)))
                .unwrap_or_default();
            s.push_str(&format!(
                "\n= {}{unit} on the model's clock\n",
                plain(value)
            ));
        }
    } else {
        s.push_str("\ndepends on the factors or on time\n");
    }
    if let Some(description) = &l.description {
        s.push_str(&format!("\n_{}_\n", description.trim()));
    }
    Some(s)
}

/// A time unit's scale to the clock, or what a declared unit is.
fn unit_text(model: &Model, name: &str) -> String {
    match sdeck_units::time_unit_years(name) {
        Some(years) => {
            let scale = years / model.clock.years;
            format!(
                "**unit `{name}`** · time\n\n1 {name} = {} {} (the model's clock)\n",
                plain(scale),
                model.clock.unit
            )
        }
        None => format!(
            "**unit `{name}`** · a base dimension declared in this file\n\nvalues in it are never rescaled\n"
        ),
    }
}

/// The unit name under the cursor in a unit expression (`[1/day]`, `6 month`, `clock`).
fn unit_name_at(a: &Analyzed, offset: usize) -> Option<(String, sdeck_diagnostics::Span)> {
    let mut found = None;
    let mut visit = |u: &UnitExpr| {
        u.walk_names(&mut |ident| {
            if ident.span.start <= offset && offset <= ident.span.end {
                found = Some((ident.name.clone(), ident.span.clone()));
            }
        })
    };
    for statement in &a.check.analysis.file.statements {
        if !(statement.span.start <= offset && offset <= statement.span.end) {
            continue;
        }
        match &statement.kind {
            StatementKind::Param(d) | StatementKind::Factor(d) => {
                if let Some(u) = d.unit() {
                    visit(u);
                }
            }
            StatementKind::Horizon { value } => visit_quantity(value, &mut visit),
            StatementKind::Let { value, .. } => value.walk(&mut |e| {
                if let Expr::Quantity(q) = e {
                    visit_quantity(q, &mut visit);
                }
            }),
            StatementKind::Equation(eq) => {
                for term in &eq.terms {
                    if let Some(c) = &term.coefficient {
                        c.walk(&mut |e| {
                            if let Expr::Quantity(q) = e {
                                visit_quantity(q, &mut visit);
                            }
                        });
                    }
                }
            }
            StatementKind::Clock { unit }
                if unit.span.start <= offset && offset <= unit.span.end =>
            {
                return Some((unit.name.clone(), unit.span.clone()));
            }
            StatementKind::Expect(e) => {
                if let Some(q) = &e.at {
                    visit_quantity(q, &mut visit);
                }
                match &e.condition {
                    sdeck_syntax::ast::Condition::Compare { value, .. } => {
                        visit_quantity(value, &mut visit)
                    }
                    sdeck_syntax::ast::Condition::Within { lower, upper, .. } => {
                        visit_quantity(lower, &mut visit);
                        visit_quantity(upper, &mut visit);
                    }
                }
            }
            _ => {}
        }
    }
    found
}

fn visit_quantity(q: &Quantity, visit: &mut impl FnMut(&UnitExpr)) {
    if let Some(u) = &q.unit {
        visit(u);
    }
}
