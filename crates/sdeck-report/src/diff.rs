//! What a change of a model's text does to its derived law: parameters, families, the
//! figures at the horizon, diagnostics and expectations, old against new. Built from two
//! [`Side`]s (the report and the findings of each text), rendered as text, Markdown or
//! JSON.

use crate::data::{FactorReport, ModelReport, ParamRow};
use crate::markdown::cell;
use crate::review::{findings, Finding};
use sdeck_checks::FileCheck;
use sdeck_diagnostics::{RuleId, Severity};
use sdeck_units::number::{or_unknown, plain, significant};
use serde_json::{json, Value};
use std::fmt::Write as _;

/// One version of a model.
#[derive(Clone, Debug, PartialEq)]
pub struct Side {
    pub source: String,
    /// `None` when the model has errors (no figure is derived from it).
    pub report: Option<ModelReport>,
    pub findings: Vec<Finding>,
}

impl Side {
    /// The report of `source` at its horizon and its located diagnostics.
    pub fn new(source: &str, check: &FileCheck) -> Side {
        let broken = check
            .diagnostics
            .iter()
            .any(|d| d.severity == Severity::Error && d.rule != RuleId::ExpectationFailed);
        let model = &check.analysis.model;
        Side {
            source: source.to_string(),
            report: (!broken)
                .then(|| ModelReport::build(model, &check.derivation, source, model.horizon)),
            findings: findings(source, check),
        }
    }
}

/// Whether the file was changed, added or removed.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Status {
    Changed,
    Added,
    Removed,
    /// The two texts are the same.
    Unchanged,
}

impl Status {
    pub fn as_str(self) -> &'static str {
        match self {
            Status::Changed => "changed",
            Status::Added => "added",
            Status::Removed => "removed",
            Status::Unchanged => "unchanged",
        }
    }
}

/// A parameter on either side; `None` where it does not exist.
#[derive(Clone, Debug, PartialEq)]
pub struct ParamChange {
    pub name: String,
    pub old: Option<ParamRow>,
    pub new: Option<ParamRow>,
}

/// A derived figure of a factor at its model's horizon, old and new. For the figure
/// `family` the values are in `old_text`/`new_text`.
#[derive(Clone, Debug, PartialEq)]
pub struct FigureChange {
    pub factor: String,
    /// `family`, `mean`, `sd`, `quantile_5`, `quantile_95`, `stationary_mean`,
    /// `stationary_sd`, `half_life`.
    pub figure: &'static str,
    pub old: Option<f64>,
    pub new: Option<f64>,
    pub old_text: Option<String>,
    pub new_text: Option<String>,
}

impl FigureChange {
    pub fn absolute_change(&self) -> Option<f64> {
        Some(self.new? - self.old?)
    }

    /// (new − old) / |old|; `None` when either is missing or old is 0.
    pub fn relative_change(&self) -> Option<f64> {
        let (old, new) = (self.old?, self.new?);
        (old != 0.0).then(|| (new - old) / old.abs())
    }

    /// Whether it moved by more than `percent` per cent: a figure that appears, vanishes,
    /// or leaves 0 always has.
    pub fn exceeds(&self, percent: f64) -> bool {
        match (self.old, self.new) {
            (Some(_), Some(_)) => match self.relative_change() {
                Some(r) => r.abs() * 100.0 > percent,
                None => self.new != self.old,
            },
            (None, None) => self.old_text != self.new_text,
            _ => true,
        }
    }
}

/// A pinned expectation whose verdict changed.
#[derive(Clone, Debug, PartialEq)]
pub struct ExpectationFlip {
    pub text: String,
    pub old: Option<bool>,
    pub new: Option<bool>,
}

/// Everything that changed in one model.
#[derive(Clone, Debug, PartialEq)]
pub struct ModelDiff {
    pub path: String,
    pub status: Status,
    pub horizons: (Option<f64>, Option<f64>),
    pub clock: String,
    pub params: Vec<ParamChange>,
    pub figures: Vec<FigureChange>,
    pub introduced: Vec<Finding>,
    pub resolved: Vec<Finding>,
    pub expectations: Vec<ExpectationFlip>,
    /// Whether a side has errors, so that its figures are not derived.
    pub broken: (bool, bool),
}

impl ModelDiff {
    /// Whether nothing derived differs: the text changed in comments or layout only (or
    /// not at all).
    pub fn law_unchanged(&self) -> bool {
        self.status != Status::Added
            && self.status != Status::Removed
            && self.params.is_empty()
            && self.figures.is_empty()
            && self.introduced.is_empty()
            && self.resolved.is_empty()
            && self.expectations.is_empty()
            && self.horizons.0 == self.horizons.1
    }

    /// The figures that moved by more than `percent` per cent.
    pub fn exceeding(&self, percent: f64) -> Vec<&FigureChange> {
        self.figures.iter().filter(|f| f.exceeds(percent)).collect()
    }
}

fn param_differs(a: &ParamRow, b: &ParamRow) -> bool {
    a.value != b.value || a.written_text != b.written_text || a.unit != b.unit || a.bound != b.bound
}

fn params(old: &[ParamRow], new: &[ParamRow]) -> Vec<ParamChange> {
    let mut out = Vec::new();
    for o in old {
        match new.iter().find(|n| n.name == o.name) {
            Some(n) if !param_differs(o, n) => {}
            n => out.push(ParamChange {
                name: o.name.clone(),
                old: Some(o.clone()),
                new: n.cloned(),
            }),
        }
    }
    for n in new.iter().filter(|n| !old.iter().any(|o| o.name == n.name)) {
        out.push(ParamChange {
            name: n.name.clone(),
            old: None,
            new: Some(n.clone()),
        });
    }
    out
}

const FIGURES: [&str; 7] = [
    "mean",
    "sd",
    "quantile_5",
    "quantile_95",
    "stationary_mean",
    "stationary_sd",
    "half_life",
];

fn figure(f: &FactorReport, name: &str) -> Option<f64> {
    match name {
        "mean" => f.figures.mean,
        "sd" => f.figures.sd,
        "quantile_5" => f.figures.quantile(0.05),
        "quantile_95" => f.figures.quantile(0.95),
        "stationary_mean" => f.stationary.as_ref().map(|s| s.mean),
        "stationary_sd" => f.stationary.as_ref().map(|s| s.sd),
        "half_life" => f.half_life,
        _ => None,
    }
    .filter(|v| v.is_finite())
}

fn figures(old: Option<&ModelReport>, new: Option<&ModelReport>) -> Vec<FigureChange> {
    let mut names: Vec<&str> = Vec::new();
    for r in [old, new].into_iter().flatten() {
        for f in &r.factors {
            if !names.contains(&f.name.as_str()) {
                names.push(&f.name);
            }
        }
    }
    let mut out = Vec::new();
    for name in names {
        let o = old.and_then(|r| r.factor(name));
        let n = new.and_then(|r| r.factor(name));
        let (of, nf) = (o.map(|f| f.family.as_str()), n.map(|f| f.family.as_str()));
        if of != nf {
            out.push(FigureChange {
                factor: name.to_string(),
                figure: "family",
                old: None,
                new: None,
                old_text: of.map(str::to_string),
                new_text: nf.map(str::to_string),
            });
        }
        for fig in FIGURES {
            let (a, b) = (
                o.and_then(|f| figure(f, fig)),
                n.and_then(|f| figure(f, fig)),
            );
            if a != b {
                out.push(FigureChange {
                    factor: name.to_string(),
                    figure: fig,
                    old: a,
                    new: b,
                    old_text: None,
                    new_text: None,
                });
            }
        }
    }
    out
}

/// Findings of `a` that `b` does not have (matched by rule and message, whatever the line),
/// each as often as it is missing.
fn missing_from(a: &[Finding], b: &[Finding]) -> Vec<Finding> {
    let mut left: Vec<&Finding> = b.iter().collect();
    let mut out = Vec::new();
    for f in a {
        match left
            .iter()
            .position(|g| g.rule == f.rule && g.message == f.message)
        {
            Some(i) => {
                left.swap_remove(i);
            }
            None => out.push(f.clone()),
        }
    }
    out
}

fn expectations(old: Option<&ModelReport>, new: Option<&ModelReport>) -> Vec<ExpectationFlip> {
    let (Some(old), Some(new)) = (old, new) else {
        return Vec::new();
    };
    new.expectations
        .iter()
        .filter_map(|n| {
            let o = old.expectations.iter().find(|o| o.text == n.text)?;
            (o.holds != n.holds).then(|| ExpectationFlip {
                text: n.text.clone(),
                old: o.holds,
                new: n.holds,
            })
        })
        .collect()
}

/// Compares two versions of the model at `path`; `None` on a side where it does not exist.
pub fn diff(path: &str, old: Option<&Side>, new: Option<&Side>) -> ModelDiff {
    let status = match (old, new) {
        (None, _) => Status::Added,
        (_, None) => Status::Removed,
        (Some(o), Some(n)) if o.source == n.source => Status::Unchanged,
        _ => Status::Changed,
    };
    let (or, nr) = (
        old.and_then(|s| s.report.as_ref()),
        new.and_then(|s| s.report.as_ref()),
    );
    let empty = Vec::new();
    let of = old.map_or(&empty, |s| &s.findings);
    let nf = new.map_or(&empty, |s| &s.findings);
    let none: Vec<ParamRow> = Vec::new();
    ModelDiff {
        path: path.to_string(),
        status,
        horizons: (or.map(|r| r.horizon), nr.map(|r| r.horizon)),
        clock: nr.or(or).map(|r| r.clock.clone()).unwrap_or_default(),
        params: params(
            or.map_or(&none, |r| &r.params),
            nr.map_or(&none, |r| &r.params),
        ),
        figures: figures(or, nr),
        introduced: missing_from(nf, of),
        resolved: missing_from(of, nf),
        expectations: expectations(or, nr),
        broken: (
            old.is_some_and(|s| s.report.is_none()),
            new.is_some_and(|s| s.report.is_none()),
        ),
    }
}

fn finding_json(f: &Finding) -> Value {
    json!({
        "rule": f.rule,
        "severity": f.severity.as_str(),
        "line": f.line,
        "column": f.column,
        "message": f.message,
    })
}

fn number(x: Option<f64>) -> Value {
    crate::moments::num(x)
}

/// `{"models": [...]}` in the documented shape.
pub fn to_json(diffs: &[ModelDiff]) -> Value {
    let models: Vec<Value> = diffs
        .iter()
        .map(|d| {
            json!({
                "path": d.path,
                "status": d.status.as_str(),
                "params": d.params.iter().map(|p| json!({
                    "name": p.name,
                    "old": number(p.old.as_ref().map(|r| r.value)),
                    "new": number(p.new.as_ref().map(|r| r.value)),
                })).collect::<Vec<_>>(),
                "figures": d.figures.iter().map(|f| json!({
                    "factor": f.factor,
                    "figure": f.figure,
                    "old": f.old_text.as_ref().map_or_else(|| number(f.old), |t| json!(t)),
                    "new": f.new_text.as_ref().map_or_else(|| number(f.new), |t| json!(t)),
                    "relative_change": number(f.relative_change()),
                })).collect::<Vec<_>>(),
                "diagnostics": {
                    "introduced": d.introduced.iter().map(finding_json).collect::<Vec<_>>(),
                    "resolved": d.resolved.iter().map(finding_json).collect::<Vec<_>>(),
                },
            })
        })
        .collect();
    json!({ "models": models })
}

fn written(p: &Option<ParamRow>, clock: &str) -> String {
    match p {
        None => "—".to_string(),
        Some(p) => {
            let unit = p
                .unit
                .as_deref()
                .map(|u| format!(" [{u}]"))
                .unwrap_or_default();
            let bound = p
                .bound
                .as_deref()
                .map(|b| format!(", bound {b}"))
                .unwrap_or_default();
            format!(
                "{}{unit} (in {clock} clock units {}{bound})",
                p.written_text,
                plain(p.value)
            )
        }
    }
}

fn verdict(holds: Option<bool>) -> &'static str {
    match holds {
        Some(true) => "holds",
        Some(false) => "fails",
        None => "has no value",
    }
}

fn signed_percent(r: Option<f64>) -> String {
    match r {
        Some(r) => format!(
            "{}{}%",
            if r > 0.0 { "+" } else { "" },
            significant(r * 100.0, 3)
        ),
        None => "—".to_string(),
    }
}

fn value_text(f: &FigureChange, new: bool) -> String {
    let (text, value) = if new {
        (&f.new_text, f.new)
    } else {
        (&f.old_text, f.old)
    };
    match text {
        Some(t) => t.clone(),
        None if value.is_none() && f.figure == "family" => "—".into(),
        None => value.map_or("—".into(), plain),
    }
}

fn headline(d: &ModelDiff) -> Option<&'static str> {
    match d.status {
        Status::Unchanged => Some("the files are the same"),
        Status::Changed if d.law_unchanged() => Some("no change in the derived law"),
        _ => None,
    }
}

/// The diff as plain text.
pub fn to_text(diffs: &[ModelDiff]) -> String {
    let mut s = String::new();
    for d in diffs {
        let _ = writeln!(s, "{}: {}", d.path, d.status.as_str());
        if let Some(h) = headline(d) {
            let _ = writeln!(s, "  {h}\n");
            continue;
        }
        if d.horizons.0 != d.horizons.1 {
            let _ = writeln!(
                s,
                "  horizon: {} → {} {}",
                or_unknown(d.horizons.0),
                or_unknown(d.horizons.1),
                d.clock
            );
        }
        for (side, broken) in [("old", d.broken.0), ("new", d.broken.1)] {
            if broken {
                let _ = writeln!(
                    s,
                    "  the {side} model has errors: its figures are not derived"
                );
            }
        }
        changes_text(&mut s, d);
        s.push('\n');
    }
    s
}

/// What changed between the versions of one model: parameters, figures, diagnostics
/// and the verdicts of expectations.
fn changes_text(s: &mut String, d: &ModelDiff) {
    if !d.params.is_empty() {
        s.push_str("  parameters:\n");
        for p in &d.params {
            let _ = writeln!(
                s,
                "    {}: {} → {}",
                p.name,
                written(&p.old, &d.clock),
                written(&p.new, &d.clock)
            );
        }
    }
    if !d.figures.is_empty() {
        s.push_str("  figures at the horizon:\n");
        for f in &d.figures {
            let _ = writeln!(
                s,
                "    {} {}: {} → {} (change {}, {})",
                f.factor,
                f.figure,
                value_text(f, false),
                value_text(f, true),
                f.absolute_change().map_or("—".into(), plain),
                signed_percent(f.relative_change())
            );
        }
    }
    for (title, list) in [("introduced", &d.introduced), ("resolved", &d.resolved)] {
        if !list.is_empty() {
            let _ = writeln!(s, "  diagnostics {title}:");
            for f in list.iter() {
                let _ = writeln!(
                    s,
                    "    {}:{} {} [{}]: {}",
                    f.line,
                    f.column,
                    f.severity.as_str(),
                    f.rule,
                    f.message
                );
            }
        }
    }
    for e in &d.expectations {
        let _ = writeln!(
            s,
            "  expectation `{}`: {} → {}",
            e.text,
            verdict(e.old),
            verdict(e.new)
        );
    }
}

/// The diff as GitHub-flavoured Markdown, for a pull-request comment.
pub fn to_markdown(diffs: &[ModelDiff]) -> String {
    let mut s = String::from("## Derived law: what this change does\n\n");
    if diffs.is_empty() {
        s.push_str("No model changed.\n");
    }
    for d in diffs {
        let _ = writeln!(s, "### `{}` ({})\n", d.path, d.status.as_str());
        if let Some(h) = headline(d) {
            let _ = writeln!(s, "{}.\n", capitalise(h));
            continue;
        }
        if d.horizons.0 != d.horizons.1 {
            let _ = writeln!(
                s,
                "Horizon: {} → {} {}.\n",
                or_unknown(d.horizons.0),
                or_unknown(d.horizons.1),
                d.clock
            );
        }
        if !d.params.is_empty() {
            s.push_str("| parameter | old | new |\n|---|---|---|\n");
            for p in &d.params {
                let _ = writeln!(
                    s,
                    "| `{}` | {} | {} |",
                    p.name,
                    cell(&written(&p.old, &d.clock)),
                    cell(&written(&p.new, &d.clock))
                );
            }
            s.push('\n');
        }
        if !d.figures.is_empty() {
            s.push_str("| factor | figure at the horizon | old | new | change | relative |\n|---|---|---|---|---|---|\n");
            for f in &d.figures {
                let _ = writeln!(
                    s,
                    "| `{}` | {} | {} | {} | {} | {} |",
                    f.factor,
                    cell(f.figure),
                    value_text(f, false),
                    value_text(f, true),
                    f.absolute_change().map_or("—".into(), plain),
                    signed_percent(f.relative_change())
                );
            }
            s.push('\n');
        }
        for (title, list) in [("Introduced", &d.introduced), ("Resolved", &d.resolved)] {
            for f in list.iter() {
                let _ = writeln!(
                    s,
                    "- {title}: line {} {} `{}`: {}",
                    f.line,
                    f.severity.as_str(),
                    f.rule,
                    cell(&f.message)
                );
            }
        }
        for e in &d.expectations {
            let _ = writeln!(
                s,
                "- Expectation `{}`: {} → **{}**",
                e.text.replace('`', "'"),
                verdict(e.old),
                verdict(e.new)
            );
        }
        s.push('\n');
    }
    let _ = writeln!(s, "> {}", crate::CAUTION);
    s
}

fn capitalise(text: &str) -> String {
    let mut chars = text.chars();
    chars
        .next()
        .map(|c| c.to_uppercase().chain(chars).collect())
        .unwrap_or_default()
}
