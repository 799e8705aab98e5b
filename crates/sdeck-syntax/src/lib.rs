//! The syntax layer of sdeck: a parser that never gives up on a file.
//!
//! Layout: [`split`] cuts a file into statements; [`parse`](parse()) parses each with the
//! pest grammar in `grammar/sdeck.pest` and builds the tree of [`ast`], every node with a
//! byte span; [`vocabulary`] lists the words of the language once; [`line_index`]
//! converts spans to lines and columns at the edges. This crate does no IO and knows
//! nothing of names, units or meaning.
//!
//! ```
//! use sdeck_syntax::ast::StatementKind;
//! let file = sdeck_syntax::parse("shock W\nfactor x = 1\ndx = -0.5 * x dt + 0.2 dW\n");
//! assert!(file.diagnostics.is_empty());
//! assert!(matches!(file.statements[2].kind, StatementKind::Equation(_)));
//! ```

pub mod ast;
pub mod line_index;
pub mod lines;
pub mod numbers;
mod parse;
pub mod split;
pub mod vocabulary;
pub mod walk;

pub use line_index::{Encoding, LineCol, LineIndex};
pub use parse::{
    parse, MAX_FILE_BYTES, MAX_NESTING, MAX_NODES, MAX_STATEMENT_BYTES, RESERVED_NAMES,
};
