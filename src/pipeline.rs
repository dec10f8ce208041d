//! The whole job on one session: read, condition, align, select per DoF,
//! plan, and gather the report. The command line's `select` is a thin shell
//! over [`analyse`] and [`build_report`]; `run` and `batch` call
//! [`run_session`], which also writes the output folder.

use crate::align::{self, Aligned, Envelopes};
use crate::config::Config;
use crate::plan::plan;
use crate::report::{BlockAlignment, Flag, Plan, SiteInfo, SitesReport, SITES_FORMAT};
use crate::select::{select_dof, DofData, DofSelection, Step};
use crate::session::{Block, BlockSource, Session};
use crate::signal::{self, Conditioned, Verdict};
use crate::Result;
use std::path::{Path, PathBuf};

/// What a long step reports, for progress display.
#[derive(Debug, Clone, PartialEq)]
pub enum Progress {
    /// A named phase started (`conditioning`, `aligning`, `planning`, ...).
    Phase(String),
    /// A unit of selection work for a DoF finished.
    Select(String, Step),
}

/// One DoF's selection, or why it could not be made.
pub enum DofOutcome {
    /// The selection.
    Selected(Box<DofSelection>),
    /// The DoF could not be fitted (e.g. it never moves); the message says why.
    Failed {
        /// DoF id.
        dof: String,
        /// Why.
        error: String,
    },
}

/// Everything computed for one session.
pub struct Analysis {
    /// The session.
    pub session: Session,
    /// Task blocks.
    pub blocks: Vec<Block>,
    /// Where they came from.
    pub block_source: BlockSource,
    /// Conditioned envelopes and channel quality.
    pub conditioned: Conditioned,
    /// Aligned pairs.
    pub aligned: Aligned,
    /// Per-DoF selections, in manifest order.
    pub dofs: Vec<DofOutcome>,
}

/// The aligned data of DoF `d` as the selection needs them: position scaled
/// to [0, 1] over the DoF's declared range, velocity in range per second.
pub fn dof_data(session: &Session, aligned: &Aligned, cond: &Conditioned, d: usize) -> DofData {
    let dof = &session.manifest.dofs[d];
    let [lo, hi] = dof.range_deg;
    let w = hi - lo;
    let row = aligned.dofs.iter().position(|x| *x == dof.id).unwrap_or(d);
    let z: Vec<f64> = aligned
        .pos
        .row(row)
        .iter()
        .map(|p| ((p - lo) / w).clamp(0.0, 1.0))
        .collect();
    let y: Vec<f64> = aligned.vel.row(row).iter().map(|v| v / w).collect();
    let quality = |site: &str| {
        cond.quality
            .iter()
            .find(|q| q.site == site)
            .map_or(Verdict::Ok, |q| q.verdict)
    };
    DofData {
        dof: dof.id.clone(),
        positive: dof.positive.clone(),
        feature_rate: cond.rate_hz,
        sites: aligned.sites.clone(),
        envelopes: aligned.env.rows().into_iter().map(|r| r.to_vec()).collect(),
        z,
        y,
        usable: aligned.usable.clone(),
        excluded: aligned
            .sites
            .iter()
            .map(|s| quality(s) == Verdict::Bad)
            .collect(),
    }
}

/// Runs conditioning, alignment and the per-DoF selection.
pub fn analyse(
    session: Session,
    cfg: &Config,
    progress: &(dyn Fn(Progress) + Sync),
) -> Result<Analysis> {
    cfg.validate()
        .map_err(|(k, m)| crate::Error::Argument(format!("configuration {k}: {m}")))?;
    let (blocks, block_source) = crate::protocol::session_blocks(&session)?;
    progress(Progress::Phase("conditioning".into()));
    let conditioned = signal::condition(&session.emg, session.sites(), &blocks, &cfg.signal)?;
    progress(Progress::Phase("aligning".into()));
    let env = Envelopes::from(&conditioned);
    let aligned = align::align(&session, &env, &blocks, &cfg.align)?;
    let mut dofs = Vec::new();
    for d in 0..session.manifest.dofs.len() {
        let data = dof_data(&session, &aligned, &conditioned, d);
        let suspect: Vec<bool> = data
            .sites
            .iter()
            .map(|s| {
                conditioned
                    .quality
                    .iter()
                    .any(|q| q.site == *s && q.verdict == Verdict::Suspect)
            })
            .collect();
        progress(Progress::Phase(format!("selecting sites for {}", data.dof)));
        let id = data.dof.clone();
        let tick = |st: Step| progress(Progress::Select(id.clone(), st));
        match select_dof(&data, &cfg.select, &suspect, &tick) {
            Ok(sel) => dofs.push(DofOutcome::Selected(Box::new(sel))),
            Err(crate::Error::Analysis(msg)) => dofs.push(DofOutcome::Failed {
                dof: id,
                error: msg,
            }),
            Err(e) => return Err(e),
        }
    }
    Ok(Analysis {
        session,
        blocks,
        block_source,
        conditioned,
        aligned,
        dofs,
    })
}

impl Analysis {
    /// The DoFs that could be fitted.
    pub fn selections(&self) -> Vec<&DofSelection> {
        self.dofs
            .iter()
            .filter_map(|d| match d {
                DofOutcome::Selected(s) => Some(s.as_ref()),
                DofOutcome::Failed { .. } => None,
            })
            .collect()
    }

    /// Plans the socket's sites (an empty plan when no DoF could be fitted).
    pub fn plan(&self, cfg: &Config) -> Result<(Plan, Vec<Flag>)> {
        let sel = self.selections();
        if sel.is_empty() {
            return Ok((
                Plan {
                    budget: cfg.plan.budget,
                    sites: Vec::new(),
                    dofs: Vec::new(),
                },
                Vec::new(),
            ));
        }
        plan(&sel, &self.aligned.sites, &cfg.plan)
    }
}

/// Gathers `sites.json`'s content from an analysis and its plan.
pub fn build_report(a: &Analysis, cfg: &Config, plan: Plan, plan_flags: Vec<Flag>) -> SitesReport {
    let m = &a.session.manifest;
    let site_info: Vec<SiteInfo> = m
        .sites
        .iter()
        .map(|s| {
            let q = a.conditioned.quality.iter().find(|q| q.site == s.id);
            SiteInfo {
                site: s.id.clone(),
                angle_deg: s.angle_deg,
                distance_cm: s.distance_cm,
                quality: q.map_or("ok", |q| q.verdict.as_str()).into(),
                reasons: q.map_or_else(Vec::new, |q| {
                    q.reasons.iter().map(|r| r.message.clone()).collect()
                }),
            }
        })
        .collect();
    let mut flags = Vec::new();
    let selected_anywhere: Vec<&str> = a
        .selections()
        .iter()
        .flat_map(|s| s.result.selected.iter().map(String::as_str))
        .collect();
    for q in &a.conditioned.quality {
        let why = q
            .reasons
            .iter()
            .map(|r| r.message.as_str())
            .collect::<Vec<_>>()
            .join("; ");
        match q.verdict {
            Verdict::Bad => flags.push(Flag {
                what: "bad-signal".into(),
                at: q.site.clone(),
                why: format!("site {}: left out of selection: {why}", q.site),
            }),
            // a suspect site that was picked is flagged with its DoF below
            Verdict::Suspect if !selected_anywhere.contains(&q.site.as_str()) => flags.push(Flag {
                what: "suspect-signal".into(),
                at: q.site.clone(),
                why: format!("site {}: kept, but {why}", q.site),
            }),
            _ => {}
        }
    }
    let alignment: Vec<BlockAlignment> = a
        .aligned
        .blocks
        .iter()
        .enumerate()
        .map(|(i, b)| {
            let (lag, spread) = b
                .figures
                .as_ref()
                .map_or_else(|| row_lag(a, i), |f| (f.lag_median_s, f.lag_iqr_s));
            BlockAlignment {
                task: b.block.task.clone(),
                dof: b.block.dof_label().to_string(),
                start_s: b.block.start_s,
                end_s: b.block.end_s,
                lag_s: finite_or_zero(lag),
                lag_spread_s: finite_or_zero(spread),
                quality: b.quality.as_str().into(),
                reasons: b.reasons.clone(),
            }
        })
        .collect();
    for (b, al) in a.aligned.blocks.iter().zip(&alignment) {
        if b.quality != align::Verdict::Ok {
            flags.push(Flag {
                what: "alignment".into(),
                at: format!("{} {} {:.1}-{:.1} s", al.task, al.dof, al.start_s, al.end_s),
                why: format!(
                    "task block {} ({}) at {:.1}-{:.1} s: alignment {}{}{}",
                    al.task,
                    al.dof,
                    al.start_s,
                    al.end_s,
                    al.quality,
                    if al.reasons.is_empty() { "" } else { ": " },
                    al.reasons.join("; ")
                ),
            });
        }
    }
    let mut dofs = Vec::new();
    for d in &a.dofs {
        match d {
            DofOutcome::Selected(s) => {
                dofs.push(s.result.clone());
                flags.extend(s.flags.iter().cloned());
            }
            DofOutcome::Failed { dof, error } => flags.push(Flag {
                what: "no-site".into(),
                at: dof.clone(),
                why: format!("{dof}: could not be fitted: {error}"),
            }),
        }
    }
    flags.extend(plan_flags);
    SitesReport {
        format: SITES_FORMAT,
        tool: format!("mirrorsite {}", env!("CARGO_PKG_VERSION")),
        subject: m.subject.clone(),
        recorded: m.recorded.clone(),
        residual_side: m.residual_side.as_str().into(),
        protocol: m.protocol.clone(),
        seed: cfg.select.seed,
        site_info,
        dofs,
        plan,
        alignment,
        flags,
    }
}

/// Median and interquartile range of the lag (intact time on the EMG clock
/// minus EMG time) over the rows of block `i` (for blocks not warped, whose
/// lag is interpolated from their neighbours).
fn row_lag(a: &Analysis, i: usize) -> (f64, f64) {
    let off = a.session.manifest.intact_offset_s;
    let mut lags: Vec<f64> = (0..a.aligned.len())
        .filter(|&r| a.aligned.block_of[r] == Some(i))
        .map(|r| a.aligned.intact_time_s[r] + off - a.aligned.time_s[r])
        .filter(|v| v.is_finite())
        .collect();
    if lags.is_empty() {
        return (f64::NAN, f64::NAN);
    }
    lags.sort_by(f64::total_cmp);
    let q = |p: f64| lags[((lags.len() - 1) as f64 * p).round() as usize];
    (q(0.5), q(0.75) - q(0.25))
}

fn finite_or_zero(x: f64) -> f64 {
    if x.is_finite() {
        (x * 1e6).round() / 1e6
    } else {
        0.0
    }
}

/// How [`run_session`] writes its output folder.
#[derive(Debug, Clone, Copy, Default)]
pub struct RunOptions {
    /// Paper size of `sheet.pdf`.
    pub paper: crate::report::PageSize,
    /// Replace an existing output folder.
    pub force: bool,
}

/// What [`run_session`] made.
pub struct RunSummary {
    /// The content of `sites.json`.
    pub report: SitesReport,
    /// The output folder.
    pub out: PathBuf,
    /// The stamp written as `run.json`.
    pub stamp: crate::batch::Stamp,
}

/// Refuses an output folder inside the session folder, and an existing one
/// unless `force`.
pub fn check_output(session_dir: &Path, out: &Path, force: bool) -> Result<()> {
    crate::output::ensure_outside(out, session_dir)?;
    if out.exists() && !force {
        return Err(crate::Error::Argument(format!(
            "{} already exists; choose a new output folder or pass --force to replace it",
            out.display()
        )));
    }
    Ok(())
}

/// The whole job on one session folder, written into `out`: `sites.json`,
/// `sites.csv`, the sheet, figures, `aligned.csv`, `alignment.json` and the
/// stamp `run.json` ([`crate::batch::Stamp`]). The folder is written through
/// [`crate::output::Staging`], so it appears complete or not at all.
pub fn run_session(
    session_dir: &Path,
    out: &Path,
    cfg: &Config,
    opts: RunOptions,
    progress: &(dyn Fn(Progress) + Sync),
) -> Result<RunSummary> {
    check_output(session_dir, out, opts.force)?;
    // Staged first, so that an unwritable output fails before the analysis.
    let stage = crate::output::Staging::new(out, opts.force)?;
    // Hashed before reading: a file changed in between makes the stamp stale,
    // never wrongly current.
    let stamp = crate::batch::Stamp::compute(session_dir, cfg, opts.paper)?;
    let session = crate::session::read(session_dir)?;
    let a = analyse(session, cfg, progress)?;
    progress(Progress::Phase("planning".into()));
    let (plan, plan_flags) = a.plan(cfg)?;
    let report = build_report(&a, cfg, plan, plan_flags);
    progress(Progress::Phase("writing the report".into()));
    crate::report::write_all(&report, stage.path(), opts.paper)?;
    crate::align::output::write_all(stage.path(), &a.aligned, &cfg.align)?;
    stamp.write(stage.path())?;
    let out = stage.commit()?;
    Ok(RunSummary { report, out, stamp })
}
