//! Completion: keywords, the names in scope, units inside brackets, functions, and the
//! figures an expectation can pin.

use crate::analysis::Analyzed;
use crate::documents::PositionEncoding;
use crate::navigation::KEYWORDS;
use sdeck_semantics::{Function, SymbolKind};
use sdeck_syntax::ast::Figure;
use tower_lsp::lsp_types::{CompletionItem, CompletionItemKind, Position};

pub fn complete(
    a: &Analyzed,
    encoding: PositionEncoding,
    position: Position,
) -> Vec<CompletionItem> {
    let converter = a.converter(encoding);
    let offset = converter.offset(position);
    let line_start = sdeck_syntax::lines::line_start(&a.text, offset);
    let before = a.text.get(line_start..offset).unwrap_or("");
    let in_brackets = before
        .rfind('[')
        .is_some_and(|open| !before[open..].contains(']'));
    let declared_units = a
        .check
        .analysis
        .symbols
        .iter()
        .filter(|s| s.kind == SymbolKind::Unit)
        .map(|s| s.name.clone());
    let mut items: Vec<CompletionItem> = sdeck_units::TIME_UNITS
        .iter()
        .map(|u| item(u, CompletionItemKind::UNIT, "time unit"))
        .chain(declared_units.map(|u| item(&u, CompletionItemKind::UNIT, "declared unit")))
        .collect();
    if in_brackets {
        items.push(item(
            "sqrt",
            CompletionItemKind::FUNCTION,
            "unit square root",
        ));
        return items;
    }
    items.extend(
        KEYWORDS
            .iter()
            .map(|k| item(k, CompletionItemKind::KEYWORD, "keyword")),
    );
    items.extend(
        Function::ALL
            .iter()
            .map(|f| item(f.name(), CompletionItemKind::FUNCTION, "function")),
    );
    items.extend(
        Figure::ALL
            .iter()
            .map(|f| item(f.keyword(), CompletionItemKind::PROPERTY, f.form())),
    );
    items.push(item(
        "t",
        CompletionItemKind::VARIABLE,
        "time, in clock units",
    ));
    items.push(item("pi", CompletionItemKind::CONSTANT, "π"));
    items.push(item(
        "dt",
        CompletionItemKind::KEYWORD,
        "drift differential",
    ));
    for s in &a.check.analysis.symbols {
        let (kind, detail) = match s.kind {
            SymbolKind::Param => (CompletionItemKind::CONSTANT, "param"),
            SymbolKind::Factor => (CompletionItemKind::VARIABLE, "factor"),
            SymbolKind::Shock => (CompletionItemKind::EVENT, "shock"),
            SymbolKind::Let => (CompletionItemKind::VARIABLE, "let"),
            SymbolKind::Unit => continue,
        };
        items.push(item(&s.name, kind, detail));
        if s.kind == SymbolKind::Shock {
            items.push(item(
                &format!("d{}", s.name),
                CompletionItemKind::EVENT,
                "shock differential",
            ));
        }
    }
    items
}

fn item(label: &str, kind: CompletionItemKind, detail: &str) -> CompletionItem {
    CompletionItem {
        label: label.to_string(),
        kind: Some(kind),
        detail: Some(detail.to_string()),
        ..CompletionItem::default()
    }
}
