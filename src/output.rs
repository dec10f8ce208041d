//! Writing an output folder all at once.
//!
//! Outputs are written into a hidden temporary sibling of the target folder
//! and renamed into place only when complete, so a crash or a kill leaves no
//! half-written output folder (at most a hidden `.<name>.partial-<pid>`
//! sibling). An existing target is never replaced unless asked.
//!
//! A process killed outright (SIGKILL, power loss) cannot remove its partial
//! sibling; the next write of the same target removes partial siblings whose
//! process no longer runs (on Linux, where `/proc` tells; elsewhere they stay
//! until removed by hand).

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
        if let Some(file) = parent.ancestors().find(|a| a.exists()) {
            if !file.is_dir() {
                return Err(Error::Argument(format!(
                    "{} is a file, not a folder; cannot create {} inside it",
                    file.display(),
                    target.display()
                )));
            }
        }
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
            let mut old = self.tmp.clone().into_os_string();
            old.push(".old");
            let old = PathBuf::from(old);
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
    if let Some(parent) = path.parent() {
        let parent = if parent.as_os_str().is_empty() {
            Path::new(".")
        } else {
            parent
        };
        remove_stale_partials(parent, &name);
    }
    let tmp = path.with_file_name(format!(".{name}.partial-{}", std::process::id()));
    std::fs::write(&tmp, bytes).map_err(|e| {
        let _ = std::fs::remove_file(&tmp);
        Error::io(path, e)
    })?;
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
    let mut out = existing
        .canonicalize()
        .unwrap_or_else(|_| existing.to_path_buf());
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

/// The pid in a partial sibling's name `.<name>.partial-<pid>[.old]`.
fn partial_pid(file_name: &str, name: &str) -> Option<u32> {
    let rest = file_name.strip_prefix(&format!(".{name}.partial-"))?;
    let digits = rest.strip_suffix(".old").unwrap_or(rest);
    if digits.is_empty() || !digits.bytes().all(|b| b.is_ascii_digit()) {
        return None;
    }
    digits.parse().ok()
}

/// Removes partial siblings of `name` in `parent` left by processes that no
/// longer run. Best effort: failures are ignored (the write that follows
/// reports any real problem with the folder).
fn remove_stale_partials(parent: &Path, name: &str) {
    if !Path::new("/proc/self").exists() {
        return; // no way to tell a live writer from a dead one
    }
    let Ok(entries) = std::fs::read_dir(parent) else {
        return;
    };
    let me = std::process::id();
    for e in entries.flatten() {
        let file_name = e.file_name();
        let Some(pid) = file_name.to_str().and_then(|f| partial_pid(f, name)) else {
            continue;
        };
        if pid == me || Path::new("/proc").join(pid.to_string()).exists() {
            continue;
        }
        let p = e.path();
        let _ = match std::fs::symlink_metadata(&p) {
            Ok(m) if m.is_dir() => std::fs::remove_dir_all(&p),
            Ok(_) => std::fs::remove_file(&p),
            Err(_) => Ok(()),
        };
    }
}

#[cfg(test)]
mod tests {
    use super::partial_pid;

    #[test]
    fn partial_names() {
        assert_eq!(partial_pid(".s.partial-123", "s"), Some(123));
        assert_eq!(partial_pid(".s.partial-123.old", "s"), Some(123));
        assert_eq!(partial_pid(".s.partial-", "s"), None);
        assert_eq!(partial_pid(".s.partial-12x", "s"), None);
        assert_eq!(partial_pid(".s2.partial-123", "s"), None);
        assert_eq!(partial_pid("s.partial-123", "s"), None);
    }
}
