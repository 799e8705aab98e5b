//! The factors a transform needs. In
//!
//! dβ_k/dτ = Σ_i K1_ik β_i + ½ βᵀ H1_k β − ρ1_k,
//!
//! a β_k that starts at zero (u_k = 0), has no rate slope and is fed by no β that can
//! move stays zero for every τ (zero solves its equation, and the solution is unique), so
//! the transform of the whole set equals that of the factors that can move. Dropping the
//! others is exact, and it often turns a set that needs the integrator into one with a
//! closed form: a price over a square-root variance beside an unrelated Gaussian rate is
//! the scalar structure of the two factors it reads.

use super::{AffineSet, Rate};
use crate::algebra::Poly;
use num_complex::Complex64;

impl AffineSet {
    /// Whether a coefficient can be non-zero: its number when the set is constant (a
    /// parameter set to zero switches a coupling off), else the polynomial itself.
    fn present(&self, poly: &Poly, number: impl FnOnce(&super::Numbers) -> f64) -> bool {
        match &self.constant {
            Some(numbers) => number(numbers) != 0.0,
            None => !poly.is_zero(),
        }
    }

    /// The factors whose β can leave zero: those with u ≠ 0 or a rate slope, and every
    /// factor that one of them feeds through K1 or through H1 with another of them.
    /// O(n³) in all: each factor joins once and each joining looks at its row of K1 and
    /// the H1 entries it forms with the factors already in.
    fn moving(&self, u: &[Complex64], rate: &Rate) -> Vec<bool> {
        let n = self.n;
        let mut moving = vec![false; n];
        let mut queue: Vec<usize> = (0..n)
            .filter(|&k| {
                u.get(k).is_some_and(|v| *v != Complex64::new(0.0, 0.0))
                    || rate.r1.get(k).is_some_and(|p| !p.is_zero())
            })
            .collect();
        for &k in &queue {
            moving[k] = true;
        }
        while let Some(i) = queue.pop() {
            for k in 0..n {
                if moving[k] {
                    continue;
                }
                let fed = self.present(&self.k1[i][k], |c| c.k1[i * n + k])
                    || (0..n).filter(|&j| moving[j]).any(|j| {
                        self.present(&self.h1[k][i][j], |c| c.h1[k * n * n + i * n + j])
                            || self.present(&self.h1[k][j][i], |c| c.h1[k * n * n + j * n + i])
                    });
                if fed {
                    moving[k] = true;
                    queue.push(k);
                }
            }
        }
        moving
    }

    /// The set and rate restricted to the factors whose β can move, with their indices
    /// in this set; `None` when every factor can (nothing to drop). When
    /// none can (u = 0 and a rate free of the factors) the first factor is kept, so the
    /// reduced set is never empty: its β stays zero there too.
    pub(super) fn reduced(
        &self,
        u: &[Complex64],
        rate: &Rate,
    ) -> Option<(AffineSet, Rate, Vec<usize>)> {
        let moving = self.moving(u, rate);
        let mut keep: Vec<usize> = (0..self.n).filter(|&k| moving[k]).collect();
        if keep.is_empty() {
            keep.push(0);
        }
        if keep.len() == self.n || u.len() != self.n || rate.r1.len() != self.n {
            return None;
        }
        let set = self.select(&keep);
        let rate = Rate {
            r0: rate.r0.clone(),
            r1: keep.iter().map(|&k| rate.r1[k].clone()).collect(),
        };
        Some((set, rate, keep))
    }
}
