//! The whole `check` analysis (names, units, calculus, derived checks, suppressions)
//! never panics; every diagnostic's span and every fix's edit lie inside the text on
//! character boundaries, and its message is not empty.
#![no_main]

use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    let result = sdeck_checks::check(text, "fuzz", &sdeck_checks::RuleSettings::default());
    for d in &result.diagnostics {
        assert!(!d.message.trim().is_empty(), "empty message from {}", d.rule);
        let in_text = |s: &std::ops::Range<usize>| {
            s.start <= s.end
                && s.end <= text.len()
                && text.is_char_boundary(s.start)
                && text.is_char_boundary(s.end)
        };
        assert!(in_text(&d.span), "{} span {:?} outside the text", d.rule, d.span);
        for fix in &d.fixes {
            for edit in &fix.edits {
                assert!(in_text(&edit.span), "{} fix edit {:?} outside", d.rule, edit.span);
            }
        }
    }
});
