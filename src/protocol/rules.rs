//! Protocol-level rules: coverage of every DoF, and limits against fatigue.
//!
//! Fatigue biases a calibration: during sustained contractions the EMG
//! amplitude rises and its mean power frequency falls within minutes (Öberg,
//! Sandsjö & Kadefors 1995, J Electromyogr Kinesiol, from memory; FACTS.md
//! section 9). The usual remedy is short contractions with rests between them
//! (common practice, no source gives numbers). The limits below are our
//! choice in that spirit, stated so that a protocol author can check them:
//!
//! - **active stretch**: consecutive active tasks (paced, hold-release, free)
//!   without a rest task between them last at most [`MAX_ACTIVE_STRETCH_S`];
//! - **rest ratio**: the rest that follows an active stretch (before the next
//!   active task) lasts at least [`MIN_REST_RATIO`] times the stretch; the
//!   last stretch of a protocol needs no rest after it. Relax phases inside a
//!   hold-release task count as active, which errs on the safe side;
//! - **holds**: a hold lasts at most [`MAX_HOLD_S`];
//! - **pace**: a paced cycle lasts at least [`MIN_PERIOD_S`], since phantom
//!   movements are slow (De Graaf et al. 2016, Neuroscience 312:48–57;
//!   FACTS.md section 4; the number itself is common practice);
//! - **total length**: at most [`MAX_TOTAL_S`]; split longer work into
//!   several protocols with a break between them.
//!
//! Coverage: every DoF the protocol declares has at least one paced task and
//! at least one free task that moves it, since a selection fitted on paced
//! cycles alone over-fits their rhythm.

use super::schema::Problems;
use super::{Pattern, Protocol};
use crate::error::InputErrorKind;

/// Longest run of active tasks without a rest task, s.
pub const MAX_ACTIVE_STRETCH_S: f64 = 60.0;
/// Least rest after an active stretch, as a fraction of the stretch.
pub const MIN_REST_RATIO: f64 = 1.0 / 3.0;
/// Longest hold, s.
pub const MAX_HOLD_S: f64 = 10.0;
/// Shortest paced cycle, s.
pub const MIN_PERIOD_S: f64 = 2.0;
/// Longest protocol, s (20 minutes).
pub const MAX_TOTAL_S: f64 = 1200.0;

const EPS: f64 = 1e-9;

pub(crate) fn check(p: &Protocol, dofs_line: usize, pr: &mut Problems<'_>) {
    coverage(p, dofs_line, pr);
    stretches(p, pr);
    total(p, pr);
}

fn coverage(p: &Protocol, dofs_line: usize, pr: &mut Problems<'_>) {
    for d in &p.dofs {
        for pattern in [Pattern::Paced, Pattern::Free] {
            let covered = p
                .tasks
                .iter()
                .any(|t| t.pattern == pattern && t.dofs.contains(d));
            if !covered {
                pr.at_line(
                    Some(dofs_line),
                    "dofs",
                    InputErrorKind::Missing,
                    format!(
                        "DoF `{d}` has no {} task; every DoF needs a paced and a free task",
                        pattern.as_str()
                    ),
                );
            }
        }
    }
}

fn stretches(p: &Protocol, pr: &mut Problems<'_>) {
    let mut i = 0;
    let n = p.tasks.len();
    while i < n {
        if !p.tasks[i].pattern.is_active() {
            i += 1;
            continue;
        }
        // An active stretch: tasks i..j.
        let first = i;
        let mut active = 0.0;
        let mut flagged = false;
        while i < n && p.tasks[i].pattern.is_active() {
            active += p.tasks[i].length_s();
            if active > MAX_ACTIVE_STRETCH_S + EPS && !flagged {
                flagged = true;
                pr.at_line(
                    p.tasks[i].line,
                    format!("task[{}]", i + 1),
                    InputErrorKind::OutOfRange,
                    format!(
                        "tasks `{}` to `{}` are active for {:.1} s without a rest; \
                         insert a rest task so no active stretch exceeds {} s",
                        p.tasks[first].id, p.tasks[i].id, active, MAX_ACTIVE_STRETCH_S
                    ),
                );
            }
            i += 1;
        }
        // The rest after it.
        let rest_first = i;
        let mut rest = 0.0;
        while i < n && !p.tasks[i].pattern.is_active() {
            rest += p.tasks[i].length_s();
            i += 1;
        }
        let last_stretch = i >= n;
        if !last_stretch && rest + EPS < MIN_REST_RATIO * active {
            pr.at_line(
                p.tasks[rest_first].line,
                format!("task[{}].duration_s", rest_first + 1),
                InputErrorKind::OutOfRange,
                format!(
                    "the rest after tasks `{}` to `{}` ({:.1} s active) lasts {:.1} s; \
                     rest at least {:.1} s ({:.0}% of the active stretch) against fatigue",
                    p.tasks[first].id,
                    p.tasks[rest_first - 1].id,
                    active,
                    rest,
                    MIN_REST_RATIO * active,
                    100.0 * MIN_REST_RATIO
                ),
            );
        }
    }
}

fn total(p: &Protocol, pr: &mut Problems<'_>) {
    let mut t = 0.0;
    for (i, task) in p.tasks.iter().enumerate() {
        t += task.length_s();
        if t > MAX_TOTAL_S + EPS {
            pr.at_line(
                task.line,
                format!("task[{}]", i + 1),
                InputErrorKind::OutOfRange,
                format!(
                    "the protocol lasts {:.0} s by the end of task `{}` (total {:.0} s); \
                     keep it within {} s and split longer work into several protocols",
                    t,
                    task.id,
                    p.length_s(),
                    MAX_TOTAL_S
                ),
            );
            return;
        }
    }
}
