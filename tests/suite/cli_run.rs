//! `mirrorsite run` end to end on a small simulated session: the output
//! folder's contract, refusal to overwrite, and the session left untouched.

use crate::common;

use common::*;
use std::process::Command;

fn bin() -> Command {
    Command::new(env!("CARGO_BIN_EXE_mirrorsite"))
}

#[test]
fn run_writes_the_whole_report_and_nothing_else() {
    let (tmp, session) = copy_session();
    let before = hash_dir(&session);
    let out = tmp.path().join("report");
    let res = bin()
        .args(["run", "--quiet", "--budget", "3"])
        .arg(&session)
        .arg("--out")
        .arg(&out)
        .output()
        .unwrap();
    let stderr = String::from_utf8_lossy(&res.stderr);
    assert!(res.status.success(), "{stderr}");
    assert!(!stderr.contains("panicked"));
    for f in [
        "sites.json",
        "sites.csv",
        "aligned.csv",
        "sheet.pdf",
        "sheet.html",
        "alignment.json",
    ] {
        assert!(out.join(f).is_file(), "missing {f}");
    }
    assert!(out.join("figures/site-map.svg").is_file());
    // the session folder is unchanged and got no new files
    assert_eq!(hash_dir(&session), before);
    // no staging leftovers beside the output
    let leftovers: Vec<_> = std::fs::read_dir(tmp.path())
        .unwrap()
        .filter_map(|e| e.ok())
        .filter(|e| e.file_name().to_string_lossy().contains("partial"))
        .collect();
    assert!(leftovers.is_empty());
    let v: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("sites.json")).unwrap()).unwrap();
    assert_eq!(v["format"], 1);
    assert_eq!(v["subject"], "TEST-01");
    assert_eq!(v["plan"]["budget"], 3);
    assert!(v["plan"]["sites"].as_array().unwrap().len() <= 3);
    for d in v["dofs"].as_array().unwrap() {
        assert!(d["cv"]["r2"].is_number() && d["cv"]["rmse"].is_number());
        for s in d["sites"].as_array().unwrap() {
            assert!(s["frequency"].is_number());
            assert!(["high", "medium", "low"].contains(&s["confidence"].as_str().unwrap()));
        }
    }
    // the flat site S4 is left out and flagged
    assert!(v["flags"]
        .as_array()
        .unwrap()
        .iter()
        .any(|f| f["where"] == "S4" && f["what"] == "bad-signal"));
    // aligned.csv has the contract header
    let header = get_line(&out.join("aligned.csv"), 1);
    assert!(header
        .starts_with("time_s,intact_time_s,fingers_pos,fingers_vel,wrist_pos,wrist_vel,S1_env"));
    // the summary names the plan and the sheet
    let stdout = String::from_utf8_lossy(&res.stdout);
    assert!(stdout.contains("plan (3 channels)"), "{stdout}");
    assert!(stdout.contains("sheet.pdf"));

    // an existing output folder is refused unless --force
    let again = bin()
        .args(["run", "--quiet"])
        .arg(&session)
        .arg("--out")
        .arg(&out)
        .output()
        .unwrap();
    assert!(!again.status.success());
    assert!(String::from_utf8_lossy(&again.stderr).contains("--force"));
    // an output inside the session folder is refused
    let inside = bin()
        .args(["run", "--quiet"])
        .arg(&session)
        .arg("--out")
        .arg(session.join("out"))
        .output()
        .unwrap();
    assert!(!inside.status.success());
    assert!(String::from_utf8_lossy(&inside.stderr).contains("inside the session folder"));
    assert!(!session.join("out").exists());
    assert_eq!(hash_dir(&session), before);
}
