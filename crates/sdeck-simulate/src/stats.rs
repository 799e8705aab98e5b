//! Sample statistics with their Monte Carlo standard errors: mean, variance and quantiles.

use statrs::distribution::{Continuous, ContinuousCDF, Normal};

/// The probabilities at which quantiles are reported.
pub const QUANTILE_PROBABILITIES: [f64; 5] = [0.01, 0.05, 0.5, 0.95, 0.99];

/// One quantile and its standard error.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct QuantileEstimate {
    pub probability: f64,
    pub value: f64,
    pub standard_error: f64,
}

/// Summary of one sample.
#[derive(Clone, Debug, PartialEq)]
pub struct SampleSummary {
    /// Finite values used.
    pub count: usize,
    pub mean: f64,
    /// sd/√N.
    pub mean_se: f64,
    /// Unbiased sample variance.
    pub variance: f64,
    /// √((m4 − s⁴)/N), m4 the sample fourth central moment (Serfling 1980,
    /// Approximation Theorems of Mathematical Statistics, §2.2.3).
    pub variance_se: f64,
    pub quantiles: Vec<QuantileEstimate>,
}

/// Quantile of sorted values, linear interpolation between order statistics
/// (Hyndman & Fan 1996, The American Statistician 50(4), definition 7).
pub fn quantile_of_sorted(sorted: &[f64], probability: f64) -> f64 {
    let n = sorted.len();
    if n == 0 {
        return f64::NAN;
    }
    let position = probability.clamp(0.0, 1.0) * (n - 1) as f64;
    let below = position.floor() as usize;
    let above = (below + 1).min(n - 1);
    let fraction = position - below as f64;
    match (sorted.get(below), sorted.get(above)) {
        (Some(lo), Some(hi)) => lo + fraction * (hi - lo),
        _ => f64::NAN,
    }
}

/// Hall–Sheather bandwidth for the sparsity estimate at `probability` with N values
/// (Hall & Sheather 1988, J. Royal Statistical Society B 50(3); Koenker 2005, Quantile
/// Regression, §3.4.2, with α = 0.05).
pub fn hall_sheather_bandwidth(probability: f64, count: usize) -> f64 {
    let normal = match Normal::new(0.0, 1.0) {
        Ok(normal) => normal,
        Err(_) => return f64::NAN,
    };
    let z_alpha = normal.inverse_cdf(0.975);
    let x = normal.inverse_cdf(probability);
    let density = normal.pdf(x);
    (count as f64).powf(-1.0 / 3.0)
        * z_alpha.powf(2.0 / 3.0)
        * (1.5 * density * density / (2.0 * x * x + 1.0)).powf(1.0 / 3.0)
}

/// Standard error of the `probability` quantile: √(p(1−p)/N) / f(q), with 1/f(q) (the
/// sparsity) estimated by the difference quotient of the empirical quantile function over
/// [p − h, p + h], h the Hall–Sheather bandwidth (Siddiqui 1960, J. Research NBS 64B;
/// Koenker 2005, Quantile Regression, §3.4.2).
pub fn quantile_standard_error(sorted: &[f64], probability: f64) -> f64 {
    let n = sorted.len();
    if n < 2 {
        return f64::NAN;
    }
    let h = hall_sheather_bandwidth(probability, n);
    let lower = (probability - h).max(0.0);
    let upper = (probability + h).min(1.0);
    if upper <= lower {
        return f64::NAN;
    }
    let sparsity =
        (quantile_of_sorted(sorted, upper) - quantile_of_sorted(sorted, lower)) / (upper - lower);
    sparsity * (probability * (1.0 - probability) / n as f64).sqrt()
}

/// Summarises the finite values of `values`; the count of dropped values is
/// `values.len() - count`.
pub fn summarize(values: &[f64]) -> SampleSummary {
    let mut sorted: Vec<f64> = values.iter().copied().filter(|x| x.is_finite()).collect();
    let count = sorted.len();
    let n = count as f64;
    let (mean, variance, fourth) = if count == 0 {
        (f64::NAN, f64::NAN, f64::NAN)
    } else {
        let mean = sorted.iter().sum::<f64>() / n;
        let (mut second, mut fourth) = (0.0, 0.0);
        for x in &sorted {
            let d = x - mean;
            let d2 = d * d;
            second += d2;
            fourth += d2 * d2;
        }
        let variance = if count > 1 {
            second / (n - 1.0)
        } else {
            f64::NAN
        };
        (mean, variance, fourth / n)
    };
    let mean_se = (variance / n).sqrt();
    // Undefined (not zero) with fewer than two values, and when the estimate of
    // m4 − s⁴ comes out negative for a sample of two or three values that vary.
    let spread = fourth - variance * variance;
    let variance_se = if count < 2 || (count < 4 && spread <= 0.0 && variance > 0.0) {
        f64::NAN
    } else {
        (spread.max(0.0) / n).sqrt()
    };
    sorted.sort_by(f64::total_cmp);
    let quantiles = QUANTILE_PROBABILITIES
        .iter()
        .map(|&p| QuantileEstimate {
            probability: p,
            value: quantile_of_sorted(&sorted, p),
            standard_error: quantile_standard_error(&sorted, p),
        })
        .collect();
    SampleSummary {
        count,
        mean,
        mean_se,
        variance,
        variance_se,
        quantiles,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::samplers::fill_standard_normal;
    use rand::SeedableRng;
    use rand_chacha::ChaCha8Rng;

    #[test]
    fn quantiles_interpolate_like_definition_seven() {
        // numpy.quantile's default ("linear") on [1, 2, 3, 4]: 0.5 → 2.5, 0.1 → 1.3.
        let sorted = [1.0, 2.0, 3.0, 4.0];
        assert!((quantile_of_sorted(&sorted, 0.5) - 2.5).abs() < 1e-15);
        assert!((quantile_of_sorted(&sorted, 0.1) - 1.3).abs() < 1e-15);
        assert_eq!(quantile_of_sorted(&sorted, 0.0), 1.0);
        assert_eq!(quantile_of_sorted(&sorted, 1.0), 4.0);
        assert!(quantile_of_sorted(&[], 0.5).is_nan());
    }

    #[test]
    fn standard_errors_of_a_normal_sample_match_their_asymptotic_values() {
        // For N(0, 1): se(mean) = 1/√N; se(variance) = √(2/N) since m4 = 3;
        // se(q_p) = √(p(1−p)/N)/φ(Φ⁻¹(p)), the median's being √(π/(2N)) (Serfling 1980,
        // §2.3.3, asymptotic normality of sample quantiles).
        let n = 100_000;
        let mut rng = ChaCha8Rng::seed_from_u64(3);
        let mut sample = vec![0.0; n];
        fill_standard_normal(&mut rng, &mut sample);
        let summary = summarize(&sample);
        let root_n = (n as f64).sqrt();
        assert!((summary.mean_se * root_n - 1.0).abs() < 0.02);
        assert!((summary.variance_se * root_n - 2f64.sqrt()).abs() < 0.05);
        let normal = Normal::new(0.0, 1.0).unwrap();
        for q in &summary.quantiles {
            let p = q.probability;
            let expected = (p * (1.0 - p) / n as f64).sqrt() / normal.pdf(normal.inverse_cdf(p));
            let relative = (q.standard_error - expected).abs() / expected;
            assert!(
                relative < 0.15,
                "p = {p}: {} vs {expected}",
                q.standard_error
            );
            // And the quantile itself within 5 of its standard errors.
            assert!(
                (q.value - normal.inverse_cdf(p)).abs() < 5.0 * expected,
                "p = {p}"
            );
        }
    }

    #[test]
    fn standard_errors_are_undefined_not_zero_for_one_or_two_values() {
        let one = summarize(&[1.0]);
        assert!(one.variance.is_nan() && one.variance_se.is_nan());
        assert!(one.mean_se.is_nan());
        // Two values: m4 − s⁴ = d⁴ − 4d⁴ < 0 for values ±d.
        let two = summarize(&[-1.0, 1.0]);
        assert_eq!(two.variance, 2.0);
        assert!(two.variance_se.is_nan());
        // A sample without spread has exact figures.
        let flat = summarize(&[3.0; 10]);
        assert_eq!((flat.variance, flat.variance_se), (0.0, 0.0));
    }

    #[test]
    fn non_finite_values_are_left_out() {
        let summary = summarize(&[1.0, f64::NAN, 3.0, f64::INFINITY]);
        assert_eq!(summary.count, 2);
        assert_eq!(summary.mean, 2.0);
        assert_eq!(summary.variance, 2.0);
    }
}
