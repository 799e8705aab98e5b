//! Choice of the scheme for each state: an exact transition where the law of a step is
//! known, Euler–Maruyama with full truncation otherwise.
//!
//! Exact steps are only used when they keep the joint law of the whole system right:
//! a linear Gaussian group or a square-root state draws its own normals, so it must not
//! share a noise (or a correlated noise) with a state simulated otherwise. The lognormal
//! step reuses the Brownian increments themselves and can share noises freely. A
//! square-root variance is autonomous, so it keeps its exact step when log-prices it
//! drives share or correlate with its noise: those take the log-price step of Andersen
//! (2008) over the exact variance path ([`VarianceDriven`]).
//!
//! Layout: [`shapes`] reads the equations, [`driven`] finds the log-prices (and prices)
//! a square-root variance drives, [`choose`] picks the schemes from the equations alone,
//! and [`confirm`] holds them to the calculus layer's classification.

mod choose;
mod confirm;
mod driven;
mod shapes;

pub use choose::plan_from_model;
pub use confirm::plan;
use sdeck_semantics::Model;
use shapes::root_states;

/// How one state advances over a step.
#[derive(Clone, Debug, PartialEq)]
pub enum Scheme {
    Exact(ExactLaw),
    /// A log-price driven by a square-root variance sampled exactly.
    VarianceDriven(VarianceDriven),
    /// Euler–Maruyama; coefficients read max(x, 0) for the states in [`Plan::truncated`].
    Euler,
}

/// dX = (drift_constant + drift_slope · V) dt + loading · √V dW_X with corr(W_X, W_V) =
/// `correlation`, V a square-root state simulated exactly. The step is Andersen's
/// (L. Andersen 2008, "Simple and efficient simulation of the Heston stochastic volatility
/// model", Journal of Computational Finance 11(3), eq. (33) with γ₁ = γ₂ = ½):
/// ∫√V dW_V is read off the exact variance step, ∫V ds is the trapezoid rule, and the
/// part of the noise orthogonal to W_V is Gaussian given the variance path.
#[derive(Clone, Debug, PartialEq)]
pub struct VarianceDriven {
    /// Index of the square-root state.
    pub variance: usize,
    /// The state's own noise (its orthogonal part is drawn from this noise's normals).
    pub noise: usize,
    pub drift_constant: f64,
    pub drift_slope: f64,
    pub loading: f64,
    pub correlation: f64,
    /// The state is the price S = exp(X), written dS = S (a + b V) dt + c S √V dW_S: the
    /// fields above are those of X = ln S, whose drift slope is b − c²/2 (Itô).
    pub price: bool,
}

/// A transition law sampled exactly.
#[derive(Clone, Debug, PartialEq)]
pub enum ExactLaw {
    /// Member of [`Plan::gaussian_group`]: Gaussian step with exact mean and covariance.
    LinearGaussian,
    /// dX = growth X dt + Σ loading_k X dW_k: lognormal step.
    Lognormal {
        growth: f64,
        loadings: Vec<(usize, f64)>,
    },
    /// dX = speed (level − X) dt + vol √X dW: noncentral chi-square step.
    SquareRoot { speed: f64, level: f64, vol: f64 },
}

/// The states whose joint law is Gaussian with constant coefficients:
/// dX_G = (drift X_G + constant) dt + loadings dW.
#[derive(Clone, Debug, PartialEq)]
pub struct GaussianGroup {
    /// Indices into the model's states, in declaration order.
    pub states: Vec<usize>,
    /// `states.len()` × `states.len()`.
    pub drift: Vec<Vec<f64>>,
    pub constant: Vec<f64>,
    /// `states.len()` × number of noises.
    pub loadings: Vec<Vec<f64>>,
}

/// The simulation plan of a model.
#[derive(Clone, Debug, PartialEq)]
pub struct Plan {
    /// One scheme per state, declaration order.
    pub schemes: Vec<Scheme>,
    pub gaussian_group: Option<GaussianGroup>,
    /// States read as max(x, 0) inside Euler coefficients and reported as such (full
    /// truncation, Lord, Koekkoek & van Dijk 2010, Quantitative Finance 10(2)).
    pub truncated: Vec<bool>,
    /// Why a state got a less exact scheme than its family suggests, for the report.
    pub notes: Vec<String>,
}

impl Scheme {
    /// A short description for reports: "exact (noncentral chi-square)", "Euler–Maruyama".
    pub fn describe(&self) -> &'static str {
        match self {
            Scheme::Exact(ExactLaw::LinearGaussian) => "exact (Gaussian)",
            Scheme::Exact(ExactLaw::Lognormal { .. }) => "exact (lognormal)",
            Scheme::Exact(ExactLaw::SquareRoot { .. }) => "exact (noncentral chi-square)",
            Scheme::VarianceDriven(driven) if driven.price => {
                "price by the log-price step over the exact variance (Andersen 2008)"
            }
            Scheme::VarianceDriven(_) => "log-price step over the exact variance (Andersen 2008)",
            Scheme::Euler => "Euler–Maruyama",
        }
    }

    pub fn is_exact(&self) -> bool {
        matches!(self, Scheme::Exact(_))
    }

    /// Whether the figures of a state on this scheme carry a discretisation bias.
    pub fn is_discretised(&self) -> bool {
        !self.is_exact()
    }
}

impl Plan {
    /// Every state on Euler–Maruyama (for comparisons and for models the calculus could not
    /// classify).
    pub fn all_euler(model: &Model) -> Plan {
        Plan {
            schemes: vec![Scheme::Euler; model.factors.len()],
            gaussian_group: None,
            truncated: root_states(model),
            notes: Vec::new(),
        }
    }

    /// Human-readable scheme of state `index`, with the truncation noted.
    pub fn describe_state(&self, index: usize) -> String {
        match self.schemes.get(index) {
            Some(Scheme::Euler) if self.truncated.get(index).copied().unwrap_or(false) => {
                "Euler–Maruyama, full truncation".to_string()
            }
            Some(scheme) => scheme.describe().to_string(),
            None => "none".to_string(),
        }
    }

    /// Whether any state is simulated with a discretised scheme (its figures then carry a
    /// bias that step doubling estimates).
    pub fn has_discretised(&self) -> bool {
        self.schemes.iter().any(Scheme::is_discretised)
    }
}
