//! Timing of `derive` and `moments_at` for three models: a one-state Ornstein–Uhlenbeck
//! rate, a three-state linear system and a two-state polynomial model. A plain loop over
//! `std::time::Instant`; prints nanoseconds per call.
//!
//! `cargo bench -p sdeck-calculus --bench moments`

use sdeck_calculus::{derive, moments_at};
use std::hint::black_box;
use std::time::Instant;

const ONE_STATE_OU: &str = "
model bench_ou
param kappa = 1.5 [1/year] > 0
param level = 4%
param vol = 1% [1/sqrt(year)] > 0
shock W
factor r = 2%
dr = kappa * (level - r) dt + vol dW
";

const THREE_STATE_LINEAR: &str = "
model bench_three
param a = 0.9 [1/year]
param b = 0.3 [1/year]
param c = 0.2 [1/year]
param v = 1% [1/sqrt(year)]
shock W1, W2, W3
corr W1 W2 = 0.4
corr W2 W3 = -0.2
factor r = 2%
factor i = 1.5%
factor g = 0
dr = (a * (0.025 - r) + b * (i - 0.02) + c * g) dt + v dW1
di = (b * (r - 0.025) - a * (i - 0.02)) dt + v dW2
dg = (-a * g + c * (r - 0.025)) dt + v dW3
";

const POLYNOMIAL: &str = "
model bench_polynomial
param mu = 5% [1/year]
param kappa = 2.0 [1/year] > 0
param theta = 0.04 [1/year] >= 0
param xi = 0.3 [1/year] > 0
shock Wx, Wv
corr Wx Wv = -0.6
factor x = 0.2
factor v = 0.05 [1/year] >= 0
dx = (mu - 0.5 * v) dt + sqrt(v) dWx
dv = kappa * (theta - v) dt + xi * sqrt(v) dWv
";

fn time_per_call(iterations: u32, mut call: impl FnMut()) -> f64 {
    // One warm-up pass so that first-touch costs are not counted.
    call();
    let start = Instant::now();
    for _ in 0..iterations {
        call();
    }
    start.elapsed().as_nanos() as f64 / f64::from(iterations)
}

fn main() {
    println!(
        "{:<22} {:>14} {:>18}",
        "model", "derive ns/call", "moments_at ns/call"
    );
    for (name, source, iterations) in [
        ("one-factor OU", ONE_STATE_OU, 20_000),
        ("three-factor linear", THREE_STATE_LINEAR, 2_000),
        ("two-factor polynomial", POLYNOMIAL, 2_000),
    ] {
        let analysis = sdeck_semantics::analyze(source, name);
        let model = analysis.model;
        let derivation = derive(&model);
        let derive_ns = time_per_call(iterations, || {
            black_box(derive(black_box(&model)));
        });
        let moments_ns = time_per_call(iterations, || {
            black_box(moments_at(black_box(&model), &derivation, black_box(1.0)));
        });
        let check = moments_at(&model, &derivation, 1.0);
        assert!(
            check.mean.iter().all(Option::is_some),
            "{name}: every mean is known ({:?})",
            check.mean
        );
        println!("{name:<22} {derive_ns:>14.0} {moments_ns:>18.0}");
    }
}
