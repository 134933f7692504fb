//! Thin binary: parse the command line, call the library, map errors to exit codes
//! (0 ok, 1 failures found when asked with --fail-on, 2 usage or input error).

use std::process::ExitCode;

use clap::Parser;

fn main() -> ExitCode {
    let cli = twinaudit::cli::Cli::parse();
    match twinaudit::cli::execute(cli) {
        Ok(code) => ExitCode::from(code),
        Err(e) => {
            eprintln!("twinaudit: error: {e:#}");
            ExitCode::from(2)
        }
    }
}
