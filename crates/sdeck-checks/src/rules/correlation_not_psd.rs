//! `correlation-not-psd`: correlations of the shocks that no set of Brownian motions has.

use super::shared::param_literal;
use super::Context;
use sdeck_calculus::correlation::{nearest_correlation_rounded, smallest_eigenvalue};
use sdeck_diagnostics::{rules, Diagnostic, TextEdit};
use sdeck_semantics::Model;
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
                let name = model.params.get(*p).map_or("?", |p| p.name.as_str());
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

fn shock_name(model: &Model, i: usize) -> &str {
    model.shocks.get(i).map_or("?", |s| s.name.as_str())
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
    let mut edits = Vec::new();
    let mut written = vec![vec![false; near.len()]; near.len()];
    let mut last_corr_end: Option<usize> = None;
    let mut last_noise_end: Option<usize> = None;
    // A correlation written as a parameter alone (`corr W, B = rho`) is mended by
    // rewriting the parameter's value; one written as any other expression cannot be.
    let mut param_targets: Vec<(usize, f64)> = Vec::new();
    for statement in &cx.analysis.file.statements {
        match &statement.kind {
            StatementKind::Corr { first, second, .. } => {
                last_corr_end = Some(statement.span.end);
                let i = model.shocks.iter().position(|n| n.name == first.name)?;
                let j = model.shocks.iter().position(|n| n.name == second.name)?;
                if i == j {
                    continue;
                }
                let target = near.get(i)?.get(j).copied()?;
                written[i][j] = true;
                written[j][i] = true;
                let c = model
                    .correlations
                    .iter()
                    .find(|c| c.span == statement.span)?;
                if (target - c.value).abs() <= 1e-12 {
                    continue;
                }
                match &c.expr {
                    None => edits.push(TextEdit {
                        span: c.value_span.clone(),
                        new_text: number::plain(target),
                    }),
                    Some(sdeck_semantics::Expr::Param(p)) => {
                        if param_targets.iter().any(|(q, t)| q == p && *t != target) {
                            return None;
                        }
                        param_targets.push((*p, target));
                    }
                    Some(_) => return None,
                }
            }
            StatementKind::Shock { .. } => last_noise_end = Some(statement.span.end),
            _ => {}
        }
    }
    for (p, target) in param_targets {
        let param = model.params.get(p)?;
        let number = param_literal(cx.analysis, &param.name)?;
        if param.scale != 1.0 || param.bound.is_some_and(|b| !b.contains(target)) {
            return None;
        }
        // The parameter must not also be used anywhere but in correlations.
        let elsewhere = cx.analysis.references.iter().any(|r| {
            r.declaration == param.name_span
                && !model
                    .correlations
                    .iter()
                    .any(|c| c.value_span.start <= r.span.start && r.span.end <= c.value_span.end)
        });
        if elsewhere {
            return None;
        }
        edits.push(TextEdit {
            span: number.span.clone(),
            new_text: number::plain(target),
        });
    }
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
    if !added.is_empty() {
        let after = last_corr_end.or(last_noise_end).unwrap_or(0);
        let next = sdeck_syntax::lines::next_line_start(cx.source, after);
        let at = (next > sdeck_syntax::lines::line_end(cx.source, after)).then_some(next);
        match at {
            Some(at) => edits.push(TextEdit {
                span: at..at,
                new_text: added,
            }),
            None => edits.push(TextEdit {
                span: cx.source.len()..cx.source.len(),
                new_text: format!("\n{added}"),
            }),
        }
    }
    if edits.is_empty() {
        return None;
    }
    Some((
        "Replace the correlations with the nearest correlation matrix (Higham 2002)".to_string(),
        edits,
    ))
}
