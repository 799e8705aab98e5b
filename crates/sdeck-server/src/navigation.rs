//! Go to definition, find references, rename and the outline, from the symbols and
//! references of the semantic layer.

use crate::analysis::Analyzed;
use crate::documents::PositionEncoding;
use sdeck_semantics::SymbolKind;
use sdeck_syntax::vocabulary;
use std::collections::HashMap;
use tower_lsp::lsp_types::{
    DocumentSymbol, Location, Position, PrepareRenameResponse, SymbolKind as LspSymbolKind,
    TextEdit, Url, WorkspaceEdit,
};

pub fn definition(
    a: &Analyzed,
    encoding: PositionEncoding,
    uri: &Url,
    position: Position,
) -> Option<Location> {
    let converter = a.converter(encoding);
    let symbol = a.symbol_at(converter.offset(position))?;
    Some(Location {
        uri: uri.clone(),
        range: converter.range(&symbol.name_span),
    })
}

pub fn references(
    a: &Analyzed,
    encoding: PositionEncoding,
    uri: &Url,
    position: Position,
    include_declaration: bool,
) -> Option<Vec<Location>> {
    let converter = a.converter(encoding);
    let symbol = a.symbol_at(converter.offset(position))?;
    let spans = a.occurrences(symbol);
    let skip = usize::from(!include_declaration);
    Some(
        spans
            .iter()
            .skip(skip)
            .map(|span| Location {
                uri: uri.clone(),
                range: converter.range(span),
            })
            .collect(),
    )
}

pub fn prepare_rename(
    a: &Analyzed,
    encoding: PositionEncoding,
    position: Position,
) -> Option<PrepareRenameResponse> {
    let converter = a.converter(encoding);
    let offset = converter.offset(position);
    let symbol = a.symbol_at(offset)?;
    let span = a
        .occurrences(symbol)
        .into_iter()
        .find(|s| s.start <= offset && offset <= s.end)?;
    Some(PrepareRenameResponse::RangeWithPlaceholder {
        range: converter.range(&span),
        placeholder: symbol.name.clone(),
    })
}

/// Why `name` cannot be a new name, if it cannot.
pub fn invalid_name(a: &Analyzed, name: &str) -> Option<String> {
    let mut chars = name.chars();
    let starts_well = chars.next().is_some_and(|c| c.is_alphabetic() || c == '_');
    if !starts_well || !chars.all(|c| c.is_alphanumeric() || c == '_') {
        return Some(format!(
            "`{name}` is not a name: a name is letters, digits and `_`, not starting with a digit"
        ));
    }
    if vocabulary::is_keyword(name) || vocabulary::is_reserved(name) {
        return Some(format!("`{name}` is reserved by the language"));
    }
    if a.check.analysis.symbols.iter().any(|s| s.name == name) {
        return Some(format!("`{name}` is already declared"));
    }
    None
}

pub fn rename(
    a: &Analyzed,
    encoding: PositionEncoding,
    uri: &Url,
    position: Position,
    new_name: &str,
) -> Result<Option<WorkspaceEdit>, String> {
    let converter = a.converter(encoding);
    let Some(symbol) = a.symbol_at(converter.offset(position)) else {
        return Ok(None);
    };
    if symbol.name == new_name {
        return Ok(None);
    }
    if let Some(reason) = invalid_name(a, new_name) {
        return Err(reason);
    }
    if symbol.kind == SymbolKind::Unit && sdeck_units::time_unit_years(new_name).is_some() {
        return Err(format!("`{new_name}` is a built-in time unit"));
    }
    let edits: Vec<TextEdit> = a
        .occurrences(symbol)
        .iter()
        .map(|span| TextEdit {
            range: converter.range(span),
            new_text: new_name.to_string(),
        })
        .collect();
    Ok(Some(WorkspaceEdit {
        changes: Some(HashMap::from([(uri.clone(), edits)])),
        document_changes: None,
        change_annotations: None,
    }))
}

#[allow(deprecated)] // `DocumentSymbol::deprecated` must still be written.
pub fn document_symbols(a: &Analyzed, encoding: PositionEncoding) -> Vec<DocumentSymbol> {
    let converter = a.converter(encoding);
    let model = &a.check.analysis.model;
    a.check
        .analysis
        .symbols
        .iter()
        .map(|s| {
            let (kind, detail) = match s.kind {
                SymbolKind::Param => (LspSymbolKind::CONSTANT, "param".to_string()),
                SymbolKind::Factor => {
                    let family = model
                        .factor_id(&s.name)
                        .and_then(|i| a.check.derivation.states.by_id(i))
                        .map(|l| format!("factor · {}", l.family.as_str()))
                        .unwrap_or_else(|| "factor".to_string());
                    (LspSymbolKind::VARIABLE, family)
                }
                SymbolKind::Shock => (LspSymbolKind::EVENT, "shock".to_string()),
                SymbolKind::Let => (LspSymbolKind::FUNCTION, "let".to_string()),
                SymbolKind::Unit => (LspSymbolKind::STRUCT, "unit".to_string()),
            };
            // The selection must lie inside the range.
            let start = s.statement_span.start.min(s.name_span.start);
            let end = s.statement_span.end.max(s.name_span.end);
            DocumentSymbol {
                name: s.name.clone(),
                detail: Some(detail),
                kind,
                tags: None,
                deprecated: None,
                range: converter.range(&(start..end)),
                selection_range: converter.range(&s.name_span),
                children: None,
            }
        })
        .collect()
}
