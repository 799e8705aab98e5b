//! The words of the language, each listed once: keywords, built-in functions and
//! built-in names. The grammar, the splitter, reserved names, completion, the semantic
//! tokens and the docs read these tables; tests compare them with `grammar/sdeck.pest`,
//! docs/language.md and the editor grammar `editors/vscode/syntaxes/sdeck.tmLanguage.json`.

/// A keyword of the language: never a name.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Keyword {
    /// The word as written.
    pub word: &'static str,
    /// Whether a line starting with it opens a statement.
    pub starts_statement: bool,
    /// One line on what it does, for completion and the docs.
    pub summary: &'static str,
}

const fn statement(word: &'static str, summary: &'static str) -> Keyword {
    Keyword {
        word,
        starts_statement: true,
        summary,
    }
}

const fn inner(word: &'static str, summary: &'static str) -> Keyword {
    Keyword {
        word,
        starts_statement: false,
        summary,
    }
}

/// Every keyword, statement keywords first in the order a model usually declares them.
pub const KEYWORDS: [Keyword; 14] = [
    statement("model", "names the model"),
    statement("clock", "the time unit every value is converted to"),
    statement("horizon", "how far ahead figures are derived"),
    statement(
        "unit",
        "declares a unit of its own (a currency, an index point)",
    ),
    statement(
        "param",
        "declares a parameter with its value, unit and bound",
    ),
    statement(
        "factor",
        "declares a factor with its start value, unit and bound",
    ),
    statement("shock", "declares one or more Brownian shocks"),
    statement("corr", "the correlation of two shocks"),
    statement("let", "names an expression used in equations"),
    statement("expect", "pins a derived figure to a value or a range"),
    statement("measure", "under which measure the drifts are written"),
    statement("discount", "the short rate that discounts"),
    inner("in", "a range: `in [a, b]`"),
    inner("inf", "infinity, in a bound"),
];

/// The keywords that open a statement, in the order of [`KEYWORDS`].
pub const STATEMENT_KEYWORDS: [&str; 12] = {
    let mut out = [""; 12];
    let mut next = 0;
    let mut i = 0;
    while i < KEYWORDS.len() {
        if KEYWORDS[i].starts_statement {
            out[next] = KEYWORDS[i].word;
            next += 1;
        }
        i += 1;
    }
    assert!(
        next == out.len(),
        "STATEMENT_KEYWORDS has one entry per statement keyword"
    );
    out
};

/// The built-in functions, in the order of the semantic layer's `Function::ALL`.
pub const FUNCTION_NAMES: [&str; 10] = [
    "exp", "log", "sqrt", "abs", "min", "max", "sin", "cos", "step", "ramp",
];

/// The names the language defines that are not functions: time, π and the drift
/// differential.
pub const BUILT_IN_NAMES: [&str; 3] = ["t", "pi", "dt"];

/// Names that can never be declared: the built-in names and the functions.
pub const RESERVED_NAMES: [&str; 13] = {
    let mut out = [""; 13];
    let mut i = 0;
    while i < BUILT_IN_NAMES.len() {
        out[i] = BUILT_IN_NAMES[i];
        i += 1;
    }
    let mut j = 0;
    while j < FUNCTION_NAMES.len() {
        out[i + j] = FUNCTION_NAMES[j];
        j += 1;
    }
    assert!(
        i + j == out.len(),
        "RESERVED_NAMES holds the built-ins and the functions"
    );
    out
};

/// Whether `word` is a keyword.
pub fn is_keyword(word: &str) -> bool {
    KEYWORDS.iter().any(|k| k.word == word)
}

/// Whether `word` is a keyword that opens a statement.
pub fn is_statement_keyword(word: &str) -> bool {
    STATEMENT_KEYWORDS.contains(&word)
}

/// Whether `name` is a built-in function.
pub fn is_function(name: &str) -> bool {
    FUNCTION_NAMES.contains(&name)
}

/// Whether `name` can never be declared (a built-in name or a function).
pub fn is_reserved(name: &str) -> bool {
    RESERVED_NAMES.contains(&name)
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::collections::BTreeSet;

    const GRAMMAR: &str = include_str!("../../../grammar/sdeck.pest");

    /// The body of the grammar rule `name = ... }`, comments removed.
    fn rule_body(name: &str) -> String {
        let start = GRAMMAR
            .lines()
            .position(|line| {
                line.split_whitespace().next() == Some(name)
                    && line.split_whitespace().nth(1) == Some("=")
            })
            .unwrap_or_else(|| panic!("the grammar has a rule `{name}`"));
        let mut body = String::new();
        for line in GRAMMAR.lines().skip(start) {
            let code = line.split("//").next().unwrap_or("");
            body.push_str(code);
            body.push('\n');
            if code.trim_end().ends_with('}') {
                break;
            }
        }
        body
    }

    /// The string literals of a piece of grammar.
    fn literals(body: &str) -> BTreeSet<String> {
        body.split('"')
            .skip(1)
            .step_by(2)
            .map(str::to_string)
            .collect()
    }

    #[test]
    fn the_grammar_keyword_rule_lists_exactly_the_table() {
        let in_grammar = literals(&rule_body("keyword"));
        let in_table: BTreeSet<String> = KEYWORDS.iter().map(|k| k.word.to_string()).collect();
        assert_eq!(in_grammar, in_table);
    }

    #[test]
    fn every_statement_keyword_has_its_grammar_rule_and_statement() {
        let statement_rule = rule_body("statement");
        for word in STATEMENT_KEYWORDS {
            let kw_rule = format!("kw_{word}");
            assert_eq!(
                literals(&rule_body(&kw_rule)),
                BTreeSet::from([word.to_string()]),
                "{kw_rule}"
            );
            assert!(
                statement_rule.contains(&format!("{word}_stmt")),
                "`statement` in the grammar has no `{word}_stmt`"
            );
        }
        // `in` has a rule of its own too; `inf` is part of `infinity`.
        assert_eq!(literals(&rule_body("kw_in")), BTreeSet::from(["in".into()]));
        assert!(literals(&rule_body("infinity")).contains("inf"));
    }

    #[test]
    fn every_kw_rule_of_the_grammar_is_a_keyword_of_the_table() {
        for line in GRAMMAR.lines() {
            let Some(first) = line.split_whitespace().next() else {
                continue;
            };
            if let Some(word) = first.strip_prefix("kw_") {
                assert!(
                    is_keyword(word),
                    "the grammar's `{first}` is not in KEYWORDS"
                );
            }
        }
    }

    /// The words between backticks in the row of docs/language.md's table of reserved
    /// words that starts with `| KIND |`.
    fn documented_words(kind: &str) -> Vec<String> {
        let docs = include_str!("../../../docs/language.md");
        let row = docs
            .lines()
            .find(|line| line.starts_with(&format!("| {kind} |")))
            .unwrap_or_else(|| panic!("docs/language.md has a row `{kind}`"));
        let words = row.trim_end_matches('|').rsplit('|').next().unwrap_or("");
        words
            .split('`')
            .skip(1)
            .step_by(2)
            .flat_map(str::split_whitespace)
            .map(str::to_string)
            .collect()
    }

    #[test]
    fn the_docs_list_the_words_of_the_tables() {
        assert_eq!(documented_words("statement keywords"), STATEMENT_KEYWORDS);
        let others: Vec<&str> = KEYWORDS
            .iter()
            .filter(|k| !k.starts_statement)
            .map(|k| k.word)
            .collect();
        assert_eq!(documented_words("other keywords"), others);
        assert_eq!(documented_words("built-in names"), BUILT_IN_NAMES);
        assert_eq!(documented_words("functions"), FUNCTION_NAMES);
    }

    /// The alternatives of the first `(a|b|c)` group of the editor grammar's pattern that
    /// contains `marker`.
    fn editor_alternatives(marker: &str) -> BTreeSet<String> {
        let grammar = include_str!("../../../editors/vscode/syntaxes/sdeck.tmLanguage.json");
        let line = grammar
            .lines()
            .find(|l| l.contains("\"match\"") && l.contains(marker))
            .unwrap_or_else(|| panic!("the editor grammar has a pattern with `{marker}`"));
        let open = line.find('(').map_or(0, |i| i + 1);
        let close = line[open..].find(')').map_or(line.len(), |i| open + i);
        line[open..close].split('|').map(str::to_string).collect()
    }

    #[test]
    fn the_editor_grammar_colours_every_word_of_the_tables() {
        let keywords: BTreeSet<String> = KEYWORDS
            .iter()
            .map(|k| k.word.to_string())
            .filter(|w| w != "inf")
            .collect();
        assert_eq!(editor_alternatives("model|clock"), keywords);
        let callables: BTreeSet<String> = FUNCTION_NAMES
            .iter()
            .map(|f| f.to_string())
            .chain(
                crate::ast::Figure::ALL
                    .iter()
                    .map(|f| f.keyword().to_string()),
            )
            .collect();
        assert_eq!(editor_alternatives("exp|log"), callables);
        // `inf` is coloured as a constant, beside the built-in names.
        let constants = editor_alternatives("t|pi");
        assert!(
            constants.contains("inf") && constants.contains("pi"),
            "{constants:?}"
        );
    }

    #[test]
    fn the_derived_lists_follow_the_table() {
        assert_eq!(STATEMENT_KEYWORDS[0], "model");
        assert_eq!(STATEMENT_KEYWORDS[11], "discount");
        assert!(is_statement_keyword("factor"));
        assert!(!is_statement_keyword("in"));
        assert!(is_keyword("inf"));
        assert!(!is_keyword("state"));
        assert_eq!(&RESERVED_NAMES[..3], &BUILT_IN_NAMES);
        assert_eq!(&RESERVED_NAMES[3..], &FUNCTION_NAMES);
        assert!(is_reserved("ramp") && is_reserved("pi") && !is_reserved("kappa"));
        assert!(is_function("sqrt") && !is_function("t"));
        let distinct: BTreeSet<&str> = KEYWORDS
            .iter()
            .map(|k| k.word)
            .chain(RESERVED_NAMES)
            .collect();
        assert_eq!(distinct.len(), KEYWORDS.len() + RESERVED_NAMES.len());
    }
}
