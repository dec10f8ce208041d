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
