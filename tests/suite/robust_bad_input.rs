//! Bad input through the binary: `mirrorsite inspect <session>` on a good
//! session with one defect each.
//!
//! The library-level battery (tests/suite/session_errors.rs) checks the kind of
//! every error. This one checks what a user sees: exit code 2, exactly one
//! line on stderr that starts with `error: <file>, line <n>, field `<f>`: `
//! (line and field where they exist), nothing on stdout, no panic, and the
//! session folder unchanged (every entry's name, type, mode, link target and
//! content; see `common::snapshot_dir`).
//!
//! Unreadable files: the tests often run as root, for whom `chmod 000` stops
//! nothing. Three honest stand-ins are checked always: a folder where a file
//! should be, a dangling link and a loop of links. The permission case itself
//! runs the binary as an unprivileged user (`setpriv`, when root) and is
//! skipped, with a note on stderr, only when that is impossible.

use crate::common;

use common::*;
use std::path::Path;
use std::process::{Command, Output};

fn bin() -> Command {
    Command::new(env!("CARGO_BIN_EXE_mirrorsite"))
}

/// The stderr prefix expected for an input error about `file`.
fn prefix(file: &Path, line: Option<usize>, field: Option<&str>) -> String {
    let mut s = format!("error: {}", file.display());
    if let Some(l) = line {
        s.push_str(&format!(", line {l}"));
    }
    if let Some(f) = field {
        s.push_str(&format!(", field `{f}`"));
    }
    s.push_str(": ");
    s
}

/// Checks the user-facing contract of a rejected input; returns the message.
fn assert_rejected(out: &Output, expected_prefix: &str) -> String {
    let err = String::from_utf8_lossy(&out.stderr).into_owned();
    assert!(!err.contains("panicked"), "panic: {err}");
    assert_eq!(out.status.code(), Some(2), "exit code 2 expected: {err}");
    assert_eq!(err.lines().count(), 1, "exactly one line expected: {err}");
    assert!(
        err.starts_with(expected_prefix),
        "expected `{expected_prefix}…`, got: {err}"
    );
    assert!(
        err.trim_end().len() > expected_prefix.len() + 10,
        "the message says what is wrong: {err}"
    );
    assert!(out.stdout.is_empty(), "nothing on stdout on error");
    err
}

/// Runs `inspect` on `dir`, expects rejection with the given location and an
/// unchanged folder; returns the message.
fn rejects(dir: &Path, file: &Path, line: Option<usize>, field: Option<&str>) -> String {
    rejects_with(bin(), dir, &prefix(file, line, field))
}

fn rejects_with(mut cmd: Command, dir: &Path, expected_prefix: &str) -> String {
    let before = snapshot_dir(dir);
    let out = cmd.arg("inspect").arg(dir).output().unwrap();
    assert_eq!(snapshot_dir(dir), before, "the session folder was changed");
    assert_rejected(&out, expected_prefix)
}

fn edit(path: &Path, f: impl FnOnce(String) -> String) {
    let s = std::fs::read_to_string(path).unwrap();
    std::fs::write(path, f(s)).unwrap();
}

#[test]
fn the_good_session_passes() {
    let (_t, d) = copy_session();
    let before = snapshot_dir(&d);
    let out = bin().arg("inspect").arg(&d).output().unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert_eq!(snapshot_dir(&d), before);
}

#[test]
fn nan() {
    let (_t, d) = copy_session();
    let f = d.join("emg.csv");
    set_field(&f, 10, 3, "NaN");
    rejects(&d, &f, Some(10), Some("S3"));
}

#[test]
fn text_in_a_number() {
    let (_t, d) = copy_session();
    let f = d.join("emg.csv");
    set_field(&f, 200, 5, "0.01x");
    let msg = rejects(&d, &f, Some(200), Some("S5"));
    assert!(msg.contains("0.01x"), "{msg}");
}

#[test]
fn missing_column() {
    let (_t, d) = copy_session();
    let f = d.join("emg.csv");
    edit(&f, |s| {
        s.lines()
            .map(|l| l.rsplit_once(',').unwrap().0.to_string() + "\n")
            .collect()
    });
    rejects(&d, &f, Some(1), Some("S8"));
}

#[test]
fn extra_column() {
    let (_t, d) = copy_session();
    let f = d.join("intact.csv");
    edit(&f, |s| {
        s.lines()
            .enumerate()
            .map(|(i, l)| format!("{l},{}\n", if i == 0 { "elbow" } else { "1.0" }))
            .collect()
    });
    // intact.csv may carry columns the manifest does not use; the same
    // defect in emg.csv is an error (an undeclared site).
    let out = bin().arg("inspect").arg(&d).output().unwrap();
    assert!(out.status.success());
    let f = d.join("emg.csv");
    edit(&f, |s| {
        s.lines()
            .enumerate()
            .map(|(i, l)| format!("{l},{}\n", if i == 0 { "X9" } else { "0.0" }))
            .collect()
    });
    rejects(&d, &f, Some(1), Some("X9"));
}

#[test]
fn extra_field_on_one_row() {
    let (_t, d) = copy_session();
    let f = d.join("emg.csv");
    let l = get_line(&f, 77);
    set_line(&f, 77, &format!("{l},0.5"));
    rejects(&d, &f, Some(77), None);
}

#[test]
fn time_goes_back() {
    let (_t, d) = copy_session();
    let f = d.join("emg.csv");
    set_field(&f, 500, 0, "0.1000");
    let msg = rejects(&d, &f, Some(500), Some("time_s"));
    assert!(msg.contains("strictly increasing"), "{msg}");
}

#[test]
fn duplicated_time() {
    let (_t, d) = copy_session();
    let f = d.join("intact.csv");
    let t = get_line(&f, 41).split(',').next().unwrap().to_string();
    set_field(&f, 42, 0, &t);
    rejects(&d, &f, Some(42), Some("time_s"));
}

#[test]
fn truncated_last_line() {
    let (_t, d) = copy_session();
    let f = d.join("emg.csv");
    let s = std::fs::read_to_string(&f).unwrap();
    let n = s.lines().count();
    let last = s.lines().last().unwrap();
    let keep = &s[..s.len() - last.len() - 1];
    let half = last.split(',').take(4).collect::<Vec<_>>().join(",");
    std::fs::write(&f, format!("{keep}{half}")).unwrap();
    let msg = rejects(&d, &f, Some(n), Some("S4"));
    assert!(msg.contains("truncated"), "{msg}");
}

#[test]
fn empty_data_file() {
    let (_t, d) = copy_session();
    let f = d.join("intact.csv");
    std::fs::write(&f, "").unwrap();
    let msg = rejects(&d, &f, Some(1), None);
    assert!(msg.contains("empty"), "{msg}");
}

#[test]
fn empty_manifest() {
    let (_t, d) = copy_session();
    let f = d.join("session.toml");
    std::fs::write(&f, "").unwrap();
    // The first key the schema misses is named.
    rejects(&d, &f, Some(1), Some("format"));
}

#[test]
fn empty_events_file() {
    let (_t, d) = copy_session();
    let f = d.join("events.csv");
    std::fs::write(&f, "").unwrap();
    rejects(&d, &f, Some(1), None);
}

#[test]
fn rate_far_from_declared() {
    let (_t, d) = copy_session();
    edit(&d.join("session.toml"), |s| {
        s.replace("rate_hz = 1000.0", "rate_hz = 1024.0")
    });
    let msg = rejects(&d, &d.join("emg.csv"), None, Some("time_s"));
    assert!(msg.contains("1024"), "{msg}");
}

#[test]
fn manifest_site_absent_from_data() {
    let (_t, d) = copy_session();
    edit(&d.join("session.toml"), |s| {
        s.replacen("id = \"S2\"", "id = \"S22\"", 1)
    });
    rejects(&d, &d.join("emg.csv"), Some(1), Some("S22"));
}

#[test]
fn missing_dof_column() {
    let (_t, d) = copy_session();
    let f = d.join("intact.csv");
    edit(&f, |s| {
        s.lines()
            .map(|l| l.rsplit_once(',').unwrap().0.to_string() + "\n")
            .collect()
    });
    rejects(&d, &f, Some(1), Some("wrist"));
}

#[test]
fn malformed_toml() {
    let (_t, d) = copy_session();
    let f = d.join("session.toml");
    set_line(&f, 4, "recorded = \"2026-10-01");
    rejects(&d, &f, Some(4), None);
}

#[test]
fn missing_key() {
    let (_t, d) = copy_session();
    let f = d.join("session.toml");
    edit(&f, |s| s.replace("units = \"mV\"\n", ""));
    // The [emg] table that lacks the key is located.
    let text = std::fs::read_to_string(&f).unwrap();
    let line = text.lines().position(|l| l == "[emg]").unwrap() + 1;
    let msg = rejects_with(bin(), &d, &format!("error: {}, line ", f.display()));
    assert!(msg.contains("field `units`"), "{msg}");
    let rest = msg
        .strip_prefix(&format!("error: {}, line ", f.display()))
        .unwrap();
    let got: usize = rest.split(',').next().unwrap().parse().unwrap();
    assert!(
        (line..line + 4).contains(&got),
        "line {got}, [emg] at {line}"
    );
}

#[test]
fn manifest_not_utf8() {
    let (_t, d) = copy_session();
    let f = d.join("session.toml");
    let mut bytes = std::fs::read(&f).unwrap();
    bytes.extend_from_slice(b"# caf\xe9\n");
    std::fs::write(&f, bytes).unwrap();
    rejects(&d, &f, None, None);
}

#[test]
fn events_reversed() {
    let (_t, d) = copy_session();
    let f = d.join("events.csv");
    set_line(&f, 3, "16.000,4.000,paced,fingers");
    rejects(&d, &f, Some(3), Some("end_s"));
}

#[test]
fn events_outside_the_recording() {
    let (_t, d) = copy_session();
    let f = d.join("events.csv");
    set_line(&f, 7, "39.700,80.000,rest,*");
    rejects(&d, &f, Some(7), Some("end_s"));
    set_line(&f, 7, "-5.000,2.000,rest,*");
    rejects(&d, &f, Some(7), Some("start_s"));
}

#[test]
fn intact_much_shorter_than_emg() {
    let (_t, d) = copy_session();
    let f = d.join("intact.csv");
    edit(&f, |s| {
        s.lines().take(2001).map(|l| format!("{l}\n")).collect()
    });
    let msg = rejects(&d, &f, None, Some("time_s"));
    assert!(msg.contains("covers"), "{msg}");
}

#[test]
fn binary_file() {
    let (_t, d) = copy_session();
    let f = d.join("emg.csv");
    let bytes: Vec<u8> = (0..4096u32)
        .map(|i| (i.wrapping_mul(2_654_435_761) >> 13) as u8)
        .collect();
    std::fs::write(&f, bytes).unwrap();
    rejects(&d, &f, Some(1), None);
}

#[test]
fn binary_manifest() {
    let (_t, d) = copy_session();
    let f = d.join("session.toml");
    std::fs::write(&f, [0x7fu8, b'E', b'L', b'F', 2, 1, 1, 0, 0, 0]).unwrap();
    rejects(&d, &f, None, None);
}

#[test]
fn huge_values() {
    let (_t, d) = copy_session();
    let f = d.join("emg.csv");
    set_field(&f, 321, 2, "1e30");
    rejects(&d, &f, Some(321), Some("S2"));
    // beyond f64: parses to infinity, which is not a finite number
    set_field(&f, 321, 2, "1e999");
    rejects(&d, &f, Some(321), Some("S2"));
    let f = d.join("intact.csv");
    base_copy(&d, "emg.csv");
    set_field(&f, 99, 1, "-1e30");
    rejects(&d, &f, Some(99), Some("fingers"));
}

/// Restores `name` from the base session; returns its path.
fn base_copy(d: &Path, name: &str) -> std::path::PathBuf {
    let p = d.join(name);
    std::fs::copy(base_session().join(name), &p).unwrap();
    p
}

#[test]
fn corrupt_gzip() {
    let (_t, d) = copy_session();
    let plain = d.join("emg.csv");
    std::fs::remove_file(&plain).unwrap();
    let gz = d.join("emg.csv.gz");
    std::fs::write(&gz, b"\x1f\x8b\x08garbage").unwrap();
    rejects(&d, &gz, None, None);
}

#[cfg(unix)]
#[test]
fn symlink_loop() {
    use std::os::unix::fs::symlink;
    let (_t, d) = copy_session();
    let f = d.join("events.csv");
    std::fs::remove_file(&f).unwrap();
    symlink("events.csv", &f).unwrap();
    rejects(&d, &f, None, None);
    // a loop of two links in place of a required file
    let f = d.join("emg.csv");
    std::fs::remove_file(&f).unwrap();
    symlink("loop.csv", &f).unwrap();
    symlink("emg.csv", d.join("loop.csv")).unwrap();
    rejects(&d, &f, None, None);
}

#[cfg(unix)]
#[test]
fn dangling_link() {
    let (_t, d) = copy_session();
    let f = d.join("intact.csv");
    std::fs::remove_file(&f).unwrap();
    std::os::unix::fs::symlink("glove-take-2.csv", &f).unwrap();
    let msg = rejects(&d, &f, None, None);
    assert!(msg.contains("not found"), "{msg}");
}

#[test]
fn folder_in_place_of_a_file() {
    let (_t, d) = copy_session();
    let f = d.join("emg.csv");
    std::fs::remove_file(&f).unwrap();
    std::fs::create_dir(&f).unwrap();
    let msg = rejects(&d, &f, None, None);
    assert!(msg.contains("folder"), "{msg}");
    let (_t, d) = copy_session();
    let f = d.join("session.toml");
    std::fs::remove_file(&f).unwrap();
    std::fs::create_dir(&f).unwrap();
    rejects(&d, &f, None, None);
}

#[cfg(unix)]
#[test]
fn unreadable_file() {
    use std::os::unix::fs::PermissionsExt;
    let (t, d) = copy_session();
    let Some(cmd) = unprivileged(Path::new(env!("CARGO_BIN_EXE_mirrorsite"))) else {
        eprintln!(
            "skipped: running as root without a usable `setpriv`, so permissions cannot be tested"
        );
        return;
    };
    open_to_all(t.path());
    open_to_all(&d);
    let f = d.join("emg.csv");
    std::fs::set_permissions(&f, std::fs::Permissions::from_mode(0o000)).unwrap();
    let msg = rejects_with(cmd, &d, &prefix(&f, None, None));
    assert!(msg.contains("permission denied"), "{msg}");
}

#[test]
fn missing_required_file() {
    let (_t, d) = copy_session();
    let f = d.join("intact.csv");
    std::fs::remove_file(&f).unwrap();
    rejects(&d, &f, None, None);
}

#[test]
fn session_folder_missing_or_a_file() {
    let t = tempfile::tempdir().unwrap();
    let nope = t.path().join("nope");
    let out = bin().arg("inspect").arg(&nope).output().unwrap();
    assert_rejected(&out, &prefix(&nope, None, None));
    let file = t.path().join("session.csv");
    std::fs::write(&file, "time_s\n").unwrap();
    let out = bin().arg("inspect").arg(&file).output().unwrap();
    assert_rejected(&out, &prefix(&file, None, None));
}

#[test]
fn broken_protocol_file_in_the_session() {
    let (_t, d) = copy_session();
    edit(&d.join("session.toml"), |s| {
        s.replace("protocol = \"hand-basic\"", "protocol = \"ours.toml\"")
    });
    let f = d.join("ours.toml");
    std::fs::write(&f, "id = \"ours\"\ntitle = \"Ours\"\nversion = [1\n").unwrap();
    // The parser's message spans two lines ("invalid array", "expected `]`");
    // it is still one line on stderr. The defect is found at the end of the
    // file, after the last line break: line 4.
    let msg = rejects(&d, &f, Some(4), None);
    assert!(msg.contains("expected"), "{msg}");
}
