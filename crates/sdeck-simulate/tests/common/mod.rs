//! Helpers shared by the integration tests of this crate.

use sdeck_semantics::{analyze, Model};
use sdeck_simulate::SimulationOptions;

/// The model of `source`, which must have no errors.
pub fn model(source: &str) -> Model {
    let analysis = analyze(source, "test");
    assert!(!analysis.has_errors(), "{:#?}", analysis.diagnostics);
    analysis.model
}

/// `paths` paths and `steps` steps to `dates`, two threads, step doubling on.
pub fn options(paths: usize, steps: usize, dates: &[f64], seed: u64) -> SimulationOptions {
    SimulationOptions {
        paths,
        steps,
        dates: dates.to_vec(),
        seed,
        threads: Some(2),
        step_doubling: true,
        ..Default::default()
    }
}
