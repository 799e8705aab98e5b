//! When a moment becomes infinite: the pole of the Riccati solution for real arguments.

use super::riccati::{approach_pole, pack, riccati_rhs, unpack};
use super::{AffineSet, Rate, WorkBudget, EXPLOSION_SIZE, RICCATI_ATOL, RICCATI_RTOL};
use crate::ode;
use num_complex::Complex64;

/// The work one explosion search may spend (units of [`WorkBudget`]): some 0.13 s in a
/// release build, and 70 times what the longest search among the reference models takes
/// (286,144 units, a square-root variance that breaks Feller). A stiff system (a vol of
/// variance of −3.3e6) took 314 million units, 2.1 s in `sdeck check`, to say it cannot
/// tell; now it says so at the budget.
const EXPLOSION_WORK: usize = 20_000_000;

impl AffineSet {
    /// The first time (clock units, up to `limit`) at which E[exp(u·X_t)] becomes
    /// infinite, for real `u` and constant coefficients; `None` when it stays finite up
    /// to `limit` or the coefficients change with time.
    ///
    /// The Riccati solution is followed until |β| reaches 10⁸, the crossing found by
    /// bisection, and the rest of the way to the pole taken from β′ ≈ q|β|² near it
    /// (Andersen & Piterbarg 2007, Finance and Stochastics 11, §3).
    pub fn explosion_time(&self, u: &[f64], limit: f64) -> Option<f64> {
        let numbers = self.constant.as_ref()?;
        if u.len() != self.n || !(limit.is_finite() && limit > 0.0) {
            return None;
        }
        let argument: Vec<Complex64> = u.iter().map(|v| Complex64::new(*v, 0.0)).collect();
        if let Some((set, _, keep)) = self.reduced(&argument, &Rate::zero(self)) {
            let u: Vec<f64> = keep.iter().map(|&k| u[k]).collect();
            return set.explosion_time(&u, limit);
        }
        let zero = vec![0.0; self.n];
        // The search's own budget: a stiff system may take thousands of steps in each of
        // the 336 integrations (grid and bisection) while staying far from any pole.
        let work = WorkBudget::new(EXPLOSION_WORK);
        let cost = self.evaluation_cost();
        let rhs = |_: f64, y: &[f64], dy: &mut [f64]| {
            if work.take(cost) {
                riccati_rhs(self.n, numbers, 0.0, &zero, y, dy)
            } else {
                dy.fill(f64::NAN);
            }
        };
        let size = |y: &[f64]| {
            unpack(y, self.n)
                .0
                .iter()
                .map(|b| b.norm_sqr())
                .sum::<f64>()
                .sqrt()
        };
        // Whether the solution stays bounded up to `to`: `Some(y)` when it does, `None`
        // when it runs past EXPLOSION_SIZE (the pole lies before `to`), and an error when
        // the integration cannot tell (a step limit on a stiff system, or the work
        // budget spent, is no pole).
        let bounded = |y0: &[f64], from: f64, to: f64| {
            let keep = |y: &[f64]| size(y) < EXPLOSION_SIZE && y.iter().all(|v| v.is_finite());
            match ode::integrate_while(rhs, y0, from, to, RICCATI_RTOL, RICCATI_ATOL, keep) {
                Ok(y) => Ok(Some(y)),
                Err(ode::OdeError::Stopped { .. } | ode::OdeError::NonFinite { .. })
                    if work.left() >= cost =>
                {
                    Ok(None)
                }
                Err(other) => Err(other),
            }
        };
        let (state, current) = approach_pole(bounded, pack(&argument), limit)?;
        // β′ ≈ Q(β) near the pole; along the direction e of β, r′ ≈ (e·Q(e)) r².
        let (beta, _) = unpack(&state, self.n);
        let r = size(&state);
        if r == 0.0 {
            return Some(current);
        }
        let direction: Vec<f64> = beta.iter().map(|b| b.re / r).collect();
        let mut growth = 0.0;
        for k in 0..self.n {
            let mut quadratic = 0.0;
            for i in 0..self.n {
                for j in 0..self.n {
                    quadratic += direction[i]
                        * numbers.h1[k * self.n * self.n + i * self.n + j]
                        * direction[j];
                }
            }
            growth += direction[k] * 0.5 * quadratic;
        }
        if growth > 0.0 {
            Some(current + 1.0 / (growth * r))
        } else {
            Some(current)
        }
    }
}
