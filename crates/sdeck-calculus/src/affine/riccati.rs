//! The Riccati equations integrated numerically: β and α packed as (Re, Im) pairs,
//! their right-hand side, and the approach to a pole.

use super::Numbers;
use crate::ode;
use num_complex::Complex64;

/// β·x.
pub(super) fn dot(beta: &[Complex64], x: &[f64]) -> Complex64 {
    beta.iter().zip(x).map(|(b, x)| b * x).sum()
}

/// β (then α = 0) as (Re, Im) pairs, the state the integrator reads.
pub(super) fn pack(u: &[Complex64]) -> Vec<f64> {
    let mut y = Vec::with_capacity(2 * u.len() + 2);
    for v in u {
        y.push(v.re);
        y.push(v.im);
    }
    y.push(0.0);
    y.push(0.0);
    y
}

/// β and α back from their (Re, Im) pairs.
pub(super) fn unpack(y: &[f64], n: usize) -> (Vec<Complex64>, Complex64) {
    let at = |k: usize| y.get(k).copied().unwrap_or(f64::NAN);
    let beta = (0..n)
        .map(|i| Complex64::new(at(2 * i), at(2 * i + 1)))
        .collect();
    (beta, Complex64::new(at(2 * n), at(2 * n + 1)))
}

/// Whether the solution has left the numbers (a moment explosion).
pub(super) fn exploded(y: &[f64]) -> bool {
    y.iter().any(|v| !v.is_finite() || v.abs() > 1e300)
}

/// The Riccati right-hand side on packed (Re, Im) pairs: β then α.
pub(super) fn riccati_rhs(n: usize, c: &Numbers, r0: f64, r1: &[f64], y: &[f64], dy: &mut [f64]) {
    let beta = |i: usize| {
        Complex64::new(
            y.get(2 * i).copied().unwrap_or(f64::NAN),
            y.get(2 * i + 1).copied().unwrap_or(f64::NAN),
        )
    };
    let mut write = |k: usize, v: Complex64| {
        if let Some(slot) = dy.get_mut(2 * k) {
            *slot = v.re;
        }
        if let Some(slot) = dy.get_mut(2 * k + 1) {
            *slot = v.im;
        }
    };
    let get = |v: &[f64], k: usize| v.get(k).copied().unwrap_or(f64::NAN);
    for k in 0..n {
        let mut total = Complex64::new(-get(r1, k), 0.0);
        for i in 0..n {
            let bi = beta(i);
            total += get(&c.k1, i * n + k) * bi;
            let mut row = Complex64::new(0.0, 0.0);
            for j in 0..n {
                let h = get(&c.h1, k * n * n + i * n + j);
                if h != 0.0 {
                    row += h * beta(j);
                }
            }
            total += 0.5 * bi * row;
        }
        write(k, total);
    }
    let mut alpha = Complex64::new(-r0, 0.0);
    for i in 0..n {
        let bi = beta(i);
        alpha += get(&c.k0, i) * bi;
        for j in 0..n {
            let h = get(&c.h0, i * n + j);
            if h != 0.0 {
                alpha += 0.5 * h * bi * beta(j);
            }
        }
    }
    write(n, alpha);
}

/// The last state short of a pole and its time: a grid of 256 steps up to `limit` finds
/// the first stretch whose end is not `bounded`, and 80 bisections narrow it. `None` when
/// the solution stays bounded up to `limit` or `bounded` cannot tell.
pub(super) fn approach_pole<B>(bounded: B, start: Vec<f64>, limit: f64) -> Option<(Vec<f64>, f64)>
where
    B: Fn(&[f64], f64, f64) -> Result<Option<Vec<f64>>, ode::OdeError>,
{
    let mut state = start;
    let mut current = 0.0;
    let grid = 256;
    let step = limit / grid as f64;
    let mut upper = None;
    for k in 1..=grid {
        let t = step * k as f64;
        match bounded(&state, current, t).ok()? {
            Some(y) => {
                state = y;
                current = t;
            }
            None => {
                upper = Some(t);
                break;
            }
        }
    }
    let mut high = upper?;
    for _ in 0..80 {
        let middle = 0.5 * (current + high);
        if middle <= current || middle >= high {
            break;
        }
        match bounded(&state, current, middle).ok()? {
            Some(y) => {
                state = y;
                current = middle;
            }
            None => high = middle,
        }
    }
    Some((state, current))
}
