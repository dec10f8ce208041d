//! Faults and determinism of `mirrorsite run`: byte-identical outputs across
//! runs and thread counts, a killed run leaves no output folder, degenerate
//! data give flags or clear errors and never NaN, output errors are reported.

use crate::common;

use std::path::Path;
use std::process::{Command, Output};
use std::time::Duration;

fn exe() -> &'static str {
    env!("CARGO_BIN_EXE_mirrorsite")
}

fn fast_config(dir: &Path) -> std::path::PathBuf {
    let cfg = dir.join("fast.toml");
    std::fs::write(&cfg, "[select]\nresamples = 6\n").unwrap();
    cfg
}

fn run(session: &Path, out: &Path, cfg: &Path, threads: Option<&str>) -> Output {
    let mut c = Command::new(exe());
    c.arg("run")
        .arg(session)
        .arg("--out")
        .arg(out)
        .arg("--config")
        .arg(cfg)
        .arg("--quiet");
    if let Some(t) = threads {
        c.env("RAYON_NUM_THREADS", t);
    }
    c.output().unwrap()
}

#[test]
fn same_session_and_seed_give_identical_outputs_across_runs_and_thread_counts() {
    let tmp = tempfile::tempdir().unwrap();
    let cfg = fast_config(tmp.path());
    let s = common::base_session();
    let outs: Vec<_> = [None, None, Some("1"), Some("2")]
        .iter()
        .enumerate()
        .map(|(i, t)| {
            let out = tmp.path().join(format!("out{i}"));
            let o = run(s, &out, &cfg, *t);
            assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
            out
        })
        .collect();
    for f in ["sites.json", "aligned.csv", "sites.csv", "run.json"] {
        let a = std::fs::read(outs[0].join(f)).unwrap();
        for o in &outs[1..] {
            assert!(
                std::fs::read(o.join(f)).unwrap() == a,
                "{f} differs between {} and {}",
                outs[0].display(),
                o.display()
            );
        }
    }
}

#[test]
fn a_killed_run_leaves_no_output_folder_and_its_leftover_is_cleared() {
    let tmp = tempfile::tempdir().unwrap();
    let cfg = fast_config(tmp.path());
    let out = tmp.path().join("out");
    let mut child = Command::new(exe())
        .arg("run")
        .arg(common::base_session())
        .arg("--out")
        .arg(&out)
        .arg("--config")
        .arg(&cfg)
        .arg("--quiet")
        .spawn()
        .unwrap();
    std::thread::sleep(Duration::from_millis(1000));
    child.kill().unwrap(); // SIGKILL on Unix: no clean-up code runs
    child.wait().unwrap();
    assert!(!out.exists(), "a killed run left {}", out.display());

    // A leftover of a dead process (as a kill while writing would leave) is
    // removed by the next run of the same target.
    let dead = {
        let mut c = Command::new(exe())
            .arg("--version")
            .stdout(std::process::Stdio::null())
            .spawn()
            .unwrap();
        let pid = c.id();
        c.wait().unwrap();
        pid
    };
    let stale = tmp.path().join(format!(".out.partial-{dead}"));
    std::fs::create_dir(&stale).unwrap();
    std::fs::write(stale.join("sites.json"), "{").unwrap();
    let o = run(common::base_session(), &out, &cfg, None);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    assert!(out.join("sites.json").is_file());
    let left: Vec<String> = std::fs::read_dir(tmp.path())
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .filter(|n| n.contains("partial"))
        .collect();
    assert!(left.is_empty(), "stale partial folders left: {left:?}");
}

#[test]
fn an_unwritable_output_is_reported_cleanly() {
    let tmp = tempfile::tempdir().unwrap();
    let cfg = fast_config(tmp.path());
    let blocker = tmp.path().join("a-file");
    std::fs::write(&blocker, "not a folder").unwrap();
    let out = blocker.join("out");
    let o = run(common::base_session(), &out, &cfg, None);
    let stderr = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(1), "{stderr}");
    assert!(
        stderr.starts_with("error: ") && stderr.contains("a-file"),
        "{stderr}"
    );
    assert!(!stderr.contains("panicked"), "{stderr}");
}

/// Rewrites a CSV (plain text) with `f(column name, row values)` per row.
fn edit_csv(path: &Path, f: impl Fn(&[String], &mut Vec<String>)) {
    let text = std::fs::read_to_string(path).unwrap();
    let mut lines = text.lines();
    let header: Vec<String> = lines.next().unwrap().split(',').map(String::from).collect();
    let mut out = header.join(",") + "\n";
    for l in lines {
        let mut v: Vec<String> = l.split(',').map(String::from).collect();
        f(&header, &mut v);
        out.push_str(&v.join(","));
        out.push('\n');
    }
    std::fs::write(path, out).unwrap();
}

#[test]
fn degenerate_data_give_flags_or_clear_errors_and_never_nan() {
    let (tmp, s) = common::copy_session();
    let cfg = fast_config(tmp.path());
    assert!(s.join("emg.csv").is_file() && s.join("intact.csv").is_file());
    // wrist never moves; S2 is all zeros; S6 is an exact copy of S5
    edit_csv(&s.join("intact.csv"), |h, v| {
        let w = h.iter().position(|c| c == "wrist").unwrap();
        v[w] = "0.0".into();
    });
    edit_csv(&s.join("emg.csv"), |h, v| {
        let c2 = h.iter().position(|c| c == "S2").unwrap();
        let c5 = h.iter().position(|c| c == "S5").unwrap();
        let c6 = h.iter().position(|c| c == "S6").unwrap();
        v[c2] = "0".into();
        v[c6] = v[c5].clone();
    });
    let out = tmp.path().join("out");
    let o = run(&s, &out, &cfg, None);
    let stderr = String::from_utf8_lossy(&o.stderr);
    assert!(!stderr.contains("panicked"), "{stderr}");
    if !o.status.success() {
        // a clear one-line error is acceptable; no output folder then
        assert!(stderr.starts_with("error: "), "{stderr}");
        assert!(!out.exists());
        return;
    }
    let text = std::fs::read_to_string(out.join("sites.json")).unwrap();
    assert!(
        !text.contains("NaN") && !text.contains("null"),
        "non-finite values in sites.json"
    );
    let v: serde_json::Value = serde_json::from_str(&text).unwrap();
    let flags = v["flags"].as_array().unwrap();
    let says = |what: &str, at: &str| {
        flags
            .iter()
            .any(|f| f["what"] == what && f["where"].as_str().unwrap_or("").contains(at))
    };
    assert!(
        says("no-site", "wrist"),
        "the still DoF is flagged: {flags:#?}"
    );
    assert!(
        says("bad-signal", "S2"),
        "the all-zero site is flagged: {flags:#?}"
    );
    for f in ["aligned.csv", "sites.csv"] {
        let t = std::fs::read_to_string(out.join(f)).unwrap();
        assert!(!t.to_lowercase().contains("nan"), "NaN in {f}");
    }
}
