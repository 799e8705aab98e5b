//! The report data against published closed forms and independent computations.

use sdeck_report::ModelReport;
use sdeck_semantics::FactorId;
use std::path::Path;

fn report_of(source: &str, at: f64) -> ModelReport {
    let check = sdeck_checks::check(source, "test", &Default::default());
    ModelReport::build(&check.analysis.model, &check.derivation, source, at)
}

fn demo(name: &str) -> String {
    let path = Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("../../demo-models")
        .join(name);
    std::fs::read_to_string(&path).unwrap_or_else(|e| panic!("{}: {e}", path.display()))
}

const VASICEK: &str = "param kappa = 0.9 [1/year] > 0  # speed\nparam theta = 3.1%\n\
    param sigma = 0.9% [1/sqrt(year)] > 0\nshock W\nfactor r = 0.2%\n\
    dr = kappa * (theta - r) dt + sigma dW\nexpect mean(r, 18 month) in [2%, 3%]\n\
    expect halflife(r) < 6 month\n";

#[test]
fn an_ornstein_uhlenbeck_factor_has_the_vasicek_law_and_its_sign_change() {
    // Vasicek 1977: E[r_t] = θ + (r0 − θ)e^(−κt), Var[r_t] = σ²(1 − e^(−2κt))/(2κ);
    // the numbers below were computed with scipy 1.x (norm.cdf) for κ = 0.9, θ = 3.1%,
    // σ = 0.9%, r0 = 0.2%, t = 1.5: P(r_t < 0) = Φ(−mean/sd).
    let report = report_of(VASICEK, 1.5);
    let r = &report.factors[0];
    let mean = r.figures.mean.unwrap_or(f64::NAN);
    let variance = r.figures.variance.unwrap_or(f64::NAN);
    assert!((mean - 0.023482032441269146).abs() < 1e-15);
    assert!((variance - 4.1975751926711254e-05).abs() < 1e-18);
    assert_eq!(r.figures.law.map(|k| k.as_str()), Some("normal"));
    let p = r.figures.sign_change.unwrap_or(f64::NAN);
    assert!((p - 0.00014481503297789774).abs() < 1e-12, "{p}");
    // Quantiles of a normal law: the median is the mean, the 5% and 95% points are
    // symmetric about it at 1.6448536 sd (scipy norm.ppf(0.95)).
    let sd = variance.sqrt();
    assert!((r.figures.quantile(0.5).unwrap_or(f64::NAN) - mean).abs() < 1e-14);
    let q95 = r.figures.quantile(0.95).unwrap_or(f64::NAN);
    assert!((q95 - mean - 1.6448536269514722 * sd).abs() < 1e-12);
    // Stationary law N(θ, σ²/(2κ)), half-life ln 2/κ.
    let st = r.stationary.as_ref().map(|s| (s.mean, s.variance));
    assert_eq!(st, Some((0.031, 0.009f64 * 0.009 / 1.8)));
    assert_eq!(r.half_life, Some(2f64.ln() / 0.9));
}

#[test]
fn parameters_and_expectations_are_rows_with_their_derived_values() {
    let report = report_of(VASICEK, 1.5);
    let kappa = &report.params[0];
    assert_eq!(
        (kappa.name.as_str(), kappa.written_text.as_str()),
        ("kappa", "0.9")
    );
    assert_eq!(kappa.unit.as_deref(), Some("1/year"));
    assert_eq!(kappa.bound.as_deref(), Some("> 0"));
    assert_eq!(kappa.description.as_deref().map(str::trim), Some("speed"));
    assert_eq!(report.params[1].written_text, "3.1%");
    assert_eq!(report.params[1].value, 0.031);
    let [mean, half_life] = &report.expectations[..] else {
        panic!("two expectations expected: {:?}", report.expectations)
    };
    assert_eq!(mean.figure, "mean");
    assert_eq!(mean.at, Some(1.5));
    assert_eq!(mean.holds, Some(true));
    assert_eq!(mean.line, 7);
    assert_eq!(mean.text, "expect mean(r, 18 month) in [2%, 3%]");
    // ln 2 / 0.9 = 0.77 year is not below half a year.
    assert_eq!(half_life.value, Some(2f64.ln() / 0.9));
    assert_eq!(half_life.holds, Some(false));
    assert_eq!(half_life.admissible, "< 0.5");
}

#[test]
fn a_square_root_factor_allows_no_sign_change() {
    let report = report_of(&demo("cir_funding_rate.sde"), 1.0);
    let r = &report.factors[0];
    assert_eq!(r.family.as_str(), "square-root");
    assert_eq!(
        r.figures.law.map(|k| k.as_str()),
        Some("noncentral-chi-square")
    );
    assert!(r.figures.quantiles_known());
    assert_eq!(r.figures.sign_change, None);
}

#[test]
fn correlation_is_the_covariance_scaled_by_both_deviations() {
    let report = report_of(&demo("two_factor_rates.sde"), 2.0);
    let cov = |i: usize, j: usize| report.covariance[i][j].unwrap_or(f64::NAN);
    let rho = report.correlation[0][1].unwrap_or(f64::NAN);
    assert!((rho - cov(0, 1) / (cov(0, 0) * cov(1, 1)).sqrt()).abs() < 1e-15);
    assert_eq!(report.correlation[0][0], Some(1.0));
    assert_eq!(report.correlation[1][0], report.correlation[0][1]);
    assert!(rho > 0.0 && rho < 1.0);
}

#[test]
fn a_factor_known_through_its_transform_has_quantiles_and_its_law_named() {
    // The log-index of the demo stochastic-variance model: its law is known only through
    // the affine transform. Its quantiles must straddle the mean and increase.
    let report = report_of(&demo("stochastic_variance_index.sde"), 1.0);
    let x = &report.factors[0];
    assert_eq!(x.figures.law.map(|k| k.as_str()), Some("fourier"));
    let q: Vec<f64> = x.figures.quantiles.iter().filter_map(|q| q.value).collect();
    assert_eq!(q.len(), 5);
    assert!(q.windows(2).all(|w| w[0] < w[1]), "{q:?}");
    let mean = x.figures.mean.unwrap_or(f64::NAN);
    assert!(q[0] < mean && mean < q[4]);
}

#[test]
fn a_model_with_a_discount_line_gets_its_yield_curve_in_both_documents() {
    // The review's curve is the calculus curve (checked against Brigo & Mercurio 2006,
    // eq. 4.10, in sdeck-calculus) at the default maturities; here: it is there, its
    // 10-year yield equals the one `curve` derives, and both renderings carry it.
    use sdeck_calculus::curve::DEFAULT_MATURITIES;
    use sdeck_report::review::{Review, ReviewOptions};
    let source = demo("kestrel_bank_short_rate.sde");
    let check = sdeck_checks::check(&source, "kestrel", &Default::default());
    let options = ReviewOptions {
        paths: 0,
        ..Default::default()
    };
    let review = Review::build("kestrel_bank_short_rate.sde", &source, &check, &options);
    let curve = match &review.curve {
        Some(Ok(c)) => c,
        other => panic!("no curve in the review: {other:?}"),
    };
    assert_eq!(curve.curve.points.len(), DEFAULT_MATURITIES.len());
    let model = &check.analysis.model;
    let rate = &model.discount.as_ref().expect("discount line").rate;
    let ten = 10.0 / model.clock.years;
    let direct = sdeck_calculus::curve::curve(model, rate, &[ten]).expect("curve");
    let in_review = curve
        .curve
        .points
        .iter()
        .find(|p| (p.maturity - ten).abs() < 1e-12)
        .expect("10-year point");
    assert!((in_review.yield_rate - direct.points[0].yield_rate).abs() < 1e-15);
    let info = sdeck_report::DocumentInfo {
        date: "2026-12-02".into(),
        version: "sdeck test".into(),
    };
    let html = sdeck_report::html::html(std::slice::from_ref(&review), &info);
    assert!(html.contains("<h2>Yield curve</h2>") && html.contains("zero yields and forwards"));
    let markdown = sdeck_report::markdown::markdown(std::slice::from_ref(&review), &info);
    assert!(markdown.contains("### Yield curve"));
    // A model without a discount line has no curve section.
    let plain = report_of(VASICEK, 1.0);
    assert!(plain.factors.len() == 1);
    let check = sdeck_checks::check(VASICEK, "vasicek", &Default::default());
    let review = Review::build("vasicek.sde", VASICEK, &check, &options);
    assert!(review.curve.is_none());
}

#[test]
fn the_report_of_one_factor_is_its_part_of_the_report_of_the_model() {
    // The hover builds one factor's report alone; it must say what the whole report says
    // of that factor, for every demo and reference model, with levels asked.
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("../..");
    let mut checked = 0;
    for dir in ["demo-models", "tests/reference/models"] {
        let mut paths: Vec<_> = std::fs::read_dir(root.join(dir))
            .unwrap_or_else(|e| panic!("{dir}: {e}"))
            .filter_map(|e| e.ok().map(|e| e.path()))
            .filter(|p| p.extension().is_some_and(|x| x == "sde"))
            .collect();
        paths.sort();
        for path in paths {
            let source = std::fs::read_to_string(&path).unwrap_or_default();
            let check = sdeck_checks::check(&source, "test", &Default::default());
            let model = &check.analysis.model;
            let at = model.horizon * 0.75;
            let levels = sdeck_report::Levels {
                quantiles: vec![0.1, 0.5],
                below: model.factors.ids().map(|i| (i, 0.0)).collect(),
                ..Default::default()
            };
            let whole = ModelReport::build_with(model, &check.derivation, &source, at, &levels);
            assert_eq!(
                whole.factors.len(),
                model.factors.len(),
                "{}",
                path.display()
            );
            for (i, expected) in whole.factors.iter().enumerate() {
                let alone = sdeck_report::FactorReport::build(
                    model,
                    &check.derivation,
                    FactorId::new(i),
                    at,
                    &levels,
                );
                assert_eq!(
                    alone.as_ref(),
                    Some(expected),
                    "{} factor {i}",
                    path.display()
                );
                checked += 1;
            }
            let past = model.factors.len();
            let none = sdeck_report::FactorReport::build(
                model,
                &check.derivation,
                FactorId::new(past),
                at,
                &levels,
            );
            assert_eq!(none, None);
        }
    }
    assert!(checked > 20, "only {checked} factors checked");
}
