//! Writing an output folder all at once.
//!
//! Outputs are written into a hidden temporary sibling of the target folder
//! and renamed into place only when complete, so a crash or a kill leaves no
//! half-written output folder (at most a hidden `.<name>.partial-<pid>`
//! sibling). An existing target is never replaced unless asked.

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

/// `path` made absolute with every existing ancestor's symbolic links resolved.
fn resolved(path: &Path) -> PathBuf {
    let abs = std::path::absolute(path).unwrap_or_else(|_| path.to_path_buf());
    let mut existing = abs.as_path();
    let mut rest = Vec::new();
    while !existing.exists() {
        match (existing.parent(), existing.file_name()) {
            (Some(p), Some(n)) => {
                rest.push(n.to_os_string());
                existing = p;
            }
            _ => break,
        }
    }
    let mut out = existing.canonicalize().unwrap_or_else(|_| existing.to_path_buf());
    for n in rest.iter().rev() {
        out.push(n);
    }
    out
}

/// Refuses an output folder that lies inside (or is) an input folder:
/// mirrorsite never writes into a session folder.
pub fn ensure_outside(out: &Path, input_dir: &Path) -> Result<()> {
    let root = resolved(input_dir);
    if resolved(out).starts_with(&root) {
        return Err(Error::Argument(format!(
            "{} lies inside the session folder {}; mirrorsite never writes there, choose an output folder elsewhere",
            out.display(),
            input_dir.display()
        )));
    }
    Ok(())
}
