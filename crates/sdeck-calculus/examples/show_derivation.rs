//! Prints the derivation of a model file: family, reason, method and formulas per state.
//!
//! `cargo run -p sdeck-calculus --example show_derivation -- FILE.sde`

fn main() {
    let Some(path) = std::env::args().nth(1) else {
        eprintln!("usage: show_derivation FILE.sde");
        std::process::exit(2);
    };
    let source = match std::fs::read_to_string(&path) {
        Ok(s) => s,
        Err(e) => {
            eprintln!("cannot read {path}: {e}");
            std::process::exit(2);
        }
    };
    let analysis = sdeck_semantics::analyze(&source, "model");
    let model = &analysis.model;
    let derivation = sdeck_calculus::derive(model);
    println!(
        "system: {} ({})",
        derivation.system_family.as_str(),
        derivation.system_reason
    );
    if let Some(eigen) = &derivation.drift_eigenvalues {
        println!("drift eigenvalues: {eigen:?}");
    }
    let moments = sdeck_calculus::moments_at(model, &derivation, model.horizon);
    for (i, (state, law)) in model.factors.iter().zip(&derivation.states).enumerate() {
        println!(
            "\n{}: {} by {}",
            state.name,
            law.family.as_str(),
            law.method.as_str()
        );
        println!("  why: {}", law.reason);
        let f = sdeck_calculus::formulas(model, &derivation, sdeck_semantics::FactorId::new(i));
        for (label, text) in [
            ("solution", &f.solution),
            ("mean", &f.mean),
            ("variance", &f.variance),
            ("autocovariance", &f.autocovariance),
            ("stationary", &f.stationary),
            ("transition", &f.transition),
        ] {
            if let Some(text) = text {
                println!("  {label}: {text}");
            }
        }
        println!(
            "  at {}: mean {:?}, variance {:?}, half-life {:?}",
            model.horizon,
            moments.mean.get(i).copied().flatten(),
            moments.variance.get(i).copied().flatten(),
            law.half_life
        );
    }
}
