//! The transform of one factor's law at one time, its plan chosen once.

use super::closed_form::scalar_solution;
use super::riccati::dot;
use super::{AffineSet, Numbers, Rate, TransformError};
use num_complex::Complex64;

/// See [`AffineSet::factor_transform`].
#[derive(Clone, Debug)]
pub struct FactorTransform {
    pub(super) set: AffineSet,
    pub(super) rate: Rate,
    pub(super) factor: usize,
    pub(super) t: f64,
    /// The coefficients and the fixed components when the plan is the scalar closed form
    /// (a log-price over a square-root variance, for one).
    pub(super) scalar: Option<(Numbers, Vec<bool>)>,
}

impl FactorTransform {
    /// log E[exp(w·X_t)] of the factor (on ln X for a log factor).
    pub fn log_transform(&self, w: Complex64) -> Result<Complex64, TransformError> {
        let n = self.set.n;
        let mut u = vec![Complex64::new(0.0, 0.0); n];
        *u.get_mut(self.factor)
            .ok_or_else(|| TransformError::Failed("no such factor".into()))? = w;
        match &self.scalar {
            Some((numbers, fixed)) => {
                let zero = vec![0.0; n];
                let (alpha, beta) = scalar_solution(n, numbers, &zero, fixed, &u, self.t)?;
                Ok(alpha + dot(&beta, &self.set.x0))
            }
            None => self.set.log_transform(&u, &self.rate, self.t),
        }
    }
}
