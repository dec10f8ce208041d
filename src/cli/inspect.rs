//! `mirrorsite inspect`: read, check and summarise a session folder.

use mirrorsite::session::{self, Summary};
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
}

/// Runs the command.
pub fn run(args: Args) -> mirrorsite::Result<ExitCode> {
    let s = session::read(&args.session)?;
    let (blocks, source) = mirrorsite::protocol::session_blocks(&s)?;
    let source = match source {
        session::BlockSource::Events => "events",
        session::BlockSource::Protocol => "protocol",
    };
    let summary = Summary::new(&s, blocks, source);
    if args.json {
        let text = serde_json::to_string_pretty(&summary)
            .map_err(|e| mirrorsite::Error::Analysis(e.to_string()))?;
        super::print_out(&(text + "\n"))?;
    } else {
        super::print_out(&summary.to_text())?;
    }
    Ok(ExitCode::SUCCESS)
}
