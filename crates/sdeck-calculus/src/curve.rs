//! The zero-coupon curve of a short rate affine in the factors: P(0, T) from the
//! transform engine at u = 0, continuously compounded zero yields −ln P / T, instantaneous
//! forwards −∂ ln P/∂T, and the long yield where the yields settle.

use crate::affine::{AffineSet, Rate, TransformError, TransformMethod};
use num_complex::Complex64;
use sdeck_semantics::{Expr, Model};

/// The maturities of a curve when none are asked for (`sdeck curve`, the review
/// document), as (amount, time unit): 1, 3 and 6 months, 1, 2, 3, 5, 7, 10, 20 and 30
/// years.
pub const DEFAULT_MATURITIES: [(f64, &str); 11] = [
    (1.0, "month"),
    (3.0, "month"),
    (6.0, "month"),
    (1.0, "year"),
    (2.0, "year"),
    (3.0, "year"),
    (5.0, "year"),
    (7.0, "year"),
    (10.0, "year"),
    (20.0, "year"),
    (30.0, "year"),
];

/// [`DEFAULT_MATURITIES`] in clock units, for a clock of `clock_years` years: amount ×
/// unit length in years / clock length in years, as a maturity written `6 month` reads.
pub fn default_maturities(clock_years: f64) -> Vec<f64> {
    DEFAULT_MATURITIES
        .iter()
        .filter_map(|(amount, unit)| {
            sdeck_units::time_unit_years(unit).map(|years| amount * years / clock_years)
        })
        .collect()
}

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
    let years = model.clock.years;
    if let Some(points) = integrated_curve(&set, &rate, maturities, years) {
        return Ok(Curve {
            method: set.method(&rate),
            points: points?,
            long_yield: long_yield(&set, &rate, years),
        });
    }
    let zero = vec![Complex64::new(0.0, 0.0); set.dimension()];
    // Each maturity with its four neighbours for the forward: T ± h, T ± 2h.
    let mut times = Vec::with_capacity(maturities.len() * 5);
    for &t in maturities {
        let h = FORWARD_STEP * t;
        times.extend([t - 2.0 * h, t - h, t, t + h, t + 2.0 * h]);
    }
    let values = set.log_transforms(&zero, &rate, &times);
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

/// The curve of a system whose Riccati equations are integrated: one pass through the
/// sorted maturities, the forward read from the right-hand side at each (exact up to
/// the integration's tolerance). `None` when the set has a closed form.
fn integrated_curve(
    set: &AffineSet,
    rate: &Rate,
    maturities: &[f64],
    years: f64,
) -> Option<Result<Vec<CurvePoint>, String>> {
    let mut order: Vec<usize> = (0..maturities.len()).collect();
    order.sort_by(|a, b| maturities[*a].total_cmp(&maturities[*b]));
    let sorted: Vec<f64> = order.iter().map(|&i| maturities[i]).collect();
    let values = set.discount_with_slopes(rate, &sorted)?;
    let mut points = vec![None; maturities.len()];
    for (&slot, (&t, value)) in order.iter().zip(sorted.iter().zip(values)) {
        let Some((log_price, slope)) = value else {
            return Some(Err(format!(
                "the bond price at {t} is not finite: the rate's transform explodes"
            )));
        };
        points[slot] = Some(CurvePoint {
            maturity: t,
            price: log_price.exp(),
            yield_rate: -log_price / (t * years),
            forward: -slope / years,
        });
    }
    Some(Ok(points.into_iter().flatten().collect()))
}

/// The slope of −ln P over a far stretch, when two stretches agree.
fn long_yield(set: &AffineSet, rate: &Rate, years: f64) -> Option<f64> {
    if set.time_dependent() {
        return None;
    }
    let far = 4000.0 / years;
    if set.method(rate) == TransformMethod::Riccati {
        return set.settled_rate(rate, far).map(|r| r / years);
    }
    let zero = vec![Complex64::new(0.0, 0.0); set.dimension()];
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

    #[test]
    fn default_maturities_read_as_written_in_any_clock() {
        let years = default_maturities(1.0);
        assert_eq!(years.len(), DEFAULT_MATURITIES.len());
        assert_eq!(years.first(), Some(&(1.0 / 12.0)));
        assert_eq!(years.last(), Some(&30.0));
        // On a monthly clock a month is 1 and a year 12.
        let months = default_maturities(1.0 / 12.0);
        assert!((months[0] - 1.0).abs() < 1e-12);
        assert!((months[3] - 12.0).abs() < 1e-12);
        assert!(years.windows(2).all(|w| w[0] < w[1]));
    }

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
        let rate = Expr::Div(Box::new(Expr::factor(0)), Box::new(Expr::Const(12.0)));
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
    fn the_settled_long_yield_of_an_integrated_system_is_the_far_slope() {
        // A square-root factor whose level follows another: Riccati, integrated. The long
        // yield read from the settled right-hand side must equal the slope of −ln P over
        // a far stretch (2000 to 4000 years), the definition.
        let text = "model s\nclock year\nparam k = 0.8 [1/year]\nparam m = 2%\n\
            param w = 0.1 [1/sqrt(year)]\nparam c = 0.3 [1/year]\nshock W2, W3\n\
            factor y = 2% >= 0\nfactor z = 1% >= 0\n\
            dy = k * (m - y) dt + w * sqrt(y) dW2\ndz = c * (y - z) dt + w * sqrt(z) dW3\n";
        let model = sdeck_semantics::analyze(text, "s").model;
        let rate = Expr::Add(Box::new(Expr::factor(0)), Box::new(Expr::factor(1)));
        let maturities = [7.0, 0.5, 30.0];
        let c = curve(&model, &rate, &maturities).expect("a curve");
        assert_eq!(c.method, TransformMethod::Riccati);
        let long = c.long_yield.expect("settles");
        let set = AffineSet::from_model(&model).expect("affine");
        let r = Rate::new(&set, &rate).expect("rate");
        let zero = vec![Complex64::new(0.0, 0.0); 2];
        // Prices from the transform one maturity at a time; forwards by a five-point
        // central difference of ln P (error of order h⁴).
        for (point, t) in c.points.iter().zip(maturities) {
            let h = 1e-3 * t;
            let ln_p: Vec<f64> = set
                .log_transforms(&zero, &r, &[t - 2.0 * h, t - h, t, t + h, t + 2.0 * h])
                .into_iter()
                .map(|v| v.expect("finite").re)
                .collect();
            assert_eq!(point.maturity, t);
            assert!((point.price.ln() - ln_p[2]).abs() < 1e-11, "{t}");
            let forward = -(ln_p[0] - 8.0 * ln_p[1] + 8.0 * ln_p[3] - ln_p[4]) / (12.0 * h);
            assert!((point.forward - forward).abs() < 1e-8, "{t}: {forward}");
        }
        let far: Vec<f64> = set
            .log_transforms(&zero, &r, &[2000.0, 4000.0])
            .into_iter()
            .map(|v| v.expect("finite").re)
            .collect();
        let slope = -(far[1] - far[0]) / 2000.0;
        assert!((long - slope).abs() < 1e-9, "{long} vs {slope}");
    }

    #[test]
    fn a_rate_without_reversion_has_no_long_yield_and_bad_maturities_are_refused() {
        let text = "model w\nclock year\nparam s = 1% [1/sqrt(year)]\nshock W\nfactor r = 2%\n\
            dr = s dW\n";
        let model = sdeck_semantics::analyze(text, "w").model;
        let c = curve(&model, &Expr::factor(0), &[1.0, 10.0]).expect("a curve");
        // ln P = −r₀T + s²T³/6 for a driftless Gaussian rate (common practice, no source).
        let expected = -0.02 * 10.0 + 1e-4 * 1000.0 / 6.0;
        assert!((c.points[1].price.ln() - expected).abs() < 1e-12);
        assert_eq!(c.long_yield, None);
        assert!(curve(&model, &Expr::factor(0), &[0.0]).is_err());
        assert!(curve(
            &model,
            &Expr::Mul(Box::new(Expr::factor(0)), Box::new(Expr::factor(0))),
            &[1.0]
        )
        .is_err());
    }
}
