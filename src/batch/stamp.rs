//! The stamp of a finished output folder (`run.json`): what it was made
//! from, so that a later batch can tell whether it is still current.
//!
//! The stamp records the tool version, a content hash of every input file
//! of the session (every regular file below the session folder, plus the
//! protocol file when the manifest names one by path), a hash of the
//! effective analysis configuration (as canonical JSON) and the paper size.
//! An output is *current* when its stamp equals the one computed now.
//!
//! The hash is 64-bit FNV-1a (Fowler, Noll & Vo), used only to notice a
//! change, not to resist tampering.

use crate::config::Config;
use crate::error::{Error, Result};
use crate::report::PageSize;
use serde::{Deserialize, Serialize};
use std::io::Read;
use std::path::{Path, PathBuf};

/// File name of the stamp inside an output folder.
pub const STAMP_FILE: &str = "run.json";

/// What an output folder was made from.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct Stamp {
    /// `mirrorsite <version>`.
    pub tool: String,
    /// Hash over every input file's relative name and content (hex).
    pub inputs: String,
    /// Each input file (relative to the session folder, `/`-separated) and its content hash.
    pub files: Vec<(String, String)>,
    /// Hash of the effective configuration (hex).
    pub config: String,
    /// Paper size of the sheet.
    pub paper: String,
}

const FNV_OFFSET: u64 = 0xcbf2_9ce4_8422_2325;
const FNV_PRIME: u64 = 0x0000_0100_0000_01b3;

/// Incremental 64-bit FNV-1a.
#[derive(Debug, Clone, Copy)]
pub struct Fnv(u64);

impl Default for Fnv {
    fn default() -> Self {
        Fnv(FNV_OFFSET)
    }
}

impl Fnv {
    /// Feeds bytes.
    pub fn update(&mut self, bytes: &[u8]) {
        let mut h = self.0;
        for b in bytes {
            h = (h ^ u64::from(*b)).wrapping_mul(FNV_PRIME);
        }
        self.0 = h;
    }

    /// The hash as 16 hex digits.
    pub fn hex(&self) -> String {
        format!("{:016x}", self.0)
    }
}

fn hash_file(path: &Path) -> Result<String> {
    let mut f = std::fs::File::open(path).map_err(|e| Error::io(path, e))?;
    let mut h = Fnv::default();
    let mut buf = vec![0u8; 1 << 16];
    loop {
        let n = f.read(&mut buf).map_err(|e| Error::io(path, e))?;
        if n == 0 {
            break;
        }
        h.update(&buf[..n]);
    }
    Ok(h.hex())
}

/// Every regular file below `dir` (symbolic links to files included,
/// links to folders not followed), relative and sorted.
fn files_below(dir: &Path) -> Result<Vec<PathBuf>> {
    let mut out = Vec::new();
    let mut todo = vec![PathBuf::new()];
    while let Some(rel) = todo.pop() {
        let here = dir.join(&rel);
        let rd = std::fs::read_dir(&here).map_err(|e| Error::io(&here, e))?;
        for e in rd {
            let e = e.map_err(|e| Error::io(&here, e))?;
            let r = rel.join(e.file_name());
            let ft = e.file_type().map_err(|err| Error::io(e.path(), err))?;
            if ft.is_dir() {
                todo.push(r);
            } else if ft.is_file() || (ft.is_symlink() && e.path().is_file()) {
                out.push(r);
            }
        }
    }
    out.sort();
    Ok(out)
}

impl Stamp {
    /// The stamp of running `session_dir` with `cfg` on `paper` now.
    pub fn compute(session_dir: &Path, cfg: &Config, paper: PageSize) -> Result<Stamp> {
        let mut files = Vec::new();
        for rel in files_below(session_dir)? {
            let name = rel
                .components()
                .map(|c| c.as_os_str().to_string_lossy().into_owned())
                .collect::<Vec<_>>()
                .join("/");
            files.push((name, hash_file(&session_dir.join(&rel))?));
        }
        // A protocol named by path lives outside the folder; shipped ones
        // change only with the tool version.
        if let Ok(m) = crate::session::read_manifest(session_dir) {
            if crate::protocol::shipped(&m.protocol).is_none() {
                let p = Path::new(&m.protocol);
                let full = if p.is_absolute() {
                    p.to_path_buf()
                } else {
                    session_dir.join(p)
                };
                if full.is_file() && !full.starts_with(session_dir) {
                    files.push((format!("protocol:{}", m.protocol), hash_file(&full)?));
                }
            }
        }
        let mut all = Fnv::default();
        for (n, h) in &files {
            all.update(n.as_bytes());
            all.update(&[0]);
            all.update(h.as_bytes());
            all.update(&[0]);
        }
        let json = serde_json::to_string(cfg).map_err(|e| Error::Analysis(e.to_string()))?;
        let mut c = Fnv::default();
        c.update(json.as_bytes());
        Ok(Stamp {
            tool: format!("mirrorsite {}", env!("CARGO_PKG_VERSION")),
            inputs: all.hex(),
            files,
            config: c.hex(),
            paper: paper.name().into(),
        })
    }

    /// Writes the stamp into `dir`.
    pub fn write(&self, dir: &Path) -> Result<()> {
        let text =
            serde_json::to_string_pretty(self).map_err(|e| Error::Analysis(e.to_string()))?;
        crate::output::write_file_atomic(&dir.join(STAMP_FILE), (text + "\n").as_bytes())
    }

    /// The stamp in `dir`, if there is a readable one.
    pub fn read(dir: &Path) -> Option<Stamp> {
        let text = std::fs::read_to_string(dir.join(STAMP_FILE)).ok()?;
        serde_json::from_str(&text).ok()
    }
}
