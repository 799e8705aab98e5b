//! The noncentral chi-square law: CDF as a Poisson mixture of central chi-square CDFs,
//! and quantiles by bracketing and bisection on that CDF.

use statrs::function::gamma::{gamma_lr, ln_gamma};

/// Poisson weights below this (relative to the largest) are dropped from the mixture.
const NEGLIGIBLE_WEIGHT: f64 = 1e-17;

/// Above this noncentrality the mixture needs too many terms (about 20·√(λ/2) per CDF
/// evaluation, some 0.1 s per quantile at 1e7 in a release build) for an interactive
/// answer, and the quantile is not given.
pub const MAX_NONCENTRALITY: f64 = 1e7;

/// P(Y ≤ y) for Y noncentral chi-square with `degrees` of freedom and noncentrality
/// `noncentrality` (the sum of squared means, λ). NaN on invalid arguments.
pub fn cdf(y: f64, degrees: f64, noncentrality: f64) -> f64 {
    if !(degrees > 0.0 && noncentrality >= 0.0 && degrees.is_finite() && noncentrality.is_finite())
        || y.is_nan()
    {
        return f64::NAN;
    }
    if y <= 0.0 {
        return 0.0;
    }
    if y.is_infinite() {
        return 1.0;
    }
    let half = noncentrality / 2.0;
    let x = y / 2.0;
    // Σ_j Pois(j; λ/2) · P(k/2 + j, y/2), P the regularised lower incomplete gamma
    // function (Johnson, Kotz & Balakrishnan 1995, Continuous Univariate Distributions
    // vol. 2, ch. 29, eq. 29.2). Start at the Poisson mode and walk both ways until the
    // weights vanish; neighbouring P values follow from one evaluation by
    // P(a + 1, x) = P(a, x) − xᵃ e^{−x} / Γ(a + 1) (Abramowitz & Stegun 6.5.21).
    let mode = half.floor();
    let log_weight = |j: f64| {
        if half == 0.0 {
            if j == 0.0 {
                0.0
            } else {
                f64::NEG_INFINITY
            }
        } else {
            -half + j * half.ln() - ln_gamma(j + 1.0)
        }
    };
    // xᵃ e^{−x} / Γ(a + 1) for a = k/2 + j.
    let step = |j: f64| {
        let a = degrees / 2.0 + j;
        (a * x.ln() - x - ln_gamma(a + 1.0)).exp()
    };
    let peak = log_weight(mode);
    let at_mode = gamma_lr(degrees / 2.0 + mode, x);
    let mut total = 0.0;
    let mut central = at_mode;
    let mut j = mode;
    loop {
        let lw = log_weight(j);
        total += lw.exp() * central.clamp(0.0, 1.0);
        if lw - peak < NEGLIGIBLE_WEIGHT.ln() || j > mode + 1e8 {
            break;
        }
        central -= step(j);
        j += 1.0;
    }
    let mut central = at_mode;
    let mut j = mode - 1.0;
    while j >= 0.0 {
        central += step(j);
        let lw = log_weight(j);
        total += lw.exp() * central.clamp(0.0, 1.0);
        if lw - peak < NEGLIGIBLE_WEIGHT.ln() {
            break;
        }
        j -= 1.0;
    }
    total.clamp(0.0, 1.0)
}

/// The p-quantile of the noncentral chi-square law, by bisection on [`cdf`] to a relative
/// width of 1e-13. `None` when p is outside (0, 1) or the arguments are invalid.
pub fn quantile(p: f64, degrees: f64, noncentrality: f64) -> Option<f64> {
    if !(p > 0.0 && p < 1.0 && degrees > 0.0 && noncentrality >= 0.0) {
        return None;
    }
    if !(degrees.is_finite() && noncentrality <= MAX_NONCENTRALITY) {
        return None;
    }
    let mean = degrees + noncentrality;
    let sd = (2.0 * (degrees + 2.0 * noncentrality)).sqrt();
    let mut high = mean + 10.0 * sd + 1.0;
    let mut guard = 0;
    while cdf(high, degrees, noncentrality) < p {
        high *= 2.0;
        guard += 1;
        if guard > 200 {
            return None;
        }
    }
    // Start below the bulk when that is safely below the quantile: fewer halvings.
    let mut low = (mean - 10.0 * sd).max(0.0);
    if cdf(low, degrees, noncentrality) >= p {
        low = 0.0;
    }
    for _ in 0..400 {
        let middle = 0.5 * (low + high);
        if cdf(middle, degrees, noncentrality) < p {
            low = middle;
        } else {
            high = middle;
        }
        if high - low <= 1e-13 * high.abs().max(f64::MIN_POSITIVE) {
            break;
        }
    }
    Some(0.5 * (low + high))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn zero_noncentrality_is_the_central_law() {
        // Central chi-square with 2 degrees of freedom is exponential with mean 2:
        // P(Y ≤ y) = 1 − e^{−y/2} (common practice, no source).
        for y in [0.1, 1.0, 3.0, 10.0] {
            let expected = 1.0 - (-y / 2.0_f64).exp();
            assert!((cdf(y, 2.0, 0.0) - expected).abs() < 1e-14);
        }
    }

    #[test]
    fn one_degree_of_freedom_is_a_shifted_normal_squared() {
        // With k = 1, Y = (Z + √λ)², so P(Y ≤ y) = Φ(√y − √λ) − Φ(−√y − √λ)
        // (Johnson, Kotz & Balakrishnan 1995, vol. 2, ch. 29, definition of the law).
        use statrs::distribution::{ContinuousCDF, Normal};
        let normal = Normal::new(0.0, 1.0).expect("standard normal");
        for lambda in [0.3_f64, 2.5, 9.0] {
            for y in [0.05_f64, 1.0, 4.0, 15.0] {
                let root = y.sqrt();
                let shift = lambda.sqrt();
                let expected = normal.cdf(root - shift) - normal.cdf(-root - shift);
                let value = cdf(y, 1.0, lambda);
                // statrs' normal CDF is good to about 1e-10 here.
                assert!(
                    (value - expected).abs() < 1e-9,
                    "y={y} λ={lambda}: {value} vs {expected}"
                );
            }
        }
    }

    #[test]
    fn values_against_scipy() {
        // scipy.stats.ncx2.cdf(y, k, λ) and scipy.stats.ncx2.ppf(p, k, λ), scipy 1.x.
        let cdfs = [
            (3.0, 4.0, 2.5, 0.21170522565569064),
            (10.0, 3.0, 5.0, 0.7066486477774525),
            (0.2, 0.7, 12.0, 0.0018024839867213664),
            (150.0, 80.0, 60.0, 0.7027797266684201),
        ];
        for (y, k, lambda, expected) in cdfs {
            let value = cdf(y, k, lambda);
            assert!(
                ((value - expected) / expected).abs() < 1e-9,
                "cdf({y}, {k}, {lambda}) = {value}"
            );
        }
        let quantiles = [
            (0.05, 4.0, 2.5, 1.2870803787219254),
            (0.5, 50.0, 10.0, 59.23894458746656),
            (0.99, 0.7, 12.0, 33.14223381492845),
            (0.3, 3.0, 1e5, 99670.61333475701),
            (0.3, 3.0, 1e6, 998953.4734463225),
        ];
        for (p, k, lambda, expected) in quantiles {
            let value = quantile(p, k, lambda).expect("quantile");
            assert!(
                ((value - expected) / expected).abs() < 1e-9,
                "ppf({p}, {k}, {lambda}) = {value}"
            );
        }
    }

    #[test]
    fn quantile_inverts_the_cdf() {
        for (k, lambda) in [(0.5, 0.2), (3.0, 7.0), (20.0, 100.0)] {
            for p in [0.01, 0.3, 0.5, 0.9, 0.999] {
                let q = quantile(p, k, lambda).expect("quantile");
                assert!(
                    (cdf(q, k, lambda) - p).abs() < 1e-9,
                    "k={k} λ={lambda} p={p}"
                );
            }
        }
    }
}
