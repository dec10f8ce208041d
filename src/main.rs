//! The `mirrorsite` command line: a thin shell over the library.

mod cli;

use clap::Parser;
use std::process::ExitCode;

fn main() -> ExitCode {
    let args = cli::Cli::parse();
    match cli::run(args) {
        Ok(code) => code,
        Err(e) => {
            eprintln!("error: {e}");
            match e {
                mirrorsite::Error::Input(_) => ExitCode::from(2),
                _ => ExitCode::from(1),
            }
        }
    }
}
