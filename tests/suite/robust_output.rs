//! Faults on the output side of the commands that write today
//! (`simulate --out`, `protocol cues --out`, and `output::Staging` under
//! them): a bad output path, no permission, a read-only or full file system,
//! and a kill mid-write. Each gives a clean one-line error, a non-zero exit,
//! no panic and no partial output at the target path.
//!
//! What is tested how:
//! - a parent that is a regular file: always;
//! - no permission: as the unprivileged user (`setpriv` when root), else skipped;
//! - read-only and full file systems: a small tmpfs mounted in a private
//!   mount namespace (`unshare -m`, needs root), else skipped; the mount
//!   disappears with the namespace, so the folder is listed from inside it;
//! - a full device for stdout writers: `/dev/full`;
//! - kill -9 mid-write: always (a hidden `.<name>.partial-<pid>` sibling
//!   remains, since SIGKILL skips all cleanup; the next run removes it).

use crate::common;

use common::*;
use mirrorsite::output::{write_file_atomic, Staging};
use std::path::Path;
use std::process::{Command, Output, Stdio};
use std::time::{Duration, Instant};

const BIN: &str = env!("CARGO_BIN_EXE_mirrorsite");

fn bin() -> Command {
    Command::new(BIN)
}

fn scenario() -> std::path::PathBuf {
    fixture("small-scenario.toml")
}

/// Entries of a folder, sorted.
fn listing(dir: &Path) -> Vec<String> {
    let mut v: Vec<String> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    v.sort();
    v
}

/// A failed run: non-zero exit, no panic, one line on stderr containing
/// each of `needles`; returns the line.
fn assert_failed_cleanly(out: &Output, needles: &[&str]) -> String {
    let err = String::from_utf8_lossy(&out.stderr).into_owned();
    assert!(!err.contains("panicked"), "panic: {err}");
    assert!(!out.status.success(), "should fail: {err}");
    assert_eq!(
        out.status.code(),
        Some(1),
        "exit 1 for an output error: {err}"
    );
    assert_eq!(err.lines().count(), 1, "one line: {err}");
    assert!(err.starts_with("error: "), "{err}");
    for n in needles {
        assert!(err.contains(n), "`{n}` missing from: {err}");
    }
    err
}

#[test]
fn simulate_into_a_path_under_a_regular_file() {
    let t = tempfile::tempdir().unwrap();
    let file = t.path().join("notes.txt");
    std::fs::write(&file, "not a folder\n").unwrap();
    let out = bin()
        .arg("simulate")
        .arg(scenario())
        .arg("--out")
        .arg(file.join("s"))
        .output()
        .unwrap();
    assert_failed_cleanly(&out, &["notes.txt", "not a folder"]);
    assert_eq!(listing(t.path()), ["notes.txt"]);
    assert_eq!(std::fs::read_to_string(&file).unwrap(), "not a folder\n");
}

#[test]
fn cues_into_a_path_under_a_regular_file() {
    let t = tempfile::tempdir().unwrap();
    let file = t.path().join("notes.txt");
    std::fs::write(&file, "x").unwrap();
    let out = bin()
        .args(["protocol", "cues", "hand-basic", "--out"])
        .arg(file.join("cues.csv"))
        .output()
        .unwrap();
    assert_failed_cleanly(&out, &["notes.txt", "Not a directory"]);
    assert_eq!(listing(t.path()), ["notes.txt"]);
}

#[test]
fn simulate_refuses_an_existing_target() {
    let t = tempfile::tempdir().unwrap();
    let target = t.path().join("s");
    std::fs::create_dir(&target).unwrap();
    std::fs::write(target.join("keep.txt"), "mine").unwrap();
    let out = bin()
        .arg("simulate")
        .arg(scenario())
        .arg("--out")
        .arg(&target)
        .output()
        .unwrap();
    assert_failed_cleanly(&out, &["already exists", "--force"]);
    assert_eq!(listing(&target), ["keep.txt"]);
    assert_eq!(listing(t.path()), ["s"]);
}

#[cfg(unix)]
#[test]
fn no_permission_to_write() {
    use std::os::unix::fs::PermissionsExt;
    let t = tempfile::tempdir().unwrap();
    let Some(mut sim) = unprivileged(Path::new(BIN)) else {
        eprintln!("skipped: running as root without a usable `setpriv`");
        return;
    };
    let mut cues = unprivileged(Path::new(BIN)).unwrap();
    // Mode 555: nobody but root may create entries here; as root the
    // command runs as an unprivileged user.
    let locked = t.path().join("locked");
    std::fs::create_dir(&locked).unwrap();
    open_to_all(t.path());
    std::fs::set_permissions(&locked, std::fs::Permissions::from_mode(0o555)).unwrap();
    // The scenario is copied beside the locked folder: the unprivileged user
    // may not be able to reach the checkout (e.g. a clone inside a 0700 folder).
    let readable = t.path().join("scenario.toml");
    std::fs::copy(scenario(), &readable).unwrap();
    std::fs::set_permissions(&readable, std::fs::Permissions::from_mode(0o644)).unwrap();
    let out = sim
        .arg("simulate")
        .arg(&readable)
        .arg("--out")
        .arg(locked.join("s"))
        .output()
        .unwrap();
    assert_failed_cleanly(&out, &["locked", "Permission denied"]);
    let out = cues
        .args(["protocol", "cues", "hand-basic", "--out"])
        .arg(locked.join("cues.csv"))
        .output()
        .unwrap();
    assert_failed_cleanly(&out, &["locked", "Permission denied"]);
    assert!(listing(&locked).is_empty(), "{:?}", listing(&locked));
}

/// Runs `args` of the binary with a fresh tmpfs (`options`, e.g.
/// `size=256k`) mounted at `dir` in a private mount namespace. Returns the
/// run and the listing of `dir` (hidden entries included) taken before the
/// namespace ends, or `None` when such a mount is not possible here.
fn with_tmpfs(dir: &Path, options: &str, args: &[&std::ffi::OsStr]) -> Option<(Output, String)> {
    let probe = Command::new("unshare")
        .args(["-m", "sh", "-c"])
        .arg("mount -t tmpfs -o size=4k tmpfs \"$0\"")
        .arg(dir)
        .stderr(Stdio::null())
        .status();
    if !probe.is_ok_and(|s| s.success()) {
        return None;
    }
    // The listing goes to stdout after a marker; the commands tested here
    // print nothing on stdout.
    let script = "d=\"$0\"; o=\"$1\"; shift; mount -t tmpfs -o \"$o\" tmpfs \"$d\" || exit 97; \
                  \"$@\"; rc=$?; echo '--listing'; ls -A \"$d\"; exit $rc";
    let out = Command::new("unshare")
        .args(["-m", "sh", "-c", script])
        .arg(dir)
        .arg(options)
        .arg(BIN)
        .args(args)
        .output()
        .unwrap();
    let stdout = String::from_utf8_lossy(&out.stdout).into_owned();
    let (_, list) = stdout.split_once("--listing\n").expect("the script ran");
    Some((out, list.to_string()))
}

#[test]
fn disk_full() {
    let t = tempfile::tempdir().unwrap();
    let dir = t.path().join("small-disk");
    std::fs::create_dir(&dir).unwrap();
    let target = dir.join("s");
    let sc = scenario();
    let args = [
        "simulate".as_ref(),
        sc.as_os_str(),
        "--out".as_ref(),
        target.as_os_str(),
    ];
    // The session is about 3 MB; the disk holds 256 kB.
    let Some((out, list)) = with_tmpfs(&dir, "size=256k", &args) else {
        eprintln!("skipped: cannot mount a tmpfs in a private namespace here (needs root)");
        return;
    };
    assert_failed_cleanly(&out, &["No space left on device"]);
    assert_eq!(list, "", "nothing left on the full disk");
    // The cue table is about 5 kB; the disk holds one 4 kB page.
    let cues = dir.join("cues.csv");
    let args = [
        "protocol".as_ref(),
        "cues".as_ref(),
        "hand-basic".as_ref(),
        "--out".as_ref(),
        cues.as_os_str(),
    ];
    let (out, list) = with_tmpfs(&dir, "size=4k", &args).unwrap();
    assert_failed_cleanly(&out, &["No space left on device"]);
    assert_eq!(list, "", "nothing left on the full disk");
}

#[test]
fn read_only_file_system() {
    let t = tempfile::tempdir().unwrap();
    let dir = t.path().join("ro");
    std::fs::create_dir(&dir).unwrap();
    let target = dir.join("s");
    let sc = scenario();
    let args = [
        "simulate".as_ref(),
        sc.as_os_str(),
        "--out".as_ref(),
        target.as_os_str(),
    ];
    let Some((out, list)) = with_tmpfs(&dir, "ro,size=64k", &args) else {
        eprintln!("skipped: cannot mount a tmpfs in a private namespace here (needs root)");
        return;
    };
    assert_failed_cleanly(&out, &["Read-only file system"]);
    assert_eq!(list, "");
}

#[test]
fn standard_output_on_a_full_device() {
    let Ok(full) = std::fs::OpenOptions::new().write(true).open("/dev/full") else {
        eprintln!("skipped: no /dev/full");
        return;
    };
    let out = bin()
        .args(["protocol", "cues", "hand-basic", "--out", "-"])
        .stdout(full.try_clone().unwrap())
        .output()
        .unwrap();
    assert_failed_cleanly(&out, &["No space left on device"]);
    let out = bin()
        .args(["inspect", "--json"])
        .arg(base_session())
        .stdout(full)
        .output()
        .unwrap();
    assert_failed_cleanly(&out, &["standard output", "No space left on device"]);
}

#[test]
fn killed_mid_write_leaves_no_output_folder() {
    let t = tempfile::tempdir().unwrap();
    // The small scenario with both rests at 60 s: about 160 s of data, long
    // enough to be caught while writing.
    let text = std::fs::read_to_string(scenario()).unwrap();
    let long = t.path().join("long.toml");
    std::fs::write(
        &long,
        text.replace("duration_s = 3.0\n", "duration_s = 60.0\n"),
    )
    .unwrap();
    let target = t.path().join("s");
    let mut child = bin()
        .arg("simulate")
        .arg(&long)
        .arg("--out")
        .arg(&target)
        .stderr(Stdio::null())
        .spawn()
        .unwrap();
    let partial = t.path().join(format!(".s.partial-{}", child.id()));
    let emg = partial.join("emg.csv");
    let t0 = Instant::now();
    loop {
        if std::fs::metadata(&emg).is_ok_and(|m| m.len() > 0) {
            break;
        }
        if let Some(status) = child.try_wait().unwrap() {
            panic!("simulate ended ({status}) before it could be interrupted");
        }
        assert!(
            t0.elapsed() < Duration::from_secs(120),
            "no output appeared"
        );
        std::thread::sleep(Duration::from_millis(5));
    }
    child.kill().unwrap(); // SIGKILL
    child.wait().unwrap();
    assert!(!target.exists(), "no folder at the target path");
    assert!(!t.path().join("s.truth.json").exists());
    // SIGKILL skips all cleanup: the hidden partial sibling remains ...
    assert!(partial.is_dir());
    // ... until the next write of the same target removes it.
    let out = bin()
        .arg("simulate")
        .arg(scenario())
        .arg("--out")
        .arg(&target)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert_eq!(listing(t.path()), ["long.toml", "s", "s.truth.json"]);
}

#[test]
fn staging_cleans_up_and_commits_whole() {
    let t = tempfile::tempdir().unwrap();
    let target = t.path().join("out");
    // dropped without commit: nothing remains
    {
        let st = Staging::new(&target, false).unwrap();
        std::fs::write(st.path().join("a.txt"), "1").unwrap();
        assert!(st.path().starts_with(t.path()));
    }
    assert!(listing(t.path()).is_empty());
    // committed: the folder appears whole
    let st = Staging::new(&target, false).unwrap();
    std::fs::write(st.path().join("a.txt"), "1").unwrap();
    st.commit().unwrap();
    assert_eq!(listing(&target), ["a.txt"]);
    // not replaced unless forced; forced replacement leaves no leftovers
    assert!(Staging::new(&target, false).is_err());
    let st = Staging::new(&target, true).unwrap();
    std::fs::write(st.path().join("b.txt"), "2").unwrap();
    st.commit().unwrap();
    assert_eq!(listing(&target), ["b.txt"]);
    assert_eq!(listing(t.path()), ["out"]);
}

#[test]
fn staging_under_a_regular_file_is_refused() {
    let t = tempfile::tempdir().unwrap();
    let file = t.path().join("f");
    std::fs::write(&file, "x").unwrap();
    let err = Staging::new(&file.join("deeper").join("out"), false).unwrap_err();
    assert!(err.to_string().contains("is a file, not a folder"), "{err}");
    let err = write_file_atomic(&file.join("x.json"), b"{}").unwrap_err();
    assert!(matches!(err, mirrorsite::Error::Io { .. }), "{err}");
    assert!(
        err.to_string().contains("x.json: "),
        "names the target: {err}"
    );
    assert_eq!(listing(t.path()), ["f"]);
}

#[cfg(target_os = "linux")]
#[test]
fn stale_partials_of_dead_processes_are_removed() {
    let t = tempfile::tempdir().unwrap();
    // A process that has ended: its pid is free (until reused, which would
    // only make the cleanup keep the folder).
    let mut c = Command::new("true").spawn().unwrap();
    let dead = c.id();
    c.wait().unwrap();
    let stale = t.path().join(format!(".out.partial-{dead}"));
    let stale_old = t.path().join(format!(".out.partial-{dead}.old"));
    let stale_file = t.path().join(format!(".out.json.partial-{dead}"));
    // pid 1 always runs: its partial folder is left alone.
    let live = t.path().join(".out.partial-1");
    let other = t.path().join(".other.partial-999999999");
    for d in [&stale, &stale_old, &live, &other] {
        std::fs::create_dir(d).unwrap();
        std::fs::write(d.join("emg.csv"), "half").unwrap();
    }
    std::fs::write(&stale_file, "{").unwrap();
    let st = Staging::new(&t.path().join("out"), false).unwrap();
    st.commit().unwrap();
    write_file_atomic(&t.path().join("out.json"), b"{}").unwrap();
    assert!(!stale.exists() && !stale_old.exists() && !stale_file.exists());
    assert!(live.exists(), "a live writer's folder is kept");
    assert!(other.exists(), "another target's partials are not touched");
}
