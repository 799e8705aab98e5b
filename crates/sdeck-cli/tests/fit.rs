//! End-to-end tests of `sdeck fit` and `sdeck simulate --export`: the JSON shape, the
//! day counts, bad data (row, column, exit 2, nothing written), `--write` and `--check`.

use serde_json::Value;
use std::path::Path;
mod common;
use common::run_in as sdeck;

fn write(dir: &Path, name: &str, text: &str) {
    std::fs::write(dir.join(name), text).unwrap_or_else(|e| panic!("{e}"));
}

fn read(dir: &Path, name: &str) -> String {
    std::fs::read_to_string(dir.join(name)).unwrap_or_else(|e| panic!("{e}"))
}

/// A formatted Ornstein–Uhlenbeck model (the formatter's layout).
const OU: &str = "# Overnight rate of the (fictional) Tarnwick Savings Bank.\n\
model tarnwick_rate\n\
clock year\n\
\n\
param kappa = 2    [1/year]       > 0  # speed of mean reversion\n\
param level = 3%                       # long-run level\n\
param vol   = 1.2% [1/sqrt(year)] > 0\n\
\n\
shock W\n\
factor r = 3%\n\
dr = kappa * (level - r) dt + vol dW\n";

/// Weekly values of an exact OU path (κ = 2, θ = 3%, σ = 1.2%), as percent cells.
fn ou_csv(n: usize, seed: u64) -> String {
    // A small linear congruential generator and Box–Muller: enough for a test series.
    let mut state = seed
        .wrapping_mul(6364136223846793005)
        .wrapping_add(1442695040888963407);
    let mut uniform = move || {
        state = state
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        ((state >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    };
    let dt = 7.0 / 365.0;
    let (kappa, theta, sigma) = (2.0_f64, 0.03_f64, 0.012_f64);
    let decay = (-kappa * dt).exp();
    let sd = sigma * ((1.0 - decay * decay) / (2.0 * kappa)).sqrt();
    let mut x = 0.03;
    let mut out = String::from("date,r\n");
    let mut day = chrono_free_date(2020, 1, 6);
    for _ in 0..n {
        out.push_str(&format!("{},{:.6}%\n", day.text(), x * 100.0));
        let z = (-2.0 * uniform().ln()).sqrt() * (2.0 * std::f64::consts::PI * uniform()).cos();
        x = theta + (x - theta) * decay + sd * z;
        day = day.plus(7);
    }
    out
}

/// Dates without a date library: a day number since 1970-01-01 and its civil form
/// (Hinnant's days-from-civil algorithm).
#[derive(Clone, Copy)]
struct Day(i64);

fn chrono_free_date(y: i64, m: i64, d: i64) -> Day {
    let y = if m <= 2 { y - 1 } else { y };
    let era = y.div_euclid(400);
    let yoe = y - era * 400;
    let mp = (m + 9) % 12;
    let doy = (153 * mp + 2) / 5 + d - 1;
    let doe = yoe * 365 + yoe / 4 - yoe / 100 + doy;
    Day(era * 146097 + doe - 719468)
}

impl Day {
    fn plus(self, days: i64) -> Day {
        Day(self.0 + days)
    }

    fn text(self) -> String {
        let z = self.0 + 719468;
        let era = z.div_euclid(146097);
        let doe = z - era * 146097;
        let yoe = (doe - doe / 1460 + doe / 36524 - doe / 146096) / 365;
        let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
        let mp = (5 * doy + 2) / 153;
        let d = doy - (153 * mp + 2) / 5 + 1;
        let m = if mp < 10 { mp + 3 } else { mp - 9 };
        let y = yoe + era * 400 + if m <= 2 { 1 } else { 0 };
        format!("{y:04}-{m:02}-{d:02}")
    }
}

#[test]
fn json_has_exactly_the_documented_shape() {
    let dir = tempfile::tempdir().unwrap_or_else(|e| panic!("{e}"));
    write(dir.path(), "rate.sde", OU);
    let mut data = ou_csv(300, 1);
    data = data.replacen("2020-01-13,", "2020-01-13,NA\n2020-01-14,", 1);
    // The replaced row keeps a value on the next day; one NA cell.
    write(dir.path(), "rate.csv", &data);
    let run = sdeck(
        dir.path(),
        &["fit", "rate.sde", "rate.csv", "--format", "json"],
    );
    assert_eq!(run.code, Some(0), "{}", run.stderr);
    let json: Value = serde_json::from_str(&run.stdout).unwrap_or(Value::Null);
    let keys: Vec<&str> = json
        .as_object()
        .map(|o| o.keys().map(String::as_str).collect())
        .unwrap_or_default();
    assert_eq!(
        keys,
        [
            "model",
            "data",
            "method",
            "loglik",
            "aic",
            "params",
            "correlation"
        ]
    );
    assert_eq!(json["model"], "tarnwick_rate");
    assert_eq!(json["method"], "exact-mle");
    assert_eq!(json["data"]["rows"], 301);
    assert_eq!(json["data"]["skipped"], 1);
    assert_eq!(json["data"]["used"], 300);
    assert_eq!(json["data"]["from"], "2020-01-06");
    let params = json["params"].as_array().cloned().unwrap_or_default();
    let names: Vec<&str> = params.iter().filter_map(|p| p["name"].as_str()).collect();
    assert_eq!(names, ["kappa", "level", "vol"]);
    for p in &params {
        let keys: Vec<&str> = p
            .as_object()
            .map(|o| o.keys().map(String::as_str).collect())
            .unwrap_or_default();
        assert_eq!(keys, ["name", "unit", "in_file", "estimate", "se", "ci95"]);
        let (lo, hi) = (p["ci95"][0].as_f64(), p["ci95"][1].as_f64());
        let (e, se) = (p["estimate"].as_f64(), p["se"].as_f64());
        if let (Some(lo), Some(hi), Some(e), Some(se)) = (lo, hi, e, se) {
            assert!((hi - lo - 2.0 * 1.959_963_984_540_054 * se).abs() < 1e-9 * hi.abs().max(1.0));
            assert!(lo < e && e < hi);
        } else {
            panic!("interval or estimate missing: {p}");
        }
    }
    assert_eq!(params[0]["unit"], "1/year");
    assert_eq!(params[1]["unit"], Value::Null);
    assert_eq!(params[1]["in_file"], 0.03);
    let corr = json["correlation"].as_array().cloned().unwrap_or_default();
    assert_eq!(corr.len(), 3);
    assert_eq!(corr[1][1], 1.0);
    let aic = json["aic"].as_f64().unwrap_or(f64::NAN);
    let loglik = json["loglik"].as_f64().unwrap_or(f64::NAN);
    assert!((aic - (6.0 - 2.0 * loglik)).abs() < 1e-9);
}

/// An arithmetic Brownian motion's drift estimate is Δx / T, which shows the day count:
/// Friday to Monday is one business day on a `bday` clock and 3/365 year on a yearly one.
#[test]
fn dates_follow_the_clock_day_count() {
    let dir = tempfile::tempdir().unwrap_or_else(|e| panic!("{e}"));
    let model = |clock: &str, unit: &str| {
        format!(
            "model walk\nclock {clock}\nparam mu = 0.1 [1/{unit}]\n\
             param sigma = 0.3 [1/sqrt({unit})] > 0\nshock W\nfactor x = 1\n\
             dx = mu dt + sigma dW\n"
        )
    };
    write(dir.path(), "bday.sde", &model("bday", "bday"));
    write(dir.path(), "year.sde", &model("year", "year"));
    // Monday 2024-03-04 to Monday 2024-03-18 through two weekends: 10 business days,
    // 14 calendar days.
    let data = "date;x\n2024-03-04;1.00\n2024-03-07;1.03\n2024-03-08;1.01\n\
                2024-03-11;1.06\n2024-03-13;1.04\n2024-03-15;1.08\n2024-03-18;1.10\n";
    write(dir.path(), "x.csv", data);
    let mu = |file: &str| {
        let run = sdeck(dir.path(), &["fit", file, "x.csv", "--format", "json"]);
        assert_eq!(run.code, Some(0), "{}", run.stderr);
        let json: Value = serde_json::from_str(&run.stdout).unwrap_or(Value::Null);
        json["params"][0]["estimate"].as_f64().unwrap_or(f64::NAN)
    };
    assert!((mu("bday.sde") - 0.10 / 10.0).abs() < 1e-9);
    assert!((mu("year.sde") - 0.10 / (14.0 / 365.0)).abs() < 1e-7);
}

/// Every kind of bad data: a clear message with the line and column, exit 2, and with
/// `--write` the model is left as it was.
#[test]
fn bad_data_is_refused_with_line_and_column() {
    let dir = tempfile::tempdir().unwrap_or_else(|e| panic!("{e}"));
    let root = "model funding\nclock year\n\
        param kappa = 1 [1/year] > 0\nparam level = 3% > 0\n\
        param vol = 5% [1/sqrt(year)] > 0\nshock W\nfactor r = 3% >= 0\n\
        dr = kappa * (level - r) dt + vol * sqrt(r) dW\n";
    write(dir.path(), "cir.sde", root);
    let good = "t,r\n0,3%\n0.1,3.1%\n0.2,2.9%\n0.3,3.2%\n0.4,3.0%\n0.5,3.1%\n";
    let cases: [(&str, String, &[&str], &str); 8] = [
        (
            "not increasing",
            good.replace("0.3,3.2%", "0.15,3.2%"),
            &[],
            ":5, column `t`",
        ),
        (
            "duplicate date",
            "date,r\n2024-01-01,3%\n2024-01-02,3.1%\n2024-01-02,3.2%\n2024-01-03,3%\n\
             2024-01-04,3%\n2024-01-05,3.1%\n"
                .to_string(),
            &[],
            ":4, column `date`",
        ),
        (
            "outside the domain",
            good.replace("2.9%", "-0.1%"),
            &[],
            ":4, column `r`",
        ),
        (
            "too few rows",
            "t,r\n0,3%\n0.1,3.1%\n0.2,2.9%\n0.3,3%\n".to_string(),
            &[],
            "needs at least 5",
        ),
        (
            "unparsable",
            good.replace("3.0%", "3.0x%"),
            &[],
            ":6, column `r`",
        ),
        (
            "a cell too many",
            good.replace("3.0%", "3,0%"),
            &[],
            ":6: the row has 3 cells",
        ),
        (
            "missing column",
            good.to_string(),
            &["--column", "r=rate"],
            "column `rate`",
        ),
        (
            "bad date",
            good.replace("t,r\n0,", "date,r\n2024-13-01,"),
            &[],
            ":2, column `date`",
        ),
    ];
    for (what, data, extra, expected) in cases {
        write(dir.path(), "r.csv", &data);
        let mut args = vec!["fit", "cir.sde", "r.csv", "--write"];
        args.extend_from_slice(extra);
        let run = sdeck(dir.path(), &args);
        assert_eq!(run.code, Some(2), "{what}: {}", run.stderr);
        assert!(
            run.stderr.contains(expected),
            "{what}: expected `{expected}` in: {}",
            run.stderr
        );
        assert_eq!(
            read(dir.path(), "cir.sde"),
            root,
            "{what}: the model changed"
        );
    }
}

#[test]
fn unknown_families_are_refused_with_the_reason() {
    let dir = tempfile::tempdir().unwrap_or_else(|e| panic!("{e}"));
    write(
        dir.path(),
        "cubic.sde",
        "model cubic\nclock year\nparam k = 1 [1/year] > 0\n\
         param vol = 0.1 [1/sqrt(year)] > 0\nshock W\nfactor x = 0\n\
         dx = -k * x^3 dt + vol dW\n",
    );
    write(
        dir.path(),
        "x.csv",
        "t,x\n0,0\n1,0.1\n2,0.05\n3,-0.1\n4,0\n5,0.1\n",
    );
    let run = sdeck(dir.path(), &["fit", "cubic.sde", "x.csv"]);
    assert_eq!(run.code, Some(2));
    assert!(run.stderr.contains("no exact likelihood"), "{}", run.stderr);
    assert!(run.stderr.contains("degree 3"), "{}", run.stderr);
}

#[test]
fn write_keeps_the_layout_and_leaves_a_note_that_hover_shows() {
    let dir = tempfile::tempdir().unwrap_or_else(|e| panic!("{e}"));
    write(dir.path(), "rate.sde", OU);
    std::fs::create_dir(dir.path().join("data")).unwrap_or_else(|e| panic!("{e}"));
    write(dir.path(), "data/rate.csv", &ou_csv(400, 2));
    let run = sdeck(dir.path(), &["fit", "rate.sde", "data/rate.csv", "--write"]);
    assert_eq!(run.code, Some(0), "{}", run.stderr);
    let text = read(dir.path(), "rate.sde");
    // Still in the formatter's layout, the first comment and the bounds kept.
    let fmt = sdeck(dir.path(), &["fmt", "--check", "rate.sde"]);
    assert_eq!(fmt.code, Some(0), "not formatted:\n{text}");
    assert!(text.starts_with("# Overnight rate of the (fictional) Tarnwick Savings Bank.\n"));
    let analysis = sdeck_semantics::analyze(&text, "rate");
    assert!(!analysis.has_errors(), "{text}");
    let kappa = &analysis.model.params[0];
    assert!(kappa.bound.is_some());
    let description = kappa.description.clone().unwrap_or_default();
    assert!(
        description.starts_with("speed of mean reversion; fitted ")
            && description.contains(" from data/rate.csv, se ")
            && description.ends_with(" [1/year]"),
        "{description}"
    );
    // The value written is the estimate, in the declared unit and style.
    let level_line = text
        .lines()
        .find(|l| l.starts_with("param level"))
        .unwrap_or_default();
    assert!(level_line.contains('%'), "{level_line}");
    // A second fit replaces the note rather than adding one.
    let again = sdeck(dir.path(), &["fit", "rate.sde", "data/rate.csv", "--write"]);
    assert_eq!(again.code, Some(0), "{}", again.stderr);
    let text = read(dir.path(), "rate.sde");
    assert_eq!(text.matches("fitted ").count(), 3, "{text}");
    // The file now agrees with its data.
    let check = sdeck(dir.path(), &["fit", "rate.sde", "data/rate.csv", "--check"]);
    assert_eq!(check.code, Some(0), "{}", check.stderr);
}

#[test]
fn check_fails_when_the_file_disagrees_with_its_data() {
    let dir = tempfile::tempdir().unwrap_or_else(|e| panic!("{e}"));
    write(
        dir.path(),
        "rate.sde",
        &OU.replace("vol   = 1.2% ", "vol   = 3.2% "),
    );
    write(dir.path(), "rate.csv", &ou_csv(400, 3));
    let run = sdeck(dir.path(), &["fit", "rate.sde", "rate.csv", "--check"]);
    assert_eq!(run.code, Some(1), "{}", run.stderr);
    assert!(
        run.stderr
            .contains("vol = 0.032 in the file lies outside the 99% interval"),
        "{}",
        run.stderr
    );
    assert!(run.stdout.contains('*'));
}

#[test]
fn write_refuses_an_estimate_beyond_a_bound() {
    let dir = tempfile::tempdir().unwrap_or_else(|e| panic!("{e}"));
    // The data revert at κ = 2; the file demands κ > 5.
    let model = OU.replace(
        "kappa = 2    [1/year]       > 0",
        "kappa = 6    [1/year]       > 5",
    );
    write(dir.path(), "rate.sde", &model);
    write(dir.path(), "rate.csv", &ou_csv(400, 4));
    let run = sdeck(dir.path(), &["fit", "rate.sde", "rate.csv", "--write"]);
    assert_eq!(run.code, Some(2), "{}", run.stderr);
    assert!(run.stderr.contains("bound of kappa"), "{}", run.stderr);
    assert_eq!(read(dir.path(), "rate.sde"), model);
}

#[test]
fn simulate_exports_paths_that_fit_reads() {
    let dir = tempfile::tempdir().unwrap_or_else(|e| panic!("{e}"));
    write(dir.path(), "rate.sde", OU);
    let run = sdeck(
        dir.path(),
        &[
            "simulate",
            "rate.sde",
            "--paths",
            "500",
            "--steps",
            "400",
            "--at",
            "20 year",
            "--export",
            "paths.csv",
            "--export-paths",
            "3",
        ],
    );
    assert_eq!(run.code, Some(0), "{}", run.stderr);
    let csv = read(dir.path(), "paths.csv");
    assert!(
        csv.starts_with("t,r.1,r.2,r.3\n0,0.03,0.03,0.03\n"),
        "{}",
        &csv[..80]
    );
    assert_eq!(csv.lines().count(), 402);
    let fit = sdeck(
        dir.path(),
        &[
            "fit",
            "rate.sde",
            "paths.csv",
            "--column",
            "r=r.2",
            "--check",
        ],
    );
    assert_eq!(fit.code, Some(0), "{}{}", fit.stdout, fit.stderr);
    // The first paths do not depend on how many are simulated.
    let fewer = sdeck(
        dir.path(),
        &[
            "simulate", "rate.sde", "--paths", "64", "--steps", "400", "--at", "20 year",
            "--export", "one.csv",
        ],
    );
    assert_eq!(fewer.code, Some(0), "{}", fewer.stderr);
    let first: Vec<String> = csv
        .lines()
        .map(|l| l.split(',').take(2).collect::<Vec<_>>().join(","))
        .skip(1)
        .collect();
    let one: Vec<String> = read(dir.path(), "one.csv")
        .lines()
        .skip(1)
        .map(String::from)
        .collect();
    assert_eq!(first, one);
}
