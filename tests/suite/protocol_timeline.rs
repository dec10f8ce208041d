//! The expanded timeline of a small protocol, cue by cue, and its blocks.
//! Expected times are worked out by hand from the schema's rules
//! (protocols/README.md): paced cycles are two half-period cues, holds are
//! reach + hold + relax, a rate of 40 beats per minute is a 3 s cycle.

use crate::protocol_common;

use mirrorsite::protocol::{parse, write_cues_csv, Pattern, Phase};
use protocol_common::TINY;
use std::path::Path;

/// start, end, task, dof, phase, repetition, target, words.
type Row = (
    f64,
    f64,
    &'static str,
    &'static str,
    Phase,
    usize,
    &'static str,
    &'static str,
);

#[test]
fn cues_of_the_small_protocol_at_start_100() {
    let p = parse(TINY, Path::new("tiny.toml")).unwrap();
    let cues = p.timeline(100.0);
    use Phase::*;
    #[rustfmt::skip]
    let expected: &[Row] = &[
        (100.0, 102.0, "f-paced", "fingers", Pace, 1, "close", "Close"),
        (102.0, 104.0, "f-paced", "fingers", Pace, 1, "open", "Open"),
        (104.0, 106.0, "f-paced", "fingers", Pace, 2, "close", "Close"),
        (106.0, 108.0, "f-paced", "fingers", Pace, 2, "open", "Open"),
        (108.0, 109.5, "holds", "wrist", Reach, 1, "up", "Move to up"),
        (109.5, 112.5, "holds", "wrist", Hold, 1, "up", "Hold up"),
        (112.5, 115.0, "holds", "wrist", Relax, 1, "rest", "Relax, let go"),
        (115.0, 116.5, "holds", "wrist", Reach, 2, "down", "Move to down"),
        (116.5, 119.5, "holds", "wrist", Hold, 2, "down", "Hold down"),
        (119.5, 122.0, "holds", "wrist", Relax, 2, "rest", "Relax, let go"),
        (122.0, 132.0, "r1", "*", Rest, 1, "rest", "Rest"),
        (132.0, 133.5, "w-paced", "wrist", Pace, 1, "down", "Down"),
        (133.5, 135.0, "w-paced", "wrist", Pace, 1, "up", "Up"),
        (135.0, 141.0, "free", "*", Free, 1, "any", "Move freely"),
    ];
    assert_eq!(cues.len(), expected.len());
    for (c, e) in cues.iter().zip(expected) {
        let got = (
            c.task_id.as_str(),
            c.dof_label(),
            c.phase,
            c.repetition,
            c.target.as_str(),
            c.words.as_str(),
        );
        assert_eq!(got, (e.2, e.3, e.4, e.5, e.6, e.7), "{c:?}");
        assert!(
            (c.start_s - e.0).abs() < 1e-9 && (c.end_s - e.1).abs() < 1e-9,
            "{c:?}"
        );
    }
    // Repetition counts and instructions come from the task.
    assert_eq!(cues[0].repetitions, 2);
    assert_eq!(cues[4].repetitions, 2);
    assert_eq!(cues[4].instruction, "Hold each.");
    assert_eq!(cues[13].pattern, Pattern::Free);
}

#[test]
fn one_block_per_task() {
    let p = parse(TINY, Path::new("tiny.toml")).unwrap();
    let blocks = p.blocks(4.0);
    let got: Vec<_> = blocks
        .iter()
        .map(|b| {
            (
                b.start_s,
                b.end_s,
                b.task.as_str(),
                b.dof_label(),
                b.words.as_deref().unwrap(),
            )
        })
        .collect();
    assert_eq!(
        got,
        [
            (4.0, 12.0, "paced", "fingers", "Open and close."),
            (12.0, 26.0, "hold-release", "wrist", "Hold each."),
            (26.0, 36.0, "rest", "*", "Rest."),
            (36.0, 39.0, "paced", "wrist", "Up and down."),
            (39.0, 45.0, "free", "*", "Move freely."),
        ]
    );
}

#[test]
fn cues_csv() {
    let p = parse(TINY, Path::new("tiny.toml")).unwrap();
    let mut out = Vec::new();
    write_cues_csv(&p.timeline(0.5), &mut out).unwrap();
    let text = String::from_utf8(out).unwrap();
    let lines: Vec<_> = text.lines().collect();
    assert_eq!(lines.len(), 15);
    assert_eq!(
        lines[0],
        "start_s,end_s,task,pattern,dof,phase,repetition,target,words,instruction"
    );
    assert_eq!(
        lines[1],
        "0.500,2.500,f-paced,paced,fingers,pace,1,close,Close,Open and close."
    );
    // Words with a comma are quoted.
    assert_eq!(
        lines[7],
        "13.000,15.500,holds,hold-release,wrist,relax,1,rest,\"Relax, let go\",Hold each."
    );
    assert_eq!(
        lines[14],
        "35.500,41.500,free,free,*,free,1,any,Move freely,Move freely."
    );
}

#[test]
fn shipped_timeline_ends_at_its_length() {
    for id in ["hand-basic", "hand-wrist-full"] {
        let p = mirrorsite::protocol::shipped(id).unwrap().unwrap();
        let cues = p.timeline(0.0);
        // Cues tile the protocol without gaps or overlaps.
        for w in cues.windows(2) {
            assert!((w[0].end_s - w[1].start_s).abs() < 1e-9);
        }
        assert!((cues.last().unwrap().end_s - p.length_s()).abs() < 1e-9);
    }
}
