//! Completion: keywords, the names in scope, units inside brackets, functions, and the
//! figures an expectation can pin.

use crate::analysis::Analyzed;
use crate::documents::PositionEncoding;
use sdeck_semantics::{Function, SymbolKind};
use sdeck_syntax::ast::Figure;
use sdeck_syntax::vocabulary::KEYWORDS;
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
    match context(before) {
        Context::Anything => {}
        Context::Figure => {
            // `expect mean(` asks for a factor, and nothing else fits.
            return names(
                a,
                SymbolKind::Factor,
                CompletionItemKind::VARIABLE,
                "factor",
            );
        }
        Context::Correlation => {
            return names(a, SymbolKind::Shock, CompletionItemKind::EVENT, "shock");
        }
        Context::Differential(prefix) => {
            let mut items: Vec<CompletionItem> = a
                .check
                .analysis
                .symbols
                .iter()
                .filter(|s| s.kind == SymbolKind::Factor)
                .map(|s| {
                    item(
                        &format!("d{}", s.name),
                        CompletionItemKind::VARIABLE,
                        "the factor's equation",
                    )
                })
                .collect();
            items.extend(
                KEYWORDS
                    .iter()
                    .filter(|k| k.word.starts_with(prefix))
                    .map(|k| item(k.word, CompletionItemKind::KEYWORD, k.summary)),
            );
            return items;
        }
    }
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
            .map(|k| item(k.word, CompletionItemKind::KEYWORD, k.summary)),
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

/// Where the cursor is, as far as completion cares.
#[derive(Debug, PartialEq)]
enum Context<'t> {
    Anything,
    /// Inside `expect figure(` before the comma: a factor.
    Figure,
    /// After `corr ` (one or two names): a shock.
    Correlation,
    /// A word starting with `d` alone at the start of the line: an equation.
    Differential(&'t str),
}

/// The context of the text of the line before the cursor.
fn context(before: &str) -> Context<'_> {
    let trimmed = before.trim_start();
    let word_start = trimmed
        .rfind(|c: char| !(c.is_alphanumeric() || c == '_'))
        .map(|i| i + trimmed[i..].chars().next().map_or(1, char::len_utf8))
        .unwrap_or(0);
    let (head, word) = trimmed.split_at(word_start);
    if head.is_empty() && word.starts_with('d') {
        return Context::Differential(word);
    }
    let mut words = head.split_whitespace();
    if words.next() == Some("corr") && head.ends_with(char::is_whitespace) {
        let rest: Vec<&str> = words.collect();
        let names_only = rest
            .iter()
            .all(|w| w.chars().all(|c| c.is_alphanumeric() || c == '_'));
        if rest.len() <= 1 && names_only {
            return Context::Correlation;
        }
    }
    if trimmed.starts_with("expect") {
        if let Some(open) = head.rfind('(') {
            let inside = &head[open + 1..];
            let figure = head[..open].trim_end();
            let is_figure = Figure::ALL.iter().any(|f| figure.ends_with(f.keyword()));
            if is_figure && !inside.contains([',', ')']) && inside.trim().is_empty() {
                return Context::Figure;
            }
        }
    }
    Context::Anything
}

/// The declared names of one kind.
fn names(
    a: &Analyzed,
    kind: SymbolKind,
    item_kind: CompletionItemKind,
    detail: &str,
) -> Vec<CompletionItem> {
    a.check
        .analysis
        .symbols
        .iter()
        .filter(|s| s.kind == kind)
        .map(|s| item(&s.name, item_kind, detail))
        .collect()
}

#[cfg(test)]
mod tests {
    use super::{context, Context};

    #[test]
    fn contexts_of_the_line_before_the_cursor() {
        assert_eq!(context("expect mean("), Context::Figure);
        assert_eq!(context("expect sd( r"), Context::Figure);
        assert_eq!(context("expect sd(r, "), Context::Anything);
        assert_eq!(context("corr "), Context::Correlation);
        assert_eq!(context("corr W1 Z"), Context::Correlation);
        assert_eq!(context("corr W1 Z = "), Context::Anything);
        assert_eq!(context("d"), Context::Differential("d"));
        assert_eq!(context("  dr"), Context::Differential("dr"));
        assert_eq!(context("dr = k * d"), Context::Anything);
        assert_eq!(context("param d"), Context::Anything);
    }
}
