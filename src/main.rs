//! The `meniscus` binary: parse the command line, run, exit with the
//! status [`meniscus::cli::run`] returns. Everything else lives in the
//! library (`meniscus::cli`, `meniscus::repl`).

use std::process::ExitCode;

use clap::Parser;
use meniscus::cli::{self, Cli};

fn main() -> ExitCode {
    let code = match Cli::try_parse() {
        Ok(args) => cli::run(args),
        Err(e) => cli::report_parse_error(e),
    };
    ExitCode::from(code)
}
