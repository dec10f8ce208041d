//! The live cue prompter.
//!
//! [`play`] walks a protocol's timeline on a [`Clock`], shows each moment on
//! a [`Screen`] and reacts to keys from a [`KeySource`]; what was actually
//! played goes to an [`EventLog`] (events.csv rows on the EMG clock). The
//! three traits let tests drive it with a simulated clock, a scripted list of
//! keys and a screen that records frames; the command line uses the
//! terminal ([`terminal`]).
//!
//! Keys: space pauses and resumes, `b` marks the current repetition bad (again
//! to unmark), `n` skips to the next cue, `s` skips the rest of the task, `q`
//! or Esc (or Ctrl-C) aborts. Timing: a cue's remaining time is kept across a
//! pause; a skipped cue ends at the key press and the next starts there. The
//! events written are, on the EMG clock `start_s + (t - t0)` with `t0` the
//! moment the first cue began:
//!
//! - one row per stretch of a task played without interruption, task = the
//!   pattern name (`paced`, `hold-release`, `free`, `rest`), dof = the task's
//!   DoF or `*`;
//! - a pause is its own row, task `pause`, dof `*`, splitting the task row;
//! - a repetition marked bad (a paced cycle, one hold with its reach and
//!   relax, a whole free cue) is its own row, task `<pattern>-bad`,
//!   splitting the task row; rest cannot be marked;
//! - skipped time is not written; the lead-in before the first cue is not
//!   written.

pub mod font;
mod log;
mod screen;
pub mod terminal;

pub use log::{EventFile, EventLog};
pub use screen::{render, Line, Style};

use super::{Cue, Pattern, Protocol};
use crate::session::Block;
use std::cell::Cell;
use std::collections::{HashSet, VecDeque};
use std::io::Write;
use std::rc::Rc;

/// A key the prompter reacts to.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Key {
    /// Pause or resume (space).
    Pause,
    /// Mark or unmark the current repetition as bad (`b`).
    Bad,
    /// Skip to the next cue (`n`).
    NextCue,
    /// Skip the rest of the task (`s`).
    SkipTask,
    /// Abort, keeping what was done (`q`, Esc, Ctrl-C).
    Abort,
}

impl Key {
    /// The key for a typed character, if it is one.
    pub fn from_char(c: char) -> Option<Key> {
        match c {
            ' ' => Some(Key::Pause),
            'b' | 'B' => Some(Key::Bad),
            'n' | 'N' => Some(Key::NextCue),
            's' | 'S' => Some(Key::SkipTask),
            'q' | 'Q' => Some(Key::Abort),
            _ => None,
        }
    }
}

/// A monotonic clock in seconds.
pub trait Clock {
    /// Seconds since an arbitrary origin.
    fn now(&self) -> f64;
}

/// Where keys come from.
pub trait KeySource {
    /// Waits up to `timeout_s` for a key; `None` when the time ran out.
    fn wait(&mut self, timeout_s: f64) -> std::io::Result<Option<Key>>;
}

/// Where frames go.
pub trait Screen {
    /// Shows one frame.
    fn draw(&mut self, frame: &Frame) -> std::io::Result<()>;
}

/// The pacing marker of a paced cycle.
#[derive(Debug, Clone, PartialEq)]
pub struct Pacing {
    /// The first position (marker at the left).
    pub from: String,
    /// The second position (marker at the right).
    pub to: String,
    /// Where the marker is, 0 (at `from`) to 1 (at `to`): `(1 - cos 2πφ) / 2`
    /// for the phase φ in [0, 1) of the cycle, a smooth back-and-forth.
    pub position: f64,
}

/// Everything one screen shows.
#[derive(Debug, Clone, PartialEq)]
pub struct Frame {
    /// Protocol title.
    pub title: String,
    /// Where in the protocol: task number, id, repetition.
    pub place: String,
    /// The cue's words (shown large).
    pub cue: String,
    /// The task's instruction.
    pub instruction: String,
    /// Seconds left in the cue (or in the lead-in).
    pub countdown_s: f64,
    /// What comes next.
    pub next: String,
    /// The pacing marker, for paced cues.
    pub pacing: Option<Pacing>,
    /// Protocol time done, s (pauses excluded).
    pub done_s: f64,
    /// Protocol length, s.
    pub total_s: f64,
    /// True while paused.
    pub paused: bool,
    /// True during the lead-in.
    pub lead_in: bool,
    /// True when the current repetition is marked bad.
    pub marked_bad: bool,
    /// A short message (the last key's effect).
    pub status: String,
}

impl Frame {
    /// Fraction of the protocol done, 0 to 1.
    pub fn progress(&self) -> f64 {
        if self.total_s > 0.0 {
            (self.done_s / self.total_s).clamp(0.0, 1.0)
        } else {
            1.0
        }
    }
}

/// Settings of a play.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PlayOptions {
    /// EMG-clock time written for the first cue's start, s.
    pub start_s: f64,
    /// Countdown before the first cue, s (not written).
    pub lead_in_s: f64,
    /// Longest time between two frames, s.
    pub frame_s: f64,
}

impl Default for PlayOptions {
    fn default() -> Self {
        PlayOptions {
            start_s: 0.0,
            lead_in_s: 5.0,
            frame_s: 0.1,
        }
    }
}

/// What a play did.
#[derive(Debug, Clone, PartialEq)]
pub struct Outcome {
    /// True when the protocol ran to its end (possibly with skips).
    pub completed: bool,
    /// EMG-clock time of the abort, when aborted.
    pub aborted_at_s: Option<f64>,
    /// Rows written to the events log.
    pub rows: Vec<Block>,
    /// Number of pauses.
    pub pauses: usize,
    /// Number of repetitions marked bad (net of unmarking).
    pub marked: usize,
    /// Number of skips (cue or task).
    pub skips: usize,
}

/// A simulated clock shared with [`ScriptedKeys`], which moves it forward.
#[derive(Debug, Clone, Default)]
pub struct SimClock(Rc<Cell<f64>>);

impl SimClock {
    /// A clock at 0.
    pub fn new() -> Self {
        SimClock::default()
    }
}

impl Clock for SimClock {
    fn now(&self) -> f64 {
        self.0.get()
    }
}

/// Keys at set times on a [`SimClock`]: waiting moves the clock to the next
/// key or by the timeout, whichever comes first, so a whole protocol plays
/// in as long as it takes to compute its frames.
#[derive(Debug)]
pub struct ScriptedKeys {
    clock: SimClock,
    keys: VecDeque<(f64, Key)>,
}

impl ScriptedKeys {
    /// `keys` are `(time, key)` on `clock`, sorted here by time.
    pub fn new(clock: &SimClock, mut keys: Vec<(f64, Key)>) -> Self {
        keys.sort_by(|a, b| a.0.total_cmp(&b.0));
        ScriptedKeys {
            clock: clock.clone(),
            keys: keys.into(),
        }
    }
}

impl KeySource for ScriptedKeys {
    fn wait(&mut self, timeout_s: f64) -> std::io::Result<Option<Key>> {
        let now = self.clock.0.get();
        let until = now + timeout_s.max(0.0);
        match self.keys.front() {
            Some(&(t, k)) if t <= until => {
                self.keys.pop_front();
                self.clock.0.set(t.max(now));
                Ok(Some(k))
            }
            _ => {
                self.clock.0.set(until);
                Ok(None)
            }
        }
    }
}

/// A screen that keeps every frame (for tests).
#[derive(Debug, Default)]
pub struct RecordingScreen {
    /// The frames drawn, in order.
    pub frames: Vec<Frame>,
}

impl Screen for RecordingScreen {
    fn draw(&mut self, frame: &Frame) -> std::io::Result<()> {
        self.frames.push(frame.clone());
        Ok(())
    }
}

fn clock_text(s: f64) -> String {
    let s = s.max(0.0).round() as u64;
    format!("{}:{:02}", s / 60, s % 60)
}

struct Player<'a, W: Write> {
    protocol: &'a Protocol,
    cues: Vec<Cue>,
    /// Index of the first cue of each cue's task.
    task_first: Vec<usize>,
    log: EventLog<W>,
    opts: PlayOptions,
    /// Actual time of the first cue's start.
    t0: f64,
    i: usize,
    /// Actual time the current cue ends (meaningless while paused).
    deadline: f64,
    /// Actual time the current uninterrupted stretch of the cue began.
    seg_start: f64,
    /// While paused: when the pause began and the cue time left.
    paused: Option<(f64, f64)>,
    bad: HashSet<(usize, usize)>,
    pauses: usize,
    skips: usize,
    status: String,
}

impl<W: Write> Player<'_, W> {
    fn emg(&self, t: f64) -> f64 {
        self.opts.start_s + (t - self.t0)
    }

    fn unit(&self, i: usize) -> (usize, usize) {
        (self.cues[i].task_index, self.cues[i].repetition)
    }

    fn log_played(&mut self, from: f64, to: f64) {
        let c = &self.cues[self.i];
        let (a, b) = (self.emg(from), self.emg(to));
        self.log.played(a, b, c.pattern.as_str(), c.dof.clone());
    }

    /// Ends the current cue at actual time `at` and moves to cue `next`.
    fn advance(&mut self, at: f64, next: usize) -> std::io::Result<()> {
        self.log_played(self.seg_start, at);
        let unit = self.unit(self.i);
        if next >= self.cues.len() || self.unit(next) != unit {
            let bad = self.bad.contains(&unit);
            self.log.end_repetition(bad)?;
        }
        self.i = next;
        self.seg_start = at;
        if next < self.cues.len() {
            self.deadline = at + self.cues[next].duration_s();
        }
        Ok(())
    }

    fn finished(&self) -> bool {
        self.i >= self.cues.len()
    }

    /// Handles a key at actual time `now`; returns true to abort.
    fn key(&mut self, key: Key, now: f64) -> std::io::Result<bool> {
        match key {
            Key::Abort => return Ok(true),
            Key::Pause => match self.paused.take() {
                None => {
                    self.log_played(self.seg_start, now);
                    self.paused = Some((now, (self.deadline - now).max(0.0)));
                    self.pauses += 1;
                    self.status = "Paused: space to go on".into();
                }
                Some((since, left)) => {
                    let (a, b) = (self.emg(since), self.emg(now));
                    self.log.paused(a, b);
                    self.seg_start = now;
                    self.deadline = now + left;
                    self.status = "Going on".into();
                }
            },
            Key::Bad => {
                let c = &self.cues[self.i];
                if c.pattern == Pattern::Rest {
                    self.status = "Nothing to mark during a rest".into();
                } else {
                    let unit = self.unit(self.i);
                    let what = match c.pattern {
                        Pattern::Paced => "cycle",
                        Pattern::HoldRelease => "hold",
                        _ => "block",
                    };
                    if self.bad.insert(unit) {
                        self.status = format!("{what} {} marked bad (b to unmark)", unit.1);
                    } else {
                        self.bad.remove(&unit);
                        self.status = format!("{what} {} unmarked", unit.1);
                    }
                }
            }
            Key::NextCue | Key::SkipTask => {
                if let Some((since, _)) = self.paused.take() {
                    let (a, b) = (self.emg(since), self.emg(now));
                    self.log.paused(a, b);
                    self.seg_start = now;
                }
                let next = if key == Key::NextCue {
                    self.i + 1
                } else {
                    let task = self.cues[self.i].task_index;
                    (self.i..self.cues.len())
                        .find(|&j| self.cues[j].task_index != task)
                        .unwrap_or(self.cues.len())
                };
                self.skips += 1;
                self.status = if key == Key::NextCue {
                    "Skipped to the next cue".into()
                } else {
                    format!("Skipped the rest of task `{}`", self.cues[self.i].task_id)
                };
                self.advance(now, next)?;
            }
        }
        Ok(false)
    }

    fn frame(&self, now: f64) -> Frame {
        let total = self.protocol.length_s();
        let c = &self.cues[self.i];
        let left = match self.paused {
            Some((_, left)) => left,
            None => (self.deadline - now).max(0.0),
        };
        let into = (c.duration_s() - left).max(0.0);
        let task = &self.protocol.tasks[c.task_index];
        let mut place = format!(
            "Task {} of {}: {}",
            c.task_index + 1,
            self.protocol.tasks.len(),
            task.id
        );
        match c.pattern {
            Pattern::Paced => place += &format!(", cycle {} of {}", c.repetition, c.repetitions),
            Pattern::HoldRelease => {
                place += &format!(", hold {} of {}", c.repetition, c.repetitions)
            }
            _ => {}
        }
        let next = match self.cues.get(self.i + 1) {
            None => "Next: the end".to_string(),
            Some(n) if n.task_index != c.task_index => format!(
                "Next task ({}): {}",
                clock_text(self.protocol.tasks[n.task_index].length_s()),
                n.instruction
            ),
            Some(n) => format!("Next: {}", n.words),
        };
        let pacing = (c.pattern == Pattern::Paced).then(|| {
            let half = (self.i - self.task_first[self.i]) % 2;
            let phase = (half as f64 + into / c.duration_s()) / 2.0;
            Pacing {
                from: task.positions[0].clone(),
                to: task.positions[1].clone(),
                position: (1.0 - (2.0 * std::f64::consts::PI * phase).cos()) / 2.0,
            }
        });
        Frame {
            title: self.protocol.title.clone(),
            place,
            cue: if self.paused.is_some() {
                "Paused".into()
            } else {
                c.words.clone()
            },
            instruction: c.instruction.clone(),
            countdown_s: left,
            next,
            pacing,
            done_s: c.start_s + into,
            total_s: total,
            paused: self.paused.is_some(),
            lead_in: false,
            marked_bad: self.bad.contains(&self.unit(self.i)),
            status: self.status.clone(),
        }
    }
}

/// Plays `protocol`: a lead-in countdown, then every cue in turn, writing
/// what was played to `log` (see the module docs for the rows). Returns when
/// the protocol ends or on abort, after writing every row; the log's sink is
/// flushed and dropped.
pub fn play<W: Write>(
    protocol: &Protocol,
    clock: &dyn Clock,
    keys: &mut dyn KeySource,
    screen: &mut dyn Screen,
    log: EventLog<W>,
    opts: PlayOptions,
) -> crate::Result<Outcome> {
    let io = |e: std::io::Error| crate::Error::Analysis(format!("prompter: {e}"));
    let cues = protocol.timeline(0.0);
    let total = protocol.length_s();
    let mut task_first = Vec::with_capacity(cues.len());
    for (j, c) in cues.iter().enumerate() {
        let first = if j > 0 && cues[j - 1].task_index == c.task_index {
            task_first[j - 1]
        } else {
            j
        };
        task_first.push(first);
    }
    let frame_s = if opts.frame_s > 0.0 {
        opts.frame_s
    } else {
        0.1
    };

    // Lead-in.
    let lead_end = clock.now() + opts.lead_in_s.max(0.0);
    let first = cues.first();
    loop {
        let now = clock.now();
        if now >= lead_end || first.is_none() {
            break;
        }
        let c = first.expect("checked above");
        screen
            .draw(&Frame {
                title: protocol.title.clone(),
                place: format!("Starting: {} tasks", protocol.tasks.len()),
                cue: "Get ready".into(),
                instruction: c.instruction.clone(),
                countdown_s: lead_end - now,
                next: format!("First: {}", c.words),
                pacing: None,
                done_s: 0.0,
                total_s: total,
                paused: false,
                lead_in: true,
                marked_bad: false,
                status: String::new(),
            })
            .map_err(io)?;
        if keys.wait(frame_s.min(lead_end - now)).map_err(io)? == Some(Key::Abort) {
            let (rows, _) = log.finish(false).map_err(io)?;
            return Ok(Outcome {
                completed: false,
                aborted_at_s: Some(opts.start_s),
                rows,
                pauses: 0,
                marked: 0,
                skips: 0,
            });
        }
    }

    let t0 = lead_end;
    let mut p = Player {
        protocol,
        deadline: t0 + first.map_or(0.0, Cue::duration_s),
        cues,
        task_first,
        log,
        opts,
        t0,
        i: 0,
        seg_start: t0,
        paused: None,
        bad: HashSet::new(),
        pauses: 0,
        skips: 0,
        status: String::new(),
    };
    let mut aborted_at = None;
    while !p.finished() {
        let now = clock.now();
        // Cues that ended by now, at their exact end times.
        while p.paused.is_none() && !p.finished() && now >= p.deadline {
            let at = p.deadline;
            p.advance(at, p.i + 1).map_err(io)?;
        }
        if p.finished() {
            break;
        }
        screen.draw(&p.frame(now)).map_err(io)?;
        let timeout = match p.paused {
            Some(_) => frame_s,
            None => frame_s.min(p.deadline - now),
        };
        if let Some(k) = keys.wait(timeout).map_err(io)? {
            let now = clock.now();
            while p.paused.is_none() && !p.finished() && now >= p.deadline {
                let at = p.deadline;
                p.advance(at, p.i + 1).map_err(io)?;
            }
            if p.finished() {
                break;
            }
            if p.key(k, now).map_err(io)? {
                match p.paused.take() {
                    Some((since, _)) => {
                        let (a, b) = (p.emg(since), p.emg(now));
                        p.log.paused(a, b);
                    }
                    None => p.log_played(p.seg_start, now),
                }
                aborted_at = Some(p.emg(now));
                break;
            }
        }
    }
    let bad_now = !p.finished() && p.bad.contains(&p.unit(p.i));
    let marked = p.bad.len();
    let (pauses, skips) = (p.pauses, p.skips);
    let (rows, _) = p.log.finish(bad_now).map_err(io)?;
    Ok(Outcome {
        completed: aborted_at.is_none(),
        aborted_at_s: aborted_at,
        rows,
        pauses,
        marked,
        skips,
    })
}
