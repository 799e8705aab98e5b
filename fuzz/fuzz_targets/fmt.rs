//! The formatter never loses text or meaning: when it formats, the result formats to
//! itself, keeps every comment, and means what the input meant (the resolved model
//! without positions). It never refuses its own output: a refusal is a formatter
//! defect the fuzzer should report.
#![no_main]

use libfuzzer_sys::fuzz_target;
use sdeck_format::{format, Outcome};

fn comments(text: &str) -> Vec<String> {
    sdeck_syntax::parse(text)
        .comments
        .iter()
        .map(|c| c.text.trim_end().to_string())
        .collect()
}

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    match format(text) {
        Outcome::Formatted(out) => {
            assert_eq!(format(&out), Outcome::Formatted(out.clone()), "not idempotent");
            assert_eq!(comments(text), comments(&out), "a comment changed");
            let before = sdeck_semantics::meaning(&sdeck_semantics::analyze(text, "m").model);
            let after = sdeck_semantics::meaning(&sdeck_semantics::analyze(&out, "m").model);
            assert_eq!(before, after, "the meaning changed:\n{out}");
        }
        Outcome::SyntaxErrors { count } => assert!(count > 0),
        Outcome::Refused { reason } => panic!("the formatter refused its own output: {reason}"),
    }
});
