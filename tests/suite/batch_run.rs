//! `mirrorsite batch`: good sessions done, a broken one failed and reported,
//! re-runs skip current outputs, `--force` redoes them.

use crate::common;

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

fn exe() -> &'static str {
    env!("CARGO_BIN_EXE_mirrorsite")
}

/// A folder with two good sessions (`clinic-a/P1`, `clinic-b/P2`) and one
/// with a non-number in emg.csv (`clinic-b/P3`), plus a fast configuration.
fn batch_folder(tmp: &Path) -> (PathBuf, PathBuf) {
    let input = tmp.join("in");
    for (rel, broken) in [
        ("clinic-a/P1", false),
        ("clinic-b/P2", false),
        ("clinic-b/P3", true),
    ] {
        let dst = input.join(rel);
        std::fs::create_dir_all(&dst).unwrap();
        for e in std::fs::read_dir(common::base_session()).unwrap() {
            let e = e.unwrap();
            std::fs::copy(e.path(), dst.join(e.file_name())).unwrap();
        }
        if broken {
            common::set_field(&dst.join("emg.csv"), 12, 2, "oops");
        }
    }
    let cfg = tmp.join("fast.toml");
    std::fs::write(&cfg, "[select]\nresamples = 6\n").unwrap();
    (input, cfg)
}

fn batch(input: &Path, out: &Path, cfg: &Path, extra: &[&str]) -> Output {
    Command::new(exe())
        .arg("batch")
        .arg(input)
        .arg("--out")
        .arg(out)
        .arg("--config")
        .arg(cfg)
        .args(["--jobs", "2"])
        .args(extra)
        .output()
        .unwrap()
}

fn summary(out: &Path) -> Vec<csv::StringRecord> {
    let mut r = csv::Reader::from_path(out.join("batch-summary.csv")).unwrap();
    assert_eq!(
        r.headers().unwrap().iter().collect::<Vec<_>>(),
        mirrorsite::batch::summary::SUMMARY_COLUMNS
    );
    r.records().map(|x| x.unwrap()).collect()
}

fn status_of(rows: &[csv::StringRecord]) -> Vec<(String, String)> {
    rows.iter()
        .map(|r| (r[0].to_string(), r[2].to_string()))
        .collect()
}

#[test]
fn batch_runs_good_sessions_reports_the_bad_one_and_skips_current_outputs() {
    let tmp = tempfile::tempdir().unwrap();
    let (input, cfg) = batch_folder(tmp.path());
    let out = tmp.path().join("out");

    let o = batch(&input, &out, &cfg, &[]);
    let stderr = String::from_utf8_lossy(&o.stderr);
    assert_eq!(
        o.status.code(),
        Some(1),
        "a failed session makes the exit status 1: {stderr}"
    );
    // one progress line per finished session
    assert_eq!(
        stderr.lines().filter(|l| l.starts_with('[')).count(),
        3,
        "{stderr}"
    );
    let rows = summary(&out);
    assert_eq!(
        status_of(&rows),
        [
            ("clinic-a/P1".to_string(), "done".to_string()),
            ("clinic-b/P2".to_string(), "done".to_string()),
            ("clinic-b/P3".to_string(), "failed".to_string()),
        ]
    );
    // the failed row carries the reader's message: file, line and field
    assert!(
        rows[2][6].contains("emg.csv, line 12") && rows[2][6].contains("oops"),
        "{}",
        &rows[2][6]
    );
    assert!(
        !out.join("clinic-b/P3").exists(),
        "no output for a failed session"
    );
    for (i, rel) in ["clinic-a/P1", "clinic-b/P2"].iter().enumerate() {
        let d = out.join(rel);
        for f in [
            "sites.json",
            "sites.csv",
            "aligned.csv",
            "sheet.pdf",
            "sheet.html",
            "run.json",
        ] {
            assert!(d.join(f).is_file(), "{rel}/{f} missing");
        }
        assert_eq!(&rows[i][1], "TEST-01");
        let planned: Vec<&str> = rows[i][3].split(' ').collect();
        assert!(
            !planned.is_empty() && planned.len() <= 4,
            "{:?}",
            &rows[i][3]
        );
        // every planned site has a confidence entry
        for p in &planned {
            assert!(rows[i][4].contains(p), "{p} not in {}", &rows[i][4]);
        }
        let json: serde_json::Value =
            serde_json::from_str(&std::fs::read_to_string(d.join("sites.json")).unwrap()).unwrap();
        assert_eq!(
            rows[i][5].parse::<usize>().unwrap(),
            json["flags"].as_array().unwrap().len()
        );
    }
    let html = std::fs::read_to_string(out.join("batch-summary.html")).unwrap();
    assert!(html.contains("clinic-b/P3") && html.contains("oops"));
    assert!(
        !html.contains("http") && !html.contains("<script"),
        "self-contained"
    );
    let first = std::fs::read(out.join("clinic-a/P1/sites.json")).unwrap();
    let first_rows = rows.clone();

    // Re-run: the good ones are current, the bad one fails again.
    let o = batch(&input, &out, &cfg, &["--quiet"]);
    assert_eq!(o.status.code(), Some(1));
    let stderr = String::from_utf8_lossy(&o.stderr);
    assert!(
        !stderr.lines().any(|l| l.starts_with('[')),
        "--quiet: {stderr}"
    );
    let rows = summary(&out);
    assert_eq!(&rows[0][2], "skipped-current");
    assert_eq!(&rows[1][2], "skipped-current");
    assert_eq!(&rows[2][2], "failed");
    // a skipped session's row is read back from its output
    for i in 0..2 {
        for c in [1, 3, 4, 5, 6] {
            assert_eq!(&rows[i][c], &first_rows[i][c]);
        }
    }

    // An input changes: only that session is redone.
    let m = input.join("clinic-b/P2/session.toml");
    let text = std::fs::read_to_string(&m).unwrap();
    std::fs::write(&m, text + "\n# edited\n").unwrap();
    let o = batch(&input, &out, &cfg, &["--quiet"]);
    assert_eq!(o.status.code(), Some(1));
    let rows = summary(&out);
    assert_eq!(&rows[0][2], "skipped-current");
    assert_eq!(&rows[1][2], "done");

    // --force redoes both, with the same result (same input and seed).
    let o = batch(&input, &out, &cfg, &["--quiet", "--force"]);
    assert_eq!(o.status.code(), Some(1));
    let rows = summary(&out);
    assert_eq!(&rows[0][2], "done");
    assert_eq!(&rows[1][2], "done");
    assert_eq!(
        std::fs::read(out.join("clinic-a/P1/sites.json")).unwrap(),
        first
    );
}

#[test]
fn a_changed_configuration_makes_outputs_stale() {
    let tmp = tempfile::tempdir().unwrap();
    let input = tmp.path().join("in");
    let dst = input.join("only");
    std::fs::create_dir_all(&dst).unwrap();
    for e in std::fs::read_dir(common::base_session()).unwrap() {
        let e = e.unwrap();
        std::fs::copy(e.path(), dst.join(e.file_name())).unwrap();
    }
    let cfg = tmp.path().join("fast.toml");
    std::fs::write(&cfg, "[select]\nresamples = 6\n").unwrap();
    let out = tmp.path().join("out");
    assert!(batch(&input, &out, &cfg, &["--quiet"]).status.success());
    assert_eq!(&summary(&out)[0][2], "done");
    assert!(batch(&input, &out, &cfg, &["--quiet"]).status.success());
    assert_eq!(&summary(&out)[0][2], "skipped-current");
    // a different budget is a different effective configuration
    assert!(batch(&input, &out, &cfg, &["--quiet", "--budget", "3"])
        .status
        .success());
    assert_eq!(&summary(&out)[0][2], "done");
    // a `run` output with the same settings counts as current too
    let single = tmp.path().join("single");
    let o = Command::new(exe())
        .arg("run")
        .arg(&dst)
        .arg("--out")
        .arg(&single)
        .arg("--config")
        .arg(&cfg)
        .args(["--quiet", "--budget", "3"])
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    assert_eq!(
        std::fs::read(single.join("run.json")).unwrap(),
        std::fs::read(out.join("only/run.json")).unwrap()
    );
}

#[test]
fn session_discovery_is_sorted_skips_hidden_folders_and_survives_link_loops() {
    let tmp = tempfile::tempdir().unwrap();
    let root = tmp.path().join("in");
    for rel in ["b/2", "a/1", "a/1b", ".hidden/x"] {
        std::fs::create_dir_all(root.join(rel)).unwrap();
        std::fs::write(root.join(rel).join("session.toml"), "").unwrap();
    }
    std::fs::create_dir_all(root.join("empty/deeper")).unwrap();
    #[cfg(unix)]
    std::os::unix::fs::symlink(&root, root.join("b/loop")).unwrap();
    let found = mirrorsite::batch::find_sessions(&root, None).unwrap();
    let rels: Vec<&str> = found.iter().map(|f| f.rel.as_str()).collect();
    assert_eq!(rels, ["a/1", "a/1b", "b/2"]);
    // the input folder itself a session: its own name
    let one = mirrorsite::batch::find_sessions(&root.join("a/1"), None).unwrap();
    assert_eq!(one.len(), 1);
    assert_eq!(one[0].rel, "1");
}
