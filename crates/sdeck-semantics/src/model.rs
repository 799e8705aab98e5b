//! The semantic model: resolved names, values converted to the clock, equations split
//! into drift and diffusion. This is the input of the calculus layer.
//!
//! Every number here is in clock units: a parameter written `0.2 [1/sqrt(day)]` in a
//! model whose clock is `year` is stored as `0.2 * sqrt(365)`. Lets are inlined into the
//! expressions that use them, so an [`Expr`] mentions only constants, parameters, states
//! and `t`.

use sdeck_diagnostics::Span;
use sdeck_syntax::ast::{Figure, Side};
use sdeck_units::Dimension;

pub use crate::ids::{FactorId, Id, IdVec, LetId, ParamId, ShockId};

pub use crate::function::{ramp_value, step_value, Function};

/// A resolved expression. Lets are inlined; `pi` is a constant.
#[derive(Clone, Debug, PartialEq)]
pub enum Expr {
    Const(f64),
    /// A parameter of [`Model::params`].
    Param(ParamId),
    /// A factor of [`Model::factors`].
    Factor(FactorId),
    /// The time `t`, in clock units.
    Time,
    Neg(Box<Expr>),
    Add(Box<Expr>, Box<Expr>),
    Sub(Box<Expr>, Box<Expr>),
    Mul(Box<Expr>, Box<Expr>),
    Div(Box<Expr>, Box<Expr>),
    Pow(Box<Expr>, Box<Expr>),
    Call(Function, Vec<Expr>),
    /// Something that did not resolve (an error was reported); the calculus treats an
    /// expression containing it as unknown.
    Invalid,
}

/// A closed, open or half-open interval; `None` ends are infinite.
#[derive(Clone, Copy, Debug, PartialEq, Default)]
pub struct Interval {
    /// `(value, inclusive)`.
    pub lower: Option<(f64, bool)>,
    pub upper: Option<(f64, bool)>,
}

impl Interval {
    pub fn contains(&self, x: f64) -> bool {
        let above = match self.lower {
            None => true,
            Some((v, true)) => x >= v,
            Some((v, false)) => x > v,
        };
        let below = match self.upper {
            None => true,
            Some((v, true)) => x <= v,
            Some((v, false)) => x < v,
        };
        above && below && !x.is_nan()
    }

    /// Whether the interval is the whole real line.
    pub fn is_unbounded(&self) -> bool {
        self.lower.is_none() && self.upper.is_none()
    }
}

/// A `param`.
#[derive(Clone, Debug, PartialEq)]
pub struct Param {
    pub name: String,
    /// Span of the name in its declaration.
    pub name_span: Span,
    /// Span of the whole declaration.
    pub span: Span,
    /// The value as written, in the declared unit.
    pub written: f64,
    /// The value in clock units: `written * scale`.
    pub value: f64,
    /// Factor from the declared unit to clock units (1 when no time unit is involved).
    pub scale: f64,
    pub dimension: Dimension,
    /// The unit as written, without brackets (`1/sqrt(day)`), if any.
    pub unit_text: Option<String>,
    /// The bound, converted to clock units; boxed, as most parameters have none (a file
    /// can hold 200,000 parameters).
    pub bound: Option<Box<Interval>>,
    pub description: Option<String>,
    /// The value as a constant expression of earlier parameters (`param stress = theta +
    /// 150bp`), when it is written as one; `value` is then its value at the file's
    /// parameters, and [`Model::derive_params`] recomputes it after others change.
    pub expr: Option<Box<Expr>>,
}

impl Param {
    /// Whether the value lies outside the declared bound (both in clock units).
    pub fn breaks_bound(&self) -> bool {
        self.bound
            .as_deref()
            .is_some_and(|b| self.value.is_finite() && !b.contains(self.value))
    }
}

/// A `state` with its initial value and its equation.
#[derive(Clone, Debug, PartialEq)]
pub struct Factor {
    pub name: String,
    pub name_span: Span,
    pub span: Span,
    /// Initial value as written.
    pub written: f64,
    /// Initial value in clock units.
    pub initial: f64,
    pub scale: f64,
    pub dimension: Dimension,
    pub unit_text: Option<String>,
    /// The declared domain, in clock units (unbounded when none was declared).
    pub domain: Interval,
    /// Whether a domain was declared.
    pub has_domain: bool,
    pub description: Option<String>,
    pub equation: Option<Equation>,
    /// The initial value as a constant expression of parameters (`factor r = theta`),
    /// when it is written as one; `initial` is its value at the file's parameters.
    pub initial_expr: Option<Expr>,
}

impl Factor {
    /// Whether the initial value lies outside the declared domain.
    pub fn breaks_domain(&self) -> bool {
        self.has_domain && self.initial.is_finite() && !self.domain.contains(self.initial)
    }
}

/// One diffusion term `coefficient dNOISE`.
#[derive(Clone, Debug, PartialEq)]
pub struct DiffusionTerm {
    /// The shock of [`Model::shocks`] the term multiplies.
    pub noise: ShockId,
    pub coefficient: Expr,
    pub span: Span,
}

/// `dX = drift dt + Σ coefficient_k dW_k`.
#[derive(Clone, Debug, PartialEq)]
pub struct Equation {
    /// Span of the whole equation statement.
    pub span: Span,
    /// Span of the `dX` token.
    pub lhs_span: Span,
    /// The drift; `Const(0)` when there is no `dt` term.
    pub drift: Expr,
    /// Span of the `dt` term, if there is one.
    pub drift_span: Option<Span>,
    pub diffusion: Vec<DiffusionTerm>,
}

/// A `noise`.
#[derive(Clone, Debug, PartialEq)]
pub struct Shock {
    pub name: String,
    pub name_span: Span,
    pub description: Option<String>,
}

/// A `corr a b = rho` statement.
#[derive(Clone, Debug, PartialEq)]
pub struct Correlation {
    pub first: ShockId,
    pub second: ShockId,
    /// The value at the file's parameters.
    pub value: f64,
    pub span: Span,
    /// The span of the value as written (a number or an expression).
    pub value_span: Span,
    /// The value as a constant expression of parameters (`corr W, B = rho`), when it is
    /// written with at least one parameter; `None` for a plain number.
    pub expr: Option<Expr>,
}

/// A `let`, kept for hover and inlay hints (its uses are already inlined).
#[derive(Clone, Debug, PartialEq)]
pub struct Let {
    pub name: String,
    pub name_span: Span,
    pub span: Span,
    pub value: Expr,
    pub dimension: Option<Dimension>,
    pub description: Option<String>,
}

/// An `expect` statement, converted to clock units.
#[derive(Clone, Debug, PartialEq)]
pub struct Expectation {
    pub figure: Figure,
    /// The factor of [`Model::factors`]; `None` for the figures of the curve (`price`,
    /// `yield`, `forward`).
    pub state: Option<FactorId>,
    /// `prob`: whether the probability is of being below or above the level.
    pub side: Option<Side>,
    /// `prob`: the level in the factor's clock units; `quantile`: the probability, in
    /// (0, 1).
    pub level: Option<f64>,
    /// The time at which the figure is taken (clock units; the maturity of a curve
    /// figure); `None` means the horizon.
    pub at: Option<f64>,
    /// The time as written (`1 month`), for messages.
    pub at_text: Option<String>,
    /// The admissible values, in the figure's clock units (probabilities, prices and
    /// annual decimals for yields and forwards).
    pub admissible: Interval,
    /// How messages show the figure to the reader.
    pub shown: Shown,
    /// How messages show the level of `prob` (as written: in % or in the factor's unit).
    pub level_shown: Shown,
    pub span: Span,
}

/// The units in which the reader sees a figure of an expectation.
#[derive(Clone, Debug, PartialEq)]
pub enum Shown {
    /// The model's clock units (the moments and half-lives).
    Clock,
    /// As a percentage (probabilities, yields, forwards, rates written with `%`).
    Percent,
    /// Divided by `scale` and followed by the unit as declared (a quantile of a factor,
    /// a bond price).
    Scaled { scale: f64, unit: Option<String> },
    /// In basis points (a mean or sd of a rate whose bound is written in `bp`).
    BasisPoints,
    /// A duration in the time unit the bound is written in (`10 day`): `scale` is that
    /// unit's length in clock units.
    Time { scale: f64, unit: String },
}

impl Shown {
    /// A value of the figure (in the units of [`Expectation::admissible`]) as the reader
    /// sees it: `3.142%`, `81.5 EUR`, `0.7312`.
    pub fn show(&self, value: f64) -> String {
        match self {
            Shown::Clock => sdeck_units::number::plain(value),
            Shown::Percent => sdeck_units::number::percent(value, 4),
            Shown::Scaled { scale, unit } => {
                sdeck_units::number::with_unit(value / scale, unit.as_deref())
            }
            Shown::BasisPoints => sdeck_units::number::basis_points(value, 4),
            Shown::Time { scale, unit } => sdeck_units::number::duration(value / scale, unit),
        }
    }
}

/// Under which measure the drifts are written.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum MeasureKind {
    RiskNeutral,
    RealWorld,
}

impl MeasureKind {
    pub fn as_str(self) -> &'static str {
        match self {
            MeasureKind::RiskNeutral => "risk-neutral",
            MeasureKind::RealWorld => "real-world",
        }
    }
}

/// A `measure` statement.
#[derive(Clone, Debug, PartialEq)]
pub struct Measure {
    pub measure: MeasureKind,
    pub span: Span,
}

/// A `discount` statement: the short rate.
#[derive(Clone, Debug, PartialEq)]
pub struct Discount {
    /// The rate per clock unit of time (a dimensionless rate is read per year and
    /// converted).
    pub rate: Expr,
    pub span: Span,
    /// Whether the rate was written without a time dimension (read as per year).
    pub per_year: bool,
}

/// A declared unit (`unit EUR`).
#[derive(Clone, Debug, PartialEq)]
pub struct UnitDecl {
    pub name: String,
    pub name_span: Span,
}

/// The time unit the model's clock runs in.
#[derive(Clone, Debug, PartialEq)]
pub struct Clock {
    /// `year`, `month`, `week`, `day` or `bday`.
    pub unit: String,
    /// Length of one clock unit in years.
    pub years: f64,
}

/// A whole model, resolved and converted to clock units.
#[derive(Clone, Debug, PartialEq)]
pub struct Model {
    pub name: String,
    pub clock: Clock,
    /// Default reporting time, in clock units.
    pub horizon: f64,
    pub units: Vec<UnitDecl>,
    pub params: IdVec<ParamId, Param>,
    pub factors: IdVec<FactorId, Factor>,
    pub shocks: IdVec<ShockId, Shock>,
    pub correlations: Vec<Correlation>,
    pub lets: IdVec<LetId, Let>,
    pub expectations: Vec<Expectation>,
    pub measure: Option<Measure>,
    pub discount: Option<Discount>,
}

impl Model {
    /// The correlation matrix of the shocks, in declaration order (identity where no
    /// `corr` was given).
    pub fn correlation_matrix(&self) -> Vec<Vec<f64>> {
        let n = self.shocks.len();
        let mut m = vec![vec![0.0; n]; n];
        for (i, row) in m.iter_mut().enumerate() {
            row[i] = 1.0;
        }
        for c in &self.correlations {
            if c.first != c.second {
                m[c.first.index()][c.second.index()] = c.value;
                m[c.second.index()][c.first.index()] = c.value;
            }
        }
        m
    }

    /// The correlations of the shocks, sparse: only the pairs a `corr` statement names
    /// (the last statement of a pair wins, as in [`Model::correlation_matrix`]).
    pub fn correlations(&self) -> Correlations {
        let mut pairs = std::collections::HashMap::new();
        for c in &self.correlations {
            if c.first != c.second {
                pairs.insert((c.first.min(c.second), c.first.max(c.second)), c.value);
            }
        }
        Correlations {
            shocks: self.shocks.len(),
            pairs,
        }
    }

    /// The parameter declared as `name`.
    pub fn param_id(&self, name: &str) -> Option<ParamId> {
        self.params.find_id(|p| p.name == name)
    }

    /// The factor declared as `name`.
    pub fn factor_id(&self, name: &str) -> Option<FactorId> {
        self.factors.find_id(|s| s.name == name)
    }

    /// The factors' names in declaration order, comma-separated, for messages that list
    /// what could have been meant ("r, v").
    pub fn factor_list(&self) -> String {
        let names: Vec<&str> = self.factors.iter().map(|s| s.name.as_str()).collect();
        names.join(", ")
    }
}

/// The correlation matrix of the shocks without its n² zeros: a model may declare
/// thousands of shocks and correlate a few of them.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Correlations {
    shocks: usize,
    pairs: std::collections::HashMap<(ShockId, ShockId), f64>,
}

impl Correlations {
    /// The correlation of shocks `k` and `l`: 1 on the diagonal, 0 where none is given.
    pub fn get(&self, k: ShockId, l: ShockId) -> f64 {
        if k == l {
            return 1.0;
        }
        self.pairs
            .get(&(k.min(l), k.max(l)))
            .copied()
            .unwrap_or(0.0)
    }

    /// Whether no two shocks are correlated.
    pub fn is_identity(&self) -> bool {
        self.pairs.values().all(|v| *v == 0.0)
    }

    /// The blocks of the matrix: groups of two or more shocks joined by nonzero
    /// correlations, each sorted, in the order of their first noise. Every noise outside
    /// them is uncorrelated with all others, so the matrix is block diagonal with these
    /// blocks and ones.
    pub fn blocks(&self) -> Vec<Vec<ShockId>> {
        let mut parent: std::collections::HashMap<ShockId, ShockId> =
            std::collections::HashMap::new();
        fn root(parent: &mut std::collections::HashMap<ShockId, ShockId>, i: ShockId) -> ShockId {
            let mut r = i;
            while let Some(&p) = parent.get(&r) {
                if p == r {
                    break;
                }
                r = p;
            }
            parent.insert(i, r);
            r
        }
        for (&(k, l), &v) in &self.pairs {
            if v == 0.0 || k.index() >= self.shocks || l.index() >= self.shocks {
                continue;
            }
            parent.entry(k).or_insert(k);
            parent.entry(l).or_insert(l);
            let (rk, rl) = (root(&mut parent, k), root(&mut parent, l));
            if rk != rl {
                parent.insert(rk.max(rl), rk.min(rl));
            }
        }
        let mut members: Vec<ShockId> = parent.keys().copied().collect();
        members.sort_unstable();
        let mut groups: std::collections::BTreeMap<ShockId, Vec<ShockId>> =
            std::collections::BTreeMap::new();
        for i in members {
            let r = root(&mut parent, i);
            groups.entry(r).or_default().push(i);
        }
        let mut blocks: Vec<Vec<ShockId>> = groups.into_values().filter(|b| b.len() > 1).collect();
        blocks.sort_by_key(|b| b.first().copied());
        blocks
    }
}

impl Expr {
    /// The parameter at `index` of [`Model::params`] (for expressions built by hand).
    pub fn param(index: usize) -> Expr {
        Expr::Param(ParamId::new(index))
    }

    /// The factor at `index` of [`Model::factors`] (for expressions built by hand).
    pub fn factor(index: usize) -> Expr {
        Expr::Factor(FactorId::new(index))
    }

    /// Evaluates the expression with parameter values `params` (clock units), state
    /// values `states` and time `t`. `Invalid` evaluates to NaN.
    pub fn eval(&self, params: &[f64], states: &[f64], t: f64) -> f64 {
        let ev = |e: &Expr| e.eval(params, states, t);
        match self {
            Expr::Const(c) => *c,
            Expr::Param(i) => params.get(i.index()).copied().unwrap_or(f64::NAN),
            Expr::Factor(i) => states.get(i.index()).copied().unwrap_or(f64::NAN),
            Expr::Time => t,
            Expr::Neg(a) => -ev(a),
            Expr::Add(a, b) => ev(a) + ev(b),
            Expr::Sub(a, b) => ev(a) - ev(b),
            Expr::Mul(a, b) => ev(a) * ev(b),
            Expr::Div(a, b) => ev(a) / ev(b),
            Expr::Pow(a, b) => ev(a).powf(ev(b)),
            Expr::Call(f, args) => {
                let x = args.first().map(ev).unwrap_or(f64::NAN);
                if f.is_schedule() {
                    let rest: Vec<f64> = args.iter().skip(1).map(ev).collect();
                    return match (f, rest.split_first()) {
                        (Function::Step, Some((v0, pairs))) => step_value(x, *v0, pairs),
                        (Function::Ramp, _) => ramp_value(x, &rest),
                        _ => f64::NAN,
                    };
                }
                match f {
                    Function::Exp => x.exp(),
                    Function::Log => x.ln(),
                    Function::Sqrt => x.sqrt(),
                    Function::Abs => x.abs(),
                    Function::Sin => x.sin(),
                    Function::Cos => x.cos(),
                    Function::Min | Function::Max => {
                        let y = args.get(1).map(ev).unwrap_or(f64::NAN);
                        if *f == Function::Min {
                            x.min(y)
                        } else {
                            x.max(y)
                        }
                    }
                    Function::Step | Function::Ramp => f64::NAN,
                }
            }
            Expr::Invalid => f64::NAN,
        }
    }
}

impl Model {
    /// Recomputes, in declaration order, every parameter written as an expression of
    /// earlier ones from `values` (clock units, one per parameter): after a fit or any
    /// change of the free parameters, the derived ones follow.
    pub fn derive_params(&self, values: &mut [f64]) {
        for (id, p) in self.params.iter_ids() {
            if let Some(expr) = &p.expr {
                let value = expr.eval(values, &[], 0.0);
                if let Some(slot) = values.get_mut(id.index()) {
                    *slot = value;
                }
            }
        }
    }

    /// The free parameters a parameter's value rests on: itself when it is written as a
    /// number, else the free parameters of its expression (in declaration order).
    pub fn free_params_of(&self, param: ParamId) -> Vec<ParamId> {
        let mut out = Vec::new();
        let mut pending = vec![param];
        while let Some(i) = pending.pop() {
            match self.params.by_id(i).map(|p| p.expr.as_ref()) {
                Some(Some(expr)) => expr.params(&mut pending),
                Some(None) => out.push(i),
                None => {}
            }
        }
        out.sort_unstable();
        out.dedup();
        out
    }

    /// Parameter values in clock units, in declaration order.
    pub fn param_values(&self) -> Vec<f64> {
        self.params.iter().map(|p| p.value).collect()
    }

    /// Initial state values in clock units, in declaration order.
    pub fn initial_values(&self) -> Vec<f64> {
        self.factors.iter().map(|s| s.initial).collect()
    }
}

#[cfg(test)]
mod tests {
    use super::Function;

    #[test]
    fn functions_follow_the_table_of_function_names() {
        let names: Vec<&str> = Function::ALL.iter().map(|f| f.name()).collect();
        assert_eq!(names, sdeck_syntax::vocabulary::FUNCTION_NAMES);
        for (index, function) in Function::ALL.into_iter().enumerate() {
            assert_eq!(function as usize, index);
            assert_eq!(Function::from_name(function.name()), Some(function));
        }
        assert_eq!(Function::from_name("t"), None);
    }
}
