//! A hover as data: blocks of text, tables and code, rendered as Markdown or plain
//! text by their kind, and lines broken to the hover's width.

/// The widest line of a hover.
pub const COLUMNS: usize = 80;

/// A hover as blocks of text, tables and code, rendered as Markdown or as plain text by
/// their kind (never by reading the rendered text back).
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Doc {
    blocks: Vec<Block>,
}

#[derive(Clone, Debug, PartialEq)]
enum Block {
    /// Markdown lines, each ending with a newline; `**`, backticks and a line wrapped in
    /// `_` are their only marks.
    Text(String),
    /// A table; in plain text each row is its cells, a two-cell row as `label  value`,
    /// and the header is shown only when `header_in_plain`.
    Table {
        header: Vec<String>,
        rows: Vec<Vec<String>>,
        header_in_plain: bool,
    },
    /// The lines of a code block.
    Code(Vec<String>),
}

impl Doc {
    /// A hover of Markdown text alone.
    pub fn text(markdown: String) -> Doc {
        let mut doc = Doc::default();
        doc.push_text(markdown);
        doc
    }

    pub(super) fn push_text(&mut self, markdown: String) {
        self.blocks.push(Block::Text(markdown));
    }

    pub(super) fn push_table(
        &mut self,
        header: &[&str],
        rows: Vec<Vec<String>>,
        header_in_plain: bool,
    ) {
        self.blocks.push(Block::Table {
            header: header.iter().map(|h| h.to_string()).collect(),
            rows,
            header_in_plain,
        });
    }

    pub(super) fn push_code(&mut self, lines: Vec<String>) {
        self.blocks.push(Block::Code(lines));
    }

    pub fn markdown(&self) -> String {
        let mut s = String::new();
        for block in &self.blocks {
            match block {
                Block::Text(text) => s.push_str(text),
                Block::Table { header, rows, .. } => {
                    s.push_str(&format!("| {} |\n", header.join(" | ")));
                    s.push_str(&format!("|{}\n", "---|".repeat(header.len())));
                    for row in rows {
                        s.push_str(&format!("| {} |\n", row.join(" | ")));
                    }
                }
                Block::Code(lines) => {
                    s.push_str(&format!("```text\n{}\n```\n", lines.join("\n")));
                }
            }
        }
        s
    }

    /// Plain text: no emphasis, code marks or fences; a table row `label | value` becomes
    /// `label  value` in aligned columns.
    pub fn plain(&self) -> String {
        let mut out: Vec<String> = Vec::new();
        let cells = |cells: &[String]| match cells {
            [label, value] => format!("{label:<15} {value}"),
            _ => cells.join("  "),
        };
        for block in &self.blocks {
            match block {
                Block::Text(text) => out.extend(text.lines().map(without_marks)),
                Block::Table {
                    header,
                    rows,
                    header_in_plain,
                } => {
                    if *header_in_plain {
                        out.push(cells(header));
                    }
                    out.extend(rows.iter().map(|row| cells(row)));
                }
                Block::Code(lines) => {
                    out.extend(lines.iter().flat_map(|l| l.lines()).map(without_marks))
                }
            }
        }
        out.join("\n")
    }
}

/// A line of Markdown without its marks: no `**`, no backticks, no `_` around it.
fn without_marks(line: &str) -> String {
    let text = line.replace("**", "").replace('`', "");
    match text.strip_prefix('_').and_then(|t| t.strip_suffix('_')) {
        Some(inner) => inner.to_string(),
        None => text,
    }
}

/// Breaks the lines longer than `width` at spaces; a continuation is indented as its
/// line was, plus two spaces. A word longer than the width stays whole.
pub fn fit_columns(text: &str, width: usize) -> String {
    let mut out: Vec<String> = Vec::new();
    for line in text.lines() {
        if line.chars().count() <= width {
            out.push(line.to_string());
            continue;
        }
        let indent: String = line.chars().take_while(|c| *c == ' ').collect();
        let follow = format!("{indent}  ");
        let mut current = indent.clone();
        for word in line.trim_start().split(' ') {
            let fresh = current.trim().is_empty();
            let wanted = current.chars().count() + usize::from(!fresh) + word.chars().count();
            if !fresh && wanted > width {
                out.push(std::mem::replace(&mut current, follow.clone()));
            }
            if !current.trim().is_empty() {
                current.push(' ');
            }
            current.push_str(word);
        }
        out.push(current);
    }
    let mut joined = out.join("\n");
    if text.ends_with('\n') {
        joined.push('\n');
    }
    joined
}

#[cfg(test)]
mod doc_tests {
    use super::Doc;

    #[test]
    fn a_doc_renders_by_its_blocks_not_by_its_text() {
        let mut doc = Doc::text("**factor `r`** · x\n\n".to_string());
        doc.push_table(
            &["figure", "value"],
            vec![vec!["mean".into(), "0.03".into()]],
            false,
        );
        // Text that looks like a table row or a fence stays text.
        doc.push_text("\n| not | a row |\n_said_\n".to_string());
        doc.push_code(vec!["mean       E[r(t)] = `m`".into()]);
        assert_eq!(
            doc.markdown(),
            "**factor `r`** · x\n\n| figure | value |\n|---|---|\n| mean | 0.03 |\n\n\
             | not | a row |\n_said_\n```text\nmean       E[r(t)] = `m`\n```\n"
        );
        assert_eq!(
            doc.plain(),
            "factor r · x\n\nmean            0.03\n\n| not | a row |\nsaid\nmean       E[r(t)] = m"
        );
        let mut curve = Doc::default();
        curve.push_table(
            &["maturity", "price"],
            vec![vec!["1 year".into(), "0.97".into()]],
            true,
        );
        assert_eq!(curve.plain(), "maturity        price\n1 year          0.97");
    }
}
