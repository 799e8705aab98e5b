//! The SARIF 2.1.0 report (OASIS Static Analysis Results Interchange Format): the rule
//! catalogue as the tool's rules, every finding as a result with rule, level and place.

use crate::check::Checked;
use crate::render;
use sdeck_diagnostics::{rules, Rule, RuleId, Severity};
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
    let mut lines = sdeck_checks::manual(rule.id)
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
        "fullDescription": {
            "text": what_it_does(rule),
            "markdown": sdeck_checks::manual(rule.id).explanation.trim(),
        },
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

/// The name of the folder relative artifact paths are resolved against: the folder
/// `sdeck check` ran in, given in the run's `originalUriBaseIds`.
pub const ROOT_BASE_ID: &str = "SRCROOT";

/// The location of an artifact: its URI, relative to [`ROOT_BASE_ID`] unless absolute.
fn artifact_location(uri: &str) -> Value {
    if uri.starts_with("file://") {
        json!({"uri": uri})
    } else {
        json!({"uri": uri, "uriBaseId": ROOT_BASE_ID})
    }
}

/// The folder the run started in, as a `file://` URI ending with `/`.
fn root_uri() -> Option<String> {
    let cwd = std::env::current_dir().ok()?;
    let mut uri = path_to_uri(&cwd.to_string_lossy());
    if !uri.starts_with("file://") {
        return None;
    }
    if !uri.ends_with('/') {
        uri.push('/');
    }
    Some(uri)
}

/// The fingerprint that follows a finding across commits: a hash of the rule, the file,
/// the text of the finding's first line with its white space trimmed (not its number,
/// which moves when lines are added above), and how many times the same rule fired on a
/// line of the same text earlier in the file.
fn fingerprint(rule: &str, uri: &str, line_text: &str, occurrence: usize) -> String {
    use sha2::{Digest, Sha256};
    let mut hasher = Sha256::new();
    for part in [rule, uri, line_text.trim(), &occurrence.to_string()] {
        hasher.update(part.as_bytes());
        hasher.update([0u8]);
    }
    hasher.finalize()[..16]
        .iter()
        .map(|b| format!("{b:02x}"))
        .collect()
}

fn region(start: (u32, u32), end: (u32, u32)) -> Value {
    json!({
        "startLine": start.0,
        "startColumn": start.1,
        "endLine": end.0,
        "endColumn": end.1,
    })
}

/// One SARIF result per finding, made as the log is written.
fn results(checked: &[Checked]) -> impl Iterator<Item = Value> + '_ {
    checked.iter().flat_map(|c| {
        let uri = path_to_uri(&c.source.path);
        let index = sdeck_syntax::LineIndex::new(&c.source.text);
        let lines: Vec<&str> = sdeck_syntax::lines::lines(&c.source.text)
            .map(|l| l.content)
            .collect();
        let mut seen: std::collections::HashMap<(RuleId, &str), usize> =
            std::collections::HashMap::new();
        c.diagnostics
            .iter()
            .zip(&c.positions)
            .map(move |(d, (start, end))| {
                let line_text = lines
                    .get(start.0.saturating_sub(1) as usize)
                    .copied()
                    .unwrap_or("");
                let occurrence = seen.entry((d.rule, line_text.trim())).or_insert(0);
                let print = fingerprint(d.rule.name(), &uri, line_text, *occurrence);
                *occurrence += 1;
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
                                "artifactLocation": artifact_location(&uri),
                                "region": region(s, e),
                            }
                        })
                    })
                    .collect();
                let mut result = json!({
                    "ruleId": d.rule.name(),
                    "level": level(d.severity),
                    "message": {"text": message},
                    "locations": [{
                        "physicalLocation": {
                            "artifactLocation": artifact_location(&uri),
                            "region": region(*start, *end),
                        }
                    }],
                    "partialFingerprints": {"findingHash/v1": print},
                });
                if let Some(object) = result.as_object_mut() {
                    object.insert("ruleIndex".to_string(), json!(d.rule.index()));
                    if !related.is_empty() {
                        object.insert("relatedLocations".to_string(), Value::Array(related));
                    }
                }
                result
            })
    })
}

/// The whole SARIF log of one run. The results are streamed: each is made as it is
/// written, so memory does not grow with the number of findings.
pub fn report(checked: &[Checked]) -> impl serde::Serialize + '_ {
    let artifacts: Vec<Value> = checked
        .iter()
        .map(|c| json!({"location": artifact_location(&path_to_uri(&c.source.path))}))
        .collect();
    let mut base_ids = serde_json::Map::new();
    if let Some(root) = root_uri() {
        base_ids.insert(ROOT_BASE_ID.to_string(), json!({"uri": root}));
    }
    #[derive(serde::Serialize)]
    #[serde(rename_all = "camelCase", bound = "")]
    struct Run<I: Iterator<Item = Value>> {
        tool: Value,
        original_uri_base_ids: serde_json::Map<String, Value>,
        column_kind: &'static str,
        artifacts: Vec<Value>,
        results: render::Streamed<I>,
    }
    #[derive(serde::Serialize)]
    #[serde(bound = "")]
    struct Log<I: Iterator<Item = Value>> {
        #[serde(rename = "$schema")]
        schema: &'static str,
        version: &'static str,
        runs: [Run<I>; 1],
    }
    Log {
        schema: SCHEMA_URI,
        version: "2.1.0",
        runs: [Run {
            tool: json!({
                "driver": {
                    "name": "sdeck",
                    "version": env!("CARGO_PKG_VERSION"),
                    "semanticVersion": env!("CARGO_PKG_VERSION"),
                    "rules": rules::ALL.iter().map(|r| rule_descriptor(r)).collect::<Vec<_>>(),
                }
            }),
            original_uri_base_ids: base_ids,
            column_kind: "unicodeCodePoints",
            artifacts,
            results: render::Streamed::new(results(checked)),
        }],
    }
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
    fn a_fingerprint_ignores_the_line_number_and_indentation_but_not_the_text() {
        let a = fingerprint("unused", "m.sde", "param a = 1", 0);
        assert_eq!(a, fingerprint("unused", "m.sde", "   param a = 1  ", 0));
        assert_ne!(a, fingerprint("unused", "m.sde", "param a = 2", 0));
        assert_ne!(a, fingerprint("unused", "m.sde", "param a = 1", 1));
        assert_ne!(a, fingerprint("unused", "n.sde", "param a = 1", 0));
        assert_eq!(a.len(), 32);
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
