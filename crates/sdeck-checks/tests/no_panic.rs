//! The parser and the checker never panic: on random text, on the demo models mutated
//! (byte ranges deleted, inserted, duplicated; brackets, NUL and Greek letters sprinkled
//! in), and on hostile shapes (10 000 nested parentheses, a 10 MB line). Every diagnostic
//! must also lie inside the text, so that the faces can place it.

use proptest::prelude::*;
use sdeck_checks::{check, RuleSettings};
use std::path::{Path, PathBuf};

fn demo_models() -> Vec<String> {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("../../demo-models");
    let mut files: Vec<PathBuf> = Vec::new();
    for dir in [root.clone(), root.join("flawed")] {
        if let Ok(entries) = std::fs::read_dir(&dir) {
            files.extend(
                entries
                    .filter_map(Result::ok)
                    .map(|e| e.path())
                    .filter(|p| p.extension().is_some_and(|x| x == "sde")),
            );
        }
    }
    files.sort();
    let texts: Vec<String> = files
        .iter()
        .filter_map(|p| std::fs::read_to_string(p).ok())
        .collect();
    assert!(texts.len() >= 8, "the demo models were not found");
    texts
}

/// Runs the whole analysis and checks that every span lies inside the text on
/// character boundaries.
fn check_survives(text: &str) {
    let result = check(text, "fuzzed", &RuleSettings::default());
    for d in &result.diagnostics {
        assert!(
            d.span.start <= d.span.end && d.span.end <= text.len(),
            "{} span {:?} outside a text of {} bytes",
            d.rule,
            d.span,
            text.len()
        );
        assert!(
            text.is_char_boundary(d.span.start) && text.is_char_boundary(d.span.end),
            "{} span {:?} splits a character",
            d.rule,
            d.span
        );
        for related in &d.related {
            assert!(
                related.span.end <= text.len(),
                "{} related span outside the text",
                d.rule
            );
        }
    }
}

/// One edit of a byte string.
#[derive(Clone, Debug)]
enum Mutation {
    Delete { at: usize, len: usize },
    Insert { at: usize, text: String },
    Duplicate { at: usize, len: usize, to: usize },
}

/// Pieces that stress the grammar: brackets, operators, NUL, Greek and other non-ASCII
/// letters, keywords, differentials, suffixes, line ends.
fn piece() -> impl Strategy<Value = String> {
    prop_oneof![
        Just("(".to_string()),
        Just(")".to_string()),
        Just("[".to_string()),
        Just("]".to_string()),
        Just("\0".to_string()),
        Just("κ".to_string()),
        Just("θσ".to_string()),
        Just("\u{feff}".to_string()),
        Just("\r\n".to_string()),
        Just("\n".to_string()),
        Just("#".to_string()),
        Just(" dt ".to_string()),
        Just(" dW".to_string()),
        Just("^".to_string()),
        Just("^(-1/2)".to_string()),
        Just("/0".to_string()),
        Just("1e308".to_string()),
        Just("-1e-320".to_string()),
        Just("%".to_string()),
        Just("bp".to_string()),
        Just("inf".to_string()),
        Just("= ".to_string()),
        Just("\nparam ".to_string()),
        Just("\nfactor x = ".to_string()),
        Just("\nexpect mean(".to_string()),
        Just("\ncorr W W = ".to_string()),
        Just("\nclock ".to_string()),
        Just("# sdeck: quiet ".to_string()),
        Just("# sdeck: quiet-begin unused".to_string()),
        "[a-zA-Z0-9_ .,+*/=<>()\\[\\]-]{1,12}",
        any::<char>().prop_map(|c| c.to_string()),
    ]
}

fn mutation() -> impl Strategy<Value = Mutation> {
    prop_oneof![
        (any::<usize>(), 0usize..40).prop_map(|(at, len)| Mutation::Delete { at, len }),
        (any::<usize>(), piece()).prop_map(|(at, text)| Mutation::Insert { at, text }),
        (any::<usize>(), 0usize..80, any::<usize>())
            .prop_map(|(at, len, to)| Mutation::Duplicate { at, len, to }),
    ]
}

/// Applies the edits to the bytes of `text`; the result is read as UTF-8 with bad bytes
/// replaced, as the CLI reads files.
fn mutate(text: &str, mutations: &[Mutation]) -> String {
    let mut bytes = text.as_bytes().to_vec();
    for m in mutations {
        let n = bytes.len();
        match m {
            Mutation::Delete { at, len } => {
                let start = if n == 0 { 0 } else { at % n };
                let end = (start + len).min(n);
                bytes.drain(start..end);
            }
            Mutation::Insert { at, text } => {
                let at = at % (n + 1);
                bytes.splice(at..at, text.bytes());
            }
            Mutation::Duplicate { at, len, to } => {
                let start = if n == 0 { 0 } else { at % n };
                let end = (start + len).min(n);
                let copy: Vec<u8> = bytes
                    .get(start..end)
                    .map(<[u8]>::to_vec)
                    .unwrap_or_default();
                let to = to % (bytes.len() + 1);
                bytes.splice(to..to, copy);
            }
        }
    }
    String::from_utf8_lossy(&bytes).into_owned()
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 192, ..ProptestConfig::default() })]

    #[test]
    fn mutated_demo_models_never_panic(
        which in any::<usize>(),
        mutations in prop::collection::vec(mutation(), 1..12),
    ) {
        let models = demo_models();
        let base = models.get(which % models.len()).cloned().unwrap_or_default();
        check_survives(&mutate(&base, &mutations));
    }

    #[test]
    fn random_text_never_panics(text in "\\PC{0,400}") {
        check_survives(&text);
    }

    #[test]
    fn random_statements_never_panic(pieces in prop::collection::vec(piece(), 0..60)) {
        check_survives(&pieces.concat());
    }
}

/// The stack the CLI gives each checking thread (crates/sdeck-cli/src/check.rs,
/// `CHECK_STACK_BYTES`): hostile shapes are checked with the same.
const FACE_STACK_BYTES: usize = 256 << 20;

/// Runs `check_survives` on a thread with the faces' stack; a panic fails the test.
fn check_survives_on_face_stack(text: String) {
    let outcome = std::thread::Builder::new()
        .stack_size(FACE_STACK_BYTES)
        .spawn(move || check_survives(&text))
        .map(|handle| handle.join());
    match outcome {
        Ok(Ok(())) => {}
        Ok(Err(panic)) => std::panic::resume_unwind(panic),
        Err(e) => panic!("cannot start a checking thread: {e}"),
    }
}

#[test]
fn ten_thousand_nested_parentheses() {
    let deep = format!(
        "param a = 1\nshock W\nfactor x = 0\ndx = {}a{} dt + a dW\n",
        "(".repeat(10_000),
        ")".repeat(10_000)
    );
    check_survives_on_face_stack(deep);
    let unclosed = format!("let l = {}\n", "(".repeat(10_000));
    check_survives_on_face_stack(unclosed);
    let brackets = format!("param a = 1 {}\n", "[".repeat(10_000));
    check_survives_on_face_stack(brackets);
    let powers = format!("let p = 2{}\n", "^2".repeat(10_000));
    check_survives_on_face_stack(powers);
    let minus = format!("let m = {}1\n", "-".repeat(10_000));
    check_survives_on_face_stack(minus);
}

#[test]
fn a_ten_megabyte_line() {
    let long_sum = format!("let s = 1{}\n", " + 1".repeat(2_500_000));
    assert!(long_sum.len() >= 10_000_000);
    check_survives_on_face_stack(long_sum);
    let long_comment = format!("# {}\nparam a = 1\n", "κ".repeat(5_000_000));
    check_survives_on_face_stack(long_comment);
    let long_name = format!("param {} = 1\n", "a".repeat(10_000_000));
    check_survives_on_face_stack(long_name);
}

#[test]
fn odd_whole_files() {
    for text in [
        "",
        "\0",
        "\u{feff}",
        "\n\n\n",
        "\r\n\r\n",
        "#",
        "# sdeck: quiet",
        "# sdeck:",
        "dx =",
        "d = 1 dt",
        "factor x = 1e999\ndx = x dt",
        "param a = 1 [year^(1/0)]",
        "param a = 1 [year^(99999999999999999999/1)]",
        "horizon -1e308 year",
        "expect halflife(x) in [inf, -inf]",
    ] {
        check_survives(text);
    }
}
