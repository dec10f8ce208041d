//! The `inspect` command on the shipped demo session and on bad input.

use crate::common;

use common::*;
use std::process::Command;

fn bin() -> Command {
    Command::new(env!("CARGO_BIN_EXE_mirrorsite"))
}

#[test]
fn inspect_demo_json() {
    let out = bin()
        .args(["inspect", "--json"])
        .arg(root().join("demo-data/session"))
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["subject"], "DEMO-07");
    assert!((v["duration_s"].as_f64().unwrap() - 168.8).abs() < 1e-6);
    let sites = v["sites"].as_array().unwrap();
    assert_eq!(sites.len(), 16);
    assert_eq!(sites[8]["site"], "B1");
    assert_eq!(sites[8]["angle_deg"], 22.5);
    assert_eq!(sites[8]["distance_cm"], 9.0);
    assert_eq!(v["dofs"].as_array().unwrap().len(), 2);
    assert_eq!(v["blocks"].as_array().unwrap().len(), 12);
    assert_eq!(v["block_source"], "events");
}

#[test]
fn inspect_text_names_the_subject() {
    let out = bin()
        .arg("inspect")
        .arg(root().join("demo-data/session"))
        .output()
        .unwrap();
    assert!(out.status.success());
    let text = String::from_utf8(out.stdout).unwrap();
    assert!(text.contains("DEMO-07"));
    assert!(text.contains("16 sites"));
}

#[test]
fn bad_input_exits_2_with_one_located_message() {
    let (_t, d) = copy_session();
    set_field(&d.join("emg.csv"), 12, 1, "oops");
    let out = bin().arg("inspect").arg(&d).output().unwrap();
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8(out.stderr).unwrap();
    assert_eq!(err.lines().count(), 1, "one message: {err}");
    assert!(err.contains("emg.csv, line 12, field `S1`"), "{err}");
    assert!(!err.contains("panicked"));
}

#[test]
fn without_events_the_blocks_come_from_the_protocol() {
    let (_t, d) = copy_session();
    std::fs::remove_file(d.join("events.csv")).unwrap();
    let out = bin().args(["inspect", "--json"]).arg(&d).output().unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["block_source"], "protocol");
    let blocks = v["blocks"].as_array().unwrap();
    assert!(!blocks.is_empty());
    // protocol_start_s = lead-in (1 s) of the small scenario
    assert!((blocks[0]["start_s"].as_f64().unwrap() - 1.0).abs() < 1e-9);
    assert!(blocks.iter().all(|b| b["words"].is_string()));
}
