//! End-to-end tests of `sdeck report`: the Markdown and HTML documents, a model with
//! errors, and the fan chart of `sdeck simulate --plot`.

mod common;
use common::run as sdeck;

#[test]
fn markdown_has_the_same_content_as_tables_and_no_image() {
    let (code, md, err) = sdeck(&[
        "report",
        "demo-models/ou_short_rate.sde",
        "--format",
        "markdown",
        "--simulate",
        "1000",
    ]);
    assert_eq!(code, Some(0), "{err}");
    for needle in [
        "## Model ",
        "| SHA-256 |",
        "Caution: derived figures hold only",
        "### Parameters",
        "### Factor `r` — ornstein-uhlenbeck",
        "| t (year) | mean | sd | 1% | 5% | 50% | 95% | 99% |",
        "- half-life: ",
        "### Monte Carlo cross-check",
        "### Expectations",
    ] {
        assert!(md.contains(needle), "{needle} missing from\n{md}");
    }
    assert!(!md.contains("<svg") && !md.contains("!["));
    // The horizon's mean is the one `sdeck moments` prints.
    let (_, moments, _) = sdeck(&["moments", "demo-models/ou_short_rate.sde"]);
    let mean = moments
        .lines()
        .find_map(|l| l.trim().strip_prefix("E[r(t)]   = "))
        .unwrap_or("missing");
    assert!(md.contains(&format!("| {mean} |")), "{mean}");
}

#[test]
fn a_model_with_errors_is_shown_with_its_findings_and_no_figures() {
    let dir = tempfile::tempdir().unwrap_or_else(|e| panic!("{e}"));
    let file = dir.path().join("broken.sde");
    std::fs::write(
        &file,
        "shock W\nfactor x = 1\ndx = -kappa * x dt + 0.1 dW\n",
    )
    .unwrap_or_else(|e| panic!("{e}"));
    let path = file.to_string_lossy().into_owned();
    let (code, html, _) = sdeck(&["report", &path, "--simulate", "0"]);
    assert_eq!(code, Some(0));
    assert!(html.contains("`kappa` is not declared"), "{html}");
    assert!(html.contains("no figure is derived"));
    assert!(!html.contains("data-figure"));
}

#[test]
fn the_html_is_self_contained() {
    let (code, html, _) = sdeck(&[
        "report",
        "demo-models/gbm_share_price.sde",
        "--simulate",
        "500",
    ]);
    assert_eq!(code, Some(0));
    assert!(html.starts_with("<!DOCTYPE html>"));
    for needle in ["src=", "<link", "http://", "https://"] {
        // The SVG namespace is the one URL allowed: it names, it does not fetch.
        let count = html.matches(needle).count();
        let namespaces = html.matches("http://www.w3.org/2000/svg").count();
        assert!(
            count == 0 || (needle == "http://" && count == namespaces),
            "{needle}"
        );
    }
    assert!(html.contains("<math"));
    assert_eq!(html.matches("class=\"fan\"").count(), 1);
}

#[test]
fn the_fan_chart_says_what_it_draws() {
    let dir = tempfile::tempdir().unwrap_or_else(|e| panic!("{e}"));
    let svg = dir.path().join("fan.svg");
    let svg_path = svg.to_string_lossy().into_owned();
    let (code, _, err) = sdeck(&[
        "simulate",
        "demo-models/two_factor_rates.sde",
        "--paths",
        "3000",
        "--plot",
        &svg_path,
    ]);
    assert_eq!(code, Some(0), "{err}");
    let text = std::fs::read_to_string(&svg).unwrap_or_default();
    let doc = roxmltree::Document::parse(&text).unwrap_or_else(|e| panic!("{e}"));
    let texts: Vec<&str> = doc
        .descendants()
        .filter(|n| n.has_tag_name("text"))
        .filter_map(|n| n.text())
        .collect();
    for wanted in [
        "r: 3,000 paths simulated, bands drawn from 3,000 of them",
        "m: 3,000 paths simulated, bands drawn from 3,000 of them",
        "r (no unit)",
        "t (year)",
        "mean",
        "median",
        "closed-form mean",
        "closed-form 5–95%",
        "simulated 5–95%",
    ] {
        assert!(texts.contains(&wanted), "{wanted} not in {texts:?}");
    }
    // Grid lines come before (under) the bands; the closed-form lines after (over) them.
    let first_chart = doc
        .descendants()
        .find(|n| n.attribute("class") == Some("fan"))
        .unwrap_or_else(|| panic!("no chart"));
    let order: Vec<&str> = first_chart
        .children()
        .filter(|n| n.is_element())
        .map(
            |n| match (n.tag_name().name(), n.attribute("stroke-dasharray")) {
                ("line", _) => "grid",
                ("polygon", _) => "band",
                ("polyline", Some(_)) => "closed",
                _ => "other",
            },
        )
        .collect();
    let last_grid = order
        .iter()
        .rposition(|k| *k == "grid")
        .unwrap_or(usize::MAX);
    let first_band = order.iter().position(|k| *k == "band").unwrap_or(0);
    let last_band = order.iter().rposition(|k| *k == "band").unwrap_or(0);
    let first_closed = order.iter().position(|k| *k == "closed").unwrap_or(0);
    assert!(last_grid < first_band, "{order:?}");
    assert!(last_band < first_closed, "{order:?}");
    // The legend sits right of the plotting frame.
    let frame_right = 560.0;
    let legend_x: Vec<f64> = first_chart
        .children()
        .filter(|n| n.has_tag_name("g"))
        .filter_map(|g| g.attribute("transform"))
        .filter_map(|t| {
            t.strip_prefix("translate(")?
                .split(' ')
                .next()?
                .parse()
                .ok()
        })
        .collect();
    assert_eq!(legend_x.len(), 6);
    assert!(legend_x.iter().all(|x| *x > frame_right));
}
