//! Calculus of sdeck models: classification into families, closed forms and moments.
//!
//! The input is a resolved [`sdeck_semantics::Model`] (every value in clock units). Each
//! drift and diffusion is normalised by the exact algebra of [`algebra`] into a
//! polynomial in the states, which lets [`derive`] see "affine in X", "constant times
//! sqrt(X)" or "quadratic" structurally, classify every state and the whole system into
//! a [`Family`], and derive what is known in closed form: solution, mean, variance,
//! autocovariance, stationary law, half-life. [`moments_at`], [`autocovariance`] and
//! [`quantile`] then give numbers at any time.
//!
//! Layout: `algebra` (polynomials in the states), `breaks` (the times at which the
//! coefficients jump or bend; every time integral is split there), `shape`
//! (classification), `one_state`
//! (figures of one decoupled state), `formulas` (readable math), `system` (several
//! states, through the engines of `linear_system`, `polynomial` and `ode`),
//! `noncentral` (the noncentral chi-square law), `elementary` (closed-form integrals of
//! time-dependent coefficients), `describe` (names of equation pieces for messages).
//!
//! ```
//! let analysis = sdeck_semantics::analyze(
//!     "param kappa = 2 [1/year]\nparam vol = 1% [1/sqrt(year)]\nshock W\n\
//!      state r = 3%\ndr = -kappa * r dt + vol dW\n",
//!     "demo",
//! );
//! let derivation = sdeck_calculus::derive(&analysis.model);
//! assert_eq!(derivation.states[0].family.as_str(), "ornstein-uhlenbeck");
//! let moments = sdeck_calculus::moments_at(&analysis.model, &derivation, 1.0);
//! let mean = moments.mean[0].expect("known in closed form");
//! assert!((mean - 0.03 * (-2f64).exp()).abs() < 1e-15); // r₀·e^(−kappa·t)
//! ```

pub mod affine;
pub mod algebra;
pub mod breaks;
pub mod coefficients;
pub mod curve;
pub mod describe;
mod elementary;
pub mod exponential_affine;
mod formulas;
pub mod laws;
pub mod linear_system;
pub mod noncentral;
pub mod ode;
pub mod one_state;
pub mod polynomial;
mod shape;
mod system;

use sdeck_semantics::Model;
use sdeck_syntax::ast::Figure;
use shape::{classify_state, classify_system, Classified, OneState, SystemShape};

/// The family a state (or a whole system) belongs to.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum Family {
    ArithmeticBrownian,
    GeometricBrownian,
    OrnsteinUhlenbeck,
    SquareRoot,
    Linear,
    LinearSystem,
    Polynomial,
    /// dS = S·(a + b·X) dt + S·(...) dW with ln S in an affine set.
    ExponentialAffine,
    General,
}

impl Family {
    /// The kebab-case name used in every output.
    pub fn as_str(self) -> &'static str {
        match self {
            Family::ArithmeticBrownian => "arithmetic-brownian",
            Family::GeometricBrownian => "geometric-brownian",
            Family::OrnsteinUhlenbeck => "ornstein-uhlenbeck",
            Family::SquareRoot => "square-root",
            Family::Linear => "linear",
            Family::LinearSystem => "linear-system",
            Family::Polynomial => "polynomial",
            Family::ExponentialAffine => "exponential-affine",
            Family::General => "general",
        }
    }
}

/// How the figures of a state were obtained.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Method {
    ClosedForm,
    Quadrature,
    MomentEquations,
    None,
}

impl Method {
    pub fn as_str(self) -> &'static str {
        match self {
            Method::ClosedForm => "closed-form",
            Method::Quadrature => "quadrature",
            Method::MomentEquations => "moment-equations",
            Method::None => "none",
        }
    }
}

/// Constant coefficients of a one-state linear SDE
/// dX = (a + b X) dt + Σ_k (c_k + d_k X) dW_k, in clock units.
#[derive(Clone, Debug, PartialEq)]
pub struct LinearCoefficients {
    pub a: f64,
    pub b: f64,
    /// `(noise, c_k)`.
    pub c: Vec<(usize, f64)>,
    /// `(noise, d_k)`.
    pub d: Vec<(usize, f64)>,
}

/// dX = speed (level − X) dt + vol sqrt(X) dW, in clock units.
#[derive(Clone, Debug, PartialEq)]
pub struct SquareRootParams {
    pub speed: f64,
    pub level: f64,
    pub vol: f64,
    pub noise: usize,
}

/// The stationary law of a state.
#[derive(Clone, Debug, PartialEq)]
pub struct Stationary {
    pub mean: f64,
    pub variance: f64,
    /// e.g. "Normal(θ, σ²/(2κ))", "Gamma(shape 2κθ/σ², scale σ²/(2κ))".
    pub law: String,
}

/// Readable math (Unicode) with the model's own names.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Formulas {
    pub solution: Option<String>,
    pub mean: Option<String>,
    pub variance: Option<String>,
    pub autocovariance: Option<String>,
    pub stationary: Option<String>,
    pub transition: Option<String>,
}

/// What is known of one state.
#[derive(Clone, Debug, PartialEq)]
pub struct StateLaw {
    pub family: Family,
    /// Why, in words: "drift affine in r with negative slope, diffusion constant".
    pub reason: String,
    pub method: Method,
    /// Readable math, Unicode, using the model's own names.
    pub formulas: Formulas,
    /// Clock units: ln 2 / |b| for constant b < 0.
    pub half_life: Option<f64>,
    pub stationary: Option<Stationary>,
    /// When the state's own SDE is linear in itself with constant coefficients and no
    /// other state appears.
    pub linear: Option<LinearCoefficients>,
    /// When the family is square-root.
    pub square_root: Option<SquareRootParams>,
    /// States that appear in this state's drift or diffusion (besides itself).
    pub depends_on: Vec<usize>,
}

impl StateLaw {
    /// Whether the law of the state is Gaussian (support the whole real line) with noise.
    pub fn is_gaussian_with_noise(&self) -> bool {
        let additive = match self.family {
            Family::ArithmeticBrownian | Family::OrnsteinUhlenbeck | Family::LinearSystem => true,
            Family::Linear => match &self.linear {
                Some(lc) => lc.d.is_empty(),
                None => self.method == Method::Quadrature,
            },
            _ => false,
        };
        let has_noise = match &self.linear {
            Some(lc) => lc.c.iter().any(|(_, c)| *c != 0.0),
            None => true,
        };
        additive && has_noise
    }
}

/// Everything derived from a model.
#[derive(Clone, Debug, PartialEq)]
pub struct Derivation {
    /// Declaration order.
    pub states: Vec<StateLaw>,
    /// Family of the whole system (LinearSystem / Polynomial when states are coupled).
    pub system_family: Family,
    pub system_reason: String,
    /// The drift matrix A of an affine system dX = (A X + b(t)) dt + ..., when the drift
    /// is affine with constant A.
    pub drift_matrix: Option<Vec<Vec<f64>>>,
    /// Eigenvalues of the drift matrix, `(re, im)`.
    pub drift_eigenvalues: Option<Vec<(f64, f64)>>,
}

/// Figures of every state at one time.
#[derive(Clone, Debug, PartialEq)]
pub struct Moments {
    /// Clock units.
    pub at: f64,
    /// Per state, declaration order.
    pub mean: Vec<Option<f64>>,
    pub variance: Vec<Option<f64>>,
    /// Full matrix, same order.
    pub covariance: Vec<Vec<Option<f64>>>,
    /// Per state: closed form or exact moment equations (not Monte Carlo).
    pub exact: Vec<bool>,
    pub method: Vec<Method>,
    /// Per state: the time (clock units, at most `at`) from which the variance is
    /// infinite, when it is (moment explosion of an exponential-affine factor).
    pub variance_infinite_from: Vec<Option<f64>>,
}

/// The structural analysis shared by every entry point.
pub(crate) struct Analysis {
    pub corr: sdeck_semantics::Correlations,
    pub classified: Vec<Classified>,
    pub system: SystemShape,
    pub params: Vec<f64>,
}

pub(crate) fn analyse(model: &Model) -> Analysis {
    let corr = model.correlations();
    let classified: Vec<Classified> = (0..model.factors.len())
        .map(|i| classify_state(model, i, &corr))
        .collect();
    let system = classify_system(model, &classified, &corr);
    Analysis {
        corr,
        classified,
        system,
        params: model.param_values(),
    }
}

impl Analysis {
    /// The one-state equation of a decoupled state that has a one-state family.
    pub(crate) fn one_state(&self, state: usize) -> Option<(&OneState, Family)> {
        let c = self.classified.get(state)?;
        if c.family == Family::General {
            return None;
        }
        c.one_state.as_ref().map(|o| (o, c.family))
    }
}

/// Classifies every state and the system, and derives what is known in closed form.
pub fn derive(model: &Model) -> Derivation {
    let analysis = analyse(model);
    let mut derivation = system::derive(model, &analysis);
    exponential_affine::classify(model, &mut derivation);
    derivation
}

/// Means, variances and covariances of every state at time `t` (clock units).
pub fn moments_at(model: &Model, derivation: &Derivation, t: f64) -> Moments {
    let analysis = analyse(model);
    let mut moments = system::moments_at(model, derivation, &analysis, t);
    exponential_affine::fill_moments(model, derivation, &mut moments);
    moments
}

/// Cov(X_s, X_t) for s <= t, where known.
pub fn autocovariance(
    model: &Model,
    derivation: &Derivation,
    state: usize,
    s: f64,
    t: f64,
) -> Option<f64> {
    let analysis = analyse(model);
    system::autocovariance(model, derivation, &analysis, state, s, t)
}

/// Quantile of the law of one state at t where the law is known (Gaussian, lognormal,
/// noncentral chi-square).
pub fn quantile(
    model: &Model,
    derivation: &Derivation,
    state: usize,
    t: f64,
    p: f64,
) -> Option<f64> {
    let analysis = analyse(model);
    system::quantile(model, derivation, &analysis, state, t, p)
}

/// The value of a figure an `expect` line can pin (`mean`, `sd`, `halflife`,
/// `stationary_sd`, ...) for one state; `at` is the time of the time-dependent figures
/// (clock units). `None` when the family has no such figure or it is not known.
pub fn figure_value(
    model: &Model,
    derivation: &Derivation,
    state: usize,
    figure: Figure,
    at: f64,
) -> Option<f64> {
    let law = derivation.states.get(state)?;
    let stationary = law.stationary.as_ref();
    match figure {
        Figure::Mean | Figure::Variance | Figure::Sd => {
            let moments = moments_at(model, derivation, at);
            match figure {
                Figure::Mean => moments.mean.get(state).copied().flatten(),
                Figure::Variance => moments.variance.get(state).copied().flatten(),
                _ => moments
                    .variance
                    .get(state)
                    .copied()
                    .flatten()
                    .map(|v| v.max(0.0).sqrt()),
            }
        }
        Figure::Halflife => law.half_life,
        Figure::StationaryMean => stationary.map(|s| s.mean),
        Figure::StationaryVariance => stationary.map(|s| s.variance),
        Figure::StationarySd => stationary.map(|s| s.variance.max(0.0).sqrt()),
    }
}
