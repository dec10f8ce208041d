//! `mirrorsite protocol`: list, check, expand and play protocols.

use mirrorsite::protocol::play::{self, terminal, EventFile, EventLog, PlayOptions};
use mirrorsite::protocol::{self, Protocol, SHIPPED};
use mirrorsite::{Error, InputError, InputErrorKind};
use std::path::{Path, PathBuf};
use std::process::ExitCode;

/// Arguments of `mirrorsite protocol`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// What to do with protocols.
    #[command(subcommand)]
    pub command: Sub,
}

/// The protocol subcommands. A protocol is named by a shipped id
/// (`hand-basic`, `hand-wrist-full`) or by the path of a TOML file.
#[derive(Debug, clap::Subcommand)]
pub enum Sub {
    /// List the shipped protocols with their length and DoFs.
    List,
    /// Validate protocol files: schema, coverage, rests against fatigue, length.
    Check {
        /// Protocol files or shipped ids.
        #[arg(required = true)]
        files: Vec<String>,
    },
    /// Write the expanded cue timeline as CSV.
    Cues {
        /// Protocol file or shipped id.
        file: String,
        /// Time of the protocol's start, s (e.g. the session's `protocol_start_s`).
        #[arg(long, default_value_t = 0.0)]
        start: f64,
        /// Output CSV file, or `-` for standard output.
        #[arg(long)]
        out: PathBuf,
        /// Replace the output file if it exists.
        #[arg(long)]
        force: bool,
    },
    /// Play the protocol live in the terminal and write events.csv.
    Play {
        /// Protocol file or shipped id.
        file: String,
        /// The events file to write (e.g. `<session>/events.csv`).
        #[arg(long)]
        out: PathBuf,
        /// EMG-clock time of the first cue, s.
        #[arg(long, default_value_t = 0.0)]
        start: f64,
        /// Countdown before the first cue, s.
        #[arg(long, default_value_t = 5.0)]
        lead_in: f64,
        /// Draw with `#` instead of block characters.
        #[arg(long)]
        ascii: bool,
        /// Replace the output file if it exists.
        #[arg(long)]
        force: bool,
    },
}

fn mmss(s: f64) -> String {
    let s = s.max(0.0).round() as u64;
    format!("{}:{:02}", s / 60, s % 60)
}

fn load(name: &str) -> mirrorsite::Result<Protocol> {
    protocol::resolve(name, Path::new("."))
}

fn summary(p: &Protocol) -> String {
    format!(
        "{}  {}  {} tasks  DoFs: {}  \"{}\"",
        p.id,
        mmss(p.length_s()),
        p.tasks.len(),
        p.dofs.join(", "),
        p.title
    )
}

/// Runs the command.
pub fn run(args: Args) -> mirrorsite::Result<ExitCode> {
    match args.command {
        Sub::List => {
            for s in SHIPPED {
                let p = protocol::parse(s.text, Path::new(s.file))?;
                println!("{}", summary(&p));
            }
            Ok(ExitCode::SUCCESS)
        }
        Sub::Check { files } => check(&files),
        Sub::Cues {
            file,
            start,
            out,
            force,
        } => cues(&file, start, &out, force),
        Sub::Play {
            file,
            out,
            start,
            lead_in,
            ascii,
            force,
        } => play_cmd(&file, &out, start, lead_in, ascii, force),
    }
}

fn check(files: &[String]) -> mirrorsite::Result<ExitCode> {
    let mut bad = false;
    for name in files {
        let (text, path) = match SHIPPED.iter().find(|s| s.id == name) {
            Some(s) => (s.text.to_string(), PathBuf::from(s.file)),
            None => {
                let path = PathBuf::from(name);
                match std::fs::read_to_string(&path) {
                    Ok(t) => (t, path),
                    Err(e) => {
                        bad = true;
                        let err = InputError::new(
                            &path,
                            InputErrorKind::Unreadable,
                            format!("cannot read: {e}"),
                        );
                        eprintln!("error: {err}");
                        continue;
                    }
                }
            }
        };
        let problems = protocol::check_source(&text, &path);
        if problems.is_empty() {
            let p = protocol::parse(&text, &path)?;
            println!("ok: {}  ({})", summary(&p), path.display());
        } else {
            bad = true;
            for e in &problems {
                eprintln!("error: {e}");
            }
        }
    }
    Ok(if bad {
        ExitCode::from(2)
    } else {
        ExitCode::SUCCESS
    })
}

fn refuse_existing(out: &Path, force: bool) -> mirrorsite::Result<()> {
    if !force && out.exists() {
        return Err(Error::Argument(format!(
            "{} exists; choose another --out or pass --force to replace it",
            out.display()
        )));
    }
    Ok(())
}

fn cues(file: &str, start: f64, out: &Path, force: bool) -> mirrorsite::Result<ExitCode> {
    if !start.is_finite() {
        return Err(Error::Argument("--start must be a finite number".into()));
    }
    let p = load(file)?;
    let cues = p.timeline(start);
    if out == Path::new("-") {
        let stdout = std::io::stdout();
        protocol::write_cues_csv(&cues, stdout.lock()).map_err(|e| Error::io("-", e))?;
        return Ok(ExitCode::SUCCESS);
    }
    refuse_existing(out, force)?;
    // Write beside the target, then rename, so a failure leaves no half file.
    let mut bytes = Vec::new();
    protocol::write_cues_csv(&cues, &mut bytes).map_err(|e| Error::io(out, e))?;
    mirrorsite::output::write_file_atomic(out, &bytes)?;
    eprintln!(
        "{} cues of {} ({}) written to {}",
        cues.len(),
        p.id,
        mmss(p.length_s()),
        out.display()
    );
    Ok(ExitCode::SUCCESS)
}

fn play_cmd(
    file: &str,
    out: &Path,
    start: f64,
    lead_in: f64,
    ascii: bool,
    force: bool,
) -> mirrorsite::Result<ExitCode> {
    if !start.is_finite() || !lead_in.is_finite() || lead_in < 0.0 {
        return Err(Error::Argument(
            "--start must be a number and --lead-in a number of seconds >= 0".into(),
        ));
    }
    let p = load(file)?;
    let (events, sink) = EventFile::create(out, force)?;
    let log = EventLog::new(sink).map_err(|e| Error::io(events.partial_path(), e))?;
    let opts = PlayOptions {
        start_s: start,
        lead_in_s: lead_in,
        ..PlayOptions::default()
    };
    let result = {
        let clock = terminal::WallClock::new();
        let mut keys = terminal::TerminalKeys;
        match terminal::TerminalScreen::new(ascii) {
            Ok(mut screen) => play::play(&p, &clock, &mut keys, &mut screen, log, opts),
            Err(e) => {
                drop(log);
                let _ = std::fs::remove_file(events.partial_path());
                return Err(Error::Argument(format!(
                    "play needs an interactive terminal: {e}"
                )));
            }
        }
    };
    // Whatever happened, keep what was written.
    let path = events.commit()?;
    let outcome = result?;
    eprintln!(
        "{} rows written to {} ({} pauses, {} marked bad, {} skips)",
        outcome.rows.len(),
        path.display(),
        outcome.pauses,
        outcome.marked,
        outcome.skips
    );
    match outcome.aborted_at_s {
        Some(t) => {
            eprintln!(
                "aborted at {t:.1} s on the EMG clock; the rows cover what was played up to then"
            );
            Ok(ExitCode::from(3))
        }
        None => Ok(ExitCode::SUCCESS),
    }
}
