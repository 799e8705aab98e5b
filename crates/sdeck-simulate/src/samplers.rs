//! Random variates for the exact transitions: standard normals, chi-squares and
//! noncentral chi-squares, and the square-root (CIR) transition built from them.

use rand::Rng;
use rand_distr::{ChiSquared, Distribution, Gamma, Poisson, StandardNormal};

/// Fills `out` with independent standard normals (ziggurat method of `rand_distr`).
#[inline]
pub fn fill_standard_normal<R: Rng + ?Sized>(rng: &mut R, out: &mut [f64]) {
    for x in out.iter_mut() {
        *x = rng.sample(StandardNormal);
    }
}

/// A chi-square variate with `dof` > 0 degrees of freedom: twice a Gamma(dof/2, 1).
/// Zero degrees of freedom give the point mass at 0 (the limit of the law).
pub fn chi_square<R: Rng + ?Sized>(rng: &mut R, dof: f64) -> f64 {
    if dof <= 0.0 || !dof.is_finite() {
        return 0.0;
    }
    match Gamma::new(0.5 * dof, 2.0) {
        Ok(gamma) => gamma.sample(rng),
        Err(_) => f64::NAN,
    }
}

/// A noncentral chi-square variate with `dof` degrees of freedom and noncentrality
/// `noncentrality` (Glasserman 2004, Monte Carlo Methods in Financial Engineering,
/// §3.4.1): for dof > 1, (Z + √λ)² + χ²_{dof−1}; otherwise the Poisson mixture
/// χ²_{dof + 2N} with N ~ Poisson(λ/2).
pub fn noncentral_chi_square<R: Rng + ?Sized>(rng: &mut R, dof: f64, noncentrality: f64) -> f64 {
    let lambda = noncentrality.max(0.0);
    if dof > 1.0 {
        let z: f64 = rng.sample(StandardNormal);
        let shifted = z + lambda.sqrt();
        shifted * shifted + chi_square(rng, dof - 1.0)
    } else {
        let jumps = if lambda > 0.0 {
            match Poisson::new(0.5 * lambda) {
                Ok(poisson) => poisson.sample(rng),
                Err(_) => return f64::NAN,
            }
        } else {
            0.0
        };
        chi_square(rng, dof + 2.0 * jumps)
    }
}

/// The exact transition of dX = speed (level − X) dt + vol √X dW over one step:
/// X_{t+Δ} = c · χ'²_d(λ) with c = vol²(1 − e^{−speed Δ})/(4 speed), d = 4 speed level/vol²,
/// λ = X_t e^{−speed Δ}/c (Glasserman 2004, §3.4.1, eq. (3.68); Cox, Ingersoll & Ross 1985,
/// Econometrica 53(2)).
#[derive(Clone, Debug)]
pub struct SquareRootStep {
    decay: f64,
    scale: f64,
    dof: f64,
    /// χ²_{d−1} sampler, precomputed when d > 1 (the common case).
    central_part: Option<ChiSquared<f64>>,
}

impl SquareRootStep {
    pub fn new(speed: f64, level: f64, vol: f64, step: f64) -> SquareRootStep {
        let decay = (-speed * step).exp();
        let variance_rate = vol * vol;
        // speed → 0 limit of (1 − e^{−speed Δ})/speed is Δ.
        let integrated = if speed.abs() < 1e-12 {
            step
        } else {
            (1.0 - decay) / speed
        };
        let scale = variance_rate * integrated / 4.0;
        let dof = 4.0 * speed * level / variance_rate;
        let central_part = if dof > 1.0 {
            ChiSquared::new(dof - 1.0).ok()
        } else {
            None
        };
        SquareRootStep {
            decay,
            scale,
            dof,
            central_part,
        }
    }

    /// Degrees of freedom d = 4 speed level / vol².
    pub fn dof(&self) -> f64 {
        self.dof
    }

    /// Draws X_{t+Δ} given X_t = `current` (negative values are read as 0).
    #[inline]
    pub fn sample<R: Rng + ?Sized>(&self, rng: &mut R, current: f64) -> f64 {
        let lambda = current.max(0.0) * self.decay / self.scale;
        match &self.central_part {
            Some(chi) => {
                let z: f64 = rng.sample(StandardNormal);
                let shifted = z + lambda.sqrt();
                self.scale * (shifted * shifted + chi.sample(rng))
            }
            None => self.scale * noncentral_chi_square(rng, self.dof, lambda),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::SeedableRng;
    use rand_chacha::ChaCha8Rng;
    use statrs::distribution::{ChiSquared as ReferenceChiSquared, ContinuousCDF, Normal};

    /// Kolmogorov–Smirnov statistic of `sample` against `cdf`.
    fn ks_statistic(mut sample: Vec<f64>, cdf: impl Fn(f64) -> f64) -> f64 {
        sample.sort_by(f64::total_cmp);
        let n = sample.len() as f64;
        sample
            .iter()
            .enumerate()
            .map(|(i, x)| {
                let f = cdf(*x);
                (f - i as f64 / n).abs().max(((i + 1) as f64 / n - f).abs())
            })
            .fold(0.0, f64::max)
    }

    /// Critical value of √n·D at level 0.001: 1.95 (asymptotic Kolmogorov distribution,
    /// Massey 1951, J. American Statistical Association 46, table 1 extended; from memory).
    const KS_CRITICAL: f64 = 1.95;

    fn mean_and_variance(sample: &[f64]) -> (f64, f64) {
        let n = sample.len() as f64;
        let mean = sample.iter().sum::<f64>() / n;
        let variance = sample.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (n - 1.0);
        (mean, variance)
    }

    #[test]
    fn normal_sampler_passes_kolmogorov_smirnov_against_statrs() {
        let mut rng = ChaCha8Rng::seed_from_u64(11);
        let mut sample = vec![0.0; 20_000];
        fill_standard_normal(&mut rng, &mut sample);
        let reference = Normal::new(0.0, 1.0).unwrap();
        let d = ks_statistic(sample.clone(), |x| reference.cdf(x));
        assert!(d * (sample.len() as f64).sqrt() < KS_CRITICAL, "D = {d}");
    }

    #[test]
    fn chi_square_sampler_passes_kolmogorov_smirnov_against_statrs() {
        // The sampler is the gamma sampler with shape dof/2 and scale 2, so this checks the
        // gamma draws too; statrs.distribution.ChiSquared is the reference law. Shapes
        // below and above 1 take different branches of the gamma method.
        for dof in [0.4, 3.0, 17.5] {
            let mut rng = ChaCha8Rng::seed_from_u64(23);
            let sample: Vec<f64> = (0..20_000).map(|_| chi_square(&mut rng, dof)).collect();
            let reference = ReferenceChiSquared::new(dof).unwrap();
            let d = ks_statistic(sample.clone(), |x| reference.cdf(x));
            assert!(
                d * (sample.len() as f64).sqrt() < KS_CRITICAL,
                "dof {dof}: D = {d}"
            );
        }
    }

    #[test]
    fn noncentral_chi_square_has_mean_k_plus_lambda_and_variance_2k_plus_4lambda() {
        // Johnson, Kotz & Balakrishnan 1995, Continuous Univariate Distributions vol. 2,
        // ch. 29, eq. (29.5): mean k + λ, variance 2(k + 2λ). Both branches of the sampler.
        let n = 200_000;
        for (k, lambda) in [(0.6, 2.0), (3.5, 0.8), (0.2, 0.0), (6.0, 15.0)] {
            let mut rng = ChaCha8Rng::seed_from_u64(5);
            let sample: Vec<f64> = (0..n)
                .map(|_| noncentral_chi_square(&mut rng, k, lambda))
                .collect();
            let (mean, variance) = mean_and_variance(&sample);
            let expected_mean = k + lambda;
            let expected_variance = 2.0 * (k + 2.0 * lambda);
            let mean_se = (expected_variance / n as f64).sqrt();
            // The standard error of the variance comes from the sample's fourth moment.
            let m4 = sample.iter().map(|x| (x - mean).powi(4)).sum::<f64>() / n as f64;
            let variance_se = ((m4 - variance * variance) / n as f64).sqrt();
            let z_mean = (mean - expected_mean) / mean_se;
            let z_variance = (variance - expected_variance) / variance_se;
            assert!(
                z_mean.abs() < 5.0,
                "k {k} λ {lambda}: mean {mean} vs {expected_mean}"
            );
            assert!(
                z_variance.abs() < 5.0,
                "k {k} λ {lambda}: variance {variance} vs {expected_variance}"
            );
        }
    }

    #[test]
    fn square_root_step_reproduces_the_cir_conditional_moments() {
        // E[X_Δ | x] = θ + (x − θ)e^{−κΔ};
        // Var = x σ² e^{−κΔ}(1 − e^{−κΔ})/κ + θσ²(1 − e^{−κΔ})²/(2κ)
        // (Cox, Ingersoll & Ross 1985, Econometrica 53(2), eq. (19)).
        // Feller satisfied (d > 1) and violated (d < 1).
        let n = 200_000;
        for (kappa, theta, sigma) in [(1.2, 0.04, 0.15), (0.5, 0.02, 0.4)] {
            let (x, step) = (0.03, 0.5);
            let transition = SquareRootStep::new(kappa, theta, sigma, step);
            let mut rng = ChaCha8Rng::seed_from_u64(77);
            let sample: Vec<f64> = (0..n).map(|_| transition.sample(&mut rng, x)).collect();
            let (mean, variance) = mean_and_variance(&sample);
            let e = (-kappa * step).exp();
            let expected_mean = theta + (x - theta) * e;
            let expected_variance = x * sigma * sigma * e * (1.0 - e) / kappa
                + theta * sigma * sigma * (1.0 - e).powi(2) / (2.0 * kappa);
            let z = (mean - expected_mean) / (expected_variance / n as f64).sqrt();
            assert!(z.abs() < 5.0, "mean {mean} vs {expected_mean}");
            let m4 = sample.iter().map(|v| (v - mean).powi(4)).sum::<f64>() / n as f64;
            let z_variance =
                (variance - expected_variance) / ((m4 - variance * variance) / n as f64).sqrt();
            assert!(
                z_variance.abs() < 5.0,
                "variance {variance} vs {expected_variance}"
            );
            assert!(sample.iter().all(|v| *v >= 0.0));
        }
    }
}
