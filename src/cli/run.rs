//! `mirrorsite run` and `mirrorsite select`: the whole job on one session.

use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};
use mirrorsite::config::Config;
use mirrorsite::output::Staging;
use mirrorsite::pipeline::{
    analyse, build_report, check_output, run_session, Analysis, Progress, RunOptions,
};
use mirrorsite::report::{self, SitesReport};
use mirrorsite::select::Step;
use std::path::{Path, PathBuf};
use std::process::ExitCode;

/// Arguments shared by `run` and `select`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The session folder (only read, never written).
    pub session: PathBuf,
    /// The new output folder.
    #[arg(long)]
    pub out: PathBuf,
    /// Configuration, budget, seed and paper.
    #[command(flatten)]
    pub analysis: super::AnalysisArgs,
    /// Replace the output folder if it exists.
    #[arg(long)]
    pub force: bool,
    /// No progress bar.
    #[arg(long, short)]
    pub quiet: bool,
}

fn progress_bar(quiet: bool, cfg: &Config, n_dofs: usize) -> ProgressBar {
    // conditioning, aligning; per DoF its phase, stages, resamples, comparison;
    // planning, writing
    let per_dof = 1 + cfg.select.stages + cfg.select.resamples + 1;
    let total = 2 + n_dofs * per_dof + 2;
    let pb = if quiet {
        ProgressBar::hidden()
    } else {
        ProgressBar::with_draw_target(Some(total as u64), ProgressDrawTarget::stderr())
    };
    pb.set_style(
        ProgressStyle::with_template("{elapsed:>4} [{bar:30}] {pos}/{len} {msg}")
            .unwrap_or_else(|_| ProgressStyle::default_bar())
            .progress_chars("=> "),
    );
    pb
}

fn ticker(pb: &ProgressBar) -> impl Fn(Progress) + Sync + '_ {
    move |p: Progress| match p {
        Progress::Phase(m) => {
            pb.set_message(m);
            pb.inc(1);
        }
        Progress::Select(dof, st) => {
            let what = match st {
                Step::Stage(k) => format!("{dof}: stage {k} tuned"),
                Step::Resample => format!("{dof}: resampling"),
                Step::Compare => format!("{dof}: alternates and baselines"),
            };
            pb.set_message(what);
            pb.inc(1);
        }
    }
}

fn analysis(args: &Args, cfg: &Config) -> mirrorsite::Result<(Analysis, ProgressBar)> {
    let session = mirrorsite::session::read(&args.session)?;
    check_output(&args.session, &args.out, args.force)?;
    let pb = progress_bar(args.quiet, cfg, session.manifest.dofs.len());
    let a = analyse(session, cfg, &ticker(&pb))?;
    Ok((a, pb))
}

/// `mirrorsite run`: everything, into a new output folder.
pub fn run(args: Args) -> mirrorsite::Result<ExitCode> {
    let cfg = args.analysis.config()?;
    // The manifest alone gives the bar its length; a bad one is reported by
    // the run itself.
    let n_dofs = mirrorsite::session::read_manifest(&args.session).map_or(0, |m| m.dofs.len());
    let pb = progress_bar(args.quiet, &cfg, n_dofs);
    let opts = RunOptions {
        paper: args.analysis.paper,
        force: args.force,
    };
    let sum = run_session(&args.session, &args.out, &cfg, opts, &ticker(&pb));
    pb.finish_and_clear();
    let sum = sum?;
    super::print_out(&summary(&sum.report, &sum.out, true))?;
    Ok(ExitCode::SUCCESS)
}

/// `mirrorsite select`: the per-DoF selection, written as sites.json and sites.csv.
pub fn select(args: Args) -> mirrorsite::Result<ExitCode> {
    let cfg = args.analysis.config()?;
    let (a, pb) = analysis(&args, &cfg)?;
    let plan = mirrorsite::report::Plan {
        budget: cfg.plan.budget,
        sites: Vec::new(),
        dofs: Vec::new(),
    };
    let rep = build_report(&a, &cfg, plan, Vec::new());
    let stage = Staging::new(&args.out, args.force)?;
    report::write_sites_json(&rep, &stage.path().join("sites.json"))?;
    report::write_sites_csv(&rep, &stage.path().join("sites.csv"))?;
    let target = stage.commit()?;
    pb.finish_and_clear();
    super::print_out(&summary(&rep, &target, false))?;
    Ok(ExitCode::SUCCESS)
}

/// The short summary printed at the end.
fn summary(r: &SitesReport, out: &Path, with_plan: bool) -> String {
    let mut s = String::new();
    s.push_str(&format!(
        "subject {}  recorded {}  {} side\n",
        r.subject, r.recorded, r.residual_side
    ));
    for d in &r.dofs {
        let picks: Vec<String> = d
            .sites
            .iter()
            .filter(|x| x.selected)
            .map(|x| format!("{} ({}, {:.0}%)", x.site, x.confidence, 100.0 * x.frequency))
            .collect();
        let pos = d
            .baselines
            .iter()
            .find(|b| b.name == "position")
            .map_or(f64::NAN, |b| b.cv.r2);
        s.push_str(&format!(
            "  {:<10} {}   CV R² {:.2} (position only {:.2})\n",
            d.dof,
            if picks.is_empty() {
                "no site".to_string()
            } else {
                picks.join(", ")
            },
            d.cv.r2,
            pos
        ));
    }
    if with_plan {
        let sites: Vec<&str> = r.plan.sites.iter().map(|p| p.site.as_str()).collect();
        s.push_str(&format!(
            "plan ({} channels): {}\n",
            r.plan.budget,
            sites.join(" ")
        ));
        for d in &r.plan.dofs {
            s.push_str(&format!(
                "  {:<10} R² {:.2} of its best {:.2}\n",
                d.dof, d.r2, d.best_r2
            ));
        }
    }
    if r.flags.is_empty() {
        s.push_str("no flags\n");
    } else {
        s.push_str(&format!(
            "{} flag(s) for clinician review:\n",
            r.flags.len()
        ));
        for f in &r.flags {
            s.push_str(&format!("  - {}\n", f.why));
        }
    }
    let main = if with_plan { "sheet.pdf" } else { "sites.json" };
    s.push_str(&format!("written to {} ({})\n", out.display(), main));
    s
}
