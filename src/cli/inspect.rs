//! `mirrorsite inspect`: read, check and summarise a session folder, with
//! the channel quality of every site.

use mirrorsite::config::Config;
use mirrorsite::session::{self, Summary};
use mirrorsite::signal::{self, Conditioned};
use serde_json::{json, Value};
use std::path::PathBuf;
use std::process::ExitCode;

/// Arguments of `mirrorsite inspect`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The session folder.
    pub session: PathBuf,
    /// Print one JSON object on stdout instead of text.
    #[arg(long)]
    pub json: bool,
    /// Analysis configuration file (defaults for every key it leaves out).
    #[arg(long, value_name = "FILE")]
    pub config: Option<PathBuf>,
}

/// Runs the command.
pub fn run(args: Args) -> mirrorsite::Result<ExitCode> {
    let cfg = Config::load_or_default(args.config.as_deref())?;
    let s = session::read(&args.session)?;
    let (blocks, source) = mirrorsite::protocol::session_blocks(&s)?;
    let source = match source {
        session::BlockSource::Events => "events",
        session::BlockSource::Protocol => "protocol",
    };
    let cond = signal::condition(&s.emg, s.sites(), &blocks, &cfg.signal)?;
    let summary = Summary::new(&s, blocks, source);
    if args.json {
        let mut v = serde_json::to_value(&summary)
            .map_err(|e| mirrorsite::Error::Analysis(e.to_string()))?;
        add_quality(&mut v, &cond);
        let text = serde_json::to_string_pretty(&v)
            .map_err(|e| mirrorsite::Error::Analysis(e.to_string()))?;
        super::print_out(&(text + "\n"))?;
    } else {
        super::print_out(&(summary.to_text() + &quality_text(&cond)))?;
    }
    Ok(ExitCode::SUCCESS)
}

/// Adds `quality`, `reasons` and `figures` to every site of the summary and
/// the mains frequency notched at the top level.
fn add_quality(v: &mut Value, cond: &Conditioned) {
    if let Some(sites) = v.get_mut("sites").and_then(Value::as_array_mut) {
        for site in sites {
            let id = site
                .get("site")
                .and_then(Value::as_str)
                .unwrap_or("")
                .to_string();
            if let Some(q) = cond.quality.iter().find(|q| q.site == id) {
                site["quality"] = json!(q.verdict);
                site["reasons"] = json!(q.reasons);
                site["figures"] = json!(q.figures);
            }
        }
    }
    v["mains_hz"] = json!(cond.mains_hz);
}

fn quality_text(cond: &Conditioned) -> String {
    use std::fmt::Write;
    let mut o = String::new();
    let mains = cond
        .mains_hz
        .map_or("none notched".to_string(), |f| format!("{f} Hz notched"));
    let _ = writeln!(o, "\nquality   (mains: {mains})");
    for q in &cond.quality {
        let _ = writeln!(o, "  {:<8}{}", q.site, q.verdict.as_str());
        for r in &q.reasons {
            let _ = writeln!(o, "            {}: {}", r.code, r.message);
        }
    }
    o
}
