//! `mirrorsite simulate`.

use std::path::PathBuf;
use std::process::ExitCode;

/// Arguments of `mirrorsite simulate`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// Input file or folder.
    pub input: PathBuf,
}

/// Runs the command.
pub fn run(_args: Args) -> mirrorsite::Result<ExitCode> {
    Err(mirrorsite::Error::Analysis("not built yet".into()))
}
