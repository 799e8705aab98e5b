//! Reading an affine set from a model: the drift and the instantaneous covariance of
//! every factor as polynomials, checked to be affine in the factors (a factor whose
//! equation is relative, dS = S·(...), is carried by its logarithm), with the
//! coefficients read once when they do not change with time.

use super::AffineSet;
use crate::algebra::{Atom, Monomial, Poly};
use crate::breaks::TimeBreaks;
use crate::shape::{diffusion_product, shape_of, NoiseTerm, Shape};
use sdeck_semantics::{Correlations, Model};

/// `poly / x_state` when every term carries x_state exactly once.
fn divide_by_state(poly: &Poly, state: usize) -> Option<Poly> {
    let mut out = Poly::zero();
    for (monomial, coefficient) in &poly.terms {
        let mut found = false;
        let mut rest: Monomial = Vec::with_capacity(monomial.len());
        for (atom, power) in monomial {
            match atom {
                Atom::State(i) if i.index() == state => {
                    if *power != 1 {
                        return None;
                    }
                    found = true;
                }
                _ => rest.push((atom.clone(), *power)),
            }
        }
        if !found {
            return None;
        }
        out.terms.insert(rest, *coefficient);
    }
    Some(out)
}

/// The relative equation of a geometric factor: drift/S and diffusion/S, when neither
/// mentions S again.
fn relative_shape(shape: &Shape, state: usize) -> Option<Shape> {
    let drift = divide_by_state(&shape.drift, state)?;
    let mentions = |poly: &Poly| poly.states().iter().any(|s| s.index() == state);
    if mentions(&drift) {
        return None;
    }
    let mut noises = Vec::with_capacity(shape.noises.len());
    for term in &shape.noises {
        let scale = divide_by_state(&term.form.scale, state)?;
        if mentions(&scale) || mentions(&term.form.radicand) {
            return None;
        }
        let mut form = term.form.clone();
        form.scale = scale;
        noises.push(NoiseTerm {
            noise: term.noise,
            form,
            expr: term.expr.clone(),
        });
    }
    Some(Shape { drift, noises })
}

/// Splits an affine polynomial into (constant, coefficient per factor); `None` when it
/// is not affine or mentions a log factor.
fn affine_parts(poly: &Poly, log: &[bool]) -> Option<(Poly, Vec<Poly>)> {
    let n = log.len();
    let mut linear = vec![Poly::zero(); n];
    let mut constant = Poly::zero();
    for (key, coefficient) in poly.by_state_monomial() {
        match key.as_slice() {
            [] => constant = coefficient,
            [(j, 1)] if !*log.get(*j)? => *linear.get_mut(*j)? = coefficient,
            _ => return None,
        }
    }
    Some((constant, linear))
}

/// The coefficients of an affine set: the drift K0 + K1·x of each factor and the
/// instantaneous covariance H0 + Σ_k x_k H1[k], as polynomials of parameters and t.
struct Coefficients {
    k0: Vec<Poly>,
    k1: Vec<Vec<Poly>>,
    h0: Vec<Vec<Poly>>,
    h1: Vec<Vec<Vec<Poly>>>,
}

impl AffineSet {
    /// The affine set of every factor of `model`, or why the model has none.
    pub fn from_model(model: &Model) -> Result<AffineSet, String> {
        let n = model.factors.len();
        if n == 0 {
            return Err("the model declares no factor".to_string());
        }
        // The set is dense (n³ coefficients for the covariances' slopes): past the size
        // the several-factor engines take it would not fit in memory.
        if n > crate::MAX_SYSTEM_STATES {
            return Err(format!(
                "the model has {n} factors, more than the {} the transform engine takes",
                crate::MAX_SYSTEM_STATES
            ));
        }
        let corr = model.correlations();
        let shapes = shapes(model)?;
        let (log, relative) = log_factors(model, &shapes, &corr)?;
        let coefficients = coefficients(model, &relative, &log, &corr)?;
        check_admissible(model, &coefficients.h1, &log)?;
        assemble(model, log, coefficients)
    }
}

/// The shape of every factor's equation.
fn shapes(model: &Model) -> Result<Vec<Shape>, String> {
    (0..model.factors.len())
        .map(|i| {
            shape_of(model, i).map_err(|_| {
                format!(
                    "the equation of {} is not a polynomial in the factors",
                    name(model, i)
                )
            })
        })
        .collect()
}

/// Which factors are carried by their logarithm, and the equations the set reads: a
/// factor whose own squared diffusion is not affine is carried by its logarithm when its
/// equation is S times something free of S.
fn log_factors(
    model: &Model,
    shapes: &[Shape],
    corr: &Correlations,
) -> Result<(Vec<bool>, Vec<Shape>), String> {
    let n = shapes.len();
    let mut log = vec![false; n];
    let mut relative = shapes.to_vec();
    for i in 0..n {
        let Some(shape) = shapes.get(i) else { continue };
        let own = diffusion_product(&shape.noises, &shape.noises, corr).ok();
        let affine_itself =
            shape.drift.state_degree() <= 1 && own.is_some_and(|p| p.state_degree() <= 1);
        if affine_itself {
            continue;
        }
        let start = model.factors.get(i).map(|s| s.initial).unwrap_or(f64::NAN);
        match relative_shape(shape, i) {
            Some(r) if start > 0.0 => {
                log[i] = true;
                relative[i] = r;
            }
            _ => {
                return Err(format!(
                    "{} has neither an affine drift and covariance nor the form \
                     S·(affine) dt + S·(...) dW with a positive start",
                    name(model, i)
                ))
            }
        }
    }
    Ok((log, relative))
}

/// K0, K1, H0 and H1 from the equations, or which drift or covariance is not affine.
fn coefficients(
    model: &Model,
    relative: &[Shape],
    log: &[bool],
    corr: &Correlations,
) -> Result<Coefficients, String> {
    let n = relative.len();
    let mut k0 = Vec::with_capacity(n);
    let mut k1 = Vec::with_capacity(n);
    let mut h0 = vec![vec![Poly::zero(); n]; n];
    let mut h1 = vec![vec![vec![Poly::zero(); n]; n]; n];
    for i in 0..n {
        let shape = relative.get(i).ok_or("internal: missing shape")?;
        let mut drift = shape.drift.clone();
        if log[i] {
            let squared = diffusion_product(&shape.noises, &shape.noises, corr)
                .map_err(|_| format!("the diffusion of {} is not affine", name(model, i)))?;
            drift = drift.sub(&squared.scale(0.5));
        }
        let (constant, linear) = affine_parts(&drift, log).ok_or_else(|| {
            format!(
                "the drift of {} is not affine in the factors{}",
                name(model, i),
                if log[i] { " (in logarithms)" } else { "" }
            )
        })?;
        k0.push(constant);
        k1.push(linear);
        for j in 0..n {
            let other = relative.get(j).ok_or("internal: missing shape")?;
            let product = diffusion_product(&shape.noises, &other.noises, corr)
                .ok()
                .and_then(|p| affine_parts(&p, log))
                .ok_or_else(|| {
                    format!(
                        "the instantaneous covariance of {} and {} is not affine in the \
                         factors",
                        name(model, i),
                        name(model, j)
                    )
                })?;
            h0[i][j] = product.0;
            for (k, coefficient) in product.1.into_iter().enumerate() {
                h1[k][i][j] = coefficient;
            }
        }
    }
    Ok(Coefficients { k0, k1, h0, h1 })
}

/// Refuses a set in which a factor that may go negative scales a covariance.
fn check_admissible(model: &Model, h1: &[Vec<Vec<Poly>>], log: &[bool]) -> Result<(), String> {
    // A factor that scales a covariance must stay non-negative, which in an affine
    // set means its own variance is proportional to it (a square-root factor; the
    // admissibility of Duffie, Filipović & Schachermayer 2003, Annals of Applied
    // Probability 13). A Gaussian factor under a square root makes the covariance
    // negative with positive probability: the transform then describes no law.
    for (k, scales) in h1.iter().enumerate() {
        let drives = scales.iter().flatten().any(|c| !c.is_zero());
        let own = scales.get(k).and_then(|row| row.get(k));
        if drives && (log[k] || own.is_none_or(Poly::is_zero)) {
            return Err(format!(
                "{} scales a covariance but has no diffusion proportional to itself, so nothing keeps it non-negative",
                name(model, k)
            ));
        }
    }
    Ok(())
}

/// The set from its coefficients: the start (in logarithms where carried so), whether
/// anything depends on t, the breaks of the coefficients, and the numbers read once when
/// nothing does.
fn assemble(model: &Model, log: Vec<bool>, c: Coefficients) -> Result<AffineSet, String> {
    let x0 = model
        .factors
        .iter()
        .zip(&log)
        .map(|(s, &l)| if l { s.initial.ln() } else { s.initial })
        .collect();
    let set = from_parts(log, x0, c, model.param_values());
    if let Some(numbers) = &set.constant {
        if numbers
            .k0
            .iter()
            .chain(&numbers.k1)
            .chain(&numbers.h0)
            .chain(&numbers.h1)
            .any(|v| !v.is_finite())
        {
            return Err("a coefficient is not a finite number".to_string());
        }
    }
    Ok(set)
}

/// The set of `log`, `x0` and the coefficients, with what follows from them: whether
/// anything depends on t, where the coefficients break, and their numbers when constant.
fn from_parts(log: Vec<bool>, x0: Vec<f64>, c: Coefficients, params: Vec<f64>) -> AffineSet {
    let Coefficients { k0, k1, h0, h1 } = c;
    let time_dependent = k0.iter().any(Poly::depends_on_time)
        || k1.iter().flatten().any(Poly::depends_on_time)
        || h0.iter().flatten().any(Poly::depends_on_time)
        || h1.iter().flatten().flatten().any(Poly::depends_on_time);
    let breaks = TimeBreaks::of_polys(
        k0.iter()
            .chain(k1.iter().flatten())
            .chain(h0.iter().flatten())
            .chain(h1.iter().flatten().flatten()),
        &params,
    );
    let mut set = AffineSet {
        n: log.len(),
        log,
        x0,
        k0,
        k1,
        h0,
        h1,
        params,
        time_dependent,
        constant: None,
        breaks,
        work: None,
    };
    if !time_dependent {
        set.constant = Some(set.numbers(0.0));
    }
    set
}

impl AffineSet {
    /// The set of the factors `keep` alone (indices into this set, in that order),
    /// drawing on the same work budget.
    pub(super) fn select(&self, keep: &[usize]) -> AffineSet {
        let pick = |v: &[Poly]| keep.iter().map(|&i| v[i].clone()).collect::<Vec<_>>();
        let pick2 = |m: &[Vec<Poly>]| keep.iter().map(|&i| pick(&m[i])).collect::<Vec<_>>();
        let coefficients = Coefficients {
            k0: pick(&self.k0),
            k1: pick2(&self.k1),
            h0: pick2(&self.h0),
            h1: keep.iter().map(|&k| pick2(&self.h1[k])).collect(),
        };
        let mut set = from_parts(
            keep.iter().map(|&i| self.log[i]).collect(),
            keep.iter().map(|&i| self.x0[i]).collect(),
            coefficients,
            self.params.clone(),
        );
        set.work = self.work.clone();
        set
    }
}

fn name(model: &Model, i: usize) -> String {
    model
        .factors
        .get(i)
        .map(|s| s.name.clone())
        .unwrap_or_else(|| format!("factor {}", i + 1))
}
