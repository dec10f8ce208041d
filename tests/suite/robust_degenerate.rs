//! Numerically degenerate but valid sessions through `inspect`: two identical
//! sites, a site that is all zeros and a DoF that never moves. The command
//! succeeds, flags the dead site, and prints no NaN or infinity (in JSON a
//! non-finite number would show as `null`, so `null` may appear only where a
//! value is optional by design).
//!
//! The model-side consequences (identical sites are collinear, a still DoF
//! has nothing to fit) belong to `run`, which does not exist yet.

use crate::common;

use common::*;
use serde_json::Value;
use std::process::Command;

/// Keys whose value may be `null` by design (an absent DoF label, a figure
/// that cannot be computed without movement blocks, no mains notched).
const OPTIONAL: &[&str] = &["dof", "activity_ratio", "mains_hz"];

fn nulls(v: &Value, key: &str, out: &mut Vec<String>) {
    match v {
        Value::Null => out.push(key.to_string()),
        Value::Array(a) => a.iter().for_each(|x| nulls(x, key, out)),
        Value::Object(o) => o.iter().for_each(|(k, x)| nulls(x, k, out)),
        _ => {}
    }
}

/// Rewrites one CSV column of every data row with `f(row fields)`.
fn rewrite(path: &std::path::Path, col: &str, f: impl Fn(&[&str]) -> String) {
    let s = std::fs::read_to_string(path).unwrap();
    let mut lines = s.lines();
    let header = lines.next().unwrap();
    let j = header.split(',').position(|h| h == col).unwrap();
    let mut out = format!("{header}\n");
    for l in lines {
        let mut fields: Vec<&str> = l.split(',').collect();
        let v = f(&fields);
        fields[j] = &v;
        out.push_str(&fields.join(","));
        out.push('\n');
    }
    std::fs::write(path, out).unwrap();
}

#[test]
fn degenerate_session_is_flagged_not_nan() {
    let (_t, d) = copy_session();
    let emg = d.join("emg.csv");
    let header = get_line(&emg, 1);
    let s2 = header.split(',').position(|h| h == "S2").unwrap();
    rewrite(&emg, "S3", |f| f[s2].to_string()); // S3 is a copy of S2
    rewrite(&emg, "S5", |_| "0".to_string()); // S5 is all zeros
    rewrite(&d.join("intact.csv"), "wrist", |_| "0.00".to_string()); // never moves
    let bin = env!("CARGO_BIN_EXE_mirrorsite");
    let out = Command::new(bin)
        .args(["inspect", "--json"])
        .arg(&d)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v: Value = serde_json::from_slice(&out.stdout).unwrap();
    let mut found = Vec::new();
    nulls(&v, "", &mut found);
    let unexpected: Vec<&String> = found
        .iter()
        .filter(|k| !OPTIONAL.contains(&k.as_str()))
        .collect();
    assert!(
        unexpected.is_empty(),
        "null (non-finite?) at {unexpected:?}"
    );
    let site = |id: &str| {
        v["sites"]
            .as_array()
            .unwrap()
            .iter()
            .find(|s| s["site"] == id)
            .unwrap()
            .clone()
    };
    let dead = site("S5");
    assert_eq!(dead["quality"], "bad", "{dead}");
    assert!(
        dead["reasons"]
            .as_array()
            .unwrap()
            .iter()
            .any(|r| r["code"] == "flat"),
        "{dead}"
    );
    // the copy has the same figures as its original
    assert_eq!(site("S2")["figures"], site("S3")["figures"]);
    let wrist = v["dofs"]
        .as_array()
        .unwrap()
        .iter()
        .find(|x| x["dof"] == "wrist")
        .unwrap()
        .clone();
    assert_eq!(wrist["observed_deg"], serde_json::json!([0.0, 0.0]));
    // and the text report has no NaN or infinity either
    let out = Command::new(bin).arg("inspect").arg(&d).output().unwrap();
    assert!(out.status.success());
    let text = String::from_utf8(out.stdout).unwrap().to_lowercase();
    for bad in ["nan", "inf"] {
        assert!(
            !text.split(|c: char| !c.is_alphanumeric()).any(|w| w == bad),
            "`{bad}` in: {text}"
        );
    }
}
