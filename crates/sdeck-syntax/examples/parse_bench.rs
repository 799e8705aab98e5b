//! Times the parser over the demo models (a quick profile aid, not a test).
fn main() {
    let dir = std::env::args()
        .nth(1)
        .unwrap_or_else(|| "demo-models".to_string());
    let mut texts = Vec::new();
    for e in std::fs::read_dir(&dir).into_iter().flatten().flatten() {
        if e.path().extension().is_some_and(|x| x == "sde") {
            texts.push(std::fs::read_to_string(e.path()).unwrap_or_default());
        }
    }
    let bytes: usize = texts.iter().map(String::len).sum();
    let rounds = 2000;
    let start = std::time::Instant::now();
    let mut statements = 0;
    for _ in 0..rounds {
        for t in &texts {
            statements += sdeck_syntax::parse(t).statements.len();
        }
    }
    let secs = start.elapsed().as_secs_f64();
    println!(
        "{} files, {} statements/round: {:.1} µs per file, {:.2} µs per statement, {:.1} MB/s",
        texts.len(),
        statements / rounds,
        secs * 1e6 / (rounds * texts.len()) as f64,
        secs * 1e6 / statements as f64,
        (bytes * rounds) as f64 / secs / 1e6
    );
}
