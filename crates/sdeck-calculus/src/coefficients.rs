//! The coefficients of a model's equations as functions of its parameters, for callers
//! that evaluate them at many parameter values (estimation from data): the one-state
//! form dX = (a + b X) dt + g dW with g² = α + β X + γ X², and the linear system
//! dX = (A X + b) dt + L dW.
//!
//! The family is decided once, with the parameter values of the file; the coefficients
//! can then be evaluated at any parameter vector (clock units, declaration order).

use crate::algebra::Poly;
use crate::linear_system::AffineGaussian;
use crate::shape::{classify_state, correlation_at, OneState};
use crate::{analyse, Family};
use nalgebra::{DMatrix, DVector};
use sdeck_semantics::Model;

/// Coefficients of one factor's equation at one parameter vector and time.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct OneStateValues {
    /// Drift a + b X.
    pub a: f64,
    pub b: f64,
    /// Squared diffusion α + β X + γ X².
    pub alpha: f64,
    pub beta: f64,
    pub gamma: f64,
}

/// The equation of one decoupled factor, with its family.
#[derive(Clone, Debug)]
pub struct OneStateForm {
    pub family: Family,
    /// Why the family, in words.
    pub reason: String,
    /// Whether some coefficient depends on `t`.
    pub time_dependent: bool,
    form: OneState,
}

impl OneStateForm {
    /// Whether the equation is dX = (a + bX) dt + Σ c dW with constant coefficients: its
    /// transition is Gaussian, with the Ornstein–Uhlenbeck moments for either sign of b.
    pub fn gaussian_with_constant_coefficients(&self) -> bool {
        !self.time_dependent && !self.form.state_dependent_noise()
    }

    /// Whether the noise is free of the factor (β = γ = 0 for every parameter value and
    /// time): then the transition is Gaussian, whatever the coefficients do in time.
    pub fn additive_noise(&self) -> bool {
        !self.form.state_dependent_noise()
    }

    /// The coefficients at parameters `params` (clock units) and time `t`.
    pub fn at(&self, params: &[f64], t: f64) -> OneStateValues {
        let f = &self.form;
        OneStateValues {
            a: f.a.value(params, t),
            b: f.b.value(params, t),
            alpha: f.alpha.value(params, t),
            beta: f.beta.value(params, t),
            gamma: f.gamma.value(params, t),
        }
    }
}

/// The one-state form of factor `state`, or why it has none (it mentions other factors,
/// or its equation is not affine in drift with an at most quadratic squared diffusion).
pub fn one_state_form(model: &Model, state: usize) -> Result<OneStateForm, String> {
    let corr = model.correlations();
    let params = model.param_values();
    let names = crate::algebra::Names::new(model);
    let classified = classify_state(model, state, &corr, &params, &names);
    match classified.one_state {
        Some(form) if classified.family != Family::General => Ok(OneStateForm {
            family: classified.family,
            reason: classified.reason,
            time_dependent: form.time_dependent,
            form,
        }),
        _ => Err(classified.reason),
    }
}

/// The whole model as a linear system with state-independent noise.
#[derive(Clone, Debug)]
pub struct LinearSystemForm {
    pub time_dependent: bool,
    /// Per factor: the drift's coefficient on each factor, and its constant part.
    rows: Vec<(Vec<Poly>, Poly)>,
    /// Per factor: the loading on each noise.
    loads: Vec<Vec<Poly>>,
    corr: sdeck_semantics::Correlations,
    shocks: usize,
}

impl LinearSystemForm {
    /// The system at parameters `params` (clock units) and time `t`; `None` when a
    /// coefficient is not finite or the shapes disagree.
    pub fn at(&self, params: &[f64], t: f64) -> Option<AffineGaussian> {
        let (rows, loads) = (&self.rows, &self.loads);
        let n = rows.len();
        let m = self.shocks;
        let value = |p: Option<&Poly>| p.map(|p| p.value(params, t)).unwrap_or(0.0);
        let a = DMatrix::from_fn(n, n, |r, c| {
            value(rows.get(r).and_then(|(cs, _)| cs.get(c)))
        });
        let b = DVector::from_fn(n, |r, _| value(rows.get(r).map(|(_, k)| k)));
        let loadings = DMatrix::from_fn(n, m, |r, k| value(loads.get(r).and_then(|l| l.get(k))));
        let corr = DMatrix::from_fn(m, m, |k, l| correlation_at(&self.corr, k, l));
        AffineGaussian::new(a, b, loadings, corr).ok()
    }
}

/// The model as a linear system (drift affine in the factors, diffusion free of them),
/// or why it is not one.
pub fn linear_system_form(model: &Model) -> Result<LinearSystemForm, String> {
    let analysis = analyse(model);
    let system = analysis.system;
    match (system.drift_rows, system.loadings) {
        (Some(rows), Some(loads)) => Ok(LinearSystemForm {
            time_dependent: system.time_dependent,
            rows,
            loads,
            corr: analysis.corr,
            shocks: model.shocks.len(),
        }),
        _ => Err(system.reason),
    }
}
