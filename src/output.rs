//! Writing an output folder all at once.
//!
//! Outputs are written into a hidden temporary sibling of the target folder
//! and renamed into place only when complete, so a crash or a kill leaves no
//! half-written output folder (at most a hidden `.<name>.partial-<pid>`
//! sibling). An existing target is never replaced unless asked. Such a
//! leftover, whose process is no longer alive, is removed by the next
//! [`Staging::new`] of the same target.

use crate::error::{Error, Result};
use std::path::{Path, PathBuf};

/// A folder being written; becomes the target folder on [`Staging::commit`].
#[derive(Debug)]
pub struct Staging {
    target: PathBuf,
    tmp: PathBuf,
    force: bool,
    done: bool,
}

impl Staging {
    /// Starts writing `target`. Fails if it exists and `force` is false.
    pub fn new(target: &Path, force: bool) -> Result<Staging> {
        if target.exists() && !force {
            return Err(Error::Argument(format!(
                "{} already exists; choose a new output folder or pass --force to replace it",
                target.display()
            )));
        }
        let name = target
            .file_name()
            .ok_or_else(|| Error::Argument(format!("{} is not a folder name", target.display())))?
            .to_string_lossy()
            .into_owned();
        let parent = match target.parent() {
            Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
            _ => PathBuf::from("."),
        };
        std::fs::create_dir_all(&parent).map_err(|e| Error::io(&parent, e))?;
        remove_stale_partials(&parent, &name);
        let tmp = parent.join(format!(".{name}.partial-{}", std::process::id()));
        if tmp.exists() {
            std::fs::remove_dir_all(&tmp).map_err(|e| Error::io(&tmp, e))?;
        }
        std::fs::create_dir(&tmp).map_err(|e| Error::io(&tmp, e))?;
        Ok(Staging {
            target: target.to_path_buf(),
            tmp,
            force,
            done: false,
        })
    }

    /// The temporary folder to write into.
    pub fn path(&self) -> &Path {
        &self.tmp
    }

    /// The final folder.
    pub fn target(&self) -> &Path {
        &self.target
    }

    /// Moves the finished folder into place.
    pub fn commit(mut self) -> Result<PathBuf> {
        if self.target.exists() {
            if !self.force {
                return Err(Error::Argument(format!(
                    "{} appeared while writing; not replacing it",
                    self.target.display()
                )));
            }
            let old = self.tmp.with_extension("old");
            std::fs::rename(&self.target, &old).map_err(|e| Error::io(&self.target, e))?;
            std::fs::rename(&self.tmp, &self.target).map_err(|e| Error::io(&self.target, e))?;
            let _ = std::fs::remove_dir_all(&old);
        } else {
            std::fs::rename(&self.tmp, &self.target).map_err(|e| Error::io(&self.target, e))?;
        }
        self.done = true;
        Ok(self.target.clone())
    }
}

impl Drop for Staging {
    fn drop(&mut self) {
        if !self.done {
            let _ = std::fs::remove_dir_all(&self.tmp);
        }
    }
}

/// Whether process `pid` is alive; `true` when it cannot be told (no `/proc`).
fn pid_alive(pid: u32) -> bool {
    let proc = Path::new("/proc");
    if !proc.join("self").exists() {
        return true;
    }
    pid == std::process::id() || proc.join(pid.to_string()).exists()
}

/// Removes `.<name>.partial-<pid>` folders in `parent` left by processes
/// that are no longer alive (killed mid-way).
fn remove_stale_partials(parent: &Path, name: &str) {
    let prefix = format!(".{name}.partial-");
    let Ok(rd) = std::fs::read_dir(parent) else {
        return;
    };
    for e in rd.flatten() {
        let file = e.file_name().to_string_lossy().into_owned();
        let Some(rest) = file.strip_prefix(&prefix) else {
            continue;
        };
        let digits: String = rest.chars().take_while(char::is_ascii_digit).collect();
        let Ok(pid) = digits.parse::<u32>() else {
            continue;
        };
        if !pid_alive(pid) && e.path().is_dir() {
            let _ = std::fs::remove_dir_all(e.path());
        }
    }
}

/// Writes `bytes` to `path` through a temporary file and a rename.
pub fn write_file_atomic(path: &Path, bytes: &[u8]) -> Result<()> {
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default();
    let tmp = path.with_file_name(format!(".{name}.partial-{}", std::process::id()));
    std::fs::write(&tmp, bytes).map_err(|e| Error::io(&tmp, e))?;
    std::fs::rename(&tmp, path).map_err(|e| {
        let _ = std::fs::remove_file(&tmp);
        Error::io(path, e)
    })
}
