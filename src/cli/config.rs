//! `mirrorsite config`.

use mirrorsite::config::Config;
use std::path::PathBuf;
use std::process::ExitCode;

/// Arguments of `mirrorsite config`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// Print the default analysis configuration, every key commented.
    #[arg(long, conflicts_with = "check")]
    pub defaults: bool,
    /// Check an analysis configuration file and print the settings in effect.
    #[arg(long, value_name = "FILE")]
    pub check: Option<PathBuf>,
}

/// Runs the command.
pub fn run(args: Args) -> mirrorsite::Result<ExitCode> {
    if args.defaults {
        super::print_out(&Config::defaults_toml())?;
        return Ok(ExitCode::SUCCESS);
    }
    match args.check {
        Some(path) => {
            let cfg = Config::load(&path)?;
            let text = toml::to_string(&cfg)
                .map_err(|e| mirrorsite::Error::Analysis(format!("cannot print settings: {e}")))?;
            super::print_out(&text)?;
            Ok(ExitCode::SUCCESS)
        }
        None => Err(mirrorsite::Error::Argument(
            "give --defaults or --check FILE".into(),
        )),
    }
}
