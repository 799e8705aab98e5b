//! The zero-coupon curve of a short rate affine in the factors: P(0, T) from the
//! transform engine at u = 0, continuously compounded zero yields −ln P / T, instantaneous
//! forwards −∂ ln P/∂T, and the long yield where the yields settle.

use crate::affine::{AffineSet, Rate, TransformError, TransformMethod};
use num_complex::Complex64;
use sdeck_semantics::{Expr, Model};

/// One maturity of the curve.
#[derive(Clone, Debug, PartialEq)]
pub struct CurvePoint {
    /// Clock units.
    pub maturity: f64,
    pub price: f64,
    /// Continuously compounded, per year (an annual decimal).
    pub yield_rate: f64,
    /// Instantaneous forward rate, per year.
    pub forward: f64,
}

/// The curve at the requested maturities.
#[derive(Clone, Debug, PartialEq)]
pub struct Curve {
    pub method: TransformMethod,
    pub points: Vec<CurvePoint>,
    /// lim −ln P(0, T)/T, per year, when the yields settle (constant coefficients and a
    /// mean-reverting rate).
    pub long_yield: Option<f64>,
}

/// Relative step of the finite differences for the forward rate.
const FORWARD_STEP: f64 = 1e-3;

/// The curve of the rate `rate` (an expression per clock unit of time, affine in the
/// factors) at `maturities` (clock units, positive).
pub fn curve(model: &Model, rate: &Expr, maturities: &[f64]) -> Result<Curve, String> {
    if let Some(bad) = maturities.iter().find(|t| !(t.is_finite() && **t > 0.0)) {
        return Err(format!("a maturity must be a positive time, not {bad}"));
    }
    let set = AffineSet::from_model(model)?;
    let rate = Rate::new(&set, rate)?;
    let zero = vec![Complex64::new(0.0, 0.0); set.dimension()];
    // Each maturity with its four neighbours for the forward: T ± h, T ± 2h.
    let mut times = Vec::with_capacity(maturities.len() * 5);
    for &t in maturities {
        let h = FORWARD_STEP * t;
        times.extend([t - 2.0 * h, t - h, t, t + h, t + 2.0 * h]);
    }
    let values = set.log_transforms(&zero, &rate, &times);
    let years = model.clock.years;
    let mut points = Vec::with_capacity(maturities.len());
    for (k, &t) in maturities.iter().enumerate() {
        let at = |j: usize| -> Result<f64, String> {
            match values.get(5 * k + j) {
                Some(Ok(value)) => Ok(value.re),
                Some(Err(TransformError::Explodes)) => Err(format!(
                    "the bond price at {t} is not finite: the rate's transform explodes"
                )),
                Some(Err(TransformError::Failed(why))) => Err(why.clone()),
                None => Err("internal: missing maturity".to_string()),
            }
        };
        let log_price = at(2)?;
        let h = FORWARD_STEP * t;
        // Five-point central difference: error of order h⁴.
        let slope = (at(0)? - 8.0 * at(1)? + 8.0 * at(3)? - at(4)?) / (12.0 * h);
        points.push(CurvePoint {
            maturity: t,
            price: log_price.exp(),
            yield_rate: -log_price / (t * years),
            forward: -slope / years,
        });
    }
    let long_yield = long_yield(&set, &rate, years);
    Ok(Curve {
        method: set.method(&rate),
        points,
        long_yield,
    })
}

/// The slope of −ln P over a far stretch, when two stretches agree.
fn long_yield(set: &AffineSet, rate: &Rate, years: f64) -> Option<f64> {
    if set.time_dependent() {
        return None;
    }
    let zero = vec![Complex64::new(0.0, 0.0); set.dimension()];
    let far = 4000.0 / years;
    let times = [far / 4.0, far / 2.0, far];
    let values: Vec<f64> = set
        .log_transforms(&zero, rate, &times)
        .into_iter()
        .map(|v| v.ok().map(|c| c.re))
        .collect::<Option<Vec<f64>>>()?;
    let first = -(values[1] - values[0]) / ((times[1] - times[0]) * years);
    let second = -(values[2] - values[1]) / ((times[2] - times[1]) * years);
    ((first - second).abs() <= 1e-9 * (1.0 + second.abs()) && second.is_finite()).then_some(second)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn vasicek_curve_has_the_published_yields_forwards_and_long_yield() {
        // Vasicek 1977, eq. 27: ln P = (θ − σ²/(2κ²))(B − T) − σ²B²/(4κ) − B r₀ with
        // B = (1 − e^{−κT})/κ; the forward is −∂ ln P/∂T and the long yield θ − σ²/(2κ²).
        let text = "model v\nclock month\nparam kappa = 0.8 [1/year]\nparam theta = 4%\n\
            param sigma = 1.5% [1/sqrt(year)]\nshock W\nfactor r = 2.5%\n\
            dr = kappa * (theta - r) dt + sigma dW\n";
        let model = sdeck_semantics::analyze(text, "v").model;
        // The rate is per year and the clock is the month: per clock unit it is r/12.
        let rate = Expr::Div(Box::new(Expr::Factor(0)), Box::new(Expr::Const(12.0)));
        let months = [1.0, 12.0, 120.0, 360.0];
        let c = curve(&model, &rate, &months).expect("a curve");
        assert_eq!(c.method, TransformMethod::ClosedForm);
        let (kappa, theta, sigma, r0) = (0.8f64, 0.04f64, 0.015f64, 0.025f64);
        let level = theta - sigma * sigma / (2.0 * kappa * kappa);
        for (point, m) in c.points.iter().zip(months) {
            let t = m / 12.0;
            let decay = (-kappa * t).exp();
            let b = (1.0 - decay) / kappa;
            let ln_p = level * (b - t) - sigma * sigma * b * b / (4.0 * kappa) - b * r0;
            let forward =
                -(level * (decay - 1.0) - sigma * sigma * b * decay / (2.0 * kappa) - decay * r0);
            assert_eq!(point.maturity, m);
            assert!((point.price - ln_p.exp()).abs() < 1e-13, "{m}");
            assert!((point.yield_rate + ln_p / t).abs() < 1e-13, "{m}");
            assert!(
                (point.forward - forward).abs() < 1e-10,
                "{m}: {}",
                point.forward
            );
        }
        let long = c.long_yield.expect("settles");
        assert!((long - level).abs() < 1e-9, "{long} vs {level}");
    }

    #[test]
    fn a_rate_without_reversion_has_no_long_yield_and_bad_maturities_are_refused() {
        let text = "model w\nclock year\nparam s = 1% [1/sqrt(year)]\nshock W\nfactor r = 2%\n\
            dr = s dW\n";
        let model = sdeck_semantics::analyze(text, "w").model;
        let c = curve(&model, &Expr::Factor(0), &[1.0, 10.0]).expect("a curve");
        // ln P = −r₀T + s²T³/6 for a driftless Gaussian rate (common practice, no source).
        let expected = -0.02 * 10.0 + 1e-4 * 1000.0 / 6.0;
        assert!((c.points[1].price.ln() - expected).abs() < 1e-12);
        assert_eq!(c.long_yield, None);
        assert!(curve(&model, &Expr::Factor(0), &[0.0]).is_err());
        assert!(curve(
            &model,
            &Expr::Mul(Box::new(Expr::Factor(0)), Box::new(Expr::Factor(0))),
            &[1.0]
        )
        .is_err());
    }
}
