//! Whole laws of single factors at one time: distribution function and quantiles.
//!
//! Normal for Gaussian factors, lognormal for geometric ones (and for a price whose log is
//! Gaussian), the scaled noncentral chi-square of a square-root factor (Cox, Ingersoll &
//! Ross 1985, eq. 18), and for every other factor of an affine set, Fourier inversion of
//! the characteristic function from the transform engine (Gil-Pelaez 1951, Biometrika 38):
//!
//! P(Z ≤ z) = ½ − (1/π) ∫₀^∞ Im(e^{−iωz} φ(ω)) / ω dω.

use crate::affine::{AffineSet, Rate, TransformError, WorkBudget};
use crate::one_state::{mean_variance, square_root_transition};
use crate::shape::OneState;
use crate::{noncentral, ode, Derivation, Family};
use num_complex::Complex64;
use sdeck_semantics::{FactorId, Model};
use statrs::distribution::{ContinuousCDF, Normal};
use std::collections::HashMap;
use std::sync::atomic::{AtomicUsize, Ordering};
use std::sync::{Arc, Mutex};

/// Which law a factor follows at a time.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum LawKind {
    Normal,
    Lognormal,
    NoncentralChiSquare,
    /// Known through its characteristic function only.
    Fourier,
}

impl LawKind {
    /// The name used in every output.
    pub fn as_str(self) -> &'static str {
        match self {
            LawKind::Normal => "normal",
            LawKind::Lognormal => "lognormal",
            LawKind::NoncentralChiSquare => "noncentral-chi-square",
            LawKind::Fourier => "fourier",
        }
    }

    /// Whether the law may put mass on both sides of zero, so a factor may change sign:
    /// a normal law, or one known through its transform.
    pub fn on_whole_line(self) -> bool {
        matches!(self, LawKind::Normal | LawKind::Fourier)
    }
}

#[derive(Clone, Debug)]
enum Shape {
    /// X ~ Normal(mean, sd²).
    Normal { mean: f64, sd: f64 },
    /// X = sign·exp(Normal(location, spread²)).
    Lognormal {
        location: f64,
        spread: f64,
        negative: bool,
    },
    /// X = Y / scale, Y ~ χ'²(degrees, noncentrality).
    NoncentralChiSquare {
        degrees: f64,
        noncentrality: f64,
        scale: f64,
    },
    /// Z = X (or ln X when `log`) with characteristic function from the transform.
    /// The transform of `set` is that of Z − `origin`; `mean` is E[Z − origin].
    Fourier {
        set: Box<AffineSet>,
        factor: usize,
        log: bool,
        t: f64,
        origin: f64,
        mean: f64,
        sd: f64,
        /// Transform evaluations left for every probability and quantile of this law
        /// together: past it they are unknown, never slow (a nearly constant law, whose
        /// characteristic function decays only at very high frequencies, would
        /// otherwise take minutes).
        budget: Arc<AtomicUsize>,
        /// ln φ at the scaled frequencies met so far (by their bits). The frequencies
        /// do not depend on the point at which the distribution is read, and the
        /// quadrature's bisected panels put its nodes at the same frequencies for each
        /// point: a quantile (some thirty distribution functions) computes most of them
        /// once.
        memo: Arc<Mutex<HashMap<u64, Option<Complex64>>>>,
    },
    /// X_t is the constant x (t = 0 or no noise).
    Point(f64),
}

/// The law of one factor at one time.
#[derive(Clone, Debug)]
pub struct Law {
    kind: LawKind,
    shape: Shape,
}

fn standard() -> Option<Normal> {
    Normal::new(0.0, 1.0).ok()
}

/// The law of factor `state` at time `t` (clock units), when it is known, with a work
/// budget of its own ([`LAW_WORK`]).
pub fn law_of(model: &Model, derivation: &Derivation, id: FactorId, t: f64) -> Option<Law> {
    law_within(model, derivation, id, t, &WorkBudget::new(LAW_WORK))
}

/// [`law_of`], its Riccati integrations drawing on `work`, which other laws may share:
/// the laws of one report spend one budget between them, not one each.
pub fn law_within(
    model: &Model,
    derivation: &Derivation,
    id: FactorId,
    t: f64,
    work: &WorkBudget,
) -> Option<Law> {
    if !(t.is_finite() && t >= 0.0) {
        return None;
    }
    let state = id.index();
    let x0 = model.factors.by_id(id)?.initial;
    if derivation
        .states
        .by_id(id)
        .is_some_and(|l| l.outside_domain.is_some())
    {
        return None;
    }
    if t == 0.0 {
        return Some(Law {
            kind: LawKind::Normal,
            shape: Shape::Point(x0),
        });
    }
    let analysis = derivation.analysis();
    if let Some((os, family)) = analysis.one_state(state) {
        if let Some(law) = one_state_law(os, family, &analysis.params, x0, t) {
            return law;
        }
    }
    if derivation.system_family == Family::LinearSystem {
        let moments = crate::state_moments(model, derivation, id, t);
        return Some(normal(moments.mean?, moments.variance?));
    }
    transform_law(model, state, t, work)
}

/// The law of a one-state factor in closed form: normal, lognormal or noncentral
/// chi-square. `None` when its family has no closed-form law here (the caller tries the
/// other ways); `Some(None)` when it has one that cannot be evaluated.
fn one_state_law(
    os: &OneState,
    family: Family,
    params: &[f64],
    x0: f64,
    t: f64,
) -> Option<Option<Law>> {
    let gaussian = matches!(
        family,
        Family::Deterministic | Family::ArithmeticBrownian | Family::OrnsteinUhlenbeck
    ) || (family == Family::Linear && !os.state_dependent_noise());
    if gaussian {
        return Some(
            mean_variance(os, family, params, x0, t).map(|mv| normal(mv.mean, mv.variance)),
        );
    }
    if family == Family::GeometricBrownian && !os.time_dependent {
        if x0 == 0.0 {
            return Some(Some(Law {
                kind: LawKind::Lognormal,
                shape: Shape::Point(0.0),
            }));
        }
        // ln(X_t / x0) ~ Normal((b − γ/2) t, γ t) (Glasserman 2004, §3.2.1).
        let v = os.values(params, 0.0);
        return Some(Some(Law {
            kind: LawKind::Lognormal,
            shape: Shape::Lognormal {
                location: x0.abs().ln() + (v.b - v.gamma / 2.0) * t,
                spread: (v.gamma * t).max(0.0).sqrt(),
                negative: x0 < 0.0,
            },
        }));
    }
    if family == Family::SquareRoot && !os.time_dependent {
        return Some(square_root_transition(os, params, x0, t).map(|law| Law {
            kind: LawKind::NoncentralChiSquare,
            shape: Shape::NoncentralChiSquare {
                degrees: law.degrees,
                noncentrality: law.noncentrality,
                scale: law.scale,
            },
        }));
    }
    None
}

/// The law of factor `state` from the transform of the model's affine set: normal or
/// lognormal when the set is Gaussian, inverted by Fourier otherwise.
fn transform_law(model: &Model, state: usize, t: f64, work: &WorkBudget) -> Option<Law> {
    let set = AffineSet::from_model(model).ok()?.with_work(work.clone());
    let log = set.is_log(state);
    // A log factor is inverted around ln X₀ (see `AffineSet::centred_log`).
    let (set, origin) = set.centred_log(state).unwrap_or((set, 0.0));
    let rate = Rate::zero(&set);
    let transform = |u: Complex64| -> Result<Complex64, TransformError> {
        let mut argument = vec![Complex64::new(0.0, 0.0); set.dimension()];
        argument[state] = u;
        set.log_transform(&argument, &rate, t)
    };
    if set.is_gaussian() {
        // log E[e^{uZ}] = u m + ½u² v, so L(1) + L(−1) = v and L(1) − L(−1) = 2m.
        let up = transform(Complex64::new(1.0, 0.0)).ok()?.re;
        let down = transform(Complex64::new(-1.0, 0.0)).ok()?.re;
        let (mean, variance) = (origin + (up - down) / 2.0, up + down);
        if log {
            return Some(Law {
                kind: LawKind::Lognormal,
                shape: Shape::Lognormal {
                    location: mean,
                    spread: variance.max(0.0).sqrt(),
                    negative: false,
                },
            });
        }
        return Some(normal(mean, variance));
    }
    let (mean, sd) = first_cumulants(&transform)?;
    Some(Law {
        kind: LawKind::Fourier,
        shape: Shape::Fourier {
            set: Box::new(set),
            factor: state,
            log,
            t,
            origin,
            mean,
            sd,
            budget: Arc::new(AtomicUsize::new(FOURIER_EVALUATIONS)),
            memo: Arc::new(Mutex::new(HashMap::new())),
        },
    })
}

/// The mean and standard deviation from the log transform at small imaginary arguments:
/// L(ih) ≈ iκ₁h − κ₂h²/2, the step refined once to the scale of the law.
fn first_cumulants(
    transform: &dyn Fn(Complex64) -> Result<Complex64, TransformError>,
) -> Option<(f64, f64)> {
    let mut h = 1e-3;
    let mut mean = f64::NAN;
    let mut sd = f64::NAN;
    for _ in 0..2 {
        let value = transform(Complex64::new(0.0, h)).ok()?;
        mean = value.im / h;
        sd = (-2.0 * value.re / (h * h)).max(0.0).sqrt();
        if !(sd > 0.0 && sd.is_finite()) {
            return None;
        }
        h = 1e-3 / sd;
    }
    Some((mean, sd))
}

/// The transform evaluations one Fourier law may spend on all its probabilities and
/// quantiles (the memo serves the frequencies met before): five quantiles of a
/// well-scaled law take well under a thousand.
const FOURIER_EVALUATIONS: usize = 200_000;

/// The work a law, or the laws of one report together, may spend integrating Riccati
/// equations (units of [`WorkBudget`]). 10⁸ is some 0.35 s in a release build, and five
/// times what the quantiles of two coupled square-root factors at a 30-year horizon
/// take (2.6 million right-hand sides of 8 units, measured). Past it the probabilities
/// are unknown: a set whose characteristic function decays slowly at a long horizon
/// would otherwise integrate for minutes.
pub const LAW_WORK: usize = 100_000_000;

fn normal(mean: f64, variance: f64) -> Law {
    let sd = variance.max(0.0).sqrt();
    Law {
        kind: LawKind::Normal,
        shape: if sd == 0.0 {
            Shape::Point(mean)
        } else {
            Shape::Normal { mean, sd }
        },
    }
}

impl Law {
    pub fn kind(&self) -> LawKind {
        self.kind
    }

    /// P(X ≤ x).
    pub fn cdf(&self, x: f64) -> Option<f64> {
        if x.is_nan() {
            return None;
        }
        let z = standard()?;
        let p = match &self.shape {
            Shape::Point(value) => f64::from(u8::from(x >= *value)),
            Shape::Normal { mean, sd } => z.cdf((x - mean) / sd),
            Shape::Lognormal {
                location,
                spread,
                negative,
            } => {
                let below = |y: f64| {
                    if y <= 0.0 {
                        0.0
                    } else if *spread == 0.0 {
                        f64::from(u8::from(y.ln() >= *location))
                    } else {
                        z.cdf((y.ln() - location) / spread)
                    }
                };
                if *negative {
                    1.0 - below(-x)
                } else {
                    below(x)
                }
            }
            Shape::NoncentralChiSquare {
                degrees,
                noncentrality,
                scale,
            } => {
                if x <= 0.0 {
                    0.0
                } else {
                    noncentral::cdf(x * scale, *degrees, *noncentrality)
                }
            }
            Shape::Fourier { log, .. } => {
                if *log && x <= 0.0 {
                    0.0
                } else {
                    self.fourier_cdf(if *log { x.ln() } else { x })?
                }
            }
        };
        p.is_finite().then_some(p.clamp(0.0, 1.0))
    }

    /// The x with P(X ≤ x) = p, 0 < p < 1.
    pub fn quantile(&self, p: f64) -> Option<f64> {
        if !(p > 0.0 && p < 1.0) {
            return None;
        }
        let z = standard()?;
        match &self.shape {
            Shape::Point(value) => Some(*value),
            Shape::Normal { mean, sd } => Some(mean + sd * z.inverse_cdf(p)),
            Shape::Lognormal {
                location,
                spread,
                negative,
            } => {
                let q = if *negative { 1.0 - p } else { p };
                let value = (location + spread * z.inverse_cdf(q)).exp();
                Some(if *negative { -value } else { value })
            }
            Shape::NoncentralChiSquare {
                degrees,
                noncentrality,
                scale,
            } => noncentral::quantile(p, *degrees, *noncentrality).map(|y| y / scale),
            Shape::Fourier {
                mean,
                sd,
                log,
                origin,
                ..
            } => {
                let target = |v: f64| self.fourier_cdf(v).map(|c| c - p);
                let value = solve_increasing(target, origin + mean, *sd)?;
                Some(if *log { value.exp() } else { value })
            }
        }
    }

    /// P(Z ≤ z) for the Fourier law, on the coordinate Z (X or ln X).
    fn fourier_cdf(&self, z: f64) -> Option<f64> {
        let Shape::Fourier {
            set,
            factor,
            t,
            origin,
            sd,
            mean,
            budget,
            memo,
            ..
        } = &self.shape
        else {
            return None;
        };
        let z = z - origin;
        let transform = set.factor_transform(*factor, *t);
        // ln φ at the scaled frequency s = ω·sd, on which the integrand decays on a
        // scale of one.
        let log_phi = |s: f64| -> Option<Complex64> {
            let remembered = memo.lock().ok().and_then(|m| m.get(&s.to_bits()).copied());
            if let Some(value) = remembered {
                return value;
            }
            budget
                .fetch_update(Ordering::Relaxed, Ordering::Relaxed, |n| n.checked_sub(1))
                .ok()?;
            let value = transform.log_transform(Complex64::new(0.0, s / sd)).ok();
            if let Ok(mut m) = memo.lock() {
                m.insert(s.to_bits(), value);
            }
            value
        };
        let integrand = |s: f64| -> f64 {
            if s == 0.0 {
                // Im(e^{−iωz} φ(ω))/ω → E[Z] − z as ω → 0.
                return (mean - z) / sd;
            }
            match log_phi(s) {
                Some(l) => (l - Complex64::new(0.0, s / sd * z)).exp().im / s,
                None => f64::NAN,
            }
        };
        let mut total = 0.0;
        let mut low = 0.0;
        let mut high = 1.0;
        // The doubling stops when the modulus |φ(ω)|/s (free of the oscillating phase,
        // and so of its rounding) says the rest of the integral is negligible; at most
        // 2⁴⁰ scaled frequencies, then the probability is unknown rather than slow.
        for _ in 0..40 {
            // 1e-10 relative per piece keeps the probability within 1e-10 absolute
            // (the pieces add to at most π/2 in size), inside the 1e-9 promised, and
            // above the rounding of the transform's phase, which a tighter tolerance
            // would chase through every subdivision.
            let piece = ode::quad(integrand, low, high, 1e-10)
                .or_else(|_| ode::quad(integrand, low, high, 1e-8))
                .ok()?;
            total += piece;
            let envelope = log_phi(high)?.re.exp() / high;
            if envelope < 1e-14 || (envelope * high < 1e-13 && piece.abs() < 1e-11) {
                let p = 0.5 - total / std::f64::consts::PI;
                return p.is_finite().then_some(p);
            }
            low = high;
            high *= 2.0;
        }
        None
    }
}

/// A root of an increasing function near `guess` with scale `scale`: bracket, then
/// bisection with secant steps (Illinois).
fn solve_increasing<F: Fn(f64) -> Option<f64>>(f: F, guess: f64, scale: f64) -> Option<f64> {
    let mut low = guess - scale;
    let mut high = guess + scale;
    let mut f_low = f(low)?;
    let mut f_high = f(high)?;
    let mut widen = 0;
    while f_low > 0.0 && widen < 60 {
        high = low;
        f_high = f_low;
        low -= scale * 2f64.powi(widen);
        f_low = f(low)?;
        widen += 1;
    }
    while f_high < 0.0 && widen < 120 {
        low = high;
        f_low = f_high;
        high += scale * 2f64.powi(widen - 60);
        f_high = f(high)?;
        widen += 1;
    }
    if f_low > 0.0 || f_high < 0.0 {
        return None;
    }
    let mut side = 0;
    for _ in 0..100 {
        let mut x = (low * f_high - high * f_low) / (f_high - f_low);
        if !(x > low && x < high) {
            x = 0.5 * (low + high);
        }
        let fx = f(x)?;
        if fx.abs() < 1e-13 || (high - low) < 1e-13 * (1.0 + x.abs()) {
            return Some(x);
        }
        if fx < 0.0 {
            low = x;
            f_low = fx;
            if side == -1 {
                f_high /= 2.0;
            }
            side = -1;
        } else {
            high = x;
            f_high = fx;
            if side == 1 {
                f_low /= 2.0;
            }
            side = 1;
        }
    }
    Some(0.5 * (low + high))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Evaluations of the transform left in a Fourier law's budget.
    fn evaluations_left(law: &Law) -> usize {
        match &law.shape {
            Shape::Fourier { budget, .. } => budget.load(Ordering::Relaxed),
            _ => panic!("not a Fourier law"),
        }
    }

    #[test]
    fn quantiles_reuse_the_frequencies_already_met() {
        // An index over a square-root variance (Heston 1993): its law is inverted by
        // Fourier. Each quantile reads some thirty distribution functions, whose
        // quadratures visit the same frequencies: most are served by the memo.
        let text = "model m\nclock year\nparam mu = 3% [1/year]\nparam kappa = 1.5 [1/year]\n\
            param theta = 0.04 [1/year]\nparam xi = 0.5 [1/year]\nshock Ws, Wv\n\
            corr Ws Wv = -0.7\nfactor S = 100\nfactor v = 0.05 [1/year] >= 0\n\
            dS = mu * S dt + sqrt(v) * S dWs\ndv = kappa * (theta - v) dt + xi * sqrt(v) dWv\n";
        let analysis = sdeck_semantics::analyze(text, "m");
        assert!(!analysis.has_errors(), "{:?}", analysis.diagnostics);
        let model = &analysis.model;
        let derivation = crate::derive(model);
        let id = model.factor_id("S").expect("S");
        let law = law_of(model, &derivation, id, 1.0).expect("a law");
        assert_eq!(law.kind(), LawKind::Fourier);
        let probabilities = [0.01, 0.05, 0.5, 0.95, 0.99];
        let first: Vec<f64> = probabilities
            .iter()
            .map(|&p| law.quantile(p).expect("a quantile"))
            .collect();
        let spent = FOURIER_EVALUATIONS - evaluations_left(&law);
        // Without the memo the five took 87,868 evaluations (measured at 6629ae6).
        assert!(spent < 5_000, "{spent} evaluations");
        // Asked again, every frequency is known: nothing is spent, nothing changes.
        let again: Vec<f64> = probabilities
            .iter()
            .map(|&p| law.quantile(p).expect("a quantile"))
            .collect();
        assert_eq!(first, again);
        assert_eq!(FOURIER_EVALUATIONS - evaluations_left(&law), spent);
        for (p, q) in probabilities.iter().zip(&first) {
            let back = law.cdf(*q).expect("a probability");
            assert!((back - p).abs() < 1e-8, "P(S ≤ {q}) = {back}, not {p}");
        }
    }
}
