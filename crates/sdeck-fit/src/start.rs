//! Where the search starts: moment estimates of each factor's coefficients.

use crate::plan::Single;
use sdeck_calculus::one_state::phi;
use sdeck_calculus::Family;

/// Moment estimates of the coefficients of one factor: the closed-form MLE for the
/// Brownian families; for Ornstein–Uhlenbeck and square-root, the AR(1) regression of
/// each value on the previous one at the mean step. `(coefficient index, value)` with
/// indices 0 = a, 1 = b, 2 = α, 3 = β, 4 = γ.
pub(crate) fn moment_targets(single: &Single) -> Vec<(usize, f64)> {
    let p = &single.points;
    if p.len() < 3 || single.form.time_dependent {
        return Vec::new();
    }
    let steps: Vec<(f64, f64, f64)> = p
        .windows(2)
        .map(|w| (w[1].0 - w[0].0, w[0].1, w[1].1))
        .collect();
    let total_time: f64 = steps.iter().map(|s| s.0).sum();
    let count = steps.len() as f64;
    // Brownian: drift Σ Δx / Σ Δt, variance rate mean((Δx − m Δt)² / Δt).
    let brownian = |f: &dyn Fn(f64) -> f64| {
        let m = steps.iter().map(|s| f(s.2) - f(s.1)).sum::<f64>() / total_time;
        let v = steps
            .iter()
            .map(|s| (f(s.2) - f(s.1) - m * s.0).powi(2) / s.0)
            .sum::<f64>()
            / count;
        (m, v)
    };
    match single.family {
        Family::ArithmeticBrownian => {
            let (m, v) = brownian(&|x| x);
            vec![(0, m), (2, v)]
        }
        Family::GeometricBrownian => {
            let (m, v) = brownian(&|x: f64| x.ln());
            vec![(1, m + v / 2.0), (4, v)]
        }
        Family::OrnsteinUhlenbeck | Family::SquareRoot => {
            let dt = total_time / count;
            let mx = steps.iter().map(|s| s.1).sum::<f64>() / count;
            let my = steps.iter().map(|s| s.2).sum::<f64>() / count;
            let sxy: f64 = steps.iter().map(|s| (s.1 - mx) * (s.2 - my)).sum();
            let sxx: f64 = steps.iter().map(|s| (s.1 - mx).powi(2)).sum();
            let slope = sxy / sxx;
            if !(slope > 0.0 && slope < 1.0) {
                return Vec::new();
            }
            let intercept = my - slope * mx;
            let b = slope.ln() / dt;
            let level = intercept / (1.0 - slope);
            let a = -b * level;
            let squares: f64 = steps
                .iter()
                .map(|s| (s.2 - intercept - slope * s.1).powi(2))
                .sum();
            if single.family == Family::OrnsteinUhlenbeck {
                vec![(0, a), (1, b), (2, squares / count / phi(2.0 * b, dt))]
            } else {
                // Var(X_{t+Δ} | x) = β (x e^{bΔ} φ(b,Δ) + a φ(b,Δ)²/2) (Cox, Ingersoll &
                // Ross 1985, eq. 19).
                let f = phi(b, dt);
                let scale: f64 = steps
                    .iter()
                    .map(|s| s.1 * (b * dt).exp() * f + a * f * f / 2.0)
                    .sum();
                vec![(0, a), (1, b), (3, squares / scale)]
            }
        }
        _ => Vec::new(),
    }
}

pub(crate) fn coefficient(v: &sdeck_calculus::coefficients::OneStateValues, index: usize) -> f64 {
    match index {
        0 => v.a,
        1 => v.b,
        2 => v.alpha,
        3 => v.beta,
        _ => v.gamma,
    }
}
