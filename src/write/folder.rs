//! The output folder, replaced as a whole: a run writes every file into a hidden staging folder
//! beside the target and, once all are complete, swaps the staging folder in with one atomic
//! rename. A run killed at any moment therefore leaves either the previous complete set or the
//! new complete set under the target name — never a mix, never a half-written file.
//!
//! Linux swaps two folders atomically with `renameat2(RENAME_EXCHANGE)`; where that is not
//! available (other systems, some file systems) the old folder is first renamed aside, leaving a
//! moment in which the target name is absent but never holds a mixed set.

use super::WriteError;
use std::path::{Path, PathBuf};

/// The file that marks a folder as written by trackswing.
pub const MANIFEST: &str = "manifest.json";

/// A staging folder on its way to becoming the output folder.
#[derive(Debug)]
pub struct Staging {
    target: PathBuf,
    staging: PathBuf,
}

fn io(path: &Path) -> impl FnOnce(std::io::Error) -> WriteError + '_ {
    move |source| WriteError::Io {
        path: path.to_path_buf(),
        source,
    }
}

fn sibling(target: &Path, tag: &str) -> Result<PathBuf, WriteError> {
    let name = target
        .file_name()
        .and_then(|n| n.to_str())
        .ok_or_else(|| WriteError::Folder {
            path: target.to_path_buf(),
            what: "has no usable folder name".into(),
        })?;
    let parent = match target.parent() {
        Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
        _ => PathBuf::from("."),
    };
    Ok(parent.join(format!(".{name}.trackswing-{tag}")))
}

/// True when `dir` holds a manifest written by trackswing.
fn written_by_trackswing(dir: &Path) -> bool {
    std::fs::read_to_string(dir.join(MANIFEST))
        .ok()
        .and_then(|t| serde_json::from_str::<serde_json::Value>(&t).ok())
        .is_some_and(|v| v.get("trackswing_version").is_some())
}

impl Staging {
    /// Checks the target and creates an empty staging folder beside it.
    ///
    /// Refuses a target that is not a folder, that holds any of `inputs`, or that is a non-empty
    /// folder trackswing did not write (unless `force`).
    pub fn begin(target: &Path, inputs: &[PathBuf], force: bool) -> Result<Self, WriteError> {
        let refuse = |what: String| WriteError::Folder {
            path: target.to_path_buf(),
            what,
        };
        if target.exists() {
            if !target.is_dir() {
                return Err(refuse("exists and is not a folder".into()));
            }
            let canon = target.canonicalize().map_err(io(target))?;
            if let Some(input) = inputs
                .iter()
                .find(|i| i.canonicalize().is_ok_and(|c| c.starts_with(&canon)))
            {
                return Err(refuse(format!(
                    "holds an input of this run ({}); choose another output folder",
                    input.display()
                )));
            }
            let empty = std::fs::read_dir(target)
                .map_err(io(target))?
                .next()
                .is_none();
            if !empty && !written_by_trackswing(target) && !force {
                return Err(refuse(
                    "is not empty and was not written by trackswing; its contents would be replaced — choose another folder or pass --force".into(),
                ));
            }
        }
        let parent = target.parent().filter(|p| !p.as_os_str().is_empty());
        if let Some(p) = parent {
            std::fs::create_dir_all(p).map_err(io(p))?;
        }
        let staging = sibling(target, "staging")?;
        if staging.exists() {
            // Left by a run that was killed: it never became the output, so it can go.
            std::fs::remove_dir_all(&staging).map_err(io(&staging))?;
        }
        std::fs::create_dir(&staging).map_err(io(&staging))?;
        Ok(Self {
            target: target.to_path_buf(),
            staging,
        })
    }

    /// Where the writers put their files.
    pub fn dir(&self) -> &Path {
        &self.staging
    }

    /// Makes the staging folder the output folder; the previous one, if any, is removed.
    pub fn commit(self) -> Result<PathBuf, WriteError> {
        let target = self.target.clone();
        if !target.exists() {
            std::fs::rename(&self.staging, &target).map_err(io(&target))?;
            return Ok(target);
        }
        if exchange(&self.staging, &target).is_ok() {
            // The staging name now holds the previous set.
            std::fs::remove_dir_all(&self.staging).map_err(io(&self.staging))?;
            return Ok(target);
        }
        let old = sibling(&target, "previous")?;
        if old.exists() {
            std::fs::remove_dir_all(&old).map_err(io(&old))?;
        }
        std::fs::rename(&target, &old).map_err(io(&target))?;
        std::fs::rename(&self.staging, &target).map_err(io(&target))?;
        std::fs::remove_dir_all(&old).map_err(io(&old))?;
        Ok(target)
    }

    /// Removes the staging folder after a failed run.
    pub fn abandon(self) {
        let _ = std::fs::remove_dir_all(&self.staging);
    }
}

#[cfg(target_os = "linux")]
fn exchange(a: &Path, b: &Path) -> std::io::Result<()> {
    use std::ffi::CString;
    use std::os::unix::ffi::OsStrExt;
    let ca = CString::new(a.as_os_str().as_bytes())?;
    let cb = CString::new(b.as_os_str().as_bytes())?;
    // SAFETY: both are valid NUL-terminated paths; AT_FDCWD resolves them like rename(2).
    let rc = unsafe {
        libc::renameat2(
            libc::AT_FDCWD,
            ca.as_ptr(),
            libc::AT_FDCWD,
            cb.as_ptr(),
            libc::RENAME_EXCHANGE,
        )
    };
    if rc == 0 {
        Ok(())
    } else {
        Err(std::io::Error::last_os_error())
    }
}

#[cfg(not(target_os = "linux"))]
fn exchange(_a: &Path, _b: &Path) -> std::io::Result<()> {
    Err(std::io::Error::from(std::io::ErrorKind::Unsupported))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_new_set_replaces_the_old_one_whole() {
        let d = tempfile::tempdir().unwrap();
        let out = d.path().join("out");
        std::fs::create_dir(&out).unwrap();
        std::fs::write(out.join(MANIFEST), r#"{"trackswing_version":"0"}"#).unwrap();
        std::fs::write(out.join("old_only.tif"), b"old").unwrap();
        let s = Staging::begin(&out, &[], false).unwrap();
        std::fs::write(s.dir().join("new.tif"), b"new").unwrap();
        s.commit().unwrap();
        assert!(out.join("new.tif").is_file());
        assert!(
            !out.join("old_only.tif").exists(),
            "no mix of old and new sets"
        );
        let names: Vec<_> = std::fs::read_dir(d.path())
            .unwrap()
            .map(|e| e.unwrap().file_name())
            .collect();
        assert_eq!(
            names.len(),
            1,
            "no staging or previous folder left: {names:?}"
        );
    }

    #[test]
    fn foreign_folders_and_input_folders_are_refused() {
        let d = tempfile::tempdir().unwrap();
        let out = d.path().join("photos");
        std::fs::create_dir(&out).unwrap();
        std::fs::write(out.join("holiday.jpg"), b"x").unwrap();
        let e = Staging::begin(&out, &[], false).unwrap_err().to_string();
        assert!(
            e.contains("not written by trackswing") && e.contains("--force"),
            "{e}"
        );
        assert!(Staging::begin(&out, &[], true).is_ok());
        let e = Staging::begin(&out, &[out.join("holiday.jpg")], true)
            .unwrap_err()
            .to_string();
        assert!(e.contains("holds an input"), "{e}");
        let f = d.path().join("file");
        std::fs::write(&f, b"x").unwrap();
        assert!(Staging::begin(&f, &[], true)
            .unwrap_err()
            .to_string()
            .contains("not a folder"));
    }
}
