//! A session's task blocks: from events.csv (words filled from the protocol)
//! or from the protocol's timeline at `protocol_start_s`; finding protocols.

use crate::protocol_common;

use mirrorsite::protocol::{is_movement_block, resolve, session_blocks};
use mirrorsite::session::{Block, BlockSource, EmgUnits, Manifest, Recording, Session, Side};
use mirrorsite::InputErrorKind;
use ndarray::Array2;
use protocol_common::TINY;
use std::path::{Path, PathBuf};

fn recording(file: &str, t_end: f64) -> Recording {
    let time_s: Vec<f64> = (0..=100).map(|i| t_end * i as f64 / 100.0).collect();
    Recording {
        file: PathBuf::from(file),
        rate_hz: 100.0 / t_end,
        channels: vec!["c".into()],
        data: Array2::zeros((1, time_s.len())),
        time_s,
    }
}

fn session(root: &Path, protocol: &str, start: f64, events: Option<Vec<Block>>) -> Session {
    Session {
        root: root.to_path_buf(),
        manifest: Manifest {
            subject: "P-1".into(),
            recorded: "2026-01-01".into(),
            residual_side: Side::Left,
            protocol: protocol.into(),
            protocol_start_s: start,
            emg_file: "emg.csv".into(),
            emg_rate_hz: 2.5,
            emg_units: EmgUnits::Millivolt,
            intact_file: "intact.csv".into(),
            intact_rate_hz: 2.5,
            intact_offset_s: 0.0,
            sites: vec![],
            dofs: vec![],
        },
        emg: recording("emg.csv", 40.0),
        intact: recording("intact.csv", 40.0),
        events,
    }
}

fn block(a: f64, b: f64, task: &str, dof: Option<&str>) -> Block {
    Block {
        start_s: a,
        end_s: b,
        task: task.into(),
        dof: dof.map(String::from),
        words: None,
    }
}

#[test]
fn resolve_by_shipped_id_relative_and_absolute_path() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("tiny.toml"), TINY).unwrap();
    assert_eq!(resolve("hand-basic", dir.path()).unwrap().id, "hand-basic");
    assert_eq!(resolve("tiny.toml", dir.path()).unwrap().id, "tiny");
    let abs = dir.path().join("tiny.toml");
    assert_eq!(
        resolve(abs.to_str().unwrap(), Path::new("/nonexistent"))
            .unwrap()
            .id,
        "tiny"
    );
    let err = resolve("hand-nothing", dir.path()).unwrap_err();
    let e = err.as_input().unwrap();
    assert_eq!(e.kind, InputErrorKind::Missing);
    assert_eq!(e.file, dir.path().join("hand-nothing"));
    // A bad protocol file is reported against that file.
    std::fs::write(
        dir.path().join("bad.toml"),
        TINY.replace("format = 1", "format = 9"),
    )
    .unwrap();
    let err = resolve("bad.toml", dir.path()).unwrap_err();
    assert_eq!(err.as_input().unwrap().file, dir.path().join("bad.toml"));
    assert_eq!(err.as_input().unwrap().line, Some(1));
}

#[test]
fn without_events_blocks_come_from_the_protocol_clipped_to_the_recording() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("tiny.toml"), TINY).unwrap();
    let s = session(dir.path(), "tiny.toml", 4.0, None);
    let (blocks, source) = session_blocks(&s).unwrap();
    assert_eq!(source, BlockSource::Protocol);
    let got: Vec<_> = blocks
        .iter()
        .map(|b| (b.start_s, b.end_s, b.task.as_str(), b.dof_label()))
        .collect();
    // The free block [39, 45] ends with the recording at 40 s.
    assert_eq!(
        got,
        [
            (4.0, 12.0, "paced", "fingers"),
            (12.0, 26.0, "hold-release", "wrist"),
            (26.0, 36.0, "rest", "*"),
            (36.0, 39.0, "paced", "wrist"),
            (39.0, 40.0, "free", "*"),
        ]
    );
    assert_eq!(blocks[1].words.as_deref(), Some("Hold each."));
}

#[test]
fn events_keep_their_times_and_get_the_protocol_words() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("tiny.toml"), TINY).unwrap();
    let events = vec![
        block(1.0, 4.0, "paced", Some("fingers")),
        block(4.0, 6.0, "pause", None),
        block(6.0, 9.0, "paced", Some("fingers")),
        block(9.0, 11.0, "paced-bad", Some("fingers")),
        block(11.0, 25.0, "hold-release", Some("wrist")),
        block(25.0, 35.0, "r1", None),
        block(35.0, 38.0, "paced", Some("wrist")),
        block(38.0, 39.5, "free", None),
        block(39.5, 40.0, "calibrate", Some("fingers")),
    ];
    let s = session(dir.path(), "tiny.toml", 0.0, Some(events.clone()));
    let (blocks, source) = session_blocks(&s).unwrap();
    assert_eq!(source, BlockSource::Events);
    for (b, e) in blocks.iter().zip(&events) {
        assert_eq!(
            (b.start_s, b.end_s, &b.task, &b.dof),
            (e.start_s, e.end_s, &e.task, &e.dof)
        );
    }
    let words: Vec<_> = blocks.iter().map(|b| b.words.as_deref()).collect();
    assert_eq!(
        words,
        [
            Some("Open and close."),
            None,
            Some("Open and close."),
            Some("Open and close."),
            Some("Hold each."),
            Some("Rest."),
            Some("Up and down."),
            Some("Move freely."),
            None,
        ]
    );
}

#[test]
fn movement_blocks_of_a_dof() {
    let b = |task: &str, dof: Option<&str>| block(0.0, 1.0, task, dof);
    assert!(is_movement_block(&b("paced", Some("wrist")), "wrist"));
    assert!(!is_movement_block(&b("paced", Some("wrist")), "fingers"));
    assert!(is_movement_block(&b("free", None), "fingers"));
    assert!(is_movement_block(
        &b("hold-release", Some("fingers")),
        "fingers"
    ));
    assert!(!is_movement_block(&b("rest", None), "fingers"));
    assert!(!is_movement_block(&b("Rest", Some("fingers")), "fingers"));
    assert!(!is_movement_block(&b("pause", None), "fingers"));
    assert!(!is_movement_block(
        &b("paced-bad", Some("fingers")),
        "fingers"
    ));
}
