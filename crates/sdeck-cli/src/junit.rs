//! The JUnit XML report: one test suite, one test case per checked file, failed when the
//! file has a finding that fails under its deny level.

use crate::check::Checked;

/// Escapes text for XML content and attribute values; characters XML 1.0 cannot hold
/// (control characters other than tab, line feed, carriage return) become `?`.
pub fn escape(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for ch in text.chars() {
        match ch {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&apos;"),
            '\t' | '\n' | '\r' => out.push(ch),
            c if (c as u32) < 0x20 || c == '\u{FFFE}' || c == '\u{FFFF}' => out.push('?'),
            c => out.push(c),
        }
    }
    out
}

fn finding_lines(c: &Checked, keep: impl Fn(&sdeck_diagnostics::Diagnostic) -> bool) -> String {
    let mut text = String::new();
    for (d, (start, _)) in c.diagnostics.iter().zip(&c.positions) {
        if keep(d) {
            text.push_str(&format!(
                "{}:{}:{}: {}[{}]: {}\n",
                c.source.path,
                start.0,
                start.1,
                d.severity.as_str(),
                d.rule,
                d.message
            ));
        }
    }
    text
}

/// The whole document.
pub fn report(checked: &[Checked]) -> String {
    let failures = checked.iter().filter(|c| c.failed()).count();
    let mut out = String::from("<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n");
    out.push_str(&format!(
        "<testsuites name=\"sdeck\" tests=\"{}\" failures=\"{failures}\" errors=\"0\">\n",
        checked.len()
    ));
    out.push_str(&format!(
        "  <testsuite name=\"sdeck check\" tests=\"{}\" failures=\"{failures}\" errors=\"0\" skipped=\"0\">\n",
        checked.len()
    ));
    for c in checked {
        let path = escape(&c.source.path);
        out.push_str(&format!(
            "    <testcase classname=\"sdeck.check\" name=\"{path}\" file=\"{path}\""
        ));
        let failing = c.diagnostics.iter().filter(|d| c.fails(d)).count();
        let others = finding_lines(c, |d| !c.fails(d));
        if failing == 0 && others.is_empty() {
            out.push_str("/>\n");
            continue;
        }
        out.push_str(">\n");
        if failing > 0 {
            let first = c
                .diagnostics
                .iter()
                .find(|d| c.fails(d))
                .map(|d| format!("{}: {}", d.rule, d.message))
                .unwrap_or_default();
            let summary = if failing == 1 {
                first
            } else {
                format!("{failing} findings; first {first}")
            };
            out.push_str(&format!(
                "      <failure message=\"{}\" type=\"sdeck\">{}</failure>\n",
                escape(&summary),
                escape(&finding_lines(c, |d| c.fails(d)))
            ));
        }
        if !others.is_empty() {
            out.push_str(&format!(
                "      <system-out>{}</system-out>\n",
                escape(&others)
            ));
        }
        out.push_str("    </testcase>\n");
    }
    out.push_str("  </testsuite>\n</testsuites>\n");
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn escapes_markup_and_control_characters() {
        assert_eq!(escape("a<b & \"c\"\u{0}"), "a&lt;b &amp; &quot;c&quot;?");
    }
}
