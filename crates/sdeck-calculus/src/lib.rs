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
//! time-dependent coefficients), `describe` (names of equation pieces for messages),
//! `figures` (the figures of a derivation at a time, and the value of an `expect` line).
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
pub mod correlation;
pub mod curve;
pub mod describe;
mod elementary;
pub mod exponential_affine;
mod figures;
mod formulas;
pub mod laws;
pub mod linear_system;
pub mod noncentral;
pub mod ode;
pub mod one_state;
mod partial;
pub mod polynomial;
mod shape;
pub mod symmetric;
mod system;

pub use figures::{
    autocovariance, covariance, expectation_value, expectation_value_within, figure_value,
    moments_at, quantile, state_figures, state_moments, StateFigures,
};
use sdeck_semantics::{FactorId, IdVec, Model, ShockId};
use shape::{classify_state, classify_system, Classified, OneState, SystemShape};
use std::sync::{Arc, OnceLock};

/// The family a state (or a whole system) belongs to.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum Family {
    /// No shock drives the factor: its path is the solution of an ordinary differential
    /// equation, with variance 0.
    Deterministic,
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
            Family::Deterministic => "deterministic",
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

    /// The laws one step of a factor of this family may follow in closed form, given its
    /// value at the start of the step and constant coefficients: normal (of variance 0
    /// for a deterministic factor) for the deterministic, arithmetic-Brownian,
    /// Ornstein–Uhlenbeck and linear-system families and for a
    /// linear factor with noise free of itself; lognormal for the geometric-Brownian
    /// family and a linear factor with noise proportional to itself; noncentral
    /// chi-square for the square-root family. None for the others.
    pub fn step_laws(self) -> &'static [laws::LawKind] {
        use laws::LawKind::{Lognormal, NoncentralChiSquare, Normal};
        match self {
            Family::Deterministic
            | Family::ArithmeticBrownian
            | Family::OrnsteinUhlenbeck
            | Family::LinearSystem => &[Normal],
            Family::Linear => &[Normal, Lognormal],
            Family::GeometricBrownian => &[Lognormal],
            Family::SquareRoot => &[NoncentralChiSquare],
            Family::Polynomial | Family::ExponentialAffine | Family::General => &[],
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
    pub c: Vec<(ShockId, f64)>,
    /// `(noise, d_k)`.
    pub d: Vec<(ShockId, f64)>,
}

/// dX = speed (level − X) dt + vol sqrt(X) dW, in clock units.
#[derive(Clone, Debug, PartialEq)]
pub struct SquareRootParams {
    pub speed: f64,
    pub level: f64,
    pub vol: f64,
    pub noise: ShockId,
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
    /// The numbers of a linear system's matrices at the file's parameters, in the letters
    /// of the formulas: `A = ((−0.9, 0), (1.4, −1.4)); b = ...; L = ...; R = ...`.
    pub matrices: Option<String>,
}

/// What is known of one state.
#[derive(Clone, Debug, PartialEq)]
pub struct StateLaw {
    pub family: Family,
    /// Why, in words: "drift affine in r with negative slope, diffusion constant".
    pub reason: String,
    pub method: Method,
    /// Clock units: ln 2 / |b| for constant b < 0.
    pub half_life: Option<f64>,
    pub stationary: Option<Stationary>,
    /// When the state's own SDE is linear in itself with constant coefficients and no
    /// other state appears.
    pub linear: Option<LinearCoefficients>,
    /// When the family is square-root.
    pub square_root: Option<SquareRootParams>,
    /// States that appear in this state's drift or diffusion (besides itself).
    pub depends_on: Vec<FactorId>,
    /// Why the family's figures do not apply to this factor, when its start or
    /// parameters lie outside the family's domain (a square-root factor starting below
    /// zero): its mean, variance and law are then unknown, never a number.
    pub outside_domain: Option<String>,
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
    pub states: IdVec<FactorId, StateLaw>,
    /// Family of the whole system (LinearSystem / Polynomial when states are coupled).
    pub system_family: Family,
    pub system_reason: String,
    /// The drift matrix A of an affine system dX = (A X + b(t)) dt + ..., when the drift
    /// is affine with constant A and the model has at most [`MAX_SYSTEM_STATES`] states
    /// (a larger dense matrix would cost memory quadratic in the model; see `blocks`).
    pub drift_matrix: Option<Vec<Vec<f64>>>,
    /// Eigenvalues of the drift matrix, `(re, im)`.
    pub drift_eigenvalues: Option<Vec<(f64, f64)>>,
    /// Groups of two or more states linked through their equations, each with its own
    /// drift matrix; states outside every block are decoupled.
    pub blocks: Vec<CoupledBlock>,
    /// The structural analysis behind the figures, kept so that every later question
    /// (moments of one state, a covariance, a quantile) reuses it.
    prepared: Prepared,
}

/// States coupled through their equations (a connected group of the graph "the equation
/// of i mentions j"), with what is known of their joint drift.
#[derive(Clone, Debug, PartialEq)]
pub struct CoupledBlock {
    /// The states, ascending.
    pub states: Vec<FactorId>,
    /// The block's drift matrix (rows and columns in the order of `states`), when every
    /// drift in the block is affine with constant coefficients and the block has at most
    /// [`MAX_BLOCK_EIGEN`] states.
    pub drift_matrix: Option<Vec<Vec<f64>>>,
    /// Its eigenvalues, `(re, im)`.
    pub drift_eigenvalues: Option<Vec<(f64, f64)>>,
}

/// The largest coupled block whose drift matrix and eigenvalues are computed (a dense
/// eigen-decomposition costs the cube of the size: 500 states take about 0.1 s).
pub const MAX_BLOCK_EIGEN: usize = 500;

pub use system::MAX_SYSTEM_STATES;

/// The structural analysis of a derivation, shared by its clones. Not part of the
/// derivation's value: two derivations compare by what they say.
#[derive(Clone)]
struct Prepared(Arc<Analysis>);

impl std::fmt::Debug for Prepared {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str("Prepared")
    }
}

impl PartialEq for Prepared {
    fn eq(&self, _: &Prepared) -> bool {
        true
    }
}

/// Mean and variance of one state at one time, and how they were obtained.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct StateMoments {
    pub mean: Option<f64>,
    pub variance: Option<f64>,
    pub method: Method,
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
    /// The engine of the whole system, built on first use.
    pub linear: OnceLock<Option<linear_system::AffineGaussian>>,
    /// Figures of the whole system at the last few times asked (the expectations of one
    /// model mostly share a horizon).
    pub system_figures: std::sync::Mutex<Vec<(f64, Option<system::SystemFigures>)>>,
}

/// The most states the calculus derives. Its cost is linear in the model (about 0.1 ms
/// and 15 KB per state, tree included); past this a model is reported as not derived
/// rather than let the memory grow without bound.
pub const MAX_DERIVED_STATES: usize = 50_000;

pub(crate) fn analyse(model: &Model) -> Analysis {
    let corr = model.correlations();
    let params = model.param_values();
    let n = model.factors.len();
    if n > MAX_DERIVED_STATES {
        let reason = format!(
            "the model has {n} states, more than the {MAX_DERIVED_STATES} the calculus \
             derives: split it into several models"
        );
        return Analysis {
            corr,
            classified: (0..n)
                .map(|_| shape::general(reason.clone(), Vec::new()))
                .collect(),
            system: SystemShape::unknown(reason),
            params,
            linear: OnceLock::new(),
            system_figures: std::sync::Mutex::new(Vec::new()),
        };
    }
    let names = algebra::Names::new(model);
    let classified: Vec<Classified> = (0..model.factors.len())
        .map(|i| classify_state(model, i, &corr, &params, &names))
        .collect();
    let system = classify_system(model, &classified, &corr);
    Analysis {
        corr,
        classified,
        system,
        params,
        linear: OnceLock::new(),
        system_figures: std::sync::Mutex::new(Vec::new()),
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
///
/// The cost is linear in the model: each state is classified and derived on its own,
/// coupled blocks together; nothing of size states × states is built unless the model
/// has at most [`MAX_SYSTEM_STATES`] states. Formula text is written only when asked
/// ([`formulas`]).
pub fn derive(model: &Model) -> Derivation {
    let analysis = Arc::new(analyse(model));
    let mut derivation = system::derive(model, analysis);
    exponential_affine::classify(model, &mut derivation);
    partial::explain(model, &mut derivation);
    for (i, law) in derivation.states.iter_mut().enumerate() {
        law.outside_domain = outside_domain(model, law, FactorId::new(i));
        if law.outside_domain.is_some() {
            law.stationary = None;
            law.half_life = None;
        }
    }
    derivation
}

/// Why a factor lies outside its family's domain, if it does. A square-root factor
/// dX = κ(θ − X) dt + σ√X dW is defined for X ≥ 0 with κθ ≥ 0: its law is a scaled
/// noncentral chi-square with 4κθ/σ² degrees of freedom (Cox, Ingersoll & Ross 1985,
/// eq. 18), which needs a start at or above zero and degrees of freedom at or above zero.
fn outside_domain(model: &Model, law: &StateLaw, state: FactorId) -> Option<String> {
    if law.family != Family::SquareRoot {
        return None;
    }
    let sr = law.square_root.as_ref()?;
    let factor = model.factors.by_id(state)?;
    let shown = |x: f64| sdeck_units::number::plain(x);
    if factor.initial < 0.0 {
        return Some(format!(
            "a square-root factor is defined only from a start at or above zero, and {} starts at {}",
            factor.name,
            shown(factor.initial)
        ));
    }
    let dof = 4.0 * sr.speed * sr.level / (sr.vol * sr.vol);
    if dof < 0.0 {
        return Some(format!(
            "the degrees of freedom of {}'s noncentral chi-square law, 4·κθ/σ² = {}, are negative",
            factor.name,
            shown(dof)
        ));
    }
    None
}

impl Derivation {
    /// Whether the figures of `state` are unknown because it lies outside its family's
    /// domain.
    fn outside_domain(&self, state: FactorId) -> bool {
        self.states
            .by_id(state)
            .is_some_and(|law| law.outside_domain.is_some())
    }
}

/// Readable math (Unicode, the model's own names) for one state; empty when the state
/// does not exist or nothing is known in closed form.
pub fn formulas(model: &Model, derivation: &Derivation, state: FactorId) -> Formulas {
    let analysis = derivation.analysis();
    let Some(law) = derivation.states.by_id(state) else {
        return Formulas::default();
    };
    if let Some((os, family)) = analysis.one_state(state.index()) {
        let mut out = formulas::one_state(model, os, family);
        if law.stationary.is_none() {
            out.stationary = None;
        }
        return out;
    }
    if law.family == Family::ExponentialAffine {
        return exponential_affine::formulas(model, state.index());
    }
    formulas::coupled(model, analysis, state.index(), law.family)
}

impl Derivation {
    pub(crate) fn analysis(&self) -> &Analysis {
        &self.prepared.0
    }
}
