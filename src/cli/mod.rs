//! Command definitions and dispatch. Each command lives in its own file and
//! only parses arguments, calls the library and prints.

use clap::{Parser, Subcommand};
use std::process::ExitCode;

mod align;
mod batch;
mod config;
mod inspect;
mod protocol;
mod run;
mod simulate;

/// Electrode-site selection for myoelectric hands from mirrored bilateral calibration sessions.
#[derive(Debug, Parser)]
#[command(name = "mirrorsite", version, about, long_about = None)]
pub struct Cli {
    /// What to do.
    #[command(subcommand)]
    pub command: Command,
}

/// The subcommands.
#[derive(Debug, Subcommand)]
pub enum Command {
    /// The whole job: check, condition, align, select per DoF, plan, and write
    /// sites.json, sites.csv, aligned.csv, the sheet (PDF, HTML) and figures.
    Run(run::Args),
    /// Run every session folder below a folder, in parallel, with a summary table.
    Batch(batch::Args),
    /// Select sites per DoF and write sites.json and sites.csv (no plan or sheet).
    Select(run::Args),
    /// Make a synthetic session with known truth from a scenario file.
    Simulate(simulate::Args),
    /// Read and check a session folder and summarise it.
    Inspect(inspect::Args),
    /// Print or check the analysis configuration file.
    Config(config::Args),
    /// List, check, expand and play task protocols.
    Protocol(protocol::Args),
    /// Time-warp the intact side onto the EMG clock: aligned.csv, alignment.json, figures.
    Align(align::Args),
}

/// Analysis options shared by `run`, `select` and `batch`.
#[derive(Debug, clap::Args)]
pub struct AnalysisArgs {
    /// Analysis configuration file (defaults for every key it leaves out).
    #[arg(long)]
    pub config: Option<std::path::PathBuf>,
    /// Channel budget of the socket (overrides `plan.budget`).
    #[arg(long)]
    pub budget: Option<usize>,
    /// Seed of the resampling (overrides `select.seed`).
    #[arg(long)]
    pub seed: Option<u64>,
    /// Paper size of sheet.pdf: a4 or letter.
    #[arg(long, default_value = "a4")]
    pub paper: mirrorsite::report::PageSize,
}

impl AnalysisArgs {
    /// The configuration file (or the defaults) with the command-line overrides, checked.
    pub fn config(&self) -> mirrorsite::Result<mirrorsite::config::Config> {
        let mut cfg = mirrorsite::config::Config::load_or_default(self.config.as_deref())?;
        if let Some(b) = self.budget {
            cfg.plan.budget = b;
        }
        if let Some(s) = self.seed {
            cfg.select.seed = s;
        }
        cfg.validate()
            .map_err(|(k, m)| mirrorsite::Error::Argument(format!("{k}: {m}")))?;
        Ok(cfg)
    }
}

/// Writes `text` to stdout; a closed pipe (e.g. `| head`) is not an error.
pub fn print_out(text: &str) -> mirrorsite::Result<()> {
    use std::io::Write;
    let mut out = std::io::stdout().lock();
    match out.write_all(text.as_bytes()).and_then(|_| out.flush()) {
        Err(e) if e.kind() != std::io::ErrorKind::BrokenPipe => {
            Err(mirrorsite::Error::io("standard output", e))
        }
        _ => Ok(()),
    }
}

/// Runs one command.
pub fn run(cli: Cli) -> mirrorsite::Result<ExitCode> {
    match cli.command {
        Command::Run(a) => run::run(a),
        Command::Batch(a) => batch::run(a),
        Command::Select(a) => run::select(a),
        Command::Simulate(a) => simulate::run(a),
        Command::Inspect(a) => inspect::run(a),
        Command::Config(a) => config::run(a),
        Command::Protocol(a) => protocol::run(a),
        Command::Align(a) => align::run(a),
    }
}
