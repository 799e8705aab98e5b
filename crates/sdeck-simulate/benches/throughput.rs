//! Throughput of the engine on a model with no closed form, the logistic-type model
//! dc = r c (cap − c) dt + s c (cap − c) dW (Euler–Maruyama), against the floor: the time
//! to draw the same number of standard normals with the generator and sampler alone, in
//! the same blocks of paths on the same threads. Then, for scale, the exact noncentral
//! chi-square step of a square-root model.
//!
//! Run: `cargo bench -p sdeck-simulate --bench throughput`. Environment:
//! SDECK_BENCH_PATHS (400000), SDECK_BENCH_STEPS (200), SDECK_BENCH_THREADS (all cores),
//! SDECK_BENCH_RUNS (3 timed runs after a warm-up), SDECK_BENCH_ONLY=yardstick to skip the
//! square-root part, SDECK_BENCH_ISA=baseline to run the baseline (SSE2) copy of the block
//! loop instead of the machine's best. bench/simulate_vs_numpy.py runs it beside numpy and prints the ratios.
//! Lines starting with `result ` are read by that script.

use rayon::prelude::*;
use sdeck_semantics::analyze;
use sdeck_simulate::bytecode::{Lanes, LANES};
use sdeck_simulate::isa::Isa;
use sdeck_simulate::normals::fill_normals_chunk_inline;
use sdeck_simulate::streams::BlockStream;
use sdeck_simulate::{plan_from_model, simulate_paths_on, Scheme, SimulationOptions};
use std::time::Instant;

const LOGISTIC: &str = "
param r = 1.5 [1/year] > 0
param cap = 1
param s = 0.3 [1/sqrt(year)] > 0
shock W
factor c = 0.1
dc = r * c * (cap - c) dt + s * c * (cap - c) dW
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

/// Best time of `runs` after one warm-up.
fn best_of(runs: usize, mut run: impl FnMut() -> f64) -> f64 {
    run();
    (0..runs.max(1))
        .map(|_| run())
        .fold(f64::INFINITY, f64::min)
}

/// Seconds for one engine run; prints the mean so that the run is not optimised away and
/// can be compared with numpy's.
fn engine_seconds(
    model: &sdeck_semantics::Model,
    plan: &sdeck_simulate::Plan,
    options: &SimulationOptions,
    isa: Isa,
) -> (f64, f64, f64) {
    let start = Instant::now();
    let samples = match simulate_paths_on(model, plan, options, isa) {
        Ok(samples) => samples,
        Err(error) => {
            eprintln!("simulation failed: {error}");
            std::process::exit(1);
        }
    };
    let seconds = start.elapsed().as_secs_f64();
    let values = &samples.finals()[0];
    let n = values.len() as f64;
    let mean = values.iter().sum::<f64>() / n;
    let variance = values.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (n - 1.0);
    (seconds, mean, (variance / n).sqrt())
}

/// The floor: `paths × steps` normals drawn block by block (one xoshiro256++ stream per
/// block of 64 paths and the ziggurat, as the engine does, compiled for `isa` as the
/// engine's step is) on `threads` threads, summed so that nothing is skipped.
fn floor_seconds(paths: usize, steps: usize, threads: usize, seed: u64, isa: Isa) -> f64 {
    let pool = match rayon::ThreadPoolBuilder::new().num_threads(threads).build() {
        Ok(pool) => pool,
        Err(error) => {
            eprintln!("no thread pool: {error}");
            std::process::exit(1);
        }
    };
    let blocks = paths.div_ceil(LANES);
    let start = Instant::now();
    let total: f64 = pool.install(|| {
        (0..blocks)
            .into_par_iter()
            .map(|block| {
                let mut rng = BlockStream::new(seed, block as u64);
                let mut words = [0u64; LANES];
                let mut normals: Lanes = [0.0; LANES];
                let mut sum = [0.0; LANES];
                for _ in 0..steps {
                    isa.run(
                        #[inline(always)]
                        || {
                            fill_normals_chunk_inline(&mut rng, &mut words, &mut normals);
                            for (s, z) in sum.iter_mut().zip(&normals) {
                                *s += z;
                            }
                        },
                    );
                }
                sum.iter().sum::<f64>()
            })
            .sum()
    });
    let seconds = start.elapsed().as_secs_f64();
    std::hint::black_box(total);
    seconds
}

fn main() {
    let paths = from_env("SDECK_BENCH_PATHS", 400_000);
    let steps = from_env("SDECK_BENCH_STEPS", 200);
    let runs = from_env("SDECK_BENCH_RUNS", 3);
    let cores = std::thread::available_parallelism().map_or(1, |n| n.get());
    let threads = from_env("SDECK_BENCH_THREADS", cores);
    let isa = match std::env::var("SDECK_BENCH_ISA").as_deref() {
        Ok("baseline") => Isa::Baseline,
        _ => Isa::detected(),
    };

    let model = analysed(LOGISTIC, "logistic");
    let plan = plan_from_model(&model);
    if plan.schemes != vec![Scheme::Euler] {
        eprintln!(
            "the logistic model should run on Euler–Maruyama, got {:?}",
            plan.schemes
        );
        std::process::exit(1);
    }
    let options = SimulationOptions {
        paths,
        steps,
        at: Some(1.0),
        seed: 2026,
        threads: Some(threads),
        ..Default::default()
    };
    let mut figures = (0.0, 0.0);
    let engine = best_of(runs, || {
        let (seconds, mean, se) = engine_seconds(&model, &plan, &options, isa);
        figures = (mean, se);
        seconds
    });
    let floor = best_of(runs, || floor_seconds(paths, steps, threads, 2026, isa));
    let path_steps = (paths * steps) as f64;
    println!("logistic, Euler–Maruyama: {paths} paths × {steps} steps, {threads} threads, {isa:?}");
    println!(
        "  engine {engine:.3} s ({:.2} ns per path-step), floor {floor:.3} s ({:.2} ns per normal): engine / floor = {:.2}",
        engine / path_steps * 1e9,
        floor / path_steps * 1e9,
        engine / floor
    );
    println!("  mean c(1) = {:.5} ± {:.5}", figures.0, figures.1);
    println!(
        "result engine_seconds={engine:.6} floor_seconds={floor:.6} mean={:.6} se={:.6} threads={threads} avx2={}",
        figures.0,
        figures.1,
        u8::from(isa == Isa::Avx2)
    );

    if std::env::var("SDECK_BENCH_ONLY").is_ok_and(|v| v == "yardstick") {
        return;
    }
    let model = analysed(SQUARE_ROOT, "square_root");
    let plan = plan_from_model(&model);
    let seconds = best_of(runs, || engine_seconds(&model, &plan, &options, isa).0);
    println!(
        "square root, {}: {paths} paths × {steps} steps, {threads} threads: {seconds:.3} s ({:.2} ns per path-step)",
        plan.describe_state(0),
        seconds / path_steps * 1e9
    );
}
