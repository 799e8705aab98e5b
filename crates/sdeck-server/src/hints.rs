//! Inlay hints: the converted value after a param written in another time unit, the
//! half-life after a mean-reversion speed, the stationary standard deviation after an
//! equation.

use crate::analysis::{Analyzed, Role};
use crate::documents::PositionEncoding;
use crate::durations::half_life_unit_of_speed;
use sdeck_semantics::SymbolKind;
use sdeck_units::number::plain;
use tower_lsp::lsp_types::{InlayHint, InlayHintKind, InlayHintLabel, Range};

/// The hints that fall in `range`: a binary search in the version's hints, built once.
pub fn inlay_hints(a: &Analyzed, encoding: PositionEncoding, range: Range) -> Vec<InlayHint> {
    let converter = a.converter(encoding);
    let all = a.hints.get_or_init(|| all_hints(a));
    let (start, end) = (converter.offset(range.start), converter.offset(range.end));
    let first = all.partition_point(|(offset, _)| *offset < start);
    let last = all.partition_point(|(offset, _)| *offset <= end);
    all.get(first..last.max(first))
        .unwrap_or(&[])
        .iter()
        .map(|(offset, label)| InlayHint {
            position: converter.position(*offset),
            label: InlayHintLabel::String(label.clone()),
            kind: Some(InlayHintKind::TYPE),
            text_edits: None,
            tooltip: None,
            padding_left: Some(true),
            padding_right: Some(false),
            data: None,
        })
        .collect()
}

/// Every hint of the model, by offset.
fn all_hints(a: &Analyzed) -> Vec<(usize, String)> {
    let model = &a.check.analysis.model;
    let clock = &model.clock.unit;
    let mut hints: Vec<(usize, String)> = Vec::new();
    for (i, p) in model.params.iter_ids() {
        let Some(declaration) = a.declaration(SymbolKind::Param, &p.name) else {
            continue;
        };
        if p.scale.is_finite() && p.scale != 1.0 {
            if let Some(unit) = declaration.unit() {
                // After the closing bracket of the unit.
                let unit_end = unit.span().end;
                let close = a
                    .text
                    .get(unit_end..p.span.end.max(unit_end))
                    .and_then(|rest| rest.find(']'))
                    .map(|k| unit_end + k + 1)
                    .unwrap_or(unit_end);
                hints.push((
                    close,
                    format!("= {} [{}]", plain(p.value), p.dimension.display_in(clock)),
                ));
            }
        }
        for role in a.roles_of_param(i).iter().cloned() {
            if let Role::Speed {
                half_life: Some(h), ..
            } = role
            {
                let unit = half_life_unit_of_speed(model, p, h);
                hints.push((p.span.end, format!("half-life {}", unit.show(h))));
            }
        }
    }
    for (i, state) in model.factors.iter().enumerate() {
        let Some(equation) = &state.equation else {
            continue;
        };
        let Some(stationary) = a
            .check
            .derivation
            .states
            .get(i)
            .and_then(|l| l.stationary.as_ref())
        else {
            continue;
        };
        if stationary.variance.is_finite() && stationary.variance >= 0.0 {
            hints.push((
                equation.span.end,
                format!("stationary sd {}", plain(stationary.variance.sqrt())),
            ));
        }
    }
    hints.sort_by_key(|(offset, _)| *offset);
    hints
}
