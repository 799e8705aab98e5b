//! `--check` on every demo model of the repository: the simulated mean and variance of
//! each state must agree with the calculus layer's closed forms within 4 standard errors.
//! The two layers compute their figures independently (sampling here, formulas there), so
//! a disagreement points at a bug in one of them.

use sdeck_calculus::{derive, moments_at};
use sdeck_semantics::analyze;
use sdeck_simulate::{check, plan, render_text, simulate, SimulationOptions};
use std::path::PathBuf;

fn demo_models() -> Vec<PathBuf> {
    let directory = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../../demo-models");
    let mut paths: Vec<PathBuf> = std::fs::read_dir(&directory)
        .map(|entries| {
            entries
                .filter_map(Result::ok)
                .map(|entry| entry.path())
                .filter(|path| path.extension().is_some_and(|e| e == "sde"))
                .collect()
        })
        .unwrap_or_default();
    paths.sort();
    paths
}

#[test]
fn every_demo_model_agrees_with_its_closed_forms() {
    let paths = demo_models();
    assert!(!paths.is_empty(), "no demo model found");
    let mut compared = 0;
    for path in paths {
        let text = std::fs::read_to_string(&path).unwrap();
        let analysis = analyze(&text, "demo");
        if analysis.has_errors() {
            continue;
        }
        let model = analysis.model;
        let derivation = derive(&model);
        let plan = plan(&model, &derivation);
        let options = SimulationOptions {
            paths: 20_000,
            steps: 100,
            seed: 2026,
            ..Default::default()
        };
        let mut result = simulate(&model, &plan, &options).unwrap();
        let moments = moments_at(&model, &derivation, result.at);
        let closed: Vec<Option<(f64, f64)>> = moments
            .mean
            .iter()
            .zip(&moments.variance)
            .map(|(m, v)| m.zip(*v))
            .collect();
        compared += closed.iter().flatten().count();
        result.attach_closed_forms(&closed);
        let disagreements = check(&result);
        assert!(
            disagreements.is_empty(),
            "{}:\n{}\n{}",
            path.display(),
            disagreements
                .iter()
                .map(|d| d.to_string())
                .collect::<Vec<_>>()
                .join("\n"),
            render_text(&result)
        );
    }
    assert!(compared > 0, "no closed form to compare with");
}
