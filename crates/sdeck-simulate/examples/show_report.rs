//! Prints the text report of a small two-state simulation (for a look at the layout).

fn main() {
    let source = "param kappa = 1.6 [1/year] > 0\nparam theta = 3.4% >= 0\nparam sigma = 9% [1/sqrt(year)] > 0\n\
                  shock W\nfactor r = 2.9% >= 0\ndr = kappa * (theta - r) dt + sigma * sqrt(r) dW\n";
    let model = sdeck_semantics::analyze(source, "demo").model;
    let derivation = sdeck_calculus::derive(&model);
    // SDECK_EXAMPLE_PATHS sets the number of paths (the progress bar is the CLI's).
    let paths = std::env::var("SDECK_EXAMPLE_PATHS")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(20_000);
    let options = sdeck_simulate::SimulationOptions {
        paths,
        steps: 20,
        ..Default::default()
    };
    match sdeck_simulate::simulate_and_compare(&model, &derivation, &options) {
        Ok(result) => print!("{}", sdeck_simulate::render_text(&result)),
        Err(error) => eprintln!("error: {error}"),
    }
}
