//! End-to-end tests of `sdeck curve`: the exact JSON shape, prices against Brigo &
//! Mercurio 2006 for the two-factor Gaussian demo model, the options and refusals.

use serde_json::Value;
mod common;

fn curve(args: &[&str]) -> (Option<i32>, String, String) {
    let mut with_command = vec!["curve"];
    with_command.extend_from_slice(args);
    common::run(&with_command)
}

const DEMO: &str = "demo-models/kestrel_bank_short_rate.sde";

/// Brigo & Mercurio 2006, Interest Rate Models, 2nd ed., eq. 4.10 with constant φ, for
/// the parameters of the demo model.
fn g2_log_price(t: f64) -> f64 {
    let (a, b, sigma, eta, rho, phi, x0, y0) = (
        0.6f64, 0.05f64, 0.009f64, 0.006f64, -0.5f64, 0.032f64, -0.006f64, 0.002f64,
    );
    let part = |k: f64, s: f64| {
        s * s / (k * k)
            * (t + 2.0 / k * (-k * t).exp()
                - 1.0 / (2.0 * k) * (-2.0 * k * t).exp()
                - 3.0 / (2.0 * k))
    };
    let v = part(a, sigma)
        + part(b, eta)
        + 2.0 * rho * sigma * eta / (a * b)
            * (t + ((-a * t).exp() - 1.0) / a + ((-b * t).exp() - 1.0) / b
                - ((-(a + b) * t).exp() - 1.0) / (a + b));
    -phi * t - x0 * (1.0 - (-a * t).exp()) / a - y0 * (1.0 - (-b * t).exp()) / b + 0.5 * v
}

#[test]
fn json_has_the_documented_shape_and_the_published_prices() {
    let (code, out, err) = curve(&[DEMO, "--format", "json"]);
    assert_eq!(code, Some(0), "{err}");
    let json: Value = serde_json::from_str(&out).expect("JSON");
    let keys: Vec<&String> = json
        .as_object()
        .map(|o| o.keys().collect())
        .unwrap_or_default();
    assert_eq!(
        keys,
        [
            "model",
            "clock",
            "measure",
            "method",
            "maturities",
            "long_yield"
        ]
    );
    assert_eq!(json["measure"], "risk-neutral");
    assert_eq!(json["method"], "closed-form");
    assert_eq!(json["clock"], "year");
    let points = json["maturities"].as_array().cloned().unwrap_or_default();
    let expected = [
        1.0 / 12.0,
        0.25,
        0.5,
        1.0,
        2.0,
        3.0,
        5.0,
        7.0,
        10.0,
        20.0,
        30.0,
    ];
    assert_eq!(points.len(), expected.len());
    for (p, t) in points.iter().zip(expected) {
        let keys: Vec<&String> = p
            .as_object()
            .map(|o| o.keys().collect())
            .unwrap_or_default();
        assert_eq!(keys, ["maturity", "price", "yield", "forward"]);
        let maturity = p["maturity"].as_f64().unwrap_or(f64::NAN);
        assert!((maturity - t).abs() < 1e-12);
        let ln_p = g2_log_price(t);
        assert!(
            (p["price"].as_f64().unwrap_or(0.0) - ln_p.exp()).abs() < 1e-12,
            "{t}"
        );
        assert!(
            (p["yield"].as_f64().unwrap_or(0.0) + ln_p / t).abs() < 1e-12,
            "{t}"
        );
        // The forward against a central difference of the published log price.
        let h = 1e-4 * t;
        let forward = -(g2_log_price(t + h) - g2_log_price(t - h)) / (2.0 * h);
        assert!(
            (p["forward"].as_f64().unwrap_or(0.0) - forward).abs() < 1e-8,
            "{t}"
        );
    }
    // Both factors revert: the yields settle at the limit of eq. 4.10,
    // φ − σ²/(2a²) − η²/(2b²) − ρση/(ab) = 2.55875%.
    let long = 0.032 - 0.009f64.powi(2) / (2.0 * 0.36) - 0.006f64.powi(2) / (2.0 * 0.0025)
        + 0.5 * 0.009 * 0.006 / (0.6 * 0.05);
    assert!((json["long_yield"].as_f64().unwrap_or(0.0) - long).abs() < 1e-9);
}

#[test]
fn maturities_text_and_svg() {
    let (code, out, err) = curve(&[DEMO, "--maturities", "6 month, 2 year,10"]);
    assert_eq!(code, Some(0), "{err}");
    assert!(out.contains("measure risk-neutral"), "{out}");
    assert!(out.contains("long yield"), "{out}");
    assert!(out.matches('%').count() >= 6, "{out}");
    let (code, svg, _) = curve(&[DEMO, "--format", "svg"]);
    assert_eq!(code, Some(0));
    assert!(svg.starts_with("<svg") && svg.trim_end().ends_with("</svg>"));
    assert!(svg.contains("maturity (year)") && svg.contains("% per year"));
    let (code, _, err) = curve(&[DEMO, "--maturities", "0 year"]);
    assert_eq!(code, Some(2));
    assert!(err.contains("positive"), "{err}");
    let (code, _, err) = curve(&["demo-models/ou_short_rate.sde"]);
    assert_eq!(code, Some(2));
    assert!(err.contains("no `discount` line"), "{err}");
}

#[test]
fn a_dimensionless_rate_is_per_year_and_a_rate_per_time_converts() {
    // One Vasicek rate written three ways: clock year, clock month with a dimensionless
    // rate (read per year), and clock month with the rate in [1/month]. The yields are
    // the same (Vasicek 1977, eq. 27, whatever the clock).
    let dir = tempfile::tempdir().unwrap_or_else(|e| panic!("{e}"));
    let body = "param kappa = 0.8 [1/year]\nparam theta = 4%\n\
        param sigma = 1.5% [1/sqrt(year)]\nshock W\nfactor r = 2.5%\n\
        dr = kappa * (theta - r) dt + sigma dW\nmeasure risk-neutral\n";
    let models = [
        (
            "year.sde",
            format!("model y\nclock year\n{body}discount r\n"),
        ),
        (
            "month.sde",
            format!("model m\nclock month\n{body}discount r\n"),
        ),
        (
            "per_month.sde",
            format!("model p\nclock month\nparam twelve = 12 [month]\n{body}discount r / twelve\n"),
        ),
    ];
    let mut yields = Vec::new();
    for (name, text) in &models {
        let path = dir.path().join(name);
        std::fs::write(&path, text).unwrap_or_else(|e| panic!("{e}"));
        let file = path.to_string_lossy().into_owned();
        let (code, out, err) =
            curve(&[&file, "--maturities", "1 year,10 year", "--format", "json"]);
        assert_eq!(code, Some(0), "{name}: {err}");
        let json: Value = serde_json::from_str(&out).expect("JSON");
        yields.push(json["maturities"][1]["yield"].as_f64().unwrap_or(f64::NAN));
    }
    let (kappa, theta, sigma, r0, t) = (0.8f64, 0.04f64, 0.015f64, 0.025f64, 10.0f64);
    let b = (1.0 - (-kappa * t).exp()) / kappa;
    let ln_p = (theta - sigma * sigma / (2.0 * kappa * kappa)) * (b - t)
        - sigma * sigma * b * b / (4.0 * kappa)
        - b * r0;
    for y in yields {
        assert!((y + ln_p / t).abs() < 1e-12, "{y}");
    }
}
