//! The `redoubt` binary: parse the command line, call [`redoubt::run`], map the outcome
//! to an exit status (0 ok, 1 a gate failed, 2 bad input or usage, 3 solver failure).

use std::process::ExitCode;

use clap::Parser;

fn main() -> ExitCode {
    let cli = match redoubt::cli::Cli::try_parse() {
        Ok(c) => c,
        Err(e) => {
            let _ = e.print();
            return ExitCode::from(if e.use_stderr() { 2 } else { 0 });
        }
    };
    match redoubt::run(cli) {
        Ok(outcome) => ExitCode::from(outcome.exit_code()),
        Err(e) => {
            eprintln!("redoubt: {e}");
            ExitCode::from(e.exit_code() as u8)
        }
    }
}
