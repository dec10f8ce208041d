//! Inputs that once broke the bad-input contract (found by the seeded random
//! inputs of tests/suite/robust_random_input.rs); see tests/fixtures/robust/README.md.

use crate::common;

use common::*;
use mirrorsite::simulate::Scenario;
use mirrorsite::{protocol, session, InputError};
use std::path::PathBuf;
use std::process::Command;

fn input(name: &str) -> PathBuf {
    fixture("robust").join(name)
}

/// One line, naming the file.
fn one_line(e: &InputError, name: &str) -> String {
    let s = e.to_string();
    assert!(!s.contains('\n'), "one line: {s:?}");
    assert!(s.contains(name), "names the file: {s}");
    s
}

#[test]
fn scenario_with_nan_lead_out() {
    let e = Scenario::from_file(&input("scenario-nan-lead-out.toml")).unwrap_err();
    let e = e.as_input().unwrap();
    one_line(e, "scenario-nan-lead-out.toml");
    assert_eq!(e.field.as_deref(), Some("lead_out_s"), "{e}");
}

#[test]
fn scenario_with_a_huge_ring_is_an_error_not_a_panic() {
    let path = input("scenario-huge-ring.toml");
    let e = Scenario::from_file(&path).unwrap_err();
    let e = e.as_input().unwrap();
    one_line(e, "scenario-huge-ring.toml");
    assert_eq!(e.field.as_deref(), Some("ring.count"), "{e}");
    // and through the binary: exit 2, one line, nothing written
    let t = tempfile::tempdir().unwrap();
    let out = Command::new(env!("CARGO_BIN_EXE_mirrorsite"))
        .arg("simulate")
        .arg(&path)
        .arg("--out")
        .arg(t.path().join("s"))
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    assert_eq!(String::from_utf8_lossy(&out.stderr).lines().count(), 1);
    assert_eq!(std::fs::read_dir(t.path()).unwrap().count(), 0);
}

#[test]
fn manifest_with_a_bare_word_for_a_string() {
    let path = input("manifest-bare-word.toml");
    let text = std::fs::read_to_string(&path).unwrap();
    let e = session::parse_manifest(&path, &text).unwrap_err();
    one_line(&e, "manifest-bare-word.toml");
    assert_eq!(e.line, Some(3), "{e}");
    assert_eq!(e.field, None, "no key is named by the parser here: {e}");
}

#[test]
fn protocol_with_an_unclosed_array() {
    let path = input("protocol-unclosed-array.toml");
    let text = std::fs::read_to_string(&path).unwrap();
    let e = protocol::parse(&text, &path).unwrap_err();
    let s = one_line(e.as_input().unwrap(), "protocol-unclosed-array.toml");
    assert!(s.contains("invalid array; expected `]`"), "{s}");
    let problems = protocol::check_source(&text, &path);
    assert_eq!(problems.len(), 1);
    one_line(&problems[0], "protocol-unclosed-array.toml");
}

#[test]
fn protocol_with_a_dot_for_a_key() {
    let path = input("protocol-dot-key.toml");
    let text = std::fs::read_to_string(&path).unwrap();
    let e = protocol::parse(&text, &path).unwrap_err();
    let e = e.as_input().unwrap();
    one_line(e, "protocol-dot-key.toml");
    assert_eq!(e.line, Some(9), "{e}");
    assert_eq!(e.field, None, "`.` is not a key: {e}");
}

#[test]
fn events_with_an_unbalanced_quote() {
    let (_t, d) = copy_session();
    std::fs::copy(input("events-unbalanced-quote.csv"), d.join("events.csv")).unwrap();
    let e = session::read(&d).unwrap_err();
    let e = e.as_input().unwrap();
    let s = one_line(e, "events.csv");
    assert_eq!(e.line, Some(3), "{e}");
    assert_eq!(e.field.as_deref(), Some("dof"), "{e}");
    assert!(s.contains("quote"), "{s}");
    assert!(
        !s.contains("hold-release"),
        "does not quote the following rows: {s}"
    );
}
