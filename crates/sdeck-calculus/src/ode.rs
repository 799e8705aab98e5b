//! Adaptive ODE integration (Dormand–Prince 5(4)) and adaptive quadrature (Gauss–Kronrod 7-15)
//! for time-dependent moment equations: m' = A(t) m + b(t), P' = A P + P Aᵀ + Q(t).
//!
//! Both engines are pure numerics over `f64` slices and closures. They never loop forever:
//! the integrator stops after [`MAX_STEPS`] steps and the quadrature after
//! [`MAX_SUBDIVISIONS`] subdivisions or [`MAX_DEPTH`] halvings of one interval, returning an
//! [`OdeError`] rather than panicking.
//!
//! ```
//! use sdeck_calculus::ode::{integrate, quad};
//!
//! // y' = −y from 1: e^{−2} at t = 2.
//! let y = integrate(|_, y, dy| dy[0] = -y[0], &[1.0], 0.0, 2.0, 1e-10, 1e-12)?;
//! assert!((y[0] - (-2.0_f64).exp()).abs() < 1e-9);
//! // ∫₀^∞ e^{−x} dx = 1.
//! let area = quad(|x| (-x).exp(), 0.0, f64::INFINITY, 1e-10)?;
//! assert!((area - 1.0).abs() < 1e-9);
//! # Ok::<(), sdeck_calculus::ode::OdeError>(())
//! ```

// Reason: the stage loops index seven buffers of one length at the same i, reading like the
// Butcher tableau; zipped iterators over seven slices would hide the formulas.
#![allow(clippy::needless_range_loop)]

mod quadrature;

pub use quadrature::{gauss_kronrod_15, quad};
use std::fmt;

/// Most accepted plus rejected steps one call to [`integrate`] may take.
/// Reason: a stiff or singular right-hand side must end in an error, not in a hang.
pub const MAX_STEPS: usize = 200_000;

/// Most interval bisections one call to [`quad`] may make.
pub const MAX_SUBDIVISIONS: usize = 5_000;

/// Most halvings of one sub-interval in [`quad`]; 2⁻⁶⁰ of the range is below `f64` resolution.
pub const MAX_DEPTH: u32 = 60;

/// Why an integration or quadrature could not deliver a result to the requested tolerance.
#[derive(Clone, Debug, PartialEq)]
pub enum OdeError {
    /// An argument is unusable (non-finite bound, negative tolerance, empty state...).
    InvalidInput(String),
    /// The right-hand side or integrand returned NaN or infinity at this time / abscissa.
    NonFinite { at: f64 },
    /// The step cap was reached before the end time.
    StepLimit { reached: f64, steps: usize },
    /// The step size fell below what `f64` can resolve at this time (a singularity or stiffness).
    StepTooSmall { at: f64 },
    /// The quadrature could not meet the tolerance within its subdivision or depth limits.
    QuadratureNotConverged { estimate: f64, error: f64 },
    /// [`integrate_while`]'s condition failed after the step that ended at this time.
    Stopped { at: f64 },
}

impl fmt::Display for OdeError {
    fn fmt(&self, formatter: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            OdeError::InvalidInput(reason) => write!(formatter, "invalid input: {reason}"),
            OdeError::NonFinite { at } => {
                write!(
                    formatter,
                    "the function returned a non-finite value at {at}"
                )
            }
            OdeError::StepLimit { reached, steps } => write!(
                formatter,
                "the integration stopped at {reached} after {steps} steps without reaching the end"
            ),
            OdeError::StepTooSmall { at } => write!(
                formatter,
                "the step size became too small at {at} (singular or very stiff equation)"
            ),
            OdeError::Stopped { at } => {
                write!(
                    formatter,
                    "the integration was stopped at {at} by its condition"
                )
            }
            OdeError::QuadratureNotConverged { estimate, error } => write!(
                formatter,
                "the quadrature did not converge: estimate {estimate}, error estimate {error}"
            ),
        }
    }
}

impl std::error::Error for OdeError {}

// Dormand & Prince 1980, J. Comput. Appl. Math. 6, 19–26, Table 2 (the RK5(4)7M pair);
// the same tableau is in Hairer, Nørsett & Wanner, Solving ODE I, Table II.5.2.
const C2: f64 = 1.0 / 5.0;
const C3: f64 = 3.0 / 10.0;
const C4: f64 = 4.0 / 5.0;
const C5: f64 = 8.0 / 9.0;
const A21: f64 = 1.0 / 5.0;
const A31: f64 = 3.0 / 40.0;
const A32: f64 = 9.0 / 40.0;
const A41: f64 = 44.0 / 45.0;
const A42: f64 = -56.0 / 15.0;
const A43: f64 = 32.0 / 9.0;
const A51: f64 = 19372.0 / 6561.0;
const A52: f64 = -25360.0 / 2187.0;
const A53: f64 = 64448.0 / 6561.0;
const A54: f64 = -212.0 / 729.0;
const A61: f64 = 9017.0 / 3168.0;
const A62: f64 = -355.0 / 33.0;
const A63: f64 = 46732.0 / 5247.0;
const A64: f64 = 49.0 / 176.0;
const A65: f64 = -5103.0 / 18656.0;
// Fifth-order weights (also the last stage row: "first same as last").
const B1: f64 = 35.0 / 384.0;
const B3: f64 = 500.0 / 1113.0;
const B4: f64 = 125.0 / 192.0;
const B5: f64 = -2187.0 / 6784.0;
const B6: f64 = 11.0 / 84.0;
// Fifth minus fourth order weights: the local error estimate.
const E1: f64 = 71.0 / 57600.0;
const E3: f64 = -71.0 / 16695.0;
const E4: f64 = 71.0 / 1920.0;
const E5: f64 = -17253.0 / 339200.0;
const E6: f64 = 22.0 / 525.0;
const E7: f64 = -1.0 / 40.0;

/// Working storage of the Dormand–Prince stepper, allocated once per call.
struct StageBuffers {
    k1: Vec<f64>,
    k2: Vec<f64>,
    k3: Vec<f64>,
    k4: Vec<f64>,
    k5: Vec<f64>,
    k6: Vec<f64>,
    k7: Vec<f64>,
    stage_input: Vec<f64>,
    y_new: Vec<f64>,
}

impl StageBuffers {
    fn new(dimension: usize) -> Self {
        let zeros = vec![0.0; dimension];
        StageBuffers {
            k1: zeros.clone(),
            k2: zeros.clone(),
            k3: zeros.clone(),
            k4: zeros.clone(),
            k5: zeros.clone(),
            k6: zeros.clone(),
            k7: zeros.clone(),
            stage_input: zeros.clone(),
            y_new: zeros,
        }
    }
}

fn check_tolerances(rtol: f64, atol: f64) -> Result<(), OdeError> {
    if !(rtol.is_finite() && rtol >= 0.0 && atol.is_finite() && atol >= 0.0) {
        return Err(OdeError::InvalidInput(format!(
            "tolerances must be finite and non-negative (rtol {rtol}, atol {atol})"
        )));
    }
    if rtol == 0.0 && atol == 0.0 {
        return Err(OdeError::InvalidInput(
            "rtol and atol cannot both be zero".to_string(),
        ));
    }
    Ok(())
}

fn all_finite(values: &[f64]) -> bool {
    values.iter().all(|value| value.is_finite())
}

/// Integrates y' = f(t, y) from `t0` to `t1` (either direction) with the adaptive
/// Dormand–Prince 5(4) pair and returns y(t1).
///
/// `f(t, y, dy)` writes the derivative into `dy`. The local error of each accepted step is
/// kept below `atol + rtol·|y|` per component (root mean square). A relative floor of
/// 100·ε is applied to `rtol` so that impossible requests still finish.
pub fn integrate<F: Fn(f64, &[f64], &mut [f64])>(
    f: F,
    y0: &[f64],
    t0: f64,
    t1: f64,
    rtol: f64,
    atol: f64,
) -> Result<Vec<f64>, OdeError> {
    integrate_while(f, y0, t0, t1, rtol, atol, |_| true)
}

/// [`integrate`], checking `keep(y)` after every accepted step: when it fails the
/// integration ends with [`OdeError::Stopped`] at that step's time. A solution that
/// leaves the region of interest (one running into a pole, say) is then given up at once
/// instead of being followed with ever smaller steps until the step limit.
pub fn integrate_while<F: Fn(f64, &[f64], &mut [f64]), K: Fn(&[f64]) -> bool>(
    f: F,
    y0: &[f64],
    t0: f64,
    t1: f64,
    rtol: f64,
    atol: f64,
    keep: K,
) -> Result<Vec<f64>, OdeError> {
    let mut y = y0.to_vec();
    let mut buffers = StageBuffers::new(y.len());
    integrate_in_place(&f, &mut y, t0, t1, rtol, atol, &mut buffers, &keep)?;
    Ok(y)
}

/// Integrates y' = f(t, y) from `t0` through each of `times` in turn (which must be
/// monotone in the direction of integration) and returns y at each of them.
pub fn integrate_through<F: Fn(f64, &[f64], &mut [f64])>(
    f: F,
    y0: &[f64],
    t0: f64,
    times: &[f64],
    rtol: f64,
    atol: f64,
) -> Result<Vec<Vec<f64>>, OdeError> {
    let mut y = y0.to_vec();
    let mut buffers = StageBuffers::new(y.len());
    let mut current = t0;
    let mut direction = 0.0_f64;
    let mut out = Vec::with_capacity(times.len());
    for &target in times {
        let step_direction = (target - current).signum();
        if target != current {
            if direction != 0.0 && step_direction != direction {
                return Err(OdeError::InvalidInput(
                    "the output times must be monotone in one direction".to_string(),
                ));
            }
            direction = step_direction;
        }
        integrate_in_place(
            &f,
            &mut y,
            current,
            target,
            rtol,
            atol,
            &mut buffers,
            &|_| true,
        )?;
        current = target;
        out.push(y.clone());
    }
    Ok(out)
}

/// Integrates y' = f(t, y) across a partition `pieces` (from its first point to its
/// last, monotone) and returns y at the last point.
///
/// On each piece [a, b] the right-hand side is called only with times inside
/// [a + δ, b − δ], δ a few units of `f64` resolution: a coefficient that jumps at a
/// break (a `step`) is then always read on the piece's own side of the jump, whatever
/// time the Runge–Kutta stages ask for at the ends.
pub fn integrate_pieces<F: Fn(f64, &[f64], &mut [f64])>(
    f: F,
    y0: &[f64],
    pieces: &[f64],
    rtol: f64,
    atol: f64,
) -> Result<Vec<f64>, OdeError> {
    let mut y = y0.to_vec();
    let mut buffers = StageBuffers::new(y.len());
    for window in pieces.windows(2) {
        let (a, b) = (window[0], window[1]);
        let (low, high) = if a <= b { (a, b) } else { (b, a) };
        let margin = 16.0 * f64::EPSILON * low.abs().max(high.abs()).max(1.0);
        let (inner_low, inner_high) = if high - low > 4.0 * margin {
            (low + margin, high - margin)
        } else {
            (low, high)
        };
        let inside = |t: f64, y: &[f64], dy: &mut [f64]| f(t.clamp(inner_low, inner_high), y, dy);
        integrate_in_place(&inside, &mut y, a, b, rtol, atol, &mut buffers, &|_| true)?;
    }
    Ok(y)
}

/// Integrates `f` over a partition `pieces` by [`quad`] on each piece, and adds.
pub fn quad_pieces<F: Fn(f64) -> f64>(f: F, pieces: &[f64], rtol: f64) -> Result<f64, OdeError> {
    let mut total = 0.0;
    for window in pieces.windows(2) {
        total += quad(&f, window[0], window[1], rtol)?;
    }
    Ok(total)
}

/// Root-mean-square of `error_i / (atol + rtol·max(|y_i|, |y_new_i|))`.
fn scaled_error_norm(buffers: &StageBuffers, y: &[f64], h: f64, rtol: f64, atol: f64) -> f64 {
    let dimension = y.len();
    if dimension == 0 {
        return 0.0;
    }
    let mut sum = 0.0;
    for i in 0..dimension {
        let local_error = h
            * (E1 * buffers.k1[i]
                + E3 * buffers.k3[i]
                + E4 * buffers.k4[i]
                + E5 * buffers.k5[i]
                + E6 * buffers.k6[i]
                + E7 * buffers.k7[i]);
        let scale = atol + rtol * y[i].abs().max(buffers.y_new[i].abs());
        let ratio = local_error / scale;
        sum += ratio * ratio;
    }
    (sum / dimension as f64).sqrt()
}

/// Starting step of Hairer, Nørsett & Wanner, Solving ODE I, §II.4 ("Starting step size"),
/// with the maximum norm instead of the root mean square (so a tiny `atol` cannot overflow
/// the squares): h₀ = 0.01·‖y‖/‖f‖, then h₁ from a second-derivative estimate, and
/// min(100 h₀, h₁). Always a positive step no longer than the interval.
fn initial_step<F: Fn(f64, &[f64], &mut [f64])>(
    f: &F,
    t0: f64,
    y: &[f64],
    span: f64,
    rtol: f64,
    atol: f64,
    buffers: &mut StageBuffers,
) -> f64 {
    let dimension = y.len();
    let length = span.abs();
    // Reason for the floor: a start of 10⁻¹⁰ of the interval is always safe, the controller
    // grows it by up to 5× per step.
    let fallback = (length * 1e-10).max(f64::MIN_POSITIVE);
    let mut d0 = 0.0_f64;
    let mut d1 = 0.0_f64;
    for i in 0..dimension {
        let scale = atol + rtol * y[i].abs();
        d0 = d0.max((y[i] / scale).abs());
        d1 = d1.max((buffers.k1[i] / scale).abs());
    }
    let h0 = if d0 < 1e-5 || d1 < 1e-5 {
        1e-6
    } else {
        0.01 * d0 / d1
    };
    let h0 = if h0.is_finite() && h0 > 0.0 {
        h0.min(length)
    } else {
        fallback
    };
    let direction = span.signum();
    for i in 0..dimension {
        buffers.stage_input[i] = y[i] + direction * h0 * buffers.k1[i];
    }
    f(t0 + direction * h0, &buffers.stage_input, &mut buffers.k2);
    if !all_finite(&buffers.k2) {
        // The trial point left the domain; start small and let the controller grow the step.
        return fallback.min(h0);
    }
    let mut d2 = 0.0_f64;
    for i in 0..dimension {
        let scale = atol + rtol * y[i].abs();
        d2 = d2.max(((buffers.k2[i] - buffers.k1[i]) / scale).abs());
    }
    let d2 = d2 / h0;
    let largest = d1.max(d2);
    let h1 = if largest <= 1e-15 {
        (h0 * 1e-3).max(1e-6)
    } else {
        (0.01 / largest).powf(1.0 / 5.0)
    };
    let step = (100.0 * h0).min(h1).min(length);
    if step.is_finite() && step > 0.0 {
        step
    } else {
        fallback.min(h0)
    }
}

/// The inputs `integrate_in_place` refuses: a time interval or a start that is not
/// finite, tolerances out of range.
fn check_inputs(y: &[f64], t0: f64, t1: f64, rtol: f64, atol: f64) -> Result<(), OdeError> {
    if !(t0.is_finite() && t1.is_finite()) {
        return Err(OdeError::InvalidInput(format!(
            "the time interval [{t0}, {t1}] must be finite"
        )));
    }
    check_tolerances(rtol, atol)?;
    if !all_finite(y) {
        return Err(OdeError::InvalidInput(
            "the initial values contain a non-finite number".to_string(),
        ));
    }
    Ok(())
}

// Reason: the integration's own inputs, each named as in `integrate`'s signature.
#[allow(clippy::too_many_arguments)]
fn integrate_in_place<F: Fn(f64, &[f64], &mut [f64])>(
    f: &F,
    y: &mut [f64],
    t0: f64,
    t1: f64,
    rtol: f64,
    atol: f64,
    buffers: &mut StageBuffers,
    keep: &dyn Fn(&[f64]) -> bool,
) -> Result<(), OdeError> {
    check_inputs(y, t0, t1, rtol, atol)?;
    if t0 == t1 || y.is_empty() {
        return Ok(());
    }
    // Reason: below ~100 ε the error estimate is rounding noise and the step would collapse.
    let rtol = rtol.max(100.0 * f64::EPSILON);
    let span = t1 - t0;
    let direction = span.signum();

    f(t0, y, &mut buffers.k1);
    if !all_finite(&buffers.k1) {
        return Err(OdeError::NonFinite { at: t0 });
    }
    let mut h = initial_step(f, t0, y, span, rtol, atol, buffers);
    let mut t = t0;
    let mut steps = 0usize;
    let mut previous_rejected = false;

    while (t1 - t) * direction > 0.0 {
        if steps >= MAX_STEPS {
            return Err(OdeError::StepLimit { reached: t, steps });
        }
        steps += 1;
        let remaining = (t1 - t).abs();
        let mut last = false;
        if h >= remaining {
            h = remaining;
            last = true;
        }
        // A last step below the resolution of t is still taken (it ends exactly at t1); any
        // other step that small means the controller is stuck.
        if !last && h <= 16.0 * f64::EPSILON * t.abs().max(f64::MIN_POSITIVE) {
            return Err(OdeError::StepTooSmall { at: t });
        }
        let hs = direction * h;
        let t_new = if last { t1 } else { t + hs };
        dormand_prince_stages(f, y, t, hs, t_new, buffers);
        let error = if stages_finite(buffers) {
            scaled_error_norm(buffers, y, hs, rtol, atol)
        } else {
            f64::INFINITY
        };

        if error <= 1.0 {
            t = t_new;
            y.copy_from_slice(&buffers.y_new);
            if !keep(y) {
                return Err(OdeError::Stopped { at: t });
            }
            // First same as last: the last stage is the first of the next step.
            std::mem::swap(&mut buffers.k1, &mut buffers.k7);
            h *= accepted_step_factor(error, previous_rejected);
            previous_rejected = false;
        } else {
            if !error.is_finite() && h <= 16.0 * f64::EPSILON * t.abs().max(1.0) {
                return Err(OdeError::NonFinite { at: t });
            }
            h *= rejected_step_factor(error);
            previous_rejected = true;
        }
    }
    Ok(())
}

/// The stages k2..k7 of one Dormand–Prince step of signed length `hs` from (t, y), with
/// k1 already in `buffers`, and the fifth-order solution in `buffers.y_new` (at `t_new`,
/// which is t + hs, or exactly the end of the interval on the last step).
fn dormand_prince_stages<F: Fn(f64, &[f64], &mut [f64])>(
    f: &F,
    y: &[f64],
    t: f64,
    hs: f64,
    t_new: f64,
    buffers: &mut StageBuffers,
) {
    let dimension = y.len();
    for i in 0..dimension {
        buffers.stage_input[i] = y[i] + hs * A21 * buffers.k1[i];
    }
    f(t + C2 * hs, &buffers.stage_input, &mut buffers.k2);
    for i in 0..dimension {
        buffers.stage_input[i] = y[i] + hs * (A31 * buffers.k1[i] + A32 * buffers.k2[i]);
    }
    f(t + C3 * hs, &buffers.stage_input, &mut buffers.k3);
    for i in 0..dimension {
        buffers.stage_input[i] =
            y[i] + hs * (A41 * buffers.k1[i] + A42 * buffers.k2[i] + A43 * buffers.k3[i]);
    }
    f(t + C4 * hs, &buffers.stage_input, &mut buffers.k4);
    for i in 0..dimension {
        buffers.stage_input[i] = y[i]
            + hs * (A51 * buffers.k1[i]
                + A52 * buffers.k2[i]
                + A53 * buffers.k3[i]
                + A54 * buffers.k4[i]);
    }
    f(t + C5 * hs, &buffers.stage_input, &mut buffers.k5);
    for i in 0..dimension {
        buffers.stage_input[i] = y[i]
            + hs * (A61 * buffers.k1[i]
                + A62 * buffers.k2[i]
                + A63 * buffers.k3[i]
                + A64 * buffers.k4[i]
                + A65 * buffers.k5[i]);
    }
    f(t + hs, &buffers.stage_input, &mut buffers.k6);
    for i in 0..dimension {
        buffers.y_new[i] = y[i]
            + hs * (B1 * buffers.k1[i]
                + B3 * buffers.k3[i]
                + B4 * buffers.k4[i]
                + B5 * buffers.k5[i]
                + B6 * buffers.k6[i]);
    }
    f(t_new, &buffers.y_new, &mut buffers.k7);
}

/// Whether every stage of the step and its solution are finite.
fn stages_finite(buffers: &StageBuffers) -> bool {
    all_finite(&buffers.k2)
        && all_finite(&buffers.k3)
        && all_finite(&buffers.k4)
        && all_finite(&buffers.k5)
        && all_finite(&buffers.k6)
        && all_finite(&buffers.k7)
        && all_finite(&buffers.y_new)
}

/// How much the step grows after an accepted step of scaled error `error` ≤ 1.
fn accepted_step_factor(error: f64, previous_rejected: bool) -> f64 {
    let factor = if error == 0.0 {
        5.0
    } else {
        (0.9 * error.powf(-0.2)).clamp(0.2, 5.0)
    };
    // Reason: right after a rejection, growing the step again invites another one.
    if previous_rejected {
        factor.min(1.0)
    } else {
        factor
    }
}

/// How much the step shrinks after a rejected step.
fn rejected_step_factor(error: f64) -> f64 {
    if error.is_finite() {
        (0.9 * error.powf(-0.2)).clamp(0.2, 1.0)
    } else {
        0.2
    }
}

#[cfg(test)]
mod tests {
    use super::quadrature::{GAUSS_WEIGHTS, KRONROD_NODES, KRONROD_WEIGHTS};
    use super::*;

    #[test]
    fn a_condition_ends_the_integration_at_the_first_step_that_breaks_it() {
        // y' = y² from y(0) = 1 is 1/(1 − t), with a pole at t = 1 (common practice, no
        // source). Kept below 1e8, the integration stops within 1e-6 of the pole, at the
        // first accepted step past |y| = 1e8, and reports where.
        let result = integrate_while(
            |_, y, dy| dy[0] = y[0] * y[0],
            &[1.0],
            0.0,
            2.0,
            1e-10,
            1e-12,
            |y| y[0].abs() < 1e8,
        );
        match result {
            Err(OdeError::Stopped { at }) => {
                assert!(at < 1.0 && at > 1.0 - 1e-6, "stopped at {at}");
                assert!(
                    1.0 / (1.0 - at) >= 1e8 * (1.0 - 1e-6),
                    "stopped early at {at}"
                );
            }
            other => panic!("expected a stop before the pole, got {other:?}"),
        }
        // A condition that holds changes nothing.
        let free = integrate(|_, y, dy| dy[0] = -y[0], &[1.0], 0.0, 1.0, 1e-10, 1e-12);
        let kept = integrate_while(
            |_, y, dy| dy[0] = -y[0],
            &[1.0],
            0.0,
            1.0,
            1e-10,
            1e-12,
            |_| true,
        );
        assert_eq!(free, kept);
    }

    /// The Kronrod weights and the Gauss weights each sum to 2, the length of [−1, 1]
    /// (any interpolatory rule integrates the constant exactly; common practice, no source).
    #[test]
    fn weights_sum_to_interval_length() {
        let kronrod: f64 = 2.0 * KRONROD_WEIGHTS[..7].iter().sum::<f64>() + KRONROD_WEIGHTS[7];
        let gauss: f64 = 2.0 * GAUSS_WEIGHTS[..3].iter().sum::<f64>() + GAUSS_WEIGHTS[3];
        assert!((kronrod - 2.0).abs() < 1e-15, "{kronrod}");
        assert!((gauss - 2.0).abs() < 1e-15, "{gauss}");
    }

    /// A 7-point Gauss rule is exact for degree 13, the 15-point Kronrod extension for
    /// degree 22 (Kronrod 1965; Laurie 1997, Math. Comp. 66, "Calculation of Gauss–Kronrod
    /// quadrature rules"): ∫₋₁¹ x^k dx = 2/(k+1) for even k.
    #[test]
    fn rules_are_exact_to_their_degree() {
        for degree in (0..=22).step_by(2) {
            let exact = 2.0 / (degree as f64 + 1.0);
            let power = |x: f64| x.powi(degree);
            let (kronrod, _) = gauss_kronrod_15(&power, -1.0, 1.0);
            assert!(
                (kronrod - exact).abs() < 1e-14,
                "degree {degree}: {kronrod}"
            );
            let mut gauss = GAUSS_WEIGHTS[3] * power(0.0);
            for j in 0..3 {
                let node = KRONROD_NODES[2 * j + 1];
                gauss += GAUSS_WEIGHTS[j] * (power(node) + power(-node));
            }
            if degree <= 13 {
                assert!(
                    (gauss - exact).abs() < 1e-14,
                    "gauss degree {degree}: {gauss}"
                );
            } else {
                // Degree 14 is beyond the Gauss rule, so it must miss.
                assert!(
                    (gauss - exact).abs() > 1e-6,
                    "gauss degree {degree}: {gauss}"
                );
            }
        }
    }

    #[test]
    fn dormand_prince_weights_are_consistent() {
        // Each row of the tableau sums to its node (common practice, no source), the weights to 1.
        assert!((A21 - C2).abs() < 1e-16);
        assert!((A31 + A32 - C3).abs() < 1e-15);
        assert!((A41 + A42 + A43 - C4).abs() < 1e-14);
        assert!((A51 + A52 + A53 + A54 - C5).abs() < 1e-14);
        assert!((A61 + A62 + A63 + A64 + A65 - 1.0).abs() < 1e-14);
        assert!((B1 + B3 + B4 + B5 + B6 - 1.0).abs() < 1e-15);
        assert!((E1 + E3 + E4 + E5 + E6 + E7).abs() < 1e-15);
    }

    #[test]
    fn step_cap_stops_a_blow_up() {
        // y' = y², y(0) = 1 blows up at t = 1 (y = 1/(1 − t)); integrating past it must end in an error.
        let result = integrate(
            |_, y, dy| dy[0] = y[0] * y[0],
            &[1.0],
            0.0,
            2.0,
            1e-8,
            1e-12,
        );
        assert!(result.is_err(), "{result:?}");
    }

    /// A variance equation started at 0 with an absolute tolerance of 1e-300 (relative
    /// control only): V' = σ² − 2κV gives V(t) = σ²(1 − e^{−2κt})/(2κ) (Vasicek 1977).
    #[test]
    fn tiny_absolute_tolerance_still_starts() {
        let (speed, vol) = (1.5, 0.2);
        let rhs = |_: f64, y: &[f64], dy: &mut [f64]| {
            dy[0] = -speed * y[0];
            dy[1] = vol * vol - 2.0 * speed * y[1];
        };
        let end = integrate(rhs, &[0.03, 0.0], 0.0, 2.0, 1e-11, 1e-300).unwrap();
        let expected = vol * vol * (1.0 - (-2.0 * speed * 2.0_f64).exp()) / (2.0 * speed);
        assert!(
            (end[1] - expected).abs() < 1e-9 * expected,
            "{} vs {expected}",
            end[1]
        );
        assert!((end[0] - 0.03 * (-3.0_f64).exp()).abs() < 1e-11);
    }

    /// An interval only a few floating-point spacings long near t₀ still integrates:
    /// y' = 1 over [10⁶, 10⁶ + 10⁻⁹] adds the length of the interval (common practice,
    /// no source).
    #[test]
    fn interval_below_time_resolution() {
        let end = integrate(
            |_, _, dy| dy[0] = 1.0,
            &[0.0],
            1e6,
            1e6 + 1e-9,
            1e-10,
            1e-20,
        )
        .unwrap();
        assert!((end[0] - ((1e6 + 1e-9) - 1e6)).abs() < 1e-20, "{}", end[0]);
    }

    #[test]
    fn bad_inputs_are_errors() {
        let rhs = |_: f64, y: &[f64], dy: &mut [f64]| dy[0] = y[0];
        assert!(matches!(
            integrate(rhs, &[1.0], 0.0, f64::INFINITY, 1e-8, 1e-10),
            Err(OdeError::InvalidInput(_))
        ));
        assert!(matches!(
            integrate(rhs, &[1.0], 0.0, 1.0, -1.0, 1e-10),
            Err(OdeError::InvalidInput(_))
        ));
        assert!(matches!(
            quad(|x| x, f64::NAN, 1.0, 1e-8),
            Err(OdeError::InvalidInput(_))
        ));
        assert!(matches!(
            quad(|x| 1.0 / x, 0.0, 1.0, 1e-10),
            Err(OdeError::NonFinite { .. }) | Err(OdeError::QuadratureNotConverged { .. })
        ));
    }
}
