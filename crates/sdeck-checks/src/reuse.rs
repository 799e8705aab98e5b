//! What the check of a new version of a text takes over from the checks of its earlier
//! versions. An editor checks a file again at every pause in typing, and most edits (a
//! comment, an expectation's interval, one factor's equation, one parameter's value)
//! leave most of the model as it was.
//!
//! Each factor gets a content key ([`ContentKeys`]): a hash of what its derived figures
//! rest on — its equation after lowering, its start, the values of the parameters it
//! reads, the factors linked to it through their equations in either direction (its
//! coupled block, with everything theirs rest on), the correlations among the shocks
//! they load on, the clock and the horizon — and never of a span, so
//! that an edit elsewhere in the text leaves the key as it was. The whole model has a
//! key too, of everything the derivation reads: a version whose model has the same key
//! takes the previous derivation as it is. Figures are kept by key in a [`Memo`], which
//! forgets what the last finished version did not use, so a memo holds about one
//! version's worth of figures whatever the length of the session.
//!
//! Keys are 64-bit hashes (SipHash with fixed keys, the standard library's
//! `DefaultHasher`): two different contents share a key with a chance of about 2⁻⁶⁴.

use sdeck_calculus::Derivation;
use sdeck_semantics::{Expectation, Expr, Factor, FactorId, Interval, Model, Param, ParamId};
use std::collections::hash_map::DefaultHasher;
use std::collections::HashMap;
use std::hash::{Hash, Hasher};
use std::sync::Mutex;

/// The content keys of one version of a model.
#[derive(Clone, Debug, Default, PartialEq, Eq)]
pub struct ContentKeys {
    /// Per factor, in declaration order: the key of what its figures rest on.
    pub factors: Vec<u64>,
    /// The key of everything the derivation reads (not the expectations, not a span).
    pub derivation: u64,
}

impl ContentKeys {
    /// The keys of `model`: linear in its size (each factor hashes its coupled block; a
    /// block of n factors costs n² small hashes, less than deriving the block).
    pub fn of(model: &Model) -> ContentKeys {
        let global = global_key(model);
        let factors = model
            .factors
            .ids()
            .zip(linked_groups(model))
            .map(|(i, group)| factor_key(model, global, i, &group))
            .collect();
        let mut h = DefaultHasher::new();
        global.hash(&mut h);
        for (i, factor) in model.factors.ids().zip(model.factors.iter()) {
            hash_factor(model, i, factor, &mut h);
        }
        for (i, param) in model.params.ids().zip(model.params.iter()) {
            hash_param(i, param, &mut h);
        }
        for c in &model.correlations {
            (c.first, c.second, c.value.to_bits()).hash(&mut h);
        }
        ContentKeys {
            factors,
            derivation: h.finish(),
        }
    }

    /// The key of an expectation's value: its figure, time and level, and the content of
    /// its factor (of the whole derivation for the figures of the curve).
    pub fn expectation(&self, e: &Expectation) -> u64 {
        let mut h = DefaultHasher::new();
        "expectation".hash(&mut h);
        match e.state {
            Some(state) => self.factors.get(state.index()).hash(&mut h),
            None => self.derivation.hash(&mut h),
        }
        e.figure.keyword().hash(&mut h);
        e.at.map(f64::to_bits).hash(&mut h);
        e.level.map(f64::to_bits).hash(&mut h);
        e.side.map(|s| s.symbol()).hash(&mut h);
        h.finish()
    }
}

/// What every figure of every factor may read: the clock, the horizon, the names of
/// everything (formulas choose their letters so as not to clash with them), the sizes
/// past which the calculus derives differently, the measure and the discount rate.
fn global_key(model: &Model) -> u64 {
    let mut h = DefaultHasher::new();
    model.clock.unit.hash(&mut h);
    model.clock.years.to_bits().hash(&mut h);
    model.horizon.to_bits().hash(&mut h);
    let n = model.factors.len();
    (n <= sdeck_calculus::MAX_SYSTEM_STATES).hash(&mut h);
    (n <= sdeck_calculus::MAX_DERIVED_STATES).hash(&mut h);
    for name in model
        .params
        .iter()
        .map(|p| &p.name)
        .chain(model.factors.iter().map(|f| &f.name))
        .chain(model.shocks.iter().map(|s| &s.name))
        .chain(model.lets.iter().map(|l| &l.name))
    {
        name.hash(&mut h);
    }
    model
        .measure
        .as_ref()
        .map(|m| m.measure.as_str())
        .hash(&mut h);
    if let Some(discount) = &model.discount {
        discount.per_year.hash(&mut h);
        hash_expr(&discount.rate, &mut h);
    }
    h.finish()
}

/// The key of factor `i`, whose group is `closure` ([`linked_groups`]): which factor it
/// is, the global key, and the content of every factor of the group, of the parameters
/// they read and of the correlations among their shocks.
fn factor_key(model: &Model, global: u64, i: FactorId, closure: &[FactorId]) -> u64 {
    let mut params = Vec::new();
    let mut shocks = Vec::new();
    for j in closure {
        let Some(factor) = model.factors.by_id(*j) else {
            continue;
        };
        for e in factor_exprs(factor) {
            e.params(&mut params);
        }
        if let Some(eq) = &factor.equation {
            shocks.extend(eq.diffusion.iter().map(|d| d.noise));
        }
    }
    // A parameter written as an expression reads others; its value is what the figures
    // see, and the free ones are hashed with it.
    let mut free = Vec::new();
    for p in &params {
        free.extend(model.free_params_of(*p));
    }
    params.extend(free);
    params.sort_unstable();
    params.dedup();
    shocks.sort_unstable();
    shocks.dedup();
    let mut h = DefaultHasher::new();
    (global, i).hash(&mut h);
    for j in closure {
        if let Some(factor) = model.factors.by_id(*j) {
            hash_factor(model, *j, factor, &mut h);
        }
    }
    for p in params {
        if let Some(param) = model.params.by_id(p) {
            hash_param(p, param, &mut h);
        }
    }
    for c in &model.correlations {
        if shocks.binary_search(&c.first).is_ok() && shocks.binary_search(&c.second).is_ok() {
            (c.first, c.second, c.value.to_bits()).hash(&mut h);
        }
    }
    h.finish()
}

/// Per factor, the group of factors linked to it through their equations and starts, in
/// either direction (the coupled block the calculus derives together: a block's formulas
/// and matrices show every member's parameters), ascending.
fn linked_groups(model: &Model) -> Vec<Vec<FactorId>> {
    let n = model.factors.len();
    let mut parent: Vec<usize> = (0..n).collect();
    fn root(parent: &mut [usize], mut i: usize) -> usize {
        while parent[i] != i {
            parent[i] = parent[parent[i]];
            i = parent[i];
        }
        i
    }
    for (j, factor) in model.factors.iter().enumerate() {
        let mut mentioned = Vec::new();
        for e in factor_exprs(factor) {
            e.factors(&mut mentioned);
        }
        for k in mentioned
            .into_iter()
            .map(FactorId::index)
            .filter(|k| *k < n)
        {
            let (a, b) = (root(&mut parent, j), root(&mut parent, k));
            parent[a.max(b)] = a.min(b);
        }
    }
    let roots: Vec<usize> = (0..n).map(|i| root(&mut parent, i)).collect();
    let mut members: HashMap<usize, Vec<FactorId>> = HashMap::new();
    for (i, r) in roots.iter().enumerate() {
        members.entry(*r).or_default().push(FactorId::new(i));
    }
    roots
        .iter()
        .map(|r| members.get(r).cloned().unwrap_or_default())
        .collect()
}

/// Every expression of a factor: its start, drift and diffusion coefficients.
fn factor_exprs(factor: &Factor) -> impl Iterator<Item = &Expr> {
    let equation = factor.equation.iter().flat_map(|eq| {
        std::iter::once(&eq.drift).chain(eq.diffusion.iter().map(|d| &d.coefficient))
    });
    factor.initial_expr.iter().chain(equation)
}

/// A factor without its spans.
fn hash_factor(model: &Model, index: FactorId, factor: &Factor, h: &mut DefaultHasher) {
    let f = factor;
    let bits = (f.written.to_bits(), f.initial.to_bits(), f.scale.to_bits());
    (index, &f.name, bits, &f.dimension, &f.unit_text).hash(h);
    hash_interval(&factor.domain, h);
    factor.has_domain.hash(h);
    factor.description.hash(h);
    if let Some(e) = &factor.initial_expr {
        hash_expr(e, h);
    }
    match &factor.equation {
        None => 0u8.hash(h),
        Some(eq) => {
            1u8.hash(h);
            hash_expr(&eq.drift, h);
            eq.drift_span.is_some().hash(h);
            for term in &eq.diffusion {
                term.noise.hash(h);
                model.shocks.by_id(term.noise).map(|s| &s.name).hash(h);
                hash_expr(&term.coefficient, h);
            }
        }
    }
}

/// A parameter without its spans, bound and description (no figure reads them).
fn hash_param(index: ParamId, param: &Param, h: &mut DefaultHasher) {
    let p = param;
    let bits = (p.written.to_bits(), p.value.to_bits(), p.scale.to_bits());
    (index, &p.name, bits, &p.dimension, &p.unit_text).hash(h);
    if let Some(e) = &param.expr {
        hash_expr(e, h);
    }
}

fn hash_interval(interval: &Interval, h: &mut DefaultHasher) {
    for end in [interval.lower, interval.upper] {
        end.map(|(v, inclusive)| (v.to_bits(), inclusive)).hash(h);
    }
}

/// An expression, node by node: a fold that writes each variant (not a walk).
fn hash_expr(e: &Expr, h: &mut DefaultHasher) {
    std::mem::discriminant(e).hash(h);
    match e {
        Expr::Const(c) => c.to_bits().hash(h),
        Expr::Param(i) => i.hash(h),
        Expr::Factor(i) => i.hash(h),
        Expr::Time | Expr::Invalid => {}
        Expr::Neg(a) => hash_expr(a, h),
        Expr::Add(a, b) | Expr::Sub(a, b) | Expr::Mul(a, b) | Expr::Div(a, b) | Expr::Pow(a, b) => {
            hash_expr(a, h);
            hash_expr(b, h);
        }
        Expr::Call(f, args) => {
            f.hash(h);
            args.len().hash(h);
            for a in args {
                hash_expr(a, h);
            }
        }
    }
}

/// Values kept by content key across versions: a lookup finds what this version or the
/// last finished one computed; [`Memo::finish_version`] forgets the rest. A version that
/// is given up keeps what it computed for the next one.
#[derive(Debug)]
pub struct Memo<V> {
    current: HashMap<u64, V>,
    previous: HashMap<u64, V>,
    /// Values computed since the memo was made.
    pub computed: u64,
    /// Values found instead of computed.
    pub reused: u64,
}

impl<V> Default for Memo<V> {
    fn default() -> Self {
        Memo {
            current: HashMap::new(),
            previous: HashMap::new(),
            computed: 0,
            reused: 0,
        }
    }
}

/// The most values a memo keeps beyond those of the last finished version: versions
/// given up one after another (fast typing) each add a few, and are not finished.
const MEMO_SLACK: usize = 4096;

impl<V: Clone> Memo<V> {
    /// The value kept under `key`, if this version or the last finished one has it.
    pub fn get(&mut self, key: u64) -> Option<V> {
        if let Some(v) = self.current.get(&key) {
            self.reused += 1;
            return Some(v.clone());
        }
        let v = self.previous.remove(&key)?;
        self.reused += 1;
        self.current.insert(key, v.clone());
        Some(v)
    }

    /// Keeps a value just computed.
    pub fn insert(&mut self, key: u64, value: V) {
        self.computed += 1;
        if self.current.len() >= self.previous.len() + MEMO_SLACK {
            self.current.clear();
        }
        self.current.insert(key, value);
    }

    /// A version has been finished: keep only what it (and the versions given up since
    /// the last finished one) used.
    pub fn finish_version(&mut self) {
        self.previous = std::mem::take(&mut self.current);
    }

    /// How many values are kept.
    pub fn len(&self) -> usize {
        self.current.len() + self.previous.len()
    }

    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }
}

/// What the checks of one document keep for the next version: the last derivation with
/// its key, and the values of expectations by key. The language server holds one per
/// open document; `sdeck check` has no use for one.
#[derive(Debug, Default)]
pub struct Reuse {
    inner: Mutex<Kept>,
}

#[derive(Debug, Default)]
struct Kept {
    derivation: Option<(u64, Derivation)>,
    derivations: u64,
    derivations_reused: u64,
    expectations: Memo<Result<f64, String>>,
}

/// How much work the checks of a document did and took over, since its [`Reuse`] was
/// made.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct ReuseCounts {
    /// Derivations of the whole model computed.
    pub derivations: u64,
    /// Derivations taken over from the previous version (same key).
    pub derivations_reused: u64,
    /// Values of expectations computed.
    pub expectations: u64,
    /// Values of expectations taken over.
    pub expectations_reused: u64,
}

impl Reuse {
    fn kept(&self) -> std::sync::MutexGuard<'_, Kept> {
        // What is kept is whole at every step (a value is inserted once computed).
        self.inner.lock().unwrap_or_else(|p| p.into_inner())
    }

    /// The derivation of `model`, whose key is `key`: the kept one when its key is the
    /// same, else a new one, which is kept.
    pub fn derivation(&self, model: &Model, key: u64) -> Derivation {
        {
            let mut kept = self.kept();
            if let Some((k, d)) = &kept.derivation {
                if *k == key {
                    let d = d.clone();
                    kept.derivations_reused += 1;
                    return d;
                }
            }
        }
        // Derived off the lock: a hover of the same document may read the memo meanwhile.
        let derivation = sdeck_calculus::derive(model);
        let mut kept = self.kept();
        kept.derivations += 1;
        kept.derivation = Some((key, derivation.clone()));
        derivation
    }

    /// The value of an expectation, kept by `key` ([`ContentKeys::expectation`]).
    pub fn expectation_value(
        &self,
        key: u64,
        compute: impl FnOnce() -> Result<f64, String>,
    ) -> Result<f64, String> {
        if let Some(v) = self.kept().expectations.get(key) {
            return v;
        }
        // Computed off the lock: a law by Fourier inversion may take a while.
        let value = compute();
        self.kept().expectations.insert(key, value.clone());
        value
    }

    /// A version's check has run to its end.
    pub fn finish_version(&self) {
        self.kept().expectations.finish_version();
    }

    /// How many values of expectations are kept.
    pub fn kept_values(&self) -> usize {
        self.kept().expectations.len()
    }

    pub fn counts(&self) -> ReuseCounts {
        let kept = self.kept();
        ReuseCounts {
            derivations: kept.derivations,
            derivations_reused: kept.derivations_reused,
            expectations: kept.expectations.computed,
            expectations_reused: kept.expectations.reused,
        }
    }
}
