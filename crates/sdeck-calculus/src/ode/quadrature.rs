//! Globally adaptive Gauss–Kronrod 7-15 quadrature, on finite and infinite intervals.

use super::{OdeError, MAX_DEPTH, MAX_SUBDIVISIONS};
use std::cmp::Ordering;
use std::collections::BinaryHeap;

// Gauss–Kronrod 7-15 rule: Piessens, de Doncker-Kapenga, Überhuber & Kahaner 1983,
// QUADPACK (routine QK15). Abscissae of the 15-point Kronrod rule, from the largest.
pub(super) const KRONROD_NODES: [f64; 8] = [
    0.991_455_371_120_812_6,
    0.949_107_912_342_758_5,
    0.864_864_423_359_769_1,
    0.741_531_185_599_394_4,
    0.586_087_235_467_691_1,
    0.405_845_151_377_397_2,
    0.207_784_955_007_898_5,
    0.0,
];
pub(super) const KRONROD_WEIGHTS: [f64; 8] = [
    0.022_935_322_010_529_225,
    0.063_092_092_629_978_55,
    0.104_790_010_322_250_18,
    0.140_653_259_715_525_92,
    0.169_004_726_639_267_9,
    0.190_350_578_064_785_4,
    0.204_432_940_075_298_9,
    0.209_482_141_084_727_83,
];
/// Weights of the 7-point Gauss rule on the Kronrod abscissae 1, 3, 5 and 7 (the centre).
pub(super) const GAUSS_WEIGHTS: [f64; 4] = [
    0.129_484_966_168_869_7,
    0.279_705_391_489_276_7,
    0.381_830_050_505_118_9,
    0.417_959_183_673_469_4,
];

/// Result of the 7-15 rule on one interval.
#[derive(Clone, Copy, Debug)]
struct Panel {
    low: f64,
    high: f64,
    integral: f64,
    error: f64,
    absolute_integral: f64,
    depth: u32,
}

impl PartialEq for Panel {
    fn eq(&self, other: &Self) -> bool {
        self.error.total_cmp(&other.error) == Ordering::Equal
    }
}
impl Eq for Panel {}
impl PartialOrd for Panel {
    fn partial_cmp(&self, other: &Self) -> Option<Ordering> {
        Some(self.cmp(other))
    }
}
impl Ord for Panel {
    /// Panels are ordered by error so the heap hands back the worst one first.
    fn cmp(&self, other: &Self) -> Ordering {
        self.error.total_cmp(&other.error)
    }
}

/// Applies the 7-15 rule on [low, high]; the error is |K15 − G7| (a deliberately plain estimate).
pub fn gauss_kronrod_15<F: Fn(f64) -> f64>(f: &F, low: f64, high: f64) -> (f64, f64) {
    let panel = kronrod_panel(f, low, high, 0);
    (panel.integral, panel.error)
}

fn kronrod_panel<F: Fn(f64) -> f64>(f: &F, low: f64, high: f64, depth: u32) -> Panel {
    let centre = 0.5 * (low + high);
    let half_width = 0.5 * (high - low);
    let centre_value = f(centre);
    let mut kronrod = KRONROD_WEIGHTS[7] * centre_value;
    let mut gauss = GAUSS_WEIGHTS[3] * centre_value;
    let mut absolute = KRONROD_WEIGHTS[7] * centre_value.abs();
    for (index, (&node, &weight)) in KRONROD_NODES[..7]
        .iter()
        .zip(KRONROD_WEIGHTS[..7].iter())
        .enumerate()
    {
        let offset = half_width * node;
        let left = f(centre - offset);
        let right = f(centre + offset);
        kronrod += weight * (left + right);
        absolute += weight * (left.abs() + right.abs());
        if index % 2 == 1 {
            gauss += GAUSS_WEIGHTS[index / 2] * (left + right);
        }
    }
    let integral = kronrod * half_width;
    Panel {
        low,
        high,
        integral,
        error: ((kronrod - gauss) * half_width).abs(),
        absolute_integral: absolute * half_width.abs(),
        depth,
    }
}

/// Integrates `f` over [a, b] by globally adaptive Gauss–Kronrod 7-15: the interval with
/// the largest error estimate is halved until the summed error is below
/// `max(rtol·|I|, 50·ε·∫|f|)`.
///
/// Either bound may be infinite: [a, ∞) is mapped by x = a + s/(1 − s), (−∞, ∞) by
/// x = s/(1 − s²); the Kronrod abscissae never touch the ends of the mapped interval.
/// `b < a` gives minus the integral over [b, a].
pub fn quad<F: Fn(f64) -> f64>(f: F, a: f64, b: f64, rtol: f64) -> Result<f64, OdeError> {
    if a.is_nan() || b.is_nan() {
        return Err(OdeError::InvalidInput(
            "an integration bound is NaN".to_string(),
        ));
    }
    if !(rtol.is_finite() && rtol > 0.0) {
        return Err(OdeError::InvalidInput(format!(
            "rtol must be finite and positive (got {rtol})"
        )));
    }
    if a == b {
        return Ok(0.0);
    }
    if b < a {
        return quad(f, b, a, rtol).map(|value| -value);
    }
    match (a.is_finite(), b.is_finite()) {
        (true, true) => adaptive(&f, a, b, rtol),
        (true, false) => adaptive(
            &|s: f64| {
                let one_minus = 1.0 - s;
                f(a + s / one_minus) / (one_minus * one_minus)
            },
            0.0,
            1.0,
            rtol,
        ),
        (false, true) => adaptive(
            &|s: f64| {
                let one_minus = 1.0 - s;
                f(b - s / one_minus) / (one_minus * one_minus)
            },
            0.0,
            1.0,
            rtol,
        ),
        (false, false) => adaptive(
            &|s: f64| {
                let one_minus_square = 1.0 - s * s;
                f(s / one_minus_square) * (1.0 + s * s) / (one_minus_square * one_minus_square)
            },
            -1.0,
            1.0,
            rtol,
        ),
    }
}

fn adaptive<F: Fn(f64) -> f64>(f: &F, a: f64, b: f64, rtol: f64) -> Result<f64, OdeError> {
    let first = kronrod_panel(f, a, b, 0);
    if !(first.integral.is_finite() && first.error.is_finite()) {
        return Err(OdeError::NonFinite { at: 0.5 * (a + b) });
    }
    let mut total = first.integral;
    let mut total_error = first.error;
    let mut total_absolute = first.absolute_integral;
    let mut heap = BinaryHeap::with_capacity(2 * MAX_SUBDIVISIONS + 1);
    heap.push(first);
    let mut subdivisions = 0usize;

    loop {
        let tolerance = (rtol * total.abs()).max(50.0 * f64::EPSILON * total_absolute);
        if total_error <= tolerance {
            return Ok(total);
        }
        let Some(worst) = heap.pop() else {
            return Ok(total);
        };
        if subdivisions >= MAX_SUBDIVISIONS || worst.depth >= MAX_DEPTH {
            return Err(OdeError::QuadratureNotConverged {
                estimate: total,
                error: total_error,
            });
        }
        subdivisions += 1;
        let middle = 0.5 * (worst.low + worst.high);
        let left = kronrod_panel(f, worst.low, middle, worst.depth + 1);
        let right = kronrod_panel(f, middle, worst.high, worst.depth + 1);
        for panel in [&left, &right] {
            if !(panel.integral.is_finite() && panel.error.is_finite()) {
                return Err(OdeError::NonFinite {
                    at: 0.5 * (panel.low + panel.high),
                });
            }
        }
        total += left.integral + right.integral - worst.integral;
        total_error += left.error + right.error - worst.error;
        total_absolute +=
            left.absolute_integral + right.absolute_integral - worst.absolute_integral;
        heap.push(left);
        heap.push(right);
    }
}
