//! The affine transform engine: for a set of factors whose drift is affine in the
//! factors and whose instantaneous covariance is affine in them,
//!
//! E[exp(u·X_T − ∫₀ᵀ (ρ₀(s) + ρ₁·X_s) ds)] = exp(α(T) + β(T)·X₀),
//!
//! with β and α solving the Riccati equations, in τ = time to maturity
//! (Duffie, Pan & Singleton 2000, Econometrica 68, eq. 2.5–2.6; Duffie & Kan 1996):
//!
//! dβ_k/dτ = Σ_i K1_ik β_i + ½ βᵀ H1_k β − ρ1_k,  dα/dτ = K0·β + ½ βᵀ H0 β − ρ0,
//!
//! where the drift of factor i is K0_i + Σ_j K1_ij x_j and the instantaneous covariance is
//! H0 + Σ_k x_k H1_k. A factor dS = S·(a + b·X) dt + S·(...) dW whose own covariance is
//! quadratic in S enters through its logarithm: Y = ln S has the affine drift
//! a + b·X − ½ (squared relative diffusion) by Itô's formula.
//!
//! Three ways to the answer, the first that applies:
//! * Gaussian sets (no factor in any covariance, constant coefficients): the mean and
//!   covariance of (X_T, ∫ρ₁·X ds) by the matrix exponential and Van Loan 1978, the
//!   transform of a Gaussian vector then being exact for complex u;
//! * sets whose Riccati system splits into scalar equations with constant coefficients
//!   (square-root factors, a log-price driven by a square-root variance): the scalar
//!   Riccati equation in closed form (Cox, Ingersoll & Ross 1985; Heston 1993), written
//!   with the decaying exponential so that the complex logarithm stays on one branch
//!   (Albrecher, Mayer, Schoutens & Tistaert 2007);
//! * otherwise the adaptive Dormand–Prince integrator of [`crate::ode`] on the real and
//!   imaginary parts, to 1e-11 relative.

use crate::algebra::{to_poly, Poly};
use crate::breaks::TimeBreaks;
use crate::ode;

mod build;
mod closed_form;
mod explosion;
mod factor_transform;
mod reach;
mod riccati;
mod work;
use closed_form::{gaussian_log_transform, scalar_solution, scalar_structure};
pub use factor_transform::FactorTransform;
use num_complex::Complex64;
use riccati::{dot, exploded, pack, riccati_rhs, unpack};
use sdeck_semantics::Expr;
pub use work::WorkBudget;

/// Relative tolerance of the Riccati integration.
const RICCATI_RTOL: f64 = 1e-11;
/// Absolute floor of the Riccati integration.
const RICCATI_ATOL: f64 = 1e-14;
/// |β| above which the transform is taken as exploding.
const EXPLOSION_SIZE: f64 = 1e8;

/// How a transform was computed.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum TransformMethod {
    /// Matrix exponential of a Gaussian set, or the scalar Riccati solution.
    ClosedForm,
    /// The Riccati equations integrated numerically.
    Riccati,
}

impl TransformMethod {
    pub fn as_str(self) -> &'static str {
        match self {
            TransformMethod::ClosedForm => "closed-form",
            TransformMethod::Riccati => "riccati",
        }
    }
}

/// Why a transform has no finite value.
#[derive(Clone, Debug, PartialEq)]
pub enum TransformError {
    /// The Riccati solution blows up before the maturity (the moment is infinite).
    Explodes,
    /// The numbers could not be computed (non-finite coefficients, integration failure).
    Failed(String),
}

/// Coefficients at one time, flat: k1[i·n + j], h0[i·n + j], h1[k·n·n + i·n + j].
#[derive(Clone, Debug, PartialEq)]
struct Numbers {
    k0: Vec<f64>,
    k1: Vec<f64>,
    h0: Vec<f64>,
    h1: Vec<f64>,
}

/// A set of factors with affine drift and affine instantaneous covariance.
#[derive(Clone, Debug)]
pub struct AffineSet {
    n: usize,
    /// Factor i is carried as ln X_i.
    log: Vec<bool>,
    /// Starting point in the set's coordinates (ln X₀ for log factors).
    x0: Vec<f64>,
    k0: Vec<Poly>,
    k1: Vec<Vec<Poly>>,
    h0: Vec<Vec<Poly>>,
    /// h1[k][i][j]: coefficient of x_k in the covariance of i and j.
    h1: Vec<Vec<Vec<Poly>>>,
    params: Vec<f64>,
    time_dependent: bool,
    constant: Option<Numbers>,
    /// Where the coefficients jump or bend (knots of `step`, `ramp`; kinks of `min`,
    /// `max`, `abs` of t): the integrations in time are split there.
    breaks: TimeBreaks,
    /// The work the numerical integrations of this set, its clones and its reductions
    /// draw on; `None`: no limit. See [`Self::with_work`].
    work: Option<WorkBudget>,
}

/// A short rate ρ₀(t) + ρ₁·X in clock units (per clock unit of time).
#[derive(Clone, Debug)]
pub struct Rate {
    r0: Poly,
    r1: Vec<Poly>,
}

impl Rate {
    /// The rate `expr` (already in per-clock-unit terms), which must be affine in the
    /// factors of `set` that are not carried by their logarithm.
    pub fn new(set: &AffineSet, expr: &Expr) -> Result<Rate, String> {
        if expr.is_invalid() {
            return Err("the rate did not resolve".to_string());
        }
        let poly = to_poly(expr).map_err(|_| {
            "the rate is not a polynomial in the factors (it must be affine: a + b·x + ...)"
                .to_string()
        })?;
        let mut r1 = vec![Poly::zero(); set.n];
        let mut r0 = Poly::zero();
        for (key, coefficient) in poly.by_state_monomial() {
            match key.as_slice() {
                [] => r0 = coefficient,
                [(j, 1)] if !set.log.get(*j).copied().unwrap_or(true) => {
                    if let Some(slot) = r1.get_mut(*j) {
                        *slot = coefficient;
                    }
                }
                [(j, 1)] => {
                    return Err(format!(
                        "the rate mentions factor {} whose law is lognormal-like; a short \
                         rate must be affine in factors with affine dynamics",
                        j + 1
                    ))
                }
                _ => return Err("the rate is not affine in the factors".to_string()),
            }
        }
        Ok(Rate { r0, r1 })
    }

    /// The zero rate.
    pub fn zero(set: &AffineSet) -> Rate {
        Rate {
            r0: Poly::zero(),
            r1: vec![Poly::zero(); set.n],
        }
    }

    fn depends_on_time(&self) -> bool {
        self.r0.depends_on_time() || self.r1.iter().any(Poly::depends_on_time)
    }

    fn values(&self, params: &[f64], t: f64) -> (f64, Vec<f64>) {
        (
            self.r0.value(params, t),
            self.r1.iter().map(|p| p.value(params, t)).collect(),
        )
    }
}

impl AffineSet {
    fn numbers(&self, t: f64) -> Numbers {
        let p = &self.params;
        Numbers {
            k0: self.k0.iter().map(|c| c.value(p, t)).collect(),
            k1: self.k1.iter().flatten().map(|c| c.value(p, t)).collect(),
            h0: self.h0.iter().flatten().map(|c| c.value(p, t)).collect(),
            h1: self
                .h1
                .iter()
                .flatten()
                .flatten()
                .map(|c| c.value(p, t))
                .collect(),
        }
    }

    /// Number of factors.
    pub fn dimension(&self) -> usize {
        self.n
    }

    /// Whether factor `i` is carried by its logarithm.
    pub fn is_log(&self, i: usize) -> bool {
        self.log.get(i).copied().unwrap_or(false)
    }

    /// Whether the coefficients change with t.
    pub fn time_dependent(&self) -> bool {
        self.time_dependent
    }

    /// Whether no factor enters any covariance: the set is Gaussian (in its coordinates).
    /// The same set with the log factor `i` started at ln X₀ = 0, and the ln X₀ taken
    /// out. Nothing in an affine set depends on a log coordinate, so its transform only
    /// gains the exact phase u·ln X₀; leaving that phase out keeps the characteristic
    /// function of a nearly constant log-price free of the cancellation between two
    /// large phases. `None` when `i` is not a log factor.
    pub fn centred_log(&self, i: usize) -> Option<(AffineSet, f64)> {
        if !self.is_log(i) {
            return None;
        }
        let mut centred = self.clone();
        let start = std::mem::replace(centred.x0.get_mut(i)?, 0.0);
        Some((centred, start))
    }

    pub fn is_gaussian(&self) -> bool {
        self.h1.iter().flatten().flatten().all(Poly::is_zero)
    }

    /// The starting point in the set's coordinates.
    pub fn start(&self) -> &[f64] {
        &self.x0
    }

    /// u = 0 for every factor.
    fn zero_argument(&self) -> Vec<Complex64> {
        vec![Complex64::new(0.0, 0.0); self.n]
    }

    /// How [`Self::log_transform`] computes the discount of this rate (u = 0).
    pub fn method(&self, rate: &Rate) -> TransformMethod {
        if let Some((set, rate, _)) = self.reduced(&self.zero_argument(), rate) {
            return set.method(&rate);
        }
        match self.plan(rate) {
            Plan::Numeric => TransformMethod::Riccati,
            _ => TransformMethod::ClosedForm,
        }
    }

    fn plan(&self, rate: &Rate) -> Plan {
        let Some(numbers) = &self.constant else {
            return Plan::Numeric;
        };
        if rate.r1.iter().any(Poly::depends_on_time) {
            return Plan::Numeric;
        }
        if self.is_gaussian() {
            return Plan::Gaussian;
        }
        let (_, r1) = rate.values(&self.params, 0.0);
        match scalar_structure(self.n, numbers, &r1) {
            Some(fixed) => Plan::Scalar(fixed),
            None => Plan::Numeric,
        }
    }

    /// log E[exp(u·X_t − ∫₀ᵗ rate ds)] = α(t) + β(t)·X₀ at each of `times` (clock units,
    /// non-negative). `u` has one entry per factor (on ln X for log factors).
    pub fn log_transforms(
        &self,
        u: &[Complex64],
        rate: &Rate,
        times: &[f64],
    ) -> Vec<Result<Complex64, TransformError>> {
        if u.len() != self.n {
            return times
                .iter()
                .map(|_| Err(TransformError::Failed("wrong number of arguments".into())))
                .collect();
        }
        if times.iter().any(|t| !(t.is_finite() && *t >= 0.0)) {
            return times
                .iter()
                .map(|_| {
                    Err(TransformError::Failed(
                        "a time is negative or not finite".into(),
                    ))
                })
                .collect();
        }
        if let Some((set, rate, keep)) = self.reduced(u, rate) {
            let u: Vec<Complex64> = keep.iter().map(|&k| u[k]).collect();
            return set.log_transforms(&u, &rate, times);
        }
        let shift = |t: f64| self.integrated_constant_rate(rate, t);
        match (self.plan(rate), &self.constant) {
            (Plan::Gaussian, Some(numbers)) => times
                .iter()
                .map(|&t| {
                    let value = gaussian_log_transform(self, numbers, u, rate, t)?;
                    Ok(value - shift(t)?)
                })
                .collect(),
            (Plan::Scalar(fixed), Some(numbers)) => {
                let (_, r1) = rate.values(&self.params, 0.0);
                times
                    .iter()
                    .map(|&t| {
                        let (alpha, beta) = scalar_solution(self.n, numbers, &r1, &fixed, u, t)?;
                        Ok(alpha + dot(&beta, &self.x0) - shift(t)?)
                    })
                    .collect()
            }
            (_, Some(numbers)) if !rate.depends_on_time() => {
                self.integrate_through(numbers, u, rate, times)
            }
            _ => times
                .iter()
                .map(|&t| self.log_transform_backward(u, rate, t))
                .collect(),
        }
    }

    /// Constant coefficients integrated numerically: one integration in τ through every
    /// time, in ascending order.
    fn integrate_through(
        &self,
        numbers: &Numbers,
        u: &[Complex64],
        rate: &Rate,
        times: &[f64],
    ) -> Vec<Result<Complex64, TransformError>> {
        let (r0, r1) = rate.values(&self.params, 0.0);
        let rhs = |_: f64, y: &[f64], dy: &mut [f64]| {
            if self.spend() {
                riccati_rhs(self.n, numbers, r0, &r1, y, dy)
            } else {
                dy.fill(f64::NAN);
            }
        };
        let mut order: Vec<usize> = (0..times.len()).collect();
        order.sort_by(|a, b| times[*a].total_cmp(&times[*b]));
        let sorted: Vec<f64> = order.iter().map(|&i| times[i]).collect();
        let mut out = vec![Err(TransformError::Explodes); times.len()];
        let start = pack(u);
        // Integrate one stop at a time so that a blow-up only affects later times.
        let mut state = start;
        let mut current = 0.0;
        for (slot, &t) in order.iter().zip(&sorted) {
            match ode::integrate(rhs, &state, current, t, RICCATI_RTOL, RICCATI_ATOL) {
                Ok(y) if exploded(&y) => break,
                Ok(y) => {
                    out[*slot] = Ok(self.finish(&y));
                    state = y;
                    current = t;
                }
                Err(_) => break,
            }
        }
        if self.spent() {
            // What the loop left as exploding it could not tell.
            for value in out.iter_mut() {
                if value == &Err(TransformError::Explodes) {
                    *value = Err(self.integration_failed());
                }
            }
        }
        out
    }

    /// For constant coefficients integrated numerically: at each of `times` (sorted
    /// ascending, positive) the log transform at u = 0 and its time derivative, read from
    /// the Riccati right-hand side at the solution (so the forward rate needs no finite
    /// differences and the integration stops once per time). `None` for the other plans
    /// or when a time is out of order; an entry is `None` where the transform blew up.
    pub fn discount_with_slopes(
        &self,
        rate: &Rate,
        times: &[f64],
    ) -> Option<Vec<Option<(f64, f64)>>> {
        if let Some((set, rate, _)) = self.reduced(&self.zero_argument(), rate) {
            return set.discount_with_slopes(&rate, times);
        }
        let numbers = self.constant.as_ref()?;
        if !matches!(self.plan(rate), Plan::Numeric)
            || rate.depends_on_time()
            || times.windows(2).any(|w| w[1] < w[0])
            || times.iter().any(|t| !(t.is_finite() && *t >= 0.0))
        {
            return None;
        }
        let (r0, r1) = rate.values(&self.params, 0.0);
        let rhs = |_: f64, y: &[f64], dy: &mut [f64]| riccati_rhs(self.n, numbers, r0, &r1, y, dy);
        let mut y = pack(&vec![Complex64::new(0.0, 0.0); self.n]);
        let mut dy = vec![0.0; y.len()];
        let mut current = 0.0;
        let mut out = Vec::with_capacity(times.len());
        for &t in times {
            match ode::integrate(rhs, &y, current, t, RICCATI_RTOL, RICCATI_ATOL) {
                Ok(next) if !exploded(&next) => {
                    y = next;
                    current = t;
                    riccati_rhs(self.n, numbers, r0, &r1, &y, &mut dy);
                    let (beta_slope, alpha_slope) = unpack(&dy, self.n);
                    let slope = alpha_slope + dot(&beta_slope, &self.x0);
                    out.push(Some((self.finish(&y).re, slope.re)));
                }
                _ => break,
            }
        }
        out.resize(times.len(), None);
        Some(out)
    }

    /// lim −(d/dt) log E[exp(−∫₀ᵗ rate ds)] per clock unit, for constant coefficients
    /// integrated numerically: the Riccati system at u = 0 is followed through doubling
    /// times until β has settled (|β′| below 1e-10 of the rate's scale, the floor the
    /// integration's own error leaves), and the slope is
    /// then −α′ − β′·X₀ read from the right-hand side. `None` when the plan is a closed
    /// form (the caller compares two far stretches, which is cheap there), when the
    /// coefficients change with time, or when β has not settled by `limit`.
    pub fn settled_rate(&self, rate: &Rate, limit: f64) -> Option<f64> {
        if let Some((set, rate, _)) = self.reduced(&self.zero_argument(), rate) {
            return set.settled_rate(&rate, limit);
        }
        let numbers = self.constant.as_ref()?;
        if !matches!(self.plan(rate), Plan::Numeric) || rate.depends_on_time() {
            return None;
        }
        let (r0, r1) = rate.values(&self.params, 0.0);
        let rhs = |_: f64, y: &[f64], dy: &mut [f64]| riccati_rhs(self.n, numbers, r0, &r1, y, dy);
        let scale = r0.abs() + r1.iter().map(|v| v.abs()).sum::<f64>();
        let mut y = pack(&vec![Complex64::new(0.0, 0.0); self.n]);
        let mut dy = vec![0.0; y.len()];
        let mut current = 0.0;
        let mut next = 1.0;
        while next <= limit {
            y = ode::integrate(rhs, &y, current, next, RICCATI_RTOL, RICCATI_ATOL).ok()?;
            if exploded(&y) {
                return None;
            }
            riccati_rhs(self.n, numbers, r0, &r1, &y, &mut dy);
            let (beta_slope, alpha_slope) = unpack(&dy, self.n);
            let moving = beta_slope.iter().map(|b| b.norm()).fold(0.0, f64::max);
            if moving <= 1e-10 * scale.max(f64::MIN_POSITIVE) {
                let slope = alpha_slope + dot(&beta_slope, &self.x0);
                return (-slope.re).is_finite().then_some(-slope.re);
            }
            current = next;
            next *= 2.0;
        }
        None
    }

    /// log E[exp(w·X_t)] of factor `factor` alone (no discounting), prepared for many
    /// complex `w`: the plan and the coefficients are read once.
    pub fn factor_transform(&self, factor: usize, t: f64) -> FactorTransform {
        let rate = Rate::zero(self);
        let mut argument = self.zero_argument();
        if let Some(slot) = argument.get_mut(factor) {
            *slot = Complex64::new(1.0, 0.0);
        }
        // Only the factors this one reads (drop the rest once, not per frequency).
        if let Some((set, _, keep)) = self.reduced(&argument, &rate) {
            if let Some(position) = keep.iter().position(|&k| k == factor) {
                return set.factor_transform(position, t);
            }
        }
        let scalar = match (self.plan(&rate), &self.constant) {
            (Plan::Scalar(fixed), Some(numbers)) => Some((numbers.clone(), fixed)),
            _ => None,
        };
        FactorTransform {
            set: self.clone(),
            rate,
            factor,
            t,
            scalar,
        }
    }

    /// One transform, see [`Self::log_transforms`].
    pub fn log_transform(
        &self,
        u: &[Complex64],
        rate: &Rate,
        t: f64,
    ) -> Result<Complex64, TransformError> {
        self.log_transforms(u, rate, &[t])
            .pop()
            .unwrap_or(Err(TransformError::Failed("no time".into())))
    }

    /// −∫₀ᵗ ρ₀(s) ds is subtracted here for the closed forms (which work without ρ₀).
    fn integrated_constant_rate(&self, rate: &Rate, t: f64) -> Result<Complex64, TransformError> {
        if rate.r0.is_zero() {
            return Ok(Complex64::new(0.0, 0.0));
        }
        if !rate.r0.depends_on_time() {
            return Ok(Complex64::new(rate.r0.value(&self.params, 0.0) * t, 0.0));
        }
        let pieces = TimeBreaks::of_polys([&rate.r0], &self.params).pieces(0.0, t);
        ode::quad_pieces(|s| rate.r0.value(&self.params, s), &pieces, 1e-13)
            .map(|v| Complex64::new(v, 0.0))
            .map_err(|e| TransformError::Failed(e.to_string()))
    }

    /// Time-dependent coefficients: integrate τ from 0 to t with calendar time t − τ.
    fn log_transform_backward(
        &self,
        u: &[Complex64],
        rate: &Rate,
        t: f64,
    ) -> Result<Complex64, TransformError> {
        let rhs = |tau: f64, y: &[f64], dy: &mut [f64]| {
            let s = t - tau;
            let numbers = match &self.constant {
                Some(numbers) => numbers.clone(),
                None => self.numbers(s),
            };
            let (r0, r1) = rate.values(&self.params, s);
            if self.spend() {
                riccati_rhs(self.n, &numbers, r0, &r1, y, dy)
            } else {
                dy.fill(f64::NAN);
            }
        };
        // The breaks in calendar time s, as times τ = t − s from 0 to t.
        let rate_breaks = TimeBreaks::of_polys(rate.r1.iter().chain([&rate.r0]), &self.params);
        let mut taus: Vec<f64> = self
            .breaks
            .pieces(t, 0.0)
            .into_iter()
            .chain(rate_breaks.pieces(t, 0.0))
            .map(|s| t - s)
            .collect();
        taus.sort_by(f64::total_cmp);
        taus.dedup();
        match ode::integrate_pieces(rhs, &pack(u), &taus, RICCATI_RTOL, RICCATI_ATOL) {
            Ok(y) if exploded(&y) => Err(TransformError::Explodes),
            Ok(y) => Ok(self.finish(&y)),
            Err(ode::OdeError::InvalidInput(why)) => Err(TransformError::Failed(why)),
            Err(_) => Err(self.integration_failed()),
        }
    }

    fn finish(&self, y: &[f64]) -> Complex64 {
        let (beta, alpha) = unpack(y, self.n);
        alpha + dot(&beta, &self.x0)
    }
}

/// How a transform is computed.
#[derive(Clone, Debug, PartialEq)]
enum Plan {
    Gaussian,
    /// Which β are fixed at u (their equation is identically zero).
    Scalar(Vec<bool>),
    Numeric,
}

#[cfg(test)]
mod tests;
