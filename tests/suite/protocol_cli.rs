//! The `mirrorsite protocol` commands that need no terminal.

use crate::protocol_common;

use protocol_common::{line_of, TINY};
use std::process::Command;

fn bin() -> Command {
    Command::new(env!("CARGO_BIN_EXE_mirrorsite"))
}

#[test]
fn list_shows_both_shipped_protocols() {
    let out = bin().args(["protocol", "list"]).output().unwrap();
    assert!(out.status.success());
    let text = String::from_utf8(out.stdout).unwrap();
    assert!(
        text.contains("hand-basic  3:08  11 tasks  DoFs: fingers, wrist"),
        "{text}"
    );
    assert!(
        text.contains("hand-wrist-full  8:06  21 tasks  DoFs: fingers, wrist, rotation"),
        "{text}"
    );
}

#[test]
fn check_passes_shipped_and_fails_bad_files_with_code_2() {
    let out = bin()
        .args(["protocol", "check", "hand-basic", "hand-wrist-full"])
        .output()
        .unwrap();
    assert!(out.status.success());
    let dir = tempfile::tempdir().unwrap();
    let bad = dir.path().join("bad.toml");
    std::fs::write(&bad, TINY.replace("hold_s = 3", "hold_s = 30")).unwrap();
    let out = bin()
        .args(["protocol", "check"])
        .arg(&bad)
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8(out.stderr).unwrap();
    let line = line_of(TINY, "hold_s", 0);
    assert!(
        err.contains(&format!("bad.toml, line {line}, field `task[2].hold_s`")),
        "{err}"
    );
}

#[test]
fn cues_writes_a_new_file_and_refuses_an_existing_one() {
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path().join("tiny.toml");
    std::fs::write(&p, TINY).unwrap();
    let out_csv = dir.path().join("cues.csv");
    let run = |force: bool| {
        let mut c = bin();
        c.args(["protocol", "cues"])
            .arg(&p)
            .args(["--start", "2"])
            .arg("--out")
            .arg(&out_csv);
        if force {
            c.arg("--force");
        }
        c.output().unwrap()
    };
    assert!(run(false).status.success());
    let text = std::fs::read_to_string(&out_csv).unwrap();
    assert_eq!(text.lines().count(), 15);
    assert!(text
        .lines()
        .nth(1)
        .unwrap()
        .starts_with("2.000,4.000,f-paced,paced,fingers,pace,1,close"));
    let again = run(false);
    assert_eq!(again.status.code(), Some(1));
    assert!(String::from_utf8(again.stderr).unwrap().contains("exists"));
    assert!(run(true).status.success());
    assert!(!dir.path().join("cues.csv.partial").exists());
}
