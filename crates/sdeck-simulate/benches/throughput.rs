//! Throughput of Euler–Maruyama (path-steps per second) on a model with no closed form,
//! the double well dx = rate (x − x³) dt + vol dW, on one thread and on all cores; then,
//! for scale, the exact noncentral chi-square step of a square-root model.
//!
//! Run: `cargo bench -p sdeck-simulate --bench throughput`. Paths and steps can be set with
//! SDECK_BENCH_PATHS and SDECK_BENCH_STEPS; bench/numpy_euler.py runs the same model.

use sdeck_semantics::analyze;
use sdeck_simulate::{plan_from_model, simulate_paths, Scheme, SimulationOptions};
use std::time::Instant;

const DOUBLE_WELL: &str = "
param rate = 1 [1/year] > 0
param vol = 0.5 [1/sqrt(year)] > 0
shock W
factor x = 0.1
dx = rate * (x - x^3) dt + vol dW
";

const SQUARE_ROOT: &str = "
param kappa = 1.6 [1/year] > 0
param theta = 3.4% >= 0
param sigma = 9% [1/sqrt(year)] > 0
shock W
factor r = 2.9% >= 0
dr = kappa * (theta - r) dt + sigma * sqrt(r) dW
";

fn from_env(name: &str, default: usize) -> usize {
    std::env::var(name)
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(default)
}

/// Best of three timed runs after a warm-up; prints path-steps per second.
fn measure(
    model: &sdeck_semantics::Model,
    plan: &sdeck_simulate::Plan,
    paths: usize,
    steps: usize,
    threads: usize,
) {
    let options = SimulationOptions {
        paths,
        steps,
        at: Some(1.0),
        seed: 2026,
        threads: Some(threads),
        ..Default::default()
    };
    let mut best = f64::INFINITY;
    let mut mean = 0.0;
    let mut standard_error = 0.0;
    for run in 0..4 {
        let start = Instant::now();
        let samples = match simulate_paths(model, plan, &options) {
            Ok(samples) => samples,
            Err(error) => {
                eprintln!("simulation failed: {error}");
                std::process::exit(1);
            }
        };
        let seconds = start.elapsed().as_secs_f64();
        let values = &samples.finals[0];
        let n = values.len() as f64;
        mean = values.iter().sum::<f64>() / n;
        let variance = values.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (n - 1.0);
        standard_error = (variance / n).sqrt();
        if run > 0 {
            best = best.min(seconds);
        }
    }
    let rate = (paths * steps) as f64 / best;
    println!("threads {threads}: {best:.3} s, {rate:.3e} path-steps/s (mean at t = 1: {mean:.4e} ± {standard_error:.1e})");
}

fn analysed(source: &str, name: &str) -> sdeck_semantics::Model {
    let analysis = analyze(source, name);
    if analysis.has_errors() {
        eprintln!(
            "benchmark model {name} does not analyse: {:?}",
            analysis.diagnostics
        );
        std::process::exit(1);
    }
    analysis.model
}

fn main() {
    let paths = from_env("SDECK_BENCH_PATHS", 100_000);
    let steps = from_env("SDECK_BENCH_STEPS", 1_000);
    let cores = std::thread::available_parallelism().map_or(1, |n| n.get());

    let model = analysed(DOUBLE_WELL, "double_well");
    let plan = plan_from_model(&model);
    if plan.schemes != vec![Scheme::Euler] {
        eprintln!(
            "the double well should run on Euler–Maruyama, got {:?}",
            plan.schemes
        );
        std::process::exit(1);
    }
    println!("double well, Euler–Maruyama: {paths} paths × {steps} steps");
    for threads in [1, cores] {
        measure(&model, &plan, paths, steps, threads);
    }

    let model = analysed(SQUARE_ROOT, "square_root");
    let plan = plan_from_model(&model);
    println!(
        "square root, {}: {paths} paths × {steps} steps",
        plan.describe_state(0)
    );
    for threads in [1, cores] {
        measure(&model, &plan, paths, steps, threads);
    }
}
