//! `mirrorsite simulate`: write a synthetic session with known truth.

use mirrorsite::simulate::{default_truth_path, write_session, Role, Scenario};
use std::path::PathBuf;
use std::process::ExitCode;

/// Arguments of `mirrorsite simulate`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The scenario file (TOML).
    pub scenario: PathBuf,
    /// The session folder to create.
    #[arg(long)]
    pub out: PathBuf,
    /// Where to write the truth file (default: `<out>.truth.json` beside the folder).
    #[arg(long)]
    pub truth: Option<PathBuf>,
    /// Override the scenario's seed.
    #[arg(long)]
    pub seed: Option<u64>,
    /// Replace existing outputs.
    #[arg(long)]
    pub force: bool,
}

/// Runs the command.
pub fn run(args: Args) -> mirrorsite::Result<ExitCode> {
    let mut sc = Scenario::from_file(&args.scenario)?;
    if let Some(seed) = args.seed {
        sc.seed = seed;
    }
    let sim = write_session(&sc, &args.out, args.truth.as_deref(), args.force)?;
    let truth_path = args.truth.unwrap_or_else(|| default_truth_path(&args.out));
    let t = &sim.truth;
    eprintln!(
        "wrote {} ({:.0} s, {} sites, {} DoFs) and {}",
        args.out.display(),
        sc.total_duration(),
        t.sites.len(),
        sc.dof.len(),
        truth_path.display()
    );
    for d in &t.informative {
        eprintln!(
            "  {} {:<10} informative: {}",
            d.dof,
            d.word,
            d.sites.join(" ")
        );
    }
    let faulty = t.sites_with(Role::Faulty);
    if !faulty.is_empty() {
        eprintln!("  faulty: {}", faulty.join(" "));
    }
    eprintln!("  irrelevant: {}", t.sites_with(Role::Irrelevant).join(" "));
    Ok(ExitCode::SUCCESS)
}
