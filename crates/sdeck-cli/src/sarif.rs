//! The SARIF 2.1.0 report (OASIS Static Analysis Results Interchange Format): the rule
//! catalogue as the tool's rules, every finding as a result with rule, level and place.

use crate::check::Checked;
use crate::render;
use sdeck_diagnostics::{rules, Rule, Severity};
use serde_json::{json, Value};

/// The schema URI of SARIF 2.1.0, as published with the OASIS standard.
pub const SCHEMA_URI: &str =
    "https://docs.oasis-open.org/sarif/sarif/v2.1.0/errata01/os/schemas/sarif-schema-2.1.0.json";

/// SARIF has four levels; hints and infos are both `note`.
pub fn level(severity: Severity) -> &'static str {
    match severity {
        Severity::Error => "error",
        Severity::Warning => "warning",
        Severity::Info | Severity::Hint => "note",
    }
}

/// The text of a rule's "Finds" section, or its summary when there is none.
fn what_it_does(rule: &Rule) -> String {
    let mut lines = rule
        .explanation
        .lines()
        .skip_while(|l| !l.starts_with("## Finds"));
    if lines.next().is_none() {
        return rule.summary.to_string();
    }
    let paragraph: Vec<&str> = lines
        .skip_while(|l| l.trim().is_empty())
        .take_while(|l| !l.trim().is_empty() && !l.starts_with('#'))
        .map(str::trim)
        .collect();
    if paragraph.is_empty() {
        rule.summary.to_string()
    } else {
        paragraph.join(" ")
    }
}

/// The descriptor of one rule: id, short and full descriptions, help, default level.
fn rule_descriptor(rule: &Rule) -> Value {
    json!({
        "id": rule.name,
        "name": pascal_case(rule.name),
        "shortDescription": {"text": rule.summary},
        "fullDescription": {"text": what_it_does(rule), "markdown": rule.explanation.trim()},
        "help": {"text": render::explain_text(rule), "markdown": render::rule_markdown(rule)},
        "defaultConfiguration": {"level": level(rule.default_severity)},
    })
}

/// `feller-condition` → `FellerCondition`: SARIF's `name` is an identifier-like form.
fn pascal_case(kebab: &str) -> String {
    kebab
        .split('-')
        .map(|word| {
            let mut chars = word.chars();
            match chars.next() {
                Some(first) => first.to_uppercase().chain(chars).collect::<String>(),
                None => String::new(),
            }
        })
        .collect()
}

/// A path as a URI reference: forward slashes, and the characters a URI cannot hold
/// written as `%XX` (RFC 3986). Absolute paths become `file://` URIs.
pub fn path_to_uri(path: &str) -> String {
    let slashed = path.replace('\\', "/");
    let mut out = String::with_capacity(slashed.len());
    for byte in slashed.bytes() {
        let keep = byte.is_ascii_alphanumeric() || b"-._~/!$&'()*+,;=@".contains(&byte);
        if keep {
            out.push(char::from(byte));
        } else {
            out.push_str(&format!("%{byte:02X}"));
        }
    }
    if slashed.starts_with('/') {
        format!("file://{out}")
    } else {
        out
    }
}

fn region(start: (u32, u32), end: (u32, u32)) -> Value {
    json!({
        "startLine": start.0,
        "startColumn": start.1,
        "endLine": end.0,
        "endColumn": end.1,
    })
}

/// The whole SARIF log of one run.
pub fn report(checked: &[Checked]) -> Value {
    let mut results = Vec::new();
    for c in checked {
        let uri = path_to_uri(&c.source.path);
        let index = sdeck_syntax::LineIndex::new(&c.source.text);
        for (d, (start, end)) in c.diagnostics.iter().zip(&c.positions) {
            let rule_index = rules::ALL.iter().position(|r| r.name == d.rule);
            let mut message = d.message.clone();
            if let Some(help) = &d.help {
                message.push_str(&format!(" (help: {help})"));
            }
            let related: Vec<Value> = d
                .related
                .iter()
                .enumerate()
                .map(|(i, label)| {
                    let (s, e) = render::span_position(&c.source.text, &index, &label.span);
                    json!({
                        "id": i,
                        "message": {"text": label.message},
                        "physicalLocation": {
                            "artifactLocation": {"uri": uri},
                            "region": region(s, e),
                        }
                    })
                })
                .collect();
            let mut result = json!({
                "ruleId": d.rule,
                "level": level(d.severity),
                "message": {"text": message},
                "locations": [{
                    "physicalLocation": {
                        "artifactLocation": {"uri": uri},
                        "region": region(*start, *end),
                    }
                }],
            });
            if let (Some(i), Some(object)) = (rule_index, result.as_object_mut()) {
                object.insert("ruleIndex".to_string(), json!(i));
            }
            if !related.is_empty() {
                if let Some(object) = result.as_object_mut() {
                    object.insert("relatedLocations".to_string(), Value::Array(related));
                }
            }
            results.push(result);
        }
    }
    let artifacts: Vec<Value> = checked
        .iter()
        .map(|c| json!({"location": {"uri": path_to_uri(&c.source.path)}}))
        .collect();
    json!({
        "$schema": SCHEMA_URI,
        "version": "2.1.0",
        "runs": [{
            "tool": {
                "driver": {
                    "name": "sdeck",
                    "version": env!("CARGO_PKG_VERSION"),
                    "semanticVersion": env!("CARGO_PKG_VERSION"),
                    "rules": rules::ALL.iter().map(|r| rule_descriptor(r)).collect::<Vec<_>>(),
                }
            },
            "columnKind": "unicodeCodePoints",
            "artifacts": artifacts,
            "results": results,
        }]
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn uris_escape_what_a_uri_cannot_hold() {
        assert_eq!(path_to_uri("models/rate.sde"), "models/rate.sde");
        assert_eq!(path_to_uri("my models/θ.sde"), "my%20models/%CE%B8.sde");
        assert_eq!(path_to_uri("/srv/a b.sde"), "file:///srv/a%20b.sde");
        assert_eq!(path_to_uri("a\\b.sde"), "a/b.sde");
    }

    #[test]
    fn names_are_pascal_case() {
        assert_eq!(pascal_case("feller-condition"), "FellerCondition");
        assert_eq!(pascal_case("syntax"), "Syntax");
    }

    #[test]
    fn every_rule_has_a_full_description() {
        for rule in rules::ALL {
            let text = what_it_does(rule);
            assert!(!text.is_empty() && !text.starts_with('#'), "{}", rule.name);
        }
    }
}
