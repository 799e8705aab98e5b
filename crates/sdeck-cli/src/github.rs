//! Workflow annotation lines, one per finding:
//! `::error file=F,line=L,col=C,endLine=L2,endColumn=C2,title=RULE::message`.

use crate::check::Checked;
use sdeck_diagnostics::Severity;

/// The annotation command for a severity: hints and infos are notices.
fn command(severity: Severity) -> &'static str {
    match severity {
        Severity::Error => "error",
        Severity::Warning => "warning",
        Severity::Info | Severity::Hint => "notice",
    }
}

/// Escapes the message part: `%`, carriage return and line feed.
pub fn escape_data(text: &str) -> String {
    text.replace('%', "%25")
        .replace('\r', "%0D")
        .replace('\n', "%0A")
}

/// Escapes a property value: as the message, plus `:` and `,`, which separate
/// properties.
pub fn escape_property(text: &str) -> String {
    escape_data(text).replace(':', "%3A").replace(',', "%2C")
}

/// All the lines of a report, each ending with a newline.
pub fn report(checked: &[Checked]) -> String {
    let mut out = String::new();
    for c in checked {
        let file = escape_property(&c.source.path);
        for (d, (start, end)) in c.diagnostics.iter().zip(&c.positions) {
            // The message alone: the annotation's title names the rule, and the help is
            // one `sdeck explain` or the human report away (repeated here, it doubled
            // the height of every annotation).
            let message = &d.message;
            out.push_str(&format!(
                "::{} file={file},line={},col={},endLine={},endColumn={},title={}::{}\n",
                command(d.severity),
                start.0,
                start.1,
                end.0,
                end.1,
                escape_property(d.rule.name()),
                escape_data(message)
            ));
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn escapes_follow_the_annotation_syntax() {
        assert_eq!(escape_data("50% of 2\nlines"), "50%25 of 2%0Alines");
        assert_eq!(escape_property("a,b:c%"), "a%2Cb%3Ac%25");
    }
}
