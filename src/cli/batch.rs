//! `mirrorsite batch`: every session folder below a folder, in parallel.

use mirrorsite::batch::{self, BatchOptions, Outcome, Status};
use mirrorsite::pipeline::RunOptions;
use std::io::Write;
use std::path::PathBuf;
use std::process::ExitCode;
use std::sync::atomic::{AtomicUsize, Ordering};

/// Arguments of `batch`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The folder to search for session folders (each holding a session.toml).
    pub folder: PathBuf,
    /// The output folder: one folder per session at its relative path, plus
    /// batch-summary.csv and batch-summary.html.
    #[arg(long)]
    pub out: PathBuf,
    /// Sessions run at the same time (default: half the cores, at least 1).
    #[arg(long, short)]
    pub jobs: Option<usize>,
    /// Configuration, budget, seed and paper (for every session).
    #[command(flatten)]
    pub analysis: super::AnalysisArgs,
    /// Redo sessions whose outputs are complete and current.
    #[arg(long)]
    pub force: bool,
    /// No line per finished session.
    #[arg(long, short)]
    pub quiet: bool,
}

fn line(o: &Outcome, k: usize, n: usize) -> String {
    let what = match (&o.status, &o.report) {
        (Status::Failed(e), _) => format!("failed: {e}"),
        (st, Some(r)) => {
            let sites: Vec<&str> = r.plan.sites.iter().map(|p| p.site.as_str()).collect();
            format!(
                "{} (plan {}, {} flag(s))",
                st.as_str(),
                if sites.is_empty() {
                    "empty".into()
                } else {
                    sites.join(" ")
                },
                r.flags.len()
            )
        }
        (st, None) => st.as_str().into(),
    };
    format!("[{k}/{n}] {} {:.1} s: {what}", o.rel, o.seconds)
}

/// Runs the batch; exit status 1 when any session failed.
pub fn run(args: Args) -> mirrorsite::Result<ExitCode> {
    let cfg = args.analysis.config()?;
    if !args.folder.is_dir() {
        return Err(mirrorsite::Error::Argument(format!(
            "{} is not a folder",
            args.folder.display()
        )));
    }
    if args.jobs == Some(0) {
        return Err(mirrorsite::Error::Argument(
            "--jobs must be at least 1".into(),
        ));
    }
    std::fs::create_dir_all(&args.out).map_err(|e| mirrorsite::Error::io(&args.out, e))?;
    let sessions = batch::find_sessions(&args.folder, Some(&args.out))?;
    if sessions.is_empty() {
        return Err(mirrorsite::Error::Argument(format!(
            "no session folder (holding a session.toml) below {}",
            args.folder.display()
        )));
    }
    let opts = BatchOptions {
        jobs: args.jobs.unwrap_or_else(batch::default_jobs),
        force: args.force,
        run: RunOptions {
            paper: args.analysis.paper,
            force: true,
        },
    };
    let n = sessions.len();
    let finished = AtomicUsize::new(0);
    let quiet = args.quiet;
    let report = |o: &Outcome| {
        let k = finished.fetch_add(1, Ordering::SeqCst) + 1;
        if !quiet {
            let _ = writeln!(std::io::stderr(), "{}", line(o, k, n));
        }
    };
    let outcomes = batch::run_batch(&sessions, &args.out, &cfg, &opts, &report);
    batch::summary::write(&args.out, &outcomes)?;
    let count = |s: &str| outcomes.iter().filter(|o| o.status.as_str() == s).count();
    let failed = count("failed");
    super::print_out(&format!(
        "{n} sessions: {} done, {} skipped as current, {failed} failed\nsummary: {}\n",
        count("done"),
        count("skipped-current"),
        args.out.join("batch-summary.html").display()
    ))?;
    Ok(if failed > 0 {
        ExitCode::from(1)
    } else {
        ExitCode::SUCCESS
    })
}
