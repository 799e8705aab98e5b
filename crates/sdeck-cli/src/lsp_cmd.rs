//! `sdeck lsp`: serves the Language Server Protocol on stdin/stdout for editors.

use clap::Args;
use std::process::ExitCode;

#[derive(Args)]
pub struct LspArgs {
    /// Accepted for editors that pass it; stdio is the only transport.
    #[arg(long)]
    stdio: bool,
}

pub fn run(args: LspArgs) -> ExitCode {
    let _ = args.stdio;
    match sdeck_server::run_stdio() {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            eprintln!("sdeck: the language server could not start: {e}");
            ExitCode::from(2)
        }
    }
}
