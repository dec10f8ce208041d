//! Helpers shared by the integration tests.
#![allow(dead_code)]

use mirrorsite::simulate::{write_session, Scenario};
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::sync::OnceLock;

/// The project root.
pub fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

/// A fixture file under tests/fixtures.
pub fn fixture(name: &str) -> PathBuf {
    root().join("tests").join("fixtures").join(name)
}

/// A good small session, simulated once per test binary; never modify it.
pub fn base_session() -> &'static Path {
    static DIR: OnceLock<(tempfile::TempDir, PathBuf)> = OnceLock::new();
    &DIR.get_or_init(|| {
        let tmp = tempfile::tempdir().unwrap();
        let out = tmp.path().join("small");
        let sc = Scenario::from_file(&fixture("small-scenario.toml")).unwrap();
        write_session(&sc, &out, None, false).unwrap();
        (tmp, out)
    })
    .1
}

/// A fresh copy of the base session in its own temporary folder.
pub fn copy_session() -> (tempfile::TempDir, PathBuf) {
    let tmp = tempfile::tempdir().unwrap();
    let dst = tmp.path().join("session");
    std::fs::create_dir(&dst).unwrap();
    for e in std::fs::read_dir(base_session()).unwrap() {
        let e = e.unwrap();
        std::fs::copy(e.path(), dst.join(e.file_name())).unwrap();
    }
    (tmp, dst)
}

/// Content hash of every file in a folder (FNV-1a, enough to see a change).
pub fn hash_dir(dir: &Path) -> BTreeMap<String, u64> {
    let mut out = BTreeMap::new();
    for e in std::fs::read_dir(dir).unwrap() {
        let e = e.unwrap();
        let name = e.file_name().to_string_lossy().into_owned();
        let h = match std::fs::read(e.path()) {
            Ok(bytes) => bytes.iter().fold(0xcbf2_9ce4_8422_2325u64, |h, b| {
                (h ^ *b as u64).wrapping_mul(0x0000_0100_0000_01b3)
            }),
            Err(_) => 0,
        };
        out.insert(name, h);
    }
    out
}

/// Replaces line `line` (1-based) of a text file.
pub fn set_line(path: &Path, line: usize, text: &str) {
    let s = std::fs::read_to_string(path).unwrap();
    let mut lines: Vec<String> = s.lines().map(str::to_string).collect();
    lines[line - 1] = text.to_string();
    std::fs::write(path, lines.join("\n") + "\n").unwrap();
}

/// Line `line` (1-based) of a text file.
pub fn get_line(path: &Path, line: usize) -> String {
    std::fs::read_to_string(path)
        .unwrap()
        .lines()
        .nth(line - 1)
        .unwrap()
        .to_string()
}

/// Replaces field `col` (0-based) on line `line` of a CSV file.
pub fn set_field(path: &Path, line: usize, col: usize, value: &str) {
    let l = get_line(path, line);
    let mut f: Vec<&str> = l.split(',').collect();
    f[col] = value;
    set_line(path, line, &f.join(","));
}

/// A snapshot of a folder tree: every entry's relative path with its type,
/// permission bits, link target (for links, which are not followed) and a
/// content hash (for files; 0 when unreadable). Two equal snapshots mean
/// nothing was added, removed, renamed, re-linked, re-permissioned or changed.
pub fn snapshot_dir(dir: &Path) -> BTreeMap<String, String> {
    fn walk(base: &Path, dir: &Path, out: &mut BTreeMap<String, String>) {
        let mut entries: Vec<_> = std::fs::read_dir(dir)
            .unwrap()
            .map(|e| e.unwrap().path())
            .collect();
        entries.sort();
        for p in entries {
            let rel = p.strip_prefix(base).unwrap().to_string_lossy().into_owned();
            let meta = std::fs::symlink_metadata(&p).unwrap();
            let mode = perm_bits(&meta);
            let what = if meta.file_type().is_symlink() {
                format!(
                    "link {mode:o} -> {}",
                    std::fs::read_link(&p).unwrap().display()
                )
            } else if meta.is_dir() {
                walk(base, &p, out);
                format!("dir {mode:o}")
            } else {
                let h = std::fs::read(&p).map_or(0, |bytes| {
                    bytes.iter().fold(0xcbf2_9ce4_8422_2325u64, |h, b| {
                        (h ^ *b as u64).wrapping_mul(0x0000_0100_0000_01b3)
                    })
                });
                format!("file {mode:o} {} {h:016x}", meta.len())
            };
            out.insert(rel, what);
        }
    }
    let mut out = BTreeMap::new();
    walk(dir, dir, &mut out);
    out
}

#[cfg(unix)]
fn perm_bits(meta: &std::fs::Metadata) -> u32 {
    use std::os::unix::fs::PermissionsExt;
    meta.permissions().mode() & 0o7777
}

#[cfg(not(unix))]
fn perm_bits(meta: &std::fs::Metadata) -> u32 {
    u32::from(meta.permissions().readonly())
}

/// Whether this process runs as root (effective uid 0), so that file
/// permissions do not stop it.
pub fn is_root() -> bool {
    std::fs::read_to_string("/proc/self/status")
        .ok()
        .and_then(|s| {
            s.lines()
                .find(|l| l.starts_with("Uid:"))
                .and_then(|l| l.split_whitespace().nth(2).map(|u| u == "0"))
        })
        .unwrap_or(false)
}

/// A command that runs `program` without the power to bypass file
/// permissions: the program itself when not root; as root, the program under
/// `setpriv` as the unprivileged user 65534 (which must be able to run it).
/// `None` when neither is possible; the caller then skips its permission check.
pub fn unprivileged(program: &Path) -> Option<std::process::Command> {
    if !is_root() {
        return Some(std::process::Command::new(program));
    }
    let make = || {
        let mut c = std::process::Command::new("setpriv");
        c.args(["--reuid=65534", "--regid=65534", "--clear-groups"])
            .arg(program);
        c
    };
    let works = make()
        .arg("--version")
        .output()
        .is_ok_and(|o| o.status.success());
    works.then(make)
}

/// Sets a folder's mode to 755 so that an unprivileged run can enter it
/// (temporary folders are created 700).
#[cfg(unix)]
pub fn open_to_all(dir: &Path) {
    use std::os::unix::fs::PermissionsExt;
    std::fs::set_permissions(dir, std::fs::Permissions::from_mode(0o755)).unwrap();
}
