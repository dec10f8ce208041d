//! Validation of protocol files: every error names the file, the line and
//! the key. Expected lines are found by searching the test text itself.

use crate::protocol_common;

use mirrorsite::protocol::{self, check_source, parse};
use mirrorsite::InputErrorKind as K;
use protocol_common::{line_of, TINY};
use std::path::Path;

const FILE: &str = "protocols/test.toml";

/// The single problem of `text`, asserting its kind, line and field.
fn one(text: &str, kind: K, line: usize, field: &str) -> String {
    let problems = check_source(text, Path::new(FILE));
    assert_eq!(problems.len(), 1, "{problems:#?}");
    let e = &problems[0];
    assert_eq!(e.file, Path::new(FILE));
    assert_eq!(e.kind, kind, "{e}");
    assert_eq!(e.line, Some(line), "{e}");
    assert_eq!(e.field.as_deref(), Some(field), "{e}");
    // `parse` fails with the same error.
    let err = parse(text, Path::new(FILE)).unwrap_err();
    assert_eq!(err.as_input(), Some(e));
    e.message.clone()
}

#[test]
fn the_small_protocol_is_valid() {
    assert!(check_source(TINY, Path::new(FILE)).is_empty());
    let p = parse(TINY, Path::new(FILE)).unwrap();
    assert_eq!(p.id, "tiny");
    assert_eq!(p.dofs, ["fingers", "wrist"]);
    assert_eq!(p.tasks.len(), 5);
    // rate_bpm 40: one beat per half cycle, so a 3 s cycle.
    assert!((p.tasks[3].period_s - 3.0).abs() < 1e-12);
    assert_eq!(p.tasks[1].line, Some(line_of(TINY, "[[task]]", 1)));
    assert!((p.length_s() - 41.0).abs() < 1e-12);
}

#[test]
fn shipped_protocols_pass_and_last_about_3_and_8_minutes() {
    let basic = protocol::shipped("hand-basic").unwrap().unwrap();
    assert_eq!(basic.dofs, ["fingers", "wrist"]);
    assert!((basic.length_s() - 188.0).abs() < 1e-9);
    let full = protocol::shipped("hand-wrist-full").unwrap().unwrap();
    assert_eq!(full.dofs, ["fingers", "wrist", "rotation"]);
    assert!((full.length_s() - 486.0).abs() < 1e-9);
    assert!(full
        .tasks
        .iter()
        .any(|t| t.pattern == protocol::Pattern::HoldRelease && t.positions.len() >= 3));
    // The embedded text is the file in protocols/.
    for s in protocol::SHIPPED {
        let on_disk =
            std::fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join(s.file)).unwrap();
        assert_eq!(on_disk, s.text);
        assert!(check_source(s.text, Path::new(s.file)).is_empty());
    }
}

#[test]
fn toml_syntax_error() {
    // An unclosed string: the parser stops on that line.
    let text = TINY.replace("title = \"Tiny\"", "title = \"Tiny");
    let problems = check_source(&text, Path::new(FILE));
    assert_eq!(problems.len(), 1);
    assert_eq!(problems[0].kind, K::Malformed);
    assert_eq!(
        problems[0].line,
        Some(line_of(&text, "title", 0)),
        "{}",
        problems[0]
    );
}

#[test]
fn unknown_key_at_top_and_in_a_task() {
    let text = TINY.replace("version = \"0.1\"\n", "version = \"0.1\"\nauthor = \"x\"\n");
    one(&text, K::Unexpected, line_of(&text, "author", 0), "author");
    let text = TINY.replace("hold_s = 3\n", "hold_s = 3\nhold_time = 3\n");
    one(
        &text,
        K::Unexpected,
        line_of(&text, "hold_time", 0),
        "hold_time",
    );
}

#[test]
fn missing_keys() {
    let text = TINY.replace("title = \"Tiny\"\n", "");
    one(&text, K::Missing, 1, "title");
    // A task without words: the error points into that task's table.
    let text = TINY.replace("words = \"Rest.\"\n", "");
    let problems = check_source(&text, Path::new(FILE));
    assert_eq!(problems.len(), 1);
    let e = &problems[0];
    assert_eq!((e.kind, e.field.as_deref()), (K::Missing, Some("words")));
    let l = e.line.unwrap();
    assert!(
        l >= line_of(&text, "[[task]]", 2) && l < line_of(&text, "[[task]]", 3),
        "{e}"
    );
}

#[test]
fn wrong_type_and_unknown_pattern() {
    let text = TINY.replace("period_s = 4", "period_s = \"four\"");
    one(
        &text,
        K::BadValue,
        line_of(&text, "period_s", 0),
        "period_s",
    );
    let text = TINY.replace("pattern = \"rest\"", "pattern = \"nap\"");
    one(&text, K::BadValue, line_of(&text, "\"nap\"", 0), "pattern");
}

#[test]
fn format_must_be_one() {
    let text = TINY.replace("format = 1", "format = 2");
    one(&text, K::BadValue, 1, "format");
}

#[test]
fn key_that_does_not_apply_to_the_pattern() {
    let text = TINY.replace("period_s = 4\n", "period_s = 4\nhold_s = 2\n");
    let m = one(
        &text,
        K::Unexpected,
        line_of(&text, "hold_s = 2", 0),
        "task[1].hold_s",
    );
    assert!(m.contains("does not apply to a paced task"), "{m}");
    let text = TINY.replace("duration_s = 10\n", "duration_s = 10\ndof = \"wrist\"\n");
    one(
        &text,
        K::Unexpected,
        line_of(&text, "dof = \"wrist\"", 1),
        "task[3].dof",
    );
}

#[test]
fn paced_needs_one_pace_and_two_positions() {
    let text = TINY.replace("period_s = 4\n", "");
    one(
        &text,
        K::Missing,
        line_of(&text, "[[task]]", 0),
        "task[1].period_s",
    );
    let text = TINY.replace("period_s = 4\n", "period_s = 4\nrate_bpm = 30\n");
    one(
        &text,
        K::Unexpected,
        line_of(&text, "rate_bpm = 30", 0),
        "task[1].rate_bpm",
    );
    let text = TINY.replace("[\"open\", \"close\"]", "[\"open\", \"half\", \"close\"]");
    one(
        &text,
        K::BadValue,
        line_of(&text, "\"half\"", 0),
        "task[1].positions",
    );
}

#[test]
fn repetitions_present_and_in_range() {
    let text = TINY.replace("repetitions = 2\n", "");
    one(
        &text,
        K::Missing,
        line_of(&text, "[[task]]", 0),
        "task[1].repetitions",
    );
    let text = TINY.replace("repetitions = 2\n", "repetitions = 0\n");
    one(
        &text,
        K::OutOfRange,
        line_of(&text, "repetitions = 0", 0),
        "task[1].repetitions",
    );
}

#[test]
fn durations_must_be_positive() {
    let text = TINY.replace("relax_s = 2.5", "relax_s = -1");
    one(
        &text,
        K::OutOfRange,
        line_of(&text, "relax_s", 0),
        "task[2].relax_s",
    );
    let text = TINY.replace("duration_s = 6", "duration_s = 0");
    one(
        &text,
        K::OutOfRange,
        line_of(&text, "duration_s = 0", 0),
        "task[5].duration_s",
    );
}

#[test]
fn dof_declared_and_used() {
    let text = TINY.replace(
        "dof = \"wrist\"\npositions = [\"up\", \"down\"]\nrepetitions = 1\nmove_s",
        "dof = \"elbow\"\npositions = [\"up\", \"down\"]\nrepetitions = 1\nmove_s",
    );
    let m = one(
        &text,
        K::Inconsistent,
        line_of(&text, "\"elbow\"", 0),
        "task[2].dof",
    );
    assert!(m.contains("`elbow`"), "{m}");
    let text = TINY.replace("dofs = [\"fingers\", \"wrist\"]\nduration_s", "duration_s");
    one(
        &text,
        K::Missing,
        line_of(&text, "[[task]]", 4),
        "task[5].dof",
    );
    let text = TINY.replace(
        "dofs = [\"fingers\", \"wrist\"]\n\n",
        "dofs = [\"fingers\", \"fingers\"]\n\n",
    );
    // A DoF listed twice (and wrist then undeclared in two tasks).
    let problems = check_source(&text, Path::new(FILE));
    assert_eq!(problems[0].kind, K::Unexpected);
    assert_eq!(problems[0].field.as_deref(), Some("dofs"));
    assert_eq!(problems[0].line, Some(5));
}

#[test]
fn duplicate_task_id() {
    let text = TINY.replace("id = \"r1\"", "id = \"holds\"");
    one(
        &text,
        K::Unexpected,
        line_of(&text, "[[task]]", 2),
        "task[3].id",
    );
}

#[test]
fn every_dof_needs_a_paced_and_a_free_task() {
    // The wrist's only paced task becomes free: no paced task for the wrist.
    let text = TINY.replace(
        "pattern = \"paced\"\ndof = \"wrist\"\npositions = [\"up\", \"down\"]\nrepetitions = 1\nrate_bpm = 40",
        "pattern = \"free\"\ndof = \"wrist\"\nduration_s = 3",
    );
    let m = one(&text, K::Missing, 5, "dofs");
    assert!(m.contains("`wrist` has no paced task"), "{m}");
    // The free block covers fingers only: no free task for the wrist.
    let text = TINY.replace(
        "dofs = [\"fingers\", \"wrist\"]\nduration_s",
        "dofs = [\"fingers\"]\nduration_s",
    );
    let m = one(&text, K::Missing, 5, "dofs");
    assert!(m.contains("`wrist` has no free task"), "{m}");
}

#[test]
fn active_stretch_without_rest_is_limited_to_60_s() {
    // 12 paced cycles of 4 s (48 s), then the holds (14 s): 62 s without a rest.
    let text = TINY.replace("repetitions = 2\n", "repetitions = 12\n");
    let problems = check_source(&text, Path::new(FILE));
    let e = problems
        .iter()
        .find(|e| e.message.contains("without a rest"))
        .expect("stretch flagged");
    assert_eq!(e.kind, K::OutOfRange);
    assert_eq!(e.line, Some(line_of(&text, "[[task]]", 1)));
    assert_eq!(e.field.as_deref(), Some("task[2]"));
    assert!(e.message.contains("62.0 s"), "{e}");
    // 48 + 14 = 62 s of activity also needs 20.7 s of rest: the 10 s rest is short.
    assert!(problems
        .iter()
        .any(|e| e.field.as_deref() == Some("task[3].duration_s")));
    // 12 cycles of 3.5 s (42 s) + 14 s = 56 s is within the limit (only the
    // rest after it, 10 s < 18.7 s, is short).
    let text = TINY.replace(
        "repetitions = 2\nperiod_s = 4",
        "repetitions = 12\nperiod_s = 3.5",
    );
    assert!(check_source(&text, Path::new(FILE))
        .iter()
        .all(|e| !e.message.contains("without a rest")));
}

#[test]
fn rest_after_activity_is_at_least_a_third_of_it() {
    // 22 s active needs 7.33 s of rest; 7 s is short, 7.5 s is enough.
    let text = TINY.replace("duration_s = 10", "duration_s = 7");
    let m = one(
        &text,
        K::OutOfRange,
        line_of(&text, "[[task]]", 2),
        "task[3].duration_s",
    );
    assert!(
        m.contains("22.0 s active") && m.contains("at least 7.3 s"),
        "{m}"
    );
    let text = TINY.replace("duration_s = 10", "duration_s = 7.5");
    assert!(check_source(&text, Path::new(FILE)).is_empty());
    // The last stretch needs no rest after it (TINY ends on free movement).
}

#[test]
fn holds_longer_than_10_s_are_flagged() {
    let text = TINY.replace("hold_s = 3", "hold_s = 10.5");
    let problems = check_source(&text, Path::new(FILE));
    let e = &problems[0];
    assert_eq!(e.kind, K::OutOfRange);
    assert_eq!(e.line, Some(line_of(&text, "hold_s", 0)));
    assert_eq!(e.field.as_deref(), Some("task[2].hold_s"));
    let text = TINY.replace("hold_s = 3", "hold_s = 10");
    assert!(check_source(&text, Path::new(FILE))
        .iter()
        .all(|e| e.field.as_deref() != Some("task[2].hold_s")));
}

#[test]
fn pace_faster_than_a_2_s_cycle_is_flagged() {
    // 80 beats per minute: a 1.5 s cycle.
    let text = TINY.replace("rate_bpm = 40", "rate_bpm = 80");
    let m = one(
        &text,
        K::OutOfRange,
        line_of(&text, "rate_bpm", 0),
        "task[4].rate_bpm",
    );
    assert!(m.contains("1.50 s"), "{m}");
    let text = TINY.replace("rate_bpm = 40", "rate_bpm = 60");
    assert!(check_source(&text, Path::new(FILE)).is_empty());
}

#[test]
fn total_length_is_limited_to_20_minutes() {
    // Append rest and short free blocks until past 1200 s: 41 + 30 x 40 = 1241 s.
    let mut text = TINY.to_string();
    for k in 0..30 {
        text.push_str(&format!(
            "\n[[task]]\nid = \"r{k}x\"\npattern = \"rest\"\nduration_s = 30\nwords = \"Rest.\"\n\
             \n[[task]]\nid = \"f{k}x\"\npattern = \"free\"\ndof = \"fingers\"\nduration_s = 10\nwords = \"Move.\"\n"
        ));
    }
    // 41 + 40 k crosses 1200 s at the 29th pair's free block (k = 28): 41 + 29 x 40 = 1201.
    let m = one(
        &text,
        K::OutOfRange,
        line_of(&text, "id = \"f28x\"", 0) - 1,
        "task[63]",
    );
    assert!(m.contains("1241 s"), "{m}");
}

#[test]
fn every_problem_is_reported_at_once() {
    let text = TINY
        .replace("hold_s = 3", "hold_s = 12")
        .replace("rate_bpm = 40", "rate_bpm = 90")
        .replace("id = \"r1\"", "id = \"holds\"");
    let problems = check_source(&text, Path::new(FILE));
    let fields: Vec<_> = problems.iter().filter_map(|e| e.field.as_deref()).collect();
    assert_eq!(fields, ["task[2].hold_s", "task[3].id", "task[4].rate_bpm"]);
    // Displayed as `file, line N, field `key`: message`.
    let shown = problems[0].to_string();
    assert!(
        shown.starts_with(&format!(
            "{FILE}, line {}, field `task[2].hold_s`: ",
            line_of(&text, "hold_s", 0)
        )),
        "{shown}"
    );
}
