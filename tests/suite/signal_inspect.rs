//! `mirrorsite inspect --json` reports the quality of every site, with
//! reasons and figures, on a simulated session written to disk.

use mirrorsite::simulate::{write_session, Scenario};
use serde_json::Value;
use std::path::Path;
use std::process::Command;

#[test]
fn inspect_json_carries_quality_and_reasons() {
    let path = Path::new(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/demo-data/demo-scenario.toml"
    ));
    let text = std::fs::read_to_string(path).unwrap();
    // The clipped fault, and a shorter session: the blocks up to the second paced block.
    let text = text.replace("kind = \"hum\"", "kind = \"clipped\"");
    let cut = text.find("[[block]]\npattern = \"hold-release\"").unwrap();
    let sc = Scenario::from_toml(path, &text[..cut]).unwrap();
    let dir = tempfile::tempdir().unwrap();
    let session = dir.path().join("session");
    write_session(&sc, &session, None, false).unwrap();

    let out = Command::new(env!("CARGO_BIN_EXE_mirrorsite"))
        .args(["inspect", "--json"])
        .arg(&session)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v: Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["mains_hz"], 50.0);
    let sites = v["sites"].as_array().unwrap();
    assert_eq!(sites.len(), 16);
    for s in sites {
        let q = s["quality"].as_str().unwrap();
        assert!(["ok", "suspect", "bad"].contains(&q));
        assert!(s["reasons"].is_array());
        assert!(s["figures"]["rms_mv"].as_f64().unwrap() > 0.0);
        if s["site"] == "B5" {
            assert_eq!(q, "bad");
            let r = &s["reasons"][0];
            assert_eq!(r["code"], "clipped");
            assert!(r["value"].as_f64().unwrap() > r["threshold"].as_f64().unwrap());
        } else {
            assert_ne!(q, "bad", "{s}");
        }
    }
}

#[test]
fn config_defaults_prints_a_parsable_commented_file() {
    let out = Command::new(env!("CARGO_BIN_EXE_mirrorsite"))
        .args(["config", "--defaults"])
        .output()
        .unwrap();
    assert!(out.status.success());
    let text = String::from_utf8(out.stdout).unwrap();
    assert!(text.contains("[signal]") && text.contains("[signal.quality]"));
    assert!(text.lines().filter(|l| l.starts_with('#')).count() > 20);
    let cfg = mirrorsite::config::Config::from_toml(&text, Path::new("defaults.toml")).unwrap();
    assert_eq!(cfg, mirrorsite::config::Config::default());
}
