//! `sdeck moments`: the analysis, the per-factor report at the horizon and at a few
//! other times, and both renderings (text and JSON) never panic; the text never
//! prints NaN and the JSON always serialises.
#![no_main]

use libfuzzer_sys::fuzz_target;
use sdeck_report::moments::{moments_json, moments_text};
use sdeck_report::ModelReport;

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    let result = sdeck_checks::check(text, "fuzz", &sdeck_checks::RuleSettings::default());
    if result.analysis.has_errors() {
        return;
    }
    let model = &result.analysis.model;
    let times = [model.horizon, 0.0, 1e-9, 30.0];
    for (k, &at) in times.iter().enumerate() {
        if !at.is_finite() || at < 0.0 || times[..k].contains(&at) {
            continue;
        }
        let report = ModelReport::build(model, &result.derivation, text, at);
        let text = moments_text(&report, "");
        assert!(!text.contains("NaN"), "{text}");
        // serde_json writes a non-finite number as null; serialising must still succeed.
        serde_json::to_string(&moments_json(&report)).expect("moments JSON");
    }
});
