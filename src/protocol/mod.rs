//! Protocols: scripted bilateral tasks, their cue timeline and a live cue
//! prompter (DESIGN.md section 4).
//!
//! A protocol is a TOML file (schema in `protocols/README.md`): an id, a
//! title, a version, the DoFs it exercises and an ordered list of tasks. Each
//! task has a [`Pattern`]:
//!
//! - **paced**: `repetitions` cycles between two positions at a fixed period
//!   (or metronome rate); each cycle is two cues of half a period each, toward
//!   the second position and back toward the first;
//! - **hold-release**: for each position in turn, move there actively
//!   (`move_s`), hold (`hold_s`), then relax so the joint returns to rest
//!   passively (`relax_s`), the whole list `repetitions` times;
//! - **free**: unscripted movement of one or several DoFs for `duration_s`;
//! - **rest**: both hands relaxed for `duration_s`.
//!
//! [`Protocol::timeline`] expands the tasks into cues, [`Protocol::blocks`]
//! gives one task block per task, [`check_source`] validates a file (schema,
//! coverage, fatigue rules, see [`rules`]), [`session_blocks`] gives a
//! session's task blocks, and [`play`] runs the live prompter.

pub mod rules;
mod schema;
mod session;
mod timeline;

pub mod play;

pub use rules::{MAX_ACTIVE_STRETCH_S, MAX_HOLD_S, MAX_TOTAL_S, MIN_PERIOD_S, MIN_REST_RATIO};
pub use schema::{check_source, parse};
pub use session::{fill_words, is_movement_block, session_blocks};
pub use timeline::{write_cues_csv, Cue, Phase};

use crate::error::{InputError, InputErrorKind};
use crate::Result;
use std::path::{Path, PathBuf};

/// What a task asks the wearer to do.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Deserialize, serde::Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Pattern {
    /// Paced cycles between two positions.
    Paced,
    /// Move to a set position, hold, relax (passive return), for each position.
    HoldRelease,
    /// Unscripted movement of one or several DoFs.
    Free,
    /// Both hands relaxed.
    Rest,
}

impl Pattern {
    /// The name used in protocol files and as the task label of blocks:
    /// `paced`, `hold-release`, `free`, `rest`.
    pub fn as_str(self) -> &'static str {
        match self {
            Pattern::Paced => "paced",
            Pattern::HoldRelease => "hold-release",
            Pattern::Free => "free",
            Pattern::Rest => "rest",
        }
    }

    /// True for the patterns with muscle activity (all but rest).
    pub fn is_active(self) -> bool {
        self != Pattern::Rest
    }
}

/// One validated task.
#[derive(Debug, Clone, PartialEq)]
pub struct Task {
    /// Task id, unique in the protocol.
    pub id: String,
    /// What the wearer does.
    pub pattern: Pattern,
    /// The DoFs exercised (one for paced and hold-release, one or more for
    /// free, none for rest).
    pub dofs: Vec<String>,
    /// The instruction shown to the wearer, in plain words.
    pub words: String,
    /// Paced: the two ends of a cycle; hold-release: the positions held, in order.
    pub positions: Vec<String>,
    /// Paced: cycles; hold-release: passes through `positions`; 1 otherwise.
    pub repetitions: usize,
    /// Paced: the cycle period, s (given directly or as `120 / rate_bpm`).
    pub period_s: f64,
    /// Hold-release: time to move to the position, s.
    pub move_s: f64,
    /// Hold-release: time to hold the position, s.
    pub hold_s: f64,
    /// Hold-release: time to relax and let the joint return to rest, s.
    pub relax_s: f64,
    /// Free and rest: duration, s.
    pub duration_s: f64,
    /// 1-based line of the task's `[[task]]` header in its file, when parsed from one.
    pub line: Option<usize>,
}

impl Task {
    /// The task's length, s.
    pub fn length_s(&self) -> f64 {
        match self.pattern {
            Pattern::Paced => self.repetitions as f64 * self.period_s,
            Pattern::HoldRelease => {
                (self.repetitions * self.positions.len()) as f64
                    * (self.move_s + self.hold_s + self.relax_s)
            }
            Pattern::Free | Pattern::Rest => self.duration_s,
        }
    }

    /// The DoF of a block of this task: the DoF when there is exactly one,
    /// `None` (`*`) for several or none.
    pub fn block_dof(&self) -> Option<String> {
        match self.dofs.as_slice() {
            [one] => Some(one.clone()),
            _ => None,
        }
    }

    /// The DoF label as written in CSV files (`*` for several or none).
    pub fn dof_label(&self) -> String {
        self.block_dof().unwrap_or_else(|| "*".to_string())
    }
}

/// A validated protocol.
#[derive(Debug, Clone, PartialEq)]
pub struct Protocol {
    /// The file it was read from (for shipped protocols `protocols/<id>.toml`).
    pub file: PathBuf,
    /// Protocol id, the name a session's `protocol` key uses.
    pub id: String,
    /// Title.
    pub title: String,
    /// Version of this protocol, free text (e.g. `1.0`).
    pub version: String,
    /// The DoFs it exercises.
    pub dofs: Vec<String>,
    /// The tasks in order.
    pub tasks: Vec<Task>,
}

impl Protocol {
    /// Total nominal length, s.
    pub fn length_s(&self) -> f64 {
        self.tasks.iter().map(Task::length_s).sum()
    }

    /// Reads and validates a protocol file.
    pub fn from_file(path: &Path) -> Result<Protocol> {
        let text = std::fs::read_to_string(path).map_err(|e| {
            InputError::new(
                path,
                InputErrorKind::Unreadable,
                format!("cannot read: {e}"),
            )
        })?;
        parse(&text, path)
    }

    /// The task with this id.
    pub fn task(&self, id: &str) -> Option<&Task> {
        self.tasks.iter().find(|t| t.id == id)
    }
}

/// A protocol shipped with the tool (embedded in the binary; the same files
/// live in the project's `protocols/` folder).
#[derive(Debug, Clone, Copy)]
pub struct Shipped {
    /// Protocol id.
    pub id: &'static str,
    /// The file name inside `protocols/`.
    pub file: &'static str,
    /// The TOML text.
    pub text: &'static str,
}

/// The shipped protocols.
pub const SHIPPED: &[Shipped] = &[
    Shipped {
        id: "hand-basic",
        file: "protocols/hand-basic.toml",
        text: include_str!("../../protocols/hand-basic.toml"),
    },
    Shipped {
        id: "hand-wrist-full",
        file: "protocols/hand-wrist-full.toml",
        text: include_str!("../../protocols/hand-wrist-full.toml"),
    },
];

/// The shipped protocol with this id, parsed.
pub fn shipped(id: &str) -> Option<Result<Protocol>> {
    SHIPPED
        .iter()
        .find(|s| s.id == id)
        .map(|s| parse(s.text, Path::new(s.file)))
}

/// Finds a protocol by a shipped id, else by a path (relative to `root`, or
/// absolute), reads and validates it.
///
/// `root` is the session folder for a session's `protocol` key, or the
/// working directory on the command line.
pub fn resolve(name_or_path: &str, root: &Path) -> Result<Protocol> {
    if let Some(p) = shipped(name_or_path) {
        return p;
    }
    let path = Path::new(name_or_path);
    let full = if path.is_absolute() {
        path.to_path_buf()
    } else {
        root.join(path)
    };
    if !full.is_file() {
        let ids: Vec<&str> = SHIPPED.iter().map(|s| s.id).collect();
        return Err(InputError::new(
            &full,
            InputErrorKind::Missing,
            format!(
                "`{name_or_path}` is neither a shipped protocol id ({}) nor a protocol file",
                ids.join(", ")
            ),
        )
        .into());
    }
    Protocol::from_file(&full)
}
