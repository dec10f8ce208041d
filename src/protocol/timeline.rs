//! Expansion of a protocol into its cue timeline and its task blocks.
//!
//! With `t` the running time from `start_s`, tasks follow one another without
//! gaps and each task expands to cues as follows (`P` the period, `n` the
//! repetitions, `p_1..p_m` the positions):
//!
//! - paced: for cycle `k = 1..n`, a cue `pace` toward `p_2` on
//!   `[t + (k-1)P, t + (k-1/2)P]` and a cue `pace` toward `p_1` on
//!   `[t + (k-1/2)P, t + kP]`;
//! - hold-release: for pass `r = 1..n` and position `j = 1..m`, hold number
//!   `(r-1)m + j` is three cues: `reach` (`move_s`), `hold` (`hold_s`),
//!   `relax` (`relax_s`, the joint returns to rest passively);
//! - free: one cue `free` of `duration_s`; rest: one cue `rest` of `duration_s`.

use super::{Pattern, Protocol, Task};
use crate::session::Block;
use std::io::Write;

/// What the wearer does during a cue.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Phase {
    /// Half a paced cycle: move toward the target at the pace.
    Pace,
    /// Move actively to a hold position.
    Reach,
    /// Hold the position.
    Hold,
    /// Relax: let the joint return to rest with no effort.
    Relax,
    /// Free movement.
    Free,
    /// Rest.
    Rest,
}

impl Phase {
    /// The name used in cue files: `pace`, `reach`, `hold`, `relax`, `free`, `rest`.
    pub fn as_str(self) -> &'static str {
        match self {
            Phase::Pace => "pace",
            Phase::Reach => "reach",
            Phase::Hold => "hold",
            Phase::Relax => "relax",
            Phase::Free => "free",
            Phase::Rest => "rest",
        }
    }
}

/// One cue of the timeline.
#[derive(Debug, Clone, PartialEq)]
pub struct Cue {
    /// Start, s (on the clock of the `start_s` given to [`Protocol::timeline`]).
    pub start_s: f64,
    /// End, s.
    pub end_s: f64,
    /// Index of the task in the protocol.
    pub task_index: usize,
    /// Task id.
    pub task_id: String,
    /// The task's pattern.
    pub pattern: Pattern,
    /// The DoF (`None` for several or none, written `*`).
    pub dof: Option<String>,
    /// What to do.
    pub phase: Phase,
    /// 1-based cycle (paced) or hold (hold-release) number within the task; 1 otherwise.
    pub repetition: usize,
    /// How many cycles or holds the task has; 1 otherwise.
    pub repetitions: usize,
    /// The target position (pace, reach, hold), `rest` (relax, rest) or `any` (free).
    pub target: String,
    /// The cue's own words, e.g. `Close`, `Hold half closed`, `Relax`.
    pub words: String,
    /// The task's instruction.
    pub instruction: String,
}

impl Cue {
    /// Duration, s.
    pub fn duration_s(&self) -> f64 {
        self.end_s - self.start_s
    }

    /// The DoF label (`*` for none).
    pub fn dof_label(&self) -> &str {
        self.dof.as_deref().unwrap_or("*")
    }
}

fn capitalise(s: &str) -> String {
    let mut c = s.chars();
    match c.next() {
        Some(f) => f.to_uppercase().chain(c).collect(),
        None => String::new(),
    }
}

impl Task {
    /// This task's cues from `t0`.
    pub fn cues(&self, index: usize, t0: f64) -> Vec<Cue> {
        let mut out = Vec::new();
        let mut offset = 0.0;
        let mut push =
            |phase: Phase, len: f64, rep: usize, reps: usize, target: &str, words: String| {
                out.push(Cue {
                    start_s: t0 + offset,
                    end_s: t0 + offset + len,
                    task_index: index,
                    task_id: self.id.clone(),
                    pattern: self.pattern,
                    dof: self.block_dof(),
                    phase,
                    repetition: rep,
                    repetitions: reps,
                    target: target.to_string(),
                    words,
                    instruction: self.words.clone(),
                });
                offset += len;
            };
        match self.pattern {
            Pattern::Paced => {
                let half = self.period_s / 2.0;
                let (a, b) = (&self.positions[0], &self.positions[1]);
                for k in 1..=self.repetitions {
                    push(Phase::Pace, half, k, self.repetitions, b, capitalise(b));
                    push(Phase::Pace, half, k, self.repetitions, a, capitalise(a));
                }
            }
            Pattern::HoldRelease => {
                let reps = self.repetitions * self.positions.len();
                let mut k = 0;
                for _ in 0..self.repetitions {
                    for p in &self.positions {
                        k += 1;
                        push(
                            Phase::Reach,
                            self.move_s,
                            k,
                            reps,
                            p,
                            format!("Move to {p}"),
                        );
                        push(Phase::Hold, self.hold_s, k, reps, p, format!("Hold {p}"));
                        push(
                            Phase::Relax,
                            self.relax_s,
                            k,
                            reps,
                            "rest",
                            "Relax, let go".to_string(),
                        );
                    }
                }
            }
            Pattern::Free => push(
                Phase::Free,
                self.duration_s,
                1,
                1,
                "any",
                "Move freely".to_string(),
            ),
            Pattern::Rest => push(
                Phase::Rest,
                self.duration_s,
                1,
                1,
                "rest",
                "Rest".to_string(),
            ),
        }
        out
    }
}

impl Protocol {
    /// The cue timeline with the protocol's t = 0 at `start_s`.
    pub fn timeline(&self, start_s: f64) -> Vec<Cue> {
        let mut out = Vec::new();
        let mut offset = 0.0;
        for (i, t) in self.tasks.iter().enumerate() {
            out.extend(t.cues(i, start_s + offset));
            offset += t.length_s();
        }
        out
    }

    /// One block per task, with the protocol's t = 0 at `start_s`: the task
    /// label is the pattern name (`paced`, `hold-release`, `free`, `rest`),
    /// `words` the task's instruction, the DoF as in the task (`None` for
    /// several or none).
    pub fn blocks(&self, start_s: f64) -> Vec<Block> {
        let mut out = Vec::new();
        let mut offset = 0.0;
        for t in &self.tasks {
            let len = t.length_s();
            out.push(Block {
                start_s: start_s + offset,
                end_s: start_s + offset + len,
                task: t.pattern.as_str().to_string(),
                dof: t.block_dof(),
                words: Some(t.words.clone()),
            });
            offset += len;
        }
        out
    }
}

/// Writes cues as CSV: header
/// `start_s,end_s,task,pattern,dof,phase,repetition,target,words,instruction`,
/// times in seconds with millisecond resolution.
pub fn write_cues_csv<W: Write>(cues: &[Cue], out: W) -> std::io::Result<()> {
    let mut w = csv::Writer::from_writer(out);
    let err = std::io::Error::other;
    w.write_record([
        "start_s",
        "end_s",
        "task",
        "pattern",
        "dof",
        "phase",
        "repetition",
        "target",
        "words",
        "instruction",
    ])
    .map_err(err)?;
    for c in cues {
        w.write_record([
            format!("{:.3}", c.start_s),
            format!("{:.3}", c.end_s),
            c.task_id.clone(),
            c.pattern.as_str().to_string(),
            c.dof_label().to_string(),
            c.phase.as_str().to_string(),
            c.repetition.to_string(),
            c.target.clone(),
            c.words.clone(),
            c.instruction.clone(),
        ])
        .map_err(err)?;
    }
    w.flush()
}
