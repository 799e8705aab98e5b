fn main() {
    let path = std::env::args().nth(1).unwrap_or_default();
    let text = std::fs::read_to_string(&path).unwrap_or(path);
    let file = sdeck_syntax::parse(&text);
    for s in &file.statements {
        println!("{:?}", s.kind);
    }
    for d in &file.diagnostics {
        println!("ERR {:?} {} help={:?}", d.span, d.message, d.help);
    }
}
