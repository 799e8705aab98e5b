//! The work budget of numerical integrations: a law inverted by Fourier may integrate
//! the Riccati equations at thousands of frequencies, and at a long horizon or a high
//! frequency one integration may take thousands of steps. The budget makes such a figure
//! unknown, never slow.

use super::{AffineSet, TransformError};
use std::sync::atomic::{AtomicUsize, Ordering};
use std::sync::Arc;

/// Units of work for Riccati integrations (a right-hand-side evaluation of n factors
/// costs n³, the terms of its quadratic part), shared by every set given a clone: the
/// laws of one report draw on one budget.
#[derive(Clone, Debug)]
pub struct WorkBudget(Arc<AtomicUsize>);

impl WorkBudget {
    pub fn new(units: usize) -> WorkBudget {
        WorkBudget(Arc::new(AtomicUsize::new(units)))
    }

    /// The units not yet spent.
    pub fn left(&self) -> usize {
        self.0.load(Ordering::Relaxed)
    }

    /// Takes `cost` units; false, taking nothing, when fewer are left.
    pub(super) fn take(&self, cost: usize) -> bool {
        self.0
            .fetch_update(Ordering::Relaxed, Ordering::Relaxed, |n| {
                n.checked_sub(cost)
            })
            .is_ok()
    }
}

impl AffineSet {
    /// The same set, its numerical integrations (and those of its clones and
    /// reductions) drawing on `budget`: past it a transform that needs the integrator is
    /// `Failed`, never slow.
    pub fn with_work(mut self, budget: WorkBudget) -> AffineSet {
        self.work = Some(budget);
        self
    }

    /// What one right-hand-side evaluation costs: n³ units.
    pub(super) fn evaluation_cost(&self) -> usize {
        self.n.saturating_pow(3).max(1)
    }

    /// Takes one right-hand-side evaluation from the budget; false once it is spent.
    pub(super) fn spend(&self) -> bool {
        self.work
            .as_ref()
            .is_none_or(|budget| budget.take(self.evaluation_cost()))
    }

    pub(super) fn spent(&self) -> bool {
        self.work
            .as_ref()
            .is_some_and(|budget| budget.left() < self.evaluation_cost())
    }

    /// Why an integration failed: the budget, else a blow-up.
    pub(super) fn integration_failed(&self) -> TransformError {
        if self.spent() {
            TransformError::Failed(
                "the integration's work budget is spent (a long horizon or a high \
                 frequency)"
                    .to_string(),
            )
        } else {
            TransformError::Explodes
        }
    }
}
