//! `correlation-not-psd`: correlations of the shocks that no set of Brownian motions has.

use super::shared::param_literal;
use super::Context;
use sdeck_calculus::correlation::{nearest_correlation_rounded, smallest_eigenvalue};
use sdeck_diagnostics::{rules, Diagnostic, TextEdit};
use sdeck_semantics::{Model, ParamId, ShockId};
use sdeck_syntax::ast::StatementKind;
use sdeck_units::number;
use sdeck_units::number::significant_whole;

/// Eigenvalues above this negative tolerance count as zero (rounding of a PSD matrix).
const EIGENVALUE_TOLERANCE: f64 = 1e-12;

/// The most shocks for which the fix is computed: the nearest matrix is iterated on the
/// whole matrix (cubic in the shocks per sweep), and the check runs on every keystroke.
const NEAREST_FIX_MAX_SHOCKS: usize = 64;

/// `correlation-not-psd`: the correlation matrix must be positive semi-definite for the
/// noises to exist jointly.
pub(super) fn run(cx: &Context, out: &mut Vec<Diagnostic>) {
    let model = cx.model;
    let Some(first) = model.correlations.first() else {
        return;
    };
    // The matrix is block diagonal: ones for the uncorrelated noises and one block per
    // group of correlated noises. Its eigenvalues are those of the blocks, so only the
    // blocks are decomposed (thousands of noises with one `corr` cost nothing).
    let correlations = model.correlations();
    let mut smallest = f64::INFINITY;
    for block in correlations.blocks() {
        let matrix: Vec<Vec<f64>> = block
            .iter()
            .map(|&r| block.iter().map(|&c| correlations.get(r, c)).collect())
            .collect();
        let Some(block_smallest) = smallest_eigenvalue(&matrix) else {
            return;
        };
        smallest = smallest.min(block_smallest);
    }
    let negative = smallest < -EIGENVALUE_TOLERANCE;
    if !negative {
        return;
    }
    let mut diagnostic = Diagnostic::new(
        &rules::CORRELATION_NOT_PSD,
        first.span.clone(),
        format!(
            "the correlations of the shocks contradict each other: their matrix has the \
             eigenvalue {} < 0, so no set of Brownian motions has these correlations",
            significant_whole(smallest, 4)
        ),
    )
    .with_help(
        "bring the correlations closer to zero (for three shocks, two strong positive \
         correlations force the third to be positive too)",
    );
    for other in model.correlations.iter().skip(1) {
        diagnostic = diagnostic.with_related(other.span.clone(), "also part of the matrix");
    }
    for c in &model.correlations {
        match &c.expr {
            None => {}
            Some(sdeck_semantics::Expr::Param(p)) => {
                let name = model.params.by_id(*p).map_or("?", |p| p.name.as_str());
                diagnostic = diagnostic.with_note(format!(
                    "the correlation of `{}` and `{}` is the parameter `{name}` = {}: mend its value",
                    shock_name(model, c.first),
                    shock_name(model, c.second),
                    significant_whole(c.value, 4)
                ));
            }
            Some(_) => {
                diagnostic = diagnostic.with_note(format!(
                    "the correlation of `{}` and `{}` is written as an expression ({}); no \
                     quick fix rewrites an expression: mend the parameters it uses",
                    shock_name(model, c.first),
                    shock_name(model, c.second),
                    significant_whole(c.value, 4)
                ));
            }
        }
    }
    if let Some((title, edits)) = nearest_correlation_fix(cx) {
        diagnostic = diagnostic.with_fix(title, edits);
    }
    out.push(diagnostic);
}

fn shock_name(model: &Model, i: ShockId) -> &str {
    model.shocks.by_id(i).map_or("?", |s| s.name.as_str())
}

/// Replaces the `corr` values with the nearest correlation matrix (Higham 2002), adding
/// `corr` statements for pairs that become correlated.
fn nearest_correlation_fix(cx: &Context) -> Option<(String, Vec<TextEdit>)> {
    let model = cx.model;
    if model.shocks.len() > NEAREST_FIX_MAX_SHOCKS {
        return None;
    }
    let matrix = model.correlation_matrix();
    let near = nearest_correlation_rounded(&matrix, 4)?;
    let mut rewrite = rewrite_statements(cx, &near)?;
    for (p, target) in std::mem::take(&mut rewrite.param_targets) {
        rewrite.edits.push(param_edit(cx, p, target)?);
    }
    let added = added_statements(model, &near, &rewrite.written);
    if !added.is_empty() {
        rewrite.edits.push(insert_after(cx.source, rewrite.after, added));
    }
    if rewrite.edits.is_empty() {
        return None;
    }
    Some((
        "Replace the correlations with the nearest correlation matrix (Higham 2002)".to_string(),
        rewrite.edits,
    ))
}

/// What the `corr` statements of a file need to hold the nearest matrix.
struct Rewrite {
    /// New values of the statements written as numbers.
    edits: Vec<TextEdit>,
    /// The pairs of shocks some statement names.
    written: Vec<Vec<bool>>,
    /// A correlation written as a parameter alone (`corr W, B = rho`) is mended by
    /// rewriting the parameter's value, to this target.
    param_targets: Vec<(ParamId, f64)>,
    /// Where new statements go: after the last `corr`, else after the last `shock`.
    after: usize,
}

/// Each `corr` statement set to its value in `near`; `None` when one is written as an
/// expression other than a parameter alone (no quick fix rewrites it), or one parameter
/// would need two values.
fn rewrite_statements(cx: &Context, near: &[Vec<f64>]) -> Option<Rewrite> {
    let model = cx.model;
    let mut rewrite = Rewrite {
        edits: Vec::new(),
        written: vec![vec![false; near.len()]; near.len()],
        param_targets: Vec::new(),
        after: 0,
    };
    let (mut last_corr_end, mut last_noise_end) = (None, None);
    for statement in &cx.analysis.file.statements {
        let StatementKind::Corr { first, second, .. } = &statement.kind else {
            if let StatementKind::Shock { .. } = statement.kind {
                last_noise_end = Some(statement.span.end);
            }
            continue;
        };
        last_corr_end = Some(statement.span.end);
        let i = model.shocks.iter().position(|n| n.name == first.name)?;
        let j = model.shocks.iter().position(|n| n.name == second.name)?;
        if i == j {
            continue;
        }
        let target = near.get(i)?.get(j).copied()?;
        rewrite.written[i][j] = true;
        rewrite.written[j][i] = true;
        let c = model
            .correlations
            .iter()
            .find(|c| c.span == statement.span)?;
        if (target - c.value).abs() <= 1e-12 {
            continue;
        }
        match &c.expr {
            None => rewrite.edits.push(TextEdit {
                span: c.value_span.clone(),
                new_text: number::plain(target),
            }),
            Some(sdeck_semantics::Expr::Param(p)) => {
                let targets = &mut rewrite.param_targets;
                if targets.iter().any(|(q, t)| q == p && *t != target) {
                    return None;
                }
                targets.push((*p, target));
            }
            Some(_) => return None,
        }
    }
    rewrite.after = last_corr_end.or(last_noise_end).unwrap_or(0);
    Some(rewrite)
}

/// The edit that gives parameter `p` the value `target`; `None` when its value is not a
/// plain number in clock units inside its bound, or the parameter is used anywhere but
/// in correlations.
fn param_edit(cx: &Context, p: ParamId, target: f64) -> Option<TextEdit> {
    let model = cx.model;
    let param = model.params.by_id(p)?;
    let number = param_literal(cx.analysis, &param.name)?;
    if param.scale != 1.0 || param.bound.as_deref().is_some_and(|b| !b.contains(target)) {
        return None;
    }
    let elsewhere = cx.analysis.references.iter().any(|r| {
        r.declaration == param.name_span
            && !model
                .correlations
                .iter()
                .any(|c| c.value_span.start <= r.span.start && r.span.end <= c.value_span.end)
    });
    (!elsewhere).then(|| TextEdit {
        span: number.span.clone(),
        new_text: number::plain(target),
    })
}

/// `corr` statements for the pairs no statement names that `near` correlates.
fn added_statements(model: &Model, near: &[Vec<f64>], written: &[Vec<bool>]) -> String {
    let mut added = String::new();
    for i in 0..near.len() {
        for j in i + 1..near.len() {
            if !written[i][j] && near[i][j] != 0.0 {
                added.push_str(&format!(
                    "corr {} {} = {}\n",
                    model.shocks[i].name,
                    model.shocks[j].name,
                    number::plain(near[i][j])
                ));
            }
        }
    }
    added
}

/// Inserts `lines` at the start of the line after offset `after` (at the end of the file,
/// on a line of their own, when there is none).
fn insert_after(source: &str, after: usize, lines: String) -> TextEdit {
    let next = sdeck_syntax::lines::next_line_start(source, after);
    if next > sdeck_syntax::lines::line_end(source, after) {
        TextEdit {
            span: next..next,
            new_text: lines,
        }
    } else {
        TextEdit {
            span: source.len()..source.len(),
            new_text: format!("\n{lines}"),
        }
    }
}
