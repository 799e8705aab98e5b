//! Completion: keywords, the names in scope, units inside brackets, functions, and the
//! figures an expectation can pin.

use crate::analysis::Analyzed;
use crate::documents::PositionEncoding;
use sdeck_semantics::{Function, Symbol, SymbolKind};
use sdeck_syntax::ast::Figure;
use sdeck_syntax::vocabulary::KEYWORDS;
use std::borrow::Cow;
use tower_lsp::lsp_types::{CompletionItem, CompletionItemKind, CompletionList, Position};

/// The most items one answer carries. A model with a thousand names would otherwise send
/// them all on every request (60 kB of JSON for 1,100 names, more to decode in the editor
/// than the rest of the request costs); past this the answer is marked incomplete, so the
/// editor asks again as the user types and the typed prefix narrows the list.
const MAX_ITEMS: usize = 200;

/// What fits at `position`, narrowed to the names that hold the word typed before the
/// cursor (its letters in order, any case: what an editor's fuzzy match shows), at most
/// [`MAX_ITEMS`] of them. Candidates are narrowed by their label before any item is
/// built: a model with a thousand names builds two hundred items, not a thousand.
pub fn complete(a: &Analyzed, encoding: PositionEncoding, position: Position) -> CompletionList {
    let converter = a.converter(encoding);
    let offset = converter.offset(position);
    let line_start = sdeck_syntax::lines::line_start(&a.text, offset);
    let before = a.text.get(line_start..offset).unwrap_or("");
    let typed = typed_word(before);
    let mut fitting = candidates(a, before)
        .into_iter()
        .filter(|c| holds_in_order(&c.label, typed));
    let items: Vec<CompletionItem> = fitting.by_ref().take(MAX_ITEMS).map(item).collect();
    CompletionList {
        is_incomplete: fitting.next().is_some(),
        items,
    }
}

/// The word (letters, digits, `_`) that ends at the cursor.
fn typed_word(before: &str) -> &str {
    let start = before
        .char_indices()
        .rev()
        .find(|(_, c)| !(c.is_alphanumeric() || *c == '_'))
        .map_or(0, |(i, c)| i + c.len_utf8());
    before.get(start..).unwrap_or("")
}

/// Whether the characters of `typed` appear in `label` in order, ignoring case.
fn holds_in_order(label: &str, typed: &str) -> bool {
    let mut rest = label.chars().flat_map(char::to_lowercase);
    typed
        .chars()
        .flat_map(char::to_lowercase)
        .all(|wanted| rest.any(|c| c == wanted))
}

/// A completion before it is an item: what narrowing reads, without allocating for the
/// names of the model.
struct Candidate<'a> {
    label: Cow<'a, str>,
    kind: CompletionItemKind,
    detail: &'static str,
}

fn candidate<'a>(
    label: impl Into<Cow<'a, str>>,
    kind: CompletionItemKind,
    detail: &'static str,
) -> Candidate<'a> {
    Candidate {
        label: label.into(),
        kind,
        detail,
    }
}

/// Everything that fits the context of the line before the cursor.
fn candidates<'a>(a: &'a Analyzed, before: &str) -> Vec<Candidate<'a>> {
    let in_brackets = before
        .rfind('[')
        .is_some_and(|open| !before[open..].contains(']'));
    let symbols = &a.check.analysis.symbols;
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
        Context::Differential(prefix) => return differentials(symbols, prefix),
    }
    let mut items = units(symbols);
    if in_brackets {
        items.push(candidate(
            "sqrt",
            CompletionItemKind::FUNCTION,
            "unit square root",
        ));
        return items;
    }
    items.extend(words());
    items.extend(declared(symbols));
    items
}

/// After a `d`: the factors' equations and the keywords that begin so.
fn differentials<'a>(symbols: &'a [Symbol], prefix: &str) -> Vec<Candidate<'a>> {
    let mut items: Vec<Candidate> = symbols
        .iter()
        .filter(|s| s.kind == SymbolKind::Factor)
        .map(|s| {
            candidate(
                format!("d{}", s.name),
                CompletionItemKind::VARIABLE,
                "the factor's equation",
            )
        })
        .collect();
    items.extend(
        KEYWORDS
            .iter()
            .filter(|k| k.word.starts_with(prefix))
            .map(|k| candidate(k.word, CompletionItemKind::KEYWORD, k.summary)),
    );
    items
}

/// The time units and the declared units.
fn units(symbols: &[Symbol]) -> Vec<Candidate<'_>> {
    let declared_units = symbols
        .iter()
        .filter(|s| s.kind == SymbolKind::Unit)
        .map(|s| candidate(s.name.as_str(), CompletionItemKind::UNIT, "declared unit"));
    sdeck_units::TIME_UNITS
        .iter()
        .map(|u| candidate(*u, CompletionItemKind::UNIT, "time unit"))
        .chain(declared_units)
        .collect()
}

/// The words of the language: keywords, functions, figures and the built-in names.
fn words() -> Vec<Candidate<'static>> {
    let mut items: Vec<Candidate> = KEYWORDS
        .iter()
        .map(|k| candidate(k.word, CompletionItemKind::KEYWORD, k.summary))
        .collect();
    items.extend(
        Function::ALL
            .iter()
            .map(|f| candidate(f.name(), CompletionItemKind::FUNCTION, "function")),
    );
    items.extend(
        Figure::ALL
            .iter()
            .map(|f| candidate(f.keyword(), CompletionItemKind::PROPERTY, f.form())),
    );
    items.push(candidate(
        "t",
        CompletionItemKind::VARIABLE,
        "time, in clock units",
    ));
    items.push(candidate("pi", CompletionItemKind::CONSTANT, "π"));
    items.push(candidate(
        "dt",
        CompletionItemKind::KEYWORD,
        "drift differential",
    ));
    items
}

/// The names the model declares (its units aside), a shock with its differential.
fn declared(symbols: &[Symbol]) -> Vec<Candidate<'_>> {
    let mut items = Vec::new();
    for s in symbols {
        let (kind, detail) = match s.kind {
            SymbolKind::Param => (CompletionItemKind::CONSTANT, "param"),
            SymbolKind::Factor => (CompletionItemKind::VARIABLE, "factor"),
            SymbolKind::Shock => (CompletionItemKind::EVENT, "shock"),
            SymbolKind::Let => (CompletionItemKind::VARIABLE, "let"),
            SymbolKind::Unit => continue,
        };
        items.push(candidate(s.name.as_str(), kind, detail));
        if s.kind == SymbolKind::Shock {
            items.push(candidate(
                format!("d{}", s.name),
                CompletionItemKind::EVENT,
                "shock differential",
            ));
        }
    }
    items
}

fn item(c: Candidate) -> CompletionItem {
    CompletionItem {
        label: c.label.into_owned(),
        kind: Some(c.kind),
        detail: Some(c.detail.to_string()),
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
fn names<'a>(
    a: &'a Analyzed,
    kind: SymbolKind,
    item_kind: CompletionItemKind,
    detail: &'static str,
) -> Vec<Candidate<'a>> {
    a.check
        .analysis
        .symbols
        .iter()
        .filter(|s| s.kind == kind)
        .map(|s| candidate(s.name.as_str(), item_kind, detail))
        .collect()
}

#[cfg(test)]
mod tests {
    use super::{context, holds_in_order, typed_word, Context};

    #[test]
    fn the_typed_word_narrows_by_its_letters_in_order() {
        assert_eq!(typed_word("dx = kap"), "kap");
        assert_eq!(typed_word("dx = "), "");
        assert_eq!(typed_word("param s = 1 [1/"), "");
        assert_eq!(typed_word("  σ_lo"), "σ_lo");
        assert!(holds_in_order("kappa_12", "kap"));
        assert!(holds_in_order("kappa_12", "K12"));
        assert!(holds_in_order("σ_local", "Σl"));
        assert!(!holds_in_order("theta", "kap"));
        assert!(holds_in_order("anything", ""));
    }

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
