//! Many sessions at once: every session folder below a folder, each run
//! into its own output folder, and a summary table across them.
//!
//! - [`find_sessions`]: every folder holding a `session.toml` below the input
//!   folder, in sorted order; symbolic links to folders are followed once
//!   (a folder already seen, e.g. through a link loop, is skipped); the
//!   search does not descend into a session folder.
//! - [`run_batch`]: runs them with at most `jobs` sessions at a time. Each
//!   session goes through [`crate::pipeline::run_session`] into
//!   `<out>/<its path relative to the input folder>`. A session whose output
//!   holds a stamp ([`Stamp`], `run.json`) equal to the one computed now is
//!   skipped as current unless `force`. A failed session (bad input, an
//!   analysis error, even a panic) is recorded with its message and the
//!   others go on.
//! - [`summary`]: `batch-summary.csv` and `batch-summary.html` at the top of
//!   the output folder.
//!
//! Parallelism: `jobs` worker threads each take the next session from a
//! shared queue; the parallel parts inside one session (folds and resamples)
//! run on rayon's one global pool, so all sessions together share the
//! machine's cores instead of each starting its own pool. Memory is bounded by
//! `jobs` sessions in flight: a worker drops one session's data before it
//! takes the next.

pub mod stamp;
pub mod summary;

pub use stamp::{Stamp, STAMP_FILE};

use crate::config::Config;
use crate::error::{Error, Result};
use crate::pipeline::{run_session, RunOptions};
use crate::report::SitesReport;
use std::collections::BTreeSet;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicUsize, Ordering};
use std::sync::Mutex;
use std::time::Instant;

/// One session folder found below the input folder.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Found {
    /// The session folder.
    pub dir: PathBuf,
    /// Its path relative to the input folder (`/`-separated; the input
    /// folder's own name when the input folder is itself a session).
    pub rel: String,
}

/// Every session folder below `root`, sorted by relative path. `skip` (e.g.
/// the output folder, when it lies inside `root`) is not searched.
pub fn find_sessions(root: &Path, skip: Option<&Path>) -> Result<Vec<Found>> {
    let root_c = root.canonicalize().map_err(|e| Error::io(root, e))?;
    let skip_c = skip.and_then(|s| s.canonicalize().ok());
    let mut seen = BTreeSet::new();
    let mut found = Vec::new();
    let mut todo = vec![(root.to_path_buf(), Vec::<String>::new())];
    while let Some((dir, rel)) = todo.pop() {
        let Ok(canon) = dir.canonicalize() else {
            continue; // a dangling link
        };
        if Some(&canon) == skip_c.as_ref() || !seen.insert(canon) {
            continue;
        }
        if dir.join("session.toml").is_file() {
            let rel = if rel.is_empty() {
                root_c
                    .file_name()
                    .map_or_else(|| "session".into(), |n| n.to_string_lossy().into_owned())
            } else {
                rel.join("/")
            };
            found.push(Found { dir, rel });
            continue;
        }
        let rd = std::fs::read_dir(&dir).map_err(|e| Error::io(&dir, e))?;
        for e in rd {
            let e = e.map_err(|e| Error::io(&dir, e))?;
            let name = e.file_name().to_string_lossy().into_owned();
            if name.starts_with('.') {
                continue; // hidden, including half-written outputs
            }
            if e.path().is_dir() {
                let mut r = rel.clone();
                r.push(name);
                todo.push((e.path(), r));
            }
        }
    }
    found.sort_by(|a, b| a.rel.cmp(&b.rel));
    Ok(found)
}

/// How a session ended in a batch.
#[derive(Debug, Clone, PartialEq)]
pub enum Status {
    /// Run now.
    Done,
    /// Its output was complete and current; not run again.
    Current,
    /// It failed; the message says why.
    Failed(String),
}

impl Status {
    /// `done`, `skipped-current` or `failed`.
    pub fn as_str(&self) -> &'static str {
        match self {
            Status::Done => "done",
            Status::Current => "skipped-current",
            Status::Failed(_) => "failed",
        }
    }
}

/// One session's line in the batch summary.
#[derive(Debug, Clone)]
pub struct Outcome {
    /// Relative path of the session (and of its output under `--out`).
    pub rel: String,
    /// The output folder.
    pub out: PathBuf,
    /// What happened.
    pub status: Status,
    /// The report, for done and current sessions.
    pub report: Option<SitesReport>,
    /// Wall time spent on this session, in seconds.
    pub seconds: f64,
}

/// Settings of a batch.
#[derive(Debug, Clone)]
pub struct BatchOptions {
    /// Sessions run at the same time (at least 1).
    pub jobs: usize,
    /// Redo sessions whose outputs are current.
    pub force: bool,
    /// How each session is written.
    pub run: RunOptions,
}

/// The default number of concurrent sessions: half the available cores, at
/// least one (the other half serves the parallel parts inside each session).
pub fn default_jobs() -> usize {
    let cores = std::thread::available_parallelism().map_or(1, |n| n.get());
    (cores / 2).max(1)
}

/// Whether the output in `out` is complete and matches `now`.
pub fn is_current(out: &Path, now: &Stamp) -> bool {
    let complete = [
        "sites.json",
        "sites.csv",
        "sheet.pdf",
        "sheet.html",
        "aligned.csv",
    ]
    .iter()
    .all(|f| out.join(f).is_file());
    complete && Stamp::read(out).as_ref() == Some(now)
}

fn read_report(out: &Path) -> Option<SitesReport> {
    let text = std::fs::read_to_string(out.join("sites.json")).ok()?;
    serde_json::from_str(&text).ok()
}

fn panic_message(p: &(dyn std::any::Any + Send)) -> String {
    if let Some(s) = p.downcast_ref::<&str>() {
        (*s).to_string()
    } else if let Some(s) = p.downcast_ref::<String>() {
        s.clone()
    } else {
        "unknown panic".into()
    }
}

/// Runs or skips one session.
fn one(s: &Found, out_root: &Path, cfg: &Config, opts: &BatchOptions) -> Outcome {
    let t = Instant::now();
    let out = out_root.join(&s.rel);
    let run = || -> Result<(Status, Option<SitesReport>)> {
        if !opts.force && out.exists() {
            let now = Stamp::compute(&s.dir, cfg, opts.run.paper)?;
            if is_current(&out, &now) {
                if let Some(r) = read_report(&out) {
                    return Ok((Status::Current, Some(r)));
                }
            }
        }
        // An existing output that is stale or incomplete is replaced.
        let ro = RunOptions {
            force: true,
            ..opts.run
        };
        let sum = run_session(&s.dir, &out, cfg, ro, &|_| {})?;
        Ok((Status::Done, Some(sum.report)))
    };
    let (status, report) = match std::panic::catch_unwind(std::panic::AssertUnwindSafe(run)) {
        Ok(Ok(x)) => x,
        Ok(Err(e)) => (Status::Failed(e.to_string()), None),
        Err(p) => (
            Status::Failed(format!(
                "internal error (panic): {}",
                panic_message(p.as_ref())
            )),
            None,
        ),
    };
    Outcome {
        rel: s.rel.clone(),
        out,
        status,
        report,
        seconds: t.elapsed().as_secs_f64(),
    }
}

/// Runs every session in `sessions` into `out_root`, at most `opts.jobs` at a
/// time; `done` is called once per finished session (from a worker thread).
/// Outcomes come back in the order of `sessions`.
pub fn run_batch(
    sessions: &[Found],
    out_root: &Path,
    cfg: &Config,
    opts: &BatchOptions,
    done: &(dyn Fn(&Outcome) + Sync),
) -> Vec<Outcome> {
    let next = AtomicUsize::new(0);
    let results: Mutex<Vec<Option<Outcome>>> = Mutex::new(vec![None; sessions.len()]);
    let workers = opts.jobs.max(1).min(sessions.len().max(1));
    std::thread::scope(|scope| {
        for _ in 0..workers {
            scope.spawn(|| loop {
                let i = next.fetch_add(1, Ordering::SeqCst);
                let Some(s) = sessions.get(i) else { break };
                let o = one(s, out_root, cfg, opts);
                done(&o);
                if let Ok(mut r) = results.lock() {
                    r[i] = Some(o);
                }
            });
        }
    });
    results
        .into_inner()
        .unwrap_or_default()
        .into_iter()
        .zip(sessions)
        .map(|(o, s)| {
            o.unwrap_or_else(|| Outcome {
                rel: s.rel.clone(),
                out: out_root.join(&s.rel),
                status: Status::Failed("not run".into()),
                report: None,
                seconds: 0.0,
            })
        })
        .collect()
}
