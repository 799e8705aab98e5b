//! Declared names and their uses, for go-to-definition, references and rename.

use sdeck_diagnostics::Span;

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum SymbolKind {
    Unit,
    Param,
    Factor,
    Shock,
    Let,
}

impl SymbolKind {
    pub fn as_str(self) -> &'static str {
        match self {
            SymbolKind::Unit => "unit",
            SymbolKind::Param => "param",
            SymbolKind::Factor => "factor",
            SymbolKind::Shock => "shock",
            SymbolKind::Let => "let",
        }
    }
}

/// A declared name.
#[derive(Clone, Debug, PartialEq)]
pub struct Symbol {
    pub name: String,
    pub kind: SymbolKind,
    pub name_span: Span,
    pub statement_span: Span,
}

/// A use of a declared name; `declaration` is the span of the declared name.
#[derive(Clone, Debug, PartialEq)]
pub struct Reference {
    /// The span of the name as used (for `dX` and `dW`, the span of `X` or `W`).
    pub span: Span,
    pub name: String,
    pub declaration: Span,
}
