//! Timing of the affine transform engine: a 30-maturity zero-coupon curve of a
//! three-factor model whose Riccati equations are integrated numerically, and one
//! probability P(S < q) of a price with a square-root variance by Fourier inversion.
//! A plain loop; prints microseconds per call by the wall clock and by the thread's CPU
//! clock (the figure that holds on a shared machine).
//!
//! `cargo bench -p sdeck-calculus --bench affine`

use sdeck_calculus::affine::TransformMethod;
use sdeck_calculus::{curve::curve, derive, laws::law_of};
use sdeck_semantics::Expr;
use std::hint::black_box;
use std::time::Instant;

/// A Gaussian factor, a square-root factor and a square-root factor whose level follows
/// the second: the Riccati system does not split, so it is integrated.
const THREE_FACTOR: &str = "
model bench_three_factor
param a = 0.5 [1/year]
param s = 1% [1/sqrt(year)]
param k = 0.8 [1/year]
param m = 2%
param w = 0.1 [1/sqrt(year)]
param c = 0.3 [1/year]
shock W1, W2, W3
factor x = 0.5%
factor y = 2% >= 0
factor z = 1% >= 0
dx = -a * x dt + s dW1
dy = k * (m - y) dt + w * sqrt(y) dW2
dz = c * (y - z) dt + w * sqrt(z) dW3
";

const PRICE_WITH_VARIANCE: &str = "
model bench_price
param mu = 3% [1/year]
param kappa = 1.5 [1/year]
param theta = 0.04 [1/year]
param xi = 0.5 [1/year]
shock Ws, Wv
corr Ws Wv = -0.7
factor S = 100
factor v = 0.05 [1/year] >= 0
dS = mu * S dt + sqrt(v) * S dWs
dv = kappa * (theta - v) dt + xi * sqrt(v) dWv
";

/// CPU time of this thread, in seconds: unlike the wall clock, it does not count the
/// time other work on a shared machine takes from the core.
fn thread_cpu_seconds() -> f64 {
    let mut spec = libc::timespec {
        tv_sec: 0,
        tv_nsec: 0,
    };
    // SAFETY: `spec` is a valid, writable timespec; the clock id is a constant of libc.
    let status = unsafe { libc::clock_gettime(libc::CLOCK_THREAD_CPUTIME_ID, &mut spec) };
    if status != 0 {
        return f64::NAN;
    }
    spec.tv_sec as f64 + spec.tv_nsec as f64 * 1e-9
}

fn time<F: FnMut()>(label: &str, runs: u32, mut f: F) {
    f();
    let start = Instant::now();
    let cpu = thread_cpu_seconds();
    for _ in 0..runs {
        f();
    }
    let cpu_micros = (thread_cpu_seconds() - cpu) * 1e6 / f64::from(runs);
    let micros = start.elapsed().as_secs_f64() * 1e6 / f64::from(runs);
    println!("{label:<58} {micros:>10.1} µs wall {cpu_micros:>10.1} µs cpu");
}

fn main() {
    let model = sdeck_semantics::analyze(THREE_FACTOR, "bench").model;
    let rate = Expr::Add(
        Box::new(Expr::Add(
            Box::new(Expr::factor(0)),
            Box::new(Expr::factor(1)),
        )),
        Box::new(Expr::factor(2)),
    );
    let maturities: Vec<f64> = (1..=30).map(f64::from).collect();
    let first = curve(&model, &rate, &maturities).expect("a curve");
    assert_eq!(first.method, TransformMethod::Riccati);
    time(
        "curve, 30 maturities, three factors, Riccati (with forwards)",
        200,
        || {
            black_box(curve(&model, &rate, black_box(&maturities)).ok());
        },
    );
    time(
        "curve, 1 maturity (mostly the long yield), three factors",
        200,
        || {
            black_box(curve(&model, &rate, black_box(&[10.0])).ok());
        },
    );
    let model = sdeck_semantics::analyze(PRICE_WITH_VARIANCE, "bench").model;
    let derivation = derive(&model);
    let law = law_of(&model, &derivation, sdeck_semantics::FactorId::new(0), 1.0).expect("a law");
    assert_eq!(law.kind().as_str(), "fourier");
    time("P(S < 90) at 1 year, Fourier inversion", 2000, || {
        black_box(law.cdf(black_box(90.0)));
    });
}
