//! What the analysis keeps beside the model for the structural rules of `sdeck-checks`
//! (`bound-violated`, `unit-scale`, `correlation-range`, `missing-equation`,
//! `duplicate-term`): where each declaration stands in the tree, every `corr` statement
//! as resolved, and the equation terms the lowering left out. The rules decide and word
//! their findings from these records; the analysis only keeps what it saw.

use crate::ids::{FactorId, IdVec, ParamId, ShockId};
use sdeck_diagnostics::Span;

/// The records of one file; see the module documentation.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Structure {
    /// The statement (index into `file.statements`) that declares each parameter of the
    /// model.
    pub param_statements: IdVec<ParamId, usize>,
    /// The statement that declares each factor.
    pub factor_statements: IdVec<FactorId, usize>,
    /// Every `corr` statement whose two names are shocks, in file order; the model holds
    /// those whose value is a correlation (see [`WrittenCorrelation::is_correlation`]).
    pub correlations: Vec<WrittenCorrelation>,
    /// For each factor, whether text that did not parse may hold its equation (`dr =
    /// ...`, or the slips `d r = ...` and `dr/dt = ...`).
    pub equation_unparsed: IdVec<FactorId, bool>,
    /// Terms of an equation left out of the model because an earlier term of the same
    /// equation ends with the same differential.
    pub repeated_terms: Vec<RepeatedTerm>,
}

/// A `corr` statement whose two names are shocks.
#[derive(Clone, Debug, PartialEq)]
pub struct WrittenCorrelation {
    /// Shocks of `model.shocks`.
    pub first: ShockId,
    pub second: ShockId,
    /// The whole statement.
    pub span: Span,
    /// The value as written.
    pub value_span: Span,
    /// The value at the file's parameters; `None` for a shock correlated with itself,
    /// whose value is not read. (A value in error is reported where it arises, and the
    /// statement is not recorded.)
    pub value: Option<f64>,
    /// Whether the value is written as a number (`-0.4`) rather than an expression.
    pub written_as_number: bool,
}

impl WrittenCorrelation {
    /// Whether the statement names one shock twice.
    pub fn is_self(&self) -> bool {
        self.first == self.second
    }

    /// Whether the value resolved to a number outside [-1, 1].
    pub fn is_out_of_range(&self) -> bool {
        self.value.is_some_and(|v| !(-1.0..=1.0).contains(&v))
    }

    /// Whether the statement relates two shocks by a value in [-1, 1]: what the model
    /// keeps.
    pub fn is_correlation(&self) -> bool {
        !self.is_self() && self.value.is_some_and(|v| (-1.0..=1.0).contains(&v))
    }
}

/// What ends a term of an equation.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum Differential {
    /// `dt`.
    Time,
    /// `dW`, a shock of `model.shocks`.
    Shock(ShockId),
}

/// A term of an equation whose differential an earlier term of the equation already
/// ends with.
#[derive(Clone, Debug, PartialEq)]
pub struct RepeatedTerm {
    /// The factor of `model.factors` whose equation it is.
    pub factor: FactorId,
    pub differential: Differential,
    /// The repeated term.
    pub span: Span,
    /// The first term with the same differential.
    pub first: Span,
}
