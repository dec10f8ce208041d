//! Shared checks for the fuzz targets.
//!
//! Every target asserts the same contract on bad input: no panic, and an
//! error that names the file it was given, fits on one line and, when it
//! gives a line, points inside the text (1-based; one past the last line
//! break is allowed for a defect found at the end).

use mirrorsite::session::{self, Manifest, Recording};
use mirrorsite::InputError;
use std::path::{Path, PathBuf};

/// A scratch file for this process in the temporary folder.
pub fn scratch(name: &str) -> PathBuf {
    std::env::temp_dir().join(format!("mirrorsite-fuzz-{}-{name}", std::process::id()))
}

/// Checks the contract of an input error about `file`; `bytes`, when given,
/// is the text whose line numbers the error uses.
pub fn check_error(e: &InputError, file: &Path, bytes: Option<&[u8]>) {
    assert_eq!(e.file, file, "the error names another file: {e}");
    let shown = e.to_string();
    assert!(
        !shown.contains('\n'),
        "a message of several lines: {shown:?}"
    );
    assert!(
        shown.starts_with(&file.display().to_string()),
        "the message starts with the file: {shown}"
    );
    if let (Some(line), Some(bytes)) = (e.line, bytes) {
        let lines = bytes.iter().filter(|&&b| b == b'\n').count() + 1;
        assert!(
            line >= 1 && line <= lines,
            "line {line} of {lines}: {shown}"
        );
    }
}

/// The manifest of the seed session (8 sites S1..S8, DoFs fingers and wrist).
pub fn seed_manifest() -> Manifest {
    let text = include_str!("../seeds/manifest/session.toml");
    session::parse_manifest(Path::new("session.toml"), text).expect("seed manifest is valid")
}

/// A stand-in EMG recording spanning the seed session (0 to 43.7 s at 1 kHz);
/// events are checked only against its span and rate.
pub fn seed_emg(m: &Manifest) -> Recording {
    let channels: Vec<String> = m.sites.iter().map(|s| s.id.clone()).collect();
    Recording {
        file: PathBuf::from("emg.csv"),
        time_s: vec![0.0, 43.7],
        rate_hz: m.emg_rate_hz,
        data: ndarray::Array2::zeros((channels.len(), 2)),
        channels,
    }
}
