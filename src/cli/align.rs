//! `mirrorsite align`.

use mirrorsite::align::{self, output, Envelopes, Verdict};
use mirrorsite::config::Config;
use mirrorsite::output::Staging;
use mirrorsite::signal;
use std::path::PathBuf;
use std::process::ExitCode;

/// Arguments of `mirrorsite align`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// Session folder.
    pub session: PathBuf,
    /// New output folder: aligned.csv, alignment.json, figures/.
    #[arg(long)]
    pub out: PathBuf,
    /// Analysis configuration file (defaults for every key it leaves out).
    #[arg(long)]
    pub config: Option<PathBuf>,
    /// Replace the output folder if it exists.
    #[arg(long)]
    pub force: bool,
}

/// Runs the command.
pub fn run(args: Args) -> mirrorsite::Result<ExitCode> {
    let cfg = Config::load_or_default(args.config.as_deref())?;
    let s = mirrorsite::session::read(&args.session)?;
    mirrorsite::output::ensure_outside(&args.out, &args.session)?;
    let (blocks, _source) = mirrorsite::protocol::session_blocks(&s)?;
    let cond = signal::condition(&s.emg, s.sites(), &blocks, &cfg.signal)?;
    let env = Envelopes::from(&cond);
    let al = align::align(&s, &env, &blocks, &cfg.align)?;
    let stage = Staging::new(&args.out, args.force)?;
    output::write_all(stage.path(), &al, &cfg.align)?;
    let target = stage.commit()?;
    let mut text = String::new();
    for b in &al.blocks {
        let lag = b.figures.as_ref().map_or("      -".to_string(), |f| {
            format!("{:+7.3}", f.lag_median_s)
        });
        text.push_str(&format!(
            "{:>8.2}-{:<8.2} {:<14} {:<8} lag {lag} s  {:<9} {}\n",
            b.block.start_s,
            b.block.end_s,
            b.block.task,
            b.block.dof_label(),
            b.quality.as_str(),
            b.reasons.join("; ")
        ));
    }
    let failed = al
        .blocks
        .iter()
        .filter(|b| b.quality == Verdict::Failed)
        .count();
    if let Some(eta) = al.direction_lag_s {
        // The blocks' own values show how well the session pins it down.
        let own: Vec<f64> = al
            .blocks
            .iter()
            .filter(|b| b.quality != Verdict::Failed)
            .filter_map(|b| b.direction_own_s)
            .map(|v| 2.0 * v * 1e3)
            .collect();
        let (lo, hi) = own
            .iter()
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(l, h), &v| {
                (l.min(v), h.max(v))
            });
        text.push_str(&format!(
            "lag while flexing minus lag while extending: {:+.0} ms, pooled over {} block(s) whose own values range {lo:+.0} to {hi:+.0} ms\n",
            2.0 * eta * 1e3,
            own.len()
        ));
    }
    text.push_str(&format!(
        "{} of {} rows usable; {failed} block(s) failed and left out; written to {}\n",
        al.usable.iter().filter(|&&u| u).count(),
        al.len(),
        target.display()
    ));
    super::print_out(&text)?;
    Ok(ExitCode::SUCCESS)
}
