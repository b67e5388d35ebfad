//! The porewise binary: parse the command line, run, map the result to an exit code.

use std::process::ExitCode;

use clap::Parser;

fn main() -> ExitCode {
    let args = porewise::cli::Cli::parse();
    match porewise::cli::run(args) {
        Ok(outcome) => outcome.into(),
        Err(err) => {
            eprintln!("error: {}", porewise::error::render(&err));
            ExitCode::from(porewise::error::EXIT_USER_ERROR)
        }
    }
}
