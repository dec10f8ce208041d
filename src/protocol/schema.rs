//! The protocol file schema: parsing and per-task validation.
//!
//! Parsing goes in two steps: serde reads the TOML into raw structs whose
//! fields keep their byte spans (`toml::Spanned`), rejecting unknown keys,
//! missing keys and wrong types; then each task is checked against its
//! pattern (which keys it needs, which do not apply, value ranges) and the
//! protocol-level rules of [`super::rules`] run. Byte spans become 1-based
//! line numbers.

use super::{rules, Pattern, Protocol, Task};
use crate::error::{InputError, InputErrorKind};
use crate::Result;
use serde::Deserialize;
use std::collections::HashSet;
use std::path::Path;
use toml::Spanned;

/// The protocol file format understood by this version.
pub const FORMAT: i64 = 1;

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawProtocol {
    format: Spanned<i64>,
    id: Spanned<String>,
    title: Spanned<String>,
    version: Spanned<String>,
    dofs: Spanned<Vec<Spanned<String>>>,
    #[serde(default)]
    #[allow(dead_code)]
    description: Option<String>,
    task: Vec<Spanned<RawTask>>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawTask {
    id: Spanned<String>,
    pattern: Spanned<Pattern>,
    words: Spanned<String>,
    dof: Option<Spanned<String>>,
    dofs: Option<Spanned<Vec<Spanned<String>>>>,
    positions: Option<Spanned<Vec<Spanned<String>>>>,
    repetitions: Option<Spanned<i64>>,
    period_s: Option<Spanned<f64>>,
    rate_bpm: Option<Spanned<f64>>,
    move_s: Option<Spanned<f64>>,
    hold_s: Option<Spanned<f64>>,
    relax_s: Option<Spanned<f64>>,
    duration_s: Option<Spanned<f64>>,
}

/// Turns byte offsets into 1-based line numbers.
pub(crate) struct Lines {
    starts: Vec<usize>,
}

impl Lines {
    pub(crate) fn new(text: &str) -> Self {
        let mut starts = vec![0];
        starts.extend(text.match_indices('\n').map(|(i, _)| i + 1));
        Lines { starts }
    }

    /// The 1-based line holding byte `offset`.
    pub(crate) fn line(&self, offset: usize) -> usize {
        self.starts.partition_point(|&s| s <= offset)
    }
}

/// Collects problems while validating one file.
pub(crate) struct Problems<'a> {
    pub(crate) file: &'a Path,
    pub(crate) lines: Lines,
    pub(crate) list: Vec<InputError>,
}

impl Problems<'_> {
    pub(crate) fn at(
        &mut self,
        offset: usize,
        field: impl Into<String>,
        kind: InputErrorKind,
        message: impl Into<String>,
    ) {
        let e = InputError::new(self.file, kind, message)
            .at_line(self.lines.line(offset))
            .field(field);
        self.list.push(e);
    }

    pub(crate) fn at_line(
        &mut self,
        line: Option<usize>,
        field: impl Into<String>,
        kind: InputErrorKind,
        message: impl Into<String>,
    ) {
        let mut e = InputError::new(self.file, kind, message).field(field);
        if let Some(l) = line {
            e = e.at_line(l);
        }
        self.list.push(e);
    }
}

/// Reads and validates a protocol from its text; the first problem found is
/// the error. `file` names the source in errors.
pub fn parse(text: &str, file: &Path) -> Result<Protocol> {
    match validate(text, file) {
        Ok(p) => Ok(p),
        Err(mut problems) => Err(problems.remove(0).into()),
    }
}

/// Validates a protocol text and returns every problem found (empty when the
/// protocol is valid). A defect in the TOML itself or its schema (syntax,
/// unknown key, missing key, wrong type) stops the check at that defect.
pub fn check_source(text: &str, file: &Path) -> Vec<InputError> {
    validate(text, file).err().unwrap_or_default()
}

fn validate(text: &str, file: &Path) -> Result<Protocol, Vec<InputError>> {
    let lines = Lines::new(text);
    let raw: RawProtocol = match toml::from_str(text) {
        Ok(r) => r,
        Err(e) => return Err(vec![toml_error(&e, text, file, &lines)]),
    };
    let mut pr = Problems {
        file,
        lines,
        list: Vec::new(),
    };
    let dofs_line = pr.lines.line(raw.dofs.span().start);
    let protocol = build(raw, &mut pr);
    if pr.list.is_empty() {
        rules::check(&protocol, dofs_line, &mut pr);
    }
    if pr.list.is_empty() {
        Ok(protocol)
    } else {
        Err(pr.list)
    }
}

/// An `InputError` from a TOML or serde error, with the line from its span
/// and the key from the message where serde names one.
fn toml_error(e: &toml::de::Error, text: &str, file: &Path, lines: &Lines) -> InputError {
    let msg = e.message().trim().to_string();
    let (kind, field) = if let Some(f) = quoted_after(&msg, "unknown field") {
        (InputErrorKind::Unexpected, Some(f))
    } else if let Some(f) = quoted_after(&msg, "missing field") {
        (InputErrorKind::Missing, Some(f))
    } else if let Some(f) = quoted_after(&msg, "duplicate key") {
        (InputErrorKind::Unexpected, Some(f))
    } else if msg.starts_with("invalid type") || msg.starts_with("unknown variant") {
        (InputErrorKind::BadValue, None)
    } else {
        (InputErrorKind::Malformed, None)
    };
    let mut err = InputError::new(file, kind, msg);
    let mut field = field;
    if let Some(span) = e.span() {
        let line = lines.line(span.start);
        err = err.at_line(line);
        if field.is_none() {
            field = key_on_line(text, lines, line);
        }
    }
    if let Some(f) = field {
        err = err.field(f);
    }
    err
}

/// The bare key assigned on 1-based `line` of `text` (`key = value`), if any.
fn key_on_line(text: &str, lines: &Lines, line: usize) -> Option<String> {
    let start = *lines.starts.get(line - 1)?;
    let rest = &text[start..];
    let l = &rest[..rest.find('\n').unwrap_or(rest.len())];
    let (key, _) = l.split_once('=')?;
    let key = key.trim();
    (is_id(key) && key.chars().any(|c| c.is_ascii_alphanumeric())).then(|| key.to_string())
}

/// The first backtick-quoted word after `lead` in `msg`.
fn quoted_after(msg: &str, lead: &str) -> Option<String> {
    let rest = &msg[msg.find(lead)? + lead.len()..];
    let a = rest.find('`')?;
    let b = rest[a + 1..].find('`')?;
    Some(rest[a + 1..a + 1 + b].to_string())
}

/// True for ids made of ASCII letters, digits, `-`, `_` and `.`.
fn is_id(s: &str) -> bool {
    !s.is_empty()
        && s.chars()
            .all(|c| c.is_ascii_alphanumeric() || matches!(c, '-' | '_' | '.'))
}

fn build(raw: RawProtocol, pr: &mut Problems<'_>) -> Protocol {
    if *raw.format.get_ref() != FORMAT {
        pr.at(
            raw.format.span().start,
            "format",
            InputErrorKind::BadValue,
            format!("format must be {FORMAT}, found {}", raw.format.get_ref()),
        );
    }
    if !is_id(raw.id.get_ref()) {
        pr.at(
            raw.id.span().start,
            "id",
            InputErrorKind::BadValue,
            "the protocol id must be letters, digits, `-`, `_` or `.`",
        );
    }
    for (key, v) in [("title", &raw.title), ("version", &raw.version)] {
        if v.get_ref().trim().is_empty() {
            pr.at(
                v.span().start,
                key,
                InputErrorKind::BadValue,
                format!("`{key}` is empty"),
            );
        }
    }
    let mut dofs: Vec<String> = Vec::new();
    if raw.dofs.get_ref().is_empty() {
        pr.at(
            raw.dofs.span().start,
            "dofs",
            InputErrorKind::Missing,
            "the protocol declares no DoF",
        );
    }
    for d in raw.dofs.get_ref() {
        if !is_id(d.get_ref()) {
            pr.at(
                d.span().start,
                "dofs",
                InputErrorKind::BadValue,
                format!(
                    "DoF id `{}` must be letters, digits, `-`, `_` or `.`",
                    d.get_ref()
                ),
            );
        } else if dofs.contains(d.get_ref()) {
            pr.at(
                d.span().start,
                "dofs",
                InputErrorKind::Unexpected,
                format!("DoF `{}` is listed twice", d.get_ref()),
            );
        } else {
            dofs.push(d.get_ref().clone());
        }
    }
    let mut seen = HashSet::new();
    let mut tasks = Vec::new();
    for (i, t) in raw.task.into_iter().enumerate() {
        let start = t.span().start;
        let task = build_task(t.into_inner(), i + 1, start, &dofs, pr);
        if !seen.insert(task.id.clone()) {
            pr.at(
                start,
                format!("task[{}].id", i + 1),
                InputErrorKind::Unexpected,
                format!("task id `{}` is used twice", task.id),
            );
        }
        tasks.push(task);
    }
    Protocol {
        file: pr.file.to_path_buf(),
        id: raw.id.into_inner(),
        title: raw.title.into_inner(),
        version: raw.version.into_inner(),
        dofs,
        tasks,
    }
}

/// Whether an optional key applies to a pattern.
fn allowed(pattern: Pattern, key: &str) -> bool {
    match pattern {
        Pattern::Paced => matches!(
            key,
            "dof" | "positions" | "repetitions" | "period_s" | "rate_bpm"
        ),
        Pattern::HoldRelease => matches!(
            key,
            "dof" | "positions" | "repetitions" | "move_s" | "hold_s" | "relax_s"
        ),
        Pattern::Free => matches!(key, "dof" | "dofs" | "duration_s"),
        Pattern::Rest => key == "duration_s",
    }
}

fn build_task(
    raw: RawTask,
    n: usize,
    start: usize,
    dofs: &[String],
    pr: &mut Problems<'_>,
) -> Task {
    let pattern = *raw.pattern.get_ref();
    let pname = pattern.as_str();
    let key = |k: &str| format!("task[{n}].{k}");
    let id = raw.id.get_ref().clone();
    if !is_id(&id) {
        pr.at(
            raw.id.span().start,
            key("id"),
            InputErrorKind::BadValue,
            "a task id must be letters, digits, `-`, `_` or `.`",
        );
    }
    if raw.words.get_ref().trim().is_empty() {
        pr.at(
            raw.words.span().start,
            key("words"),
            InputErrorKind::BadValue,
            format!("task `{id}`: `words` is empty; say what the wearer should do"),
        );
    }
    // Keys that do not apply to this pattern.
    let present: [(&str, Option<usize>); 10] = [
        ("dof", raw.dof.as_ref().map(|v| v.span().start)),
        ("dofs", raw.dofs.as_ref().map(|v| v.span().start)),
        ("positions", raw.positions.as_ref().map(|v| v.span().start)),
        (
            "repetitions",
            raw.repetitions.as_ref().map(|v| v.span().start),
        ),
        ("period_s", raw.period_s.as_ref().map(|v| v.span().start)),
        ("rate_bpm", raw.rate_bpm.as_ref().map(|v| v.span().start)),
        ("move_s", raw.move_s.as_ref().map(|v| v.span().start)),
        ("hold_s", raw.hold_s.as_ref().map(|v| v.span().start)),
        ("relax_s", raw.relax_s.as_ref().map(|v| v.span().start)),
        (
            "duration_s",
            raw.duration_s.as_ref().map(|v| v.span().start),
        ),
    ];
    for (k, at) in present {
        if let Some(at) = at {
            if !allowed(pattern, k) {
                pr.at(
                    at,
                    key(k),
                    InputErrorKind::Unexpected,
                    format!("task `{id}`: `{k}` does not apply to a {pname} task"),
                );
            }
        }
    }
    let missing = |pr: &mut Problems<'_>, k: &str, what: &str| {
        pr.at(
            start,
            key(k),
            InputErrorKind::Missing,
            format!("task `{id}`: a {pname} task needs `{k}` ({what})"),
        );
    };

    // DoFs.
    let mut task_dofs: Vec<(String, usize)> = Vec::new();
    match (&raw.dof, &raw.dofs) {
        (Some(d), Some(_)) if allowed(pattern, "dofs") => pr.at(
            d.span().start,
            key("dof"),
            InputErrorKind::Unexpected,
            format!("task `{id}`: give either `dof` or `dofs`, not both"),
        ),
        (Some(d), _) if allowed(pattern, "dof") => {
            task_dofs.push((d.get_ref().clone(), d.span().start))
        }
        (_, Some(ds)) if allowed(pattern, "dofs") => {
            if ds.get_ref().is_empty() {
                pr.at(
                    ds.span().start,
                    key("dofs"),
                    InputErrorKind::Missing,
                    format!("task `{id}`: `dofs` is empty"),
                );
            }
            for d in ds.get_ref() {
                if task_dofs.iter().any(|(x, _)| x == d.get_ref()) {
                    pr.at(
                        d.span().start,
                        key("dofs"),
                        InputErrorKind::Unexpected,
                        format!("task `{id}`: DoF `{}` is listed twice", d.get_ref()),
                    );
                } else {
                    task_dofs.push((d.get_ref().clone(), d.span().start));
                }
            }
        }
        _ => {
            if pattern != Pattern::Rest {
                let what = if pattern == Pattern::Free {
                    "the DoF moved, or `dofs` for several"
                } else {
                    "the DoF exercised"
                };
                missing(pr, "dof", what);
            }
        }
    }
    for (d, at) in &task_dofs {
        if !dofs.contains(d) {
            pr.at(
                *at,
                key(if raw.dofs.is_some() { "dofs" } else { "dof" }),
                InputErrorKind::Inconsistent,
                format!("task `{id}`: DoF `{d}` is not among the protocol's `dofs`"),
            );
        }
    }

    // Positions.
    let positions: Vec<String> = raw
        .positions
        .as_ref()
        .map(|p| {
            p.get_ref()
                .iter()
                .map(|s| s.get_ref().trim().to_string())
                .collect()
        })
        .unwrap_or_default();
    if let Some(p) = &raw.positions {
        if allowed(pattern, "positions") {
            let at = p.span().start;
            if pattern == Pattern::Paced && positions.len() != 2 {
                pr.at(
                    at,
                    key("positions"),
                    InputErrorKind::BadValue,
                    format!(
                        "task `{id}`: a paced task cycles between exactly 2 positions, found {}",
                        positions.len()
                    ),
                );
            } else if positions.is_empty() {
                pr.at(
                    at,
                    key("positions"),
                    InputErrorKind::Missing,
                    format!("task `{id}`: `positions` is empty"),
                );
            }
            if positions.iter().any(|s| s.is_empty()) {
                pr.at(
                    at,
                    key("positions"),
                    InputErrorKind::BadValue,
                    format!("task `{id}`: a position has no words"),
                );
            }
        }
    } else if matches!(pattern, Pattern::Paced | Pattern::HoldRelease) {
        missing(pr, "positions", "the positions, in plain words");
    }

    // Repetitions.
    let mut repetitions = 1usize;
    if matches!(pattern, Pattern::Paced | Pattern::HoldRelease) {
        match &raw.repetitions {
            Some(r) if (1..=1000).contains(r.get_ref()) => repetitions = *r.get_ref() as usize,
            Some(r) => pr.at(
                r.span().start,
                key("repetitions"),
                InputErrorKind::OutOfRange,
                format!(
                    "task `{id}`: repetitions must be 1 to 1000, found {}",
                    r.get_ref()
                ),
            ),
            None => missing(pr, "repetitions", "how many times"),
        }
    }

    // Durations: each present one finite and positive.
    let duration = |pr: &mut Problems<'_>, v: &Option<Spanned<f64>>, k: &str| -> f64 {
        match v {
            Some(s) if s.get_ref().is_finite() && *s.get_ref() > 0.0 => *s.get_ref(),
            Some(s) => {
                pr.at(
                    s.span().start,
                    key(k),
                    InputErrorKind::OutOfRange,
                    format!(
                        "task `{id}`: `{k}` must be a positive number, found {}",
                        s.get_ref()
                    ),
                );
                0.0
            }
            None => 0.0,
        }
    };
    let mut task = Task {
        id: id.clone(),
        pattern,
        dofs: task_dofs.into_iter().map(|(d, _)| d).collect(),
        words: raw.words.get_ref().trim().to_string(),
        positions,
        repetitions,
        period_s: 0.0,
        move_s: 0.0,
        hold_s: 0.0,
        relax_s: 0.0,
        duration_s: 0.0,
        line: Some(pr.lines.line(start)),
    };
    match pattern {
        Pattern::Paced => {
            let period = duration(pr, &raw.period_s, "period_s");
            let rate = duration(pr, &raw.rate_bpm, "rate_bpm");
            match (&raw.period_s, &raw.rate_bpm) {
                (Some(_), Some(r)) => pr.at(
                    r.span().start,
                    key("rate_bpm"),
                    InputErrorKind::Unexpected,
                    format!("task `{id}`: give either `period_s` or `rate_bpm`, not both"),
                ),
                (None, None) => missing(
                    pr,
                    "period_s",
                    "the cycle period, or `rate_bpm`, metronome beats per minute",
                ),
                _ => {}
            }
            // One beat per half cycle: a cycle lasts two beats.
            task.period_s = if raw.period_s.is_some() {
                period
            } else if rate > 0.0 {
                120.0 / rate
            } else {
                0.0
            };
            let given = raw.period_s.as_ref().or(raw.rate_bpm.as_ref());
            if let Some(g) = given {
                if task.period_s > 0.0 && task.period_s < rules::MIN_PERIOD_S - 1e-9 {
                    let k = if raw.period_s.is_some() {
                        "period_s"
                    } else {
                        "rate_bpm"
                    };
                    pr.at(
                        g.span().start,
                        key(k),
                        InputErrorKind::OutOfRange,
                        format!(
                            "task `{id}`: a cycle of {:.2} s is too fast; phantom movements are \
                             slow, so a cycle lasts at least {} s (rate_bpm at most {})",
                            task.period_s,
                            rules::MIN_PERIOD_S,
                            120.0 / rules::MIN_PERIOD_S
                        ),
                    );
                }
            }
        }
        Pattern::HoldRelease => {
            for (k, v) in [
                ("move_s", &raw.move_s),
                ("hold_s", &raw.hold_s),
                ("relax_s", &raw.relax_s),
            ] {
                if v.is_none() {
                    missing(pr, k, "seconds");
                }
            }
            task.move_s = duration(pr, &raw.move_s, "move_s");
            task.hold_s = duration(pr, &raw.hold_s, "hold_s");
            if let Some(h) = &raw.hold_s {
                if task.hold_s > rules::MAX_HOLD_S + 1e-9 {
                    pr.at(
                        h.span().start,
                        key("hold_s"),
                        InputErrorKind::OutOfRange,
                        format!(
                            "task `{id}`: a hold of {} s is too long against fatigue; hold at \
                             most {} s",
                            task.hold_s,
                            rules::MAX_HOLD_S
                        ),
                    );
                }
            }
            task.relax_s = duration(pr, &raw.relax_s, "relax_s");
        }
        Pattern::Free | Pattern::Rest => {
            if raw.duration_s.is_none() {
                missing(pr, "duration_s", "seconds");
            }
            task.duration_s = duration(pr, &raw.duration_s, "duration_s");
        }
    }
    task
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn lines_are_one_based() {
        let l = Lines::new("a\nbc\n\nd");
        assert_eq!(l.line(0), 1);
        assert_eq!(l.line(1), 1);
        assert_eq!(l.line(2), 2);
        assert_eq!(l.line(5), 3);
        assert_eq!(l.line(6), 4);
    }

    #[test]
    fn quoted_word() {
        assert_eq!(
            quoted_after("unknown field `hold`, expected one of `a`", "unknown field"),
            Some("hold".to_string())
        );
        assert_eq!(quoted_after("nothing here", "unknown field"), None);
    }
}
