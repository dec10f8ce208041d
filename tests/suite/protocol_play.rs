//! The prompter driven non-interactively: a simulated clock, scripted keys
//! and a screen that records frames. The small protocol (tests/protocol_common)
//! lasts 41 s; with a 2 s lead-in the first cue starts at clock time 2 and is
//! written at EMG time 10 (`start_s`), so EMG time = 8 + clock time.
//! Expected rows are worked out by hand from the rules in the play module's
//! documentation.

use crate::protocol_common;

use mirrorsite::protocol::play::{
    play, EventFile, EventLog, Key, Outcome, PlayOptions, RecordingScreen, ScriptedKeys, SimClock,
};
use mirrorsite::protocol::{parse, Protocol};
use protocol_common::TINY;
use std::path::Path;

fn tiny() -> Protocol {
    parse(TINY, Path::new("tiny.toml")).unwrap()
}

const OPTS: PlayOptions = PlayOptions {
    start_s: 10.0,
    lead_in_s: 2.0,
    frame_s: 0.1,
};

/// Plays with keys at clock times; returns the outcome and the frames.
fn run(keys: &[(f64, Key)]) -> (Outcome, RecordingScreen) {
    let clock = SimClock::new();
    let mut k = ScriptedKeys::new(&clock, keys.to_vec());
    let mut screen = RecordingScreen::default();
    let log = EventLog::new(Vec::new()).unwrap();
    let p = tiny();
    let outcome = play(&p, &clock, &mut k, &mut screen, log, OPTS).unwrap();
    (outcome, screen)
}

fn rows(o: &Outcome) -> Vec<(f64, f64, String, String)> {
    o.rows
        .iter()
        .map(|b| {
            (
                b.start_s,
                b.end_s,
                b.task.clone(),
                b.dof_label().to_string(),
            )
        })
        .collect()
}

fn assert_rows(o: &Outcome, expected: &[(f64, f64, &str, &str)]) {
    let got = rows(o);
    assert_eq!(got.len(), expected.len(), "{got:#?}");
    for (g, e) in got.iter().zip(expected) {
        assert!(
            (g.0 - e.0).abs() < 1e-6 && (g.1 - e.1).abs() < 1e-6 && g.2 == e.2 && g.3 == e.3,
            "got {g:?}, expected {e:?}"
        );
    }
}

#[test]
fn without_keys_the_rows_are_the_protocol_blocks() {
    let (o, screen) = run(&[]);
    assert!(o.completed);
    assert_eq!(o.aborted_at_s, None);
    assert_rows(
        &o,
        &[
            (10.0, 18.0, "paced", "fingers"),
            (18.0, 32.0, "hold-release", "wrist"),
            (32.0, 42.0, "rest", "*"),
            (42.0, 45.0, "paced", "wrist"),
            (45.0, 51.0, "free", "*"),
        ],
    );
    let blocks = tiny().blocks(10.0);
    for (r, b) in o.rows.iter().zip(&blocks) {
        assert_eq!(
            (r.task.as_str(), r.dof.as_deref()),
            (b.task.as_str(), b.dof.as_deref())
        );
    }
    // Lead-in frames first, then cue frames.
    assert!(screen.frames[0].lead_in && screen.frames[0].cue == "Get ready");
    assert!(!screen.frames.last().unwrap().lead_in);
}

#[test]
fn frames_show_countdown_pacing_and_progress() {
    let (_, screen) = run(&[]);
    let at = |done: f64| {
        screen
            .frames
            .iter()
            .find(|f| !f.lead_in && (f.done_s - done).abs() < 1e-6)
            .unwrap_or_else(|| panic!("no frame at {done}"))
    };
    // 1 s into the first half cycle (toward `close`): phase 1/4 of the cycle,
    // marker (1 - cos(pi/2)) / 2 = 0.5 of the way, 1 s left.
    let f = at(1.0);
    assert_eq!(f.cue, "Close");
    assert_eq!(f.next, "Next: Open");
    assert!(f.place.contains("cycle 1 of 2"), "{}", f.place);
    let p = f.pacing.as_ref().unwrap();
    assert_eq!((p.from.as_str(), p.to.as_str()), ("open", "close"));
    assert!((p.position - 0.5).abs() < 1e-6);
    assert!((f.countdown_s - 1.0).abs() < 1e-6);
    // 2.5 s: phase 5/8, marker (1 - cos(5 pi / 4)) / 2 = 0.853553 on the way back.
    let f = at(2.5);
    assert_eq!(f.cue, "Open");
    assert!((f.pacing.as_ref().unwrap().position - 0.853_553_390_6).abs() < 1e-6);
    // Progress over the whole 41 s protocol.
    let f = at(20.5);
    assert!((f.progress() - 0.5).abs() < 1e-9);
    assert!(f.pacing.is_none());
    // Holds start at 8 s: hold 2 is reach [15, 16.5], hold [16.5, 19.5], relax [19.5, 22].
    assert_eq!(f.cue, "Relax, let go");
    assert_eq!(at(18.0).cue, "Hold down");
    // The last cue of a task announces the next task with its length.
    let f = at(7.0);
    assert_eq!(f.next, "Next task (0:14): Hold each.");
}

#[test]
fn a_pause_is_its_own_row_and_shifts_the_rest() {
    // Pause at clock 5 (protocol 3 s, second half of cycle 1), resume at 9.
    let (o, screen) = run(&[(5.0, Key::Pause), (9.0, Key::Pause)]);
    assert!(o.completed);
    assert_eq!(o.pauses, 1);
    assert_rows(
        &o,
        &[
            (10.0, 13.0, "paced", "fingers"),
            (13.0, 17.0, "pause", "*"),
            (17.0, 22.0, "paced", "fingers"),
            (22.0, 36.0, "hold-release", "wrist"),
            (36.0, 46.0, "rest", "*"),
            (46.0, 49.0, "paced", "wrist"),
            (49.0, 55.0, "free", "*"),
        ],
    );
    // While paused the countdown stands still at 1 s.
    let paused: Vec<_> = screen.frames.iter().filter(|f| f.paused).collect();
    assert!(paused.len() >= 30);
    assert!(paused
        .iter()
        .all(|f| (f.countdown_s - 1.0).abs() < 1e-6 && f.cue == "Paused"));
}

#[test]
fn marked_bad_repetitions_are_their_own_rows() {
    let (o, _) = run(&[
        // Protocol 5 s: cycle 2 of the finger cycles, protocol [4, 8].
        (7.0, Key::Bad),
        // Protocol 16 s: reach of hold 2, whose hold spans protocol [15, 22].
        (18.0, Key::Bad),
        // Protocol 25 s: a rest, which cannot be marked.
        (27.0, Key::Bad),
        // Protocol 36 and 37 s: free movement marked, then unmarked.
        (38.0, Key::Bad),
        (39.0, Key::Bad),
    ]);
    assert!(o.completed);
    assert_eq!(o.marked, 2);
    assert_rows(
        &o,
        &[
            (10.0, 14.0, "paced", "fingers"),
            (14.0, 18.0, "paced-bad", "fingers"),
            (18.0, 25.0, "hold-release", "wrist"),
            (25.0, 32.0, "hold-release-bad", "wrist"),
            (32.0, 42.0, "rest", "*"),
            (42.0, 45.0, "paced", "wrist"),
            (45.0, 51.0, "free", "*"),
        ],
    );
}

#[test]
fn skipping_a_task_and_a_cue() {
    // Clock 12 = protocol 10 (hold 1): skip the rest of the holds. The rest
    // then runs clock [12, 22]; at clock 15 skip to the next cue.
    let (o, _) = run(&[(12.0, Key::SkipTask), (15.0, Key::NextCue)]);
    assert!(o.completed);
    assert_eq!(o.skips, 2);
    assert_rows(
        &o,
        &[
            (10.0, 18.0, "paced", "fingers"),
            (18.0, 20.0, "hold-release", "wrist"),
            (20.0, 23.0, "rest", "*"),
            (23.0, 26.0, "paced", "wrist"),
            (26.0, 32.0, "free", "*"),
        ],
    );
}

#[test]
fn abort_mid_task_keeps_what_was_played() {
    // Clock 19.25 = protocol 17.25, in the hold of hold 2.
    let (o, _) = run(&[(19.25, Key::Abort)]);
    assert!(!o.completed);
    assert!((o.aborted_at_s.unwrap() - 27.25).abs() < 1e-9);
    assert_rows(
        &o,
        &[
            (10.0, 18.0, "paced", "fingers"),
            (18.0, 27.25, "hold-release", "wrist"),
        ],
    );
    // Abort while paused, and abort in a repetition marked bad.
    let (o, _) = run(&[(22.0, Key::Pause), (25.0, Key::Abort)]);
    assert_rows(
        &o,
        &[
            (10.0, 18.0, "paced", "fingers"),
            (18.0, 30.0, "hold-release", "wrist"),
            (30.0, 33.0, "pause", "*"),
        ],
    );
    let (o, _) = run(&[(19.0, Key::Bad), (19.25, Key::Abort)]);
    assert_rows(
        &o,
        &[
            (10.0, 18.0, "paced", "fingers"),
            (18.0, 25.0, "hold-release", "wrist"),
            (25.0, 27.25, "hold-release-bad", "wrist"),
        ],
    );
    // Abort during the lead-in: nothing was played.
    let (o, _) = run(&[(1.0, Key::Abort)]);
    assert!(!o.completed && o.rows.is_empty());
}

#[test]
fn events_file_is_written_on_abort_and_never_over_an_existing_file() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("events.csv");
    let (file, sink) = EventFile::create(&out, false).unwrap();
    let partial = file.partial_path().to_path_buf();
    let clock = SimClock::new();
    let mut keys = ScriptedKeys::new(&clock, vec![(7.0, Key::Bad), (19.25, Key::Abort)]);
    let mut screen = RecordingScreen::default();
    let log = EventLog::new(sink).unwrap();
    let o = play(&tiny(), &clock, &mut keys, &mut screen, log, OPTS).unwrap();
    assert!(!o.completed);
    // Rows are already in the partial file before the rename.
    assert_eq!(
        std::fs::read_to_string(&partial).unwrap().lines().count(),
        4
    );
    file.commit().unwrap();
    assert!(!partial.exists());
    let text = std::fs::read_to_string(&out).unwrap();
    assert_eq!(
        text,
        "start_s,end_s,task,dof\n10.000,14.000,paced,fingers\n\
         14.000,18.000,paced-bad,fingers\n18.000,27.250,hold-release,wrist\n"
    );
    // The file exists now: refused without --force, allowed with it.
    let err = EventFile::create(&out, false).unwrap_err();
    assert!(err.to_string().contains("exists"), "{err}");
    let (again, _) = EventFile::create(&out, true).unwrap();
    drop(again);
}

#[test]
fn rows_merge_within_a_label_and_are_written_when_the_next_begins() {
    let mut log = EventLog::new(Vec::new()).unwrap();
    let f = || Some("fingers".to_string());
    // Cycle 1: two half cycles.
    log.played(0.0, 1.0, "paced", f());
    log.played(1.0, 2.0, "paced", f());
    log.end_repetition(false).unwrap();
    // The row may still grow: nothing written yet.
    assert!(log.written().is_empty());
    // Cycle 2, marked bad.
    log.played(2.0, 3.0, "paced", f());
    log.end_repetition(true).unwrap();
    assert_eq!(log.written().len(), 1);
    // Cycle 3 with a pause in it.
    log.played(3.0, 3.5, "paced", f());
    log.paused(3.5, 4.0);
    log.played(4.0, 5.0, "paced", f());
    let (rows, sink) = log.finish(false).unwrap();
    assert_eq!(rows.len(), 5);
    assert_eq!(
        String::from_utf8(sink).unwrap(),
        "start_s,end_s,task,dof\n0.000,2.000,paced,fingers\n2.000,3.000,paced-bad,fingers\n\
         3.000,3.500,paced,fingers\n3.500,4.000,pause,*\n4.000,5.000,paced,fingers\n"
    );
}
