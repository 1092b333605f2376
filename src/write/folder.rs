//! The output folder, replaced as a whole: a run writes every file into a hidden staging folder
//! beside the target and, once all are complete, swaps the staging folder in with one atomic
//! rename. A run killed at any moment therefore leaves either the previous complete set or the
//! new complete set under the target name — never a mix, never a half-written file.
//!
//! Files in the previous folder that trackswing did not write (not listed in its manifest: a GIS
//! project, style files, GDAL's `.aux.xml` sidecars, notes) are carried over into the new set
//! before the swap, as hard links where the file system allows (copies otherwise), so a re-run
//! never deletes them; the previous folder keeps its own links until the swap, so a run killed
//! at any moment loses none of them either.
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
    /// Entries of the previous folder trackswing did not write, carried over at the swap.
    carried: Vec<PathBuf>,
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

/// The files trackswing wrote into `dir`, from its manifest (the manifest included); `None`
/// when `dir` holds no manifest of trackswing's.
fn written_by_trackswing(dir: &Path) -> Option<Vec<String>> {
    let v = std::fs::read_to_string(dir.join(MANIFEST))
        .ok()
        .and_then(|t| serde_json::from_str::<serde_json::Value>(&t).ok())
        .filter(|v| v.get("trackswing_version").is_some())?;
    // A file listed with its SHA-256 (the styles, which users edit) is ours only while it has
    // the bytes we wrote: edited, it is the user's and is kept.
    let unchanged = |x: &serde_json::Value, name: &str| {
        x["sha256"].as_str().is_none_or(|want| {
            std::fs::read(dir.join(name)).is_ok_and(|b| {
                use sha2::Digest;
                format!("{:x}", sha2::Sha256::digest(&b)) == want
            })
        })
    };
    let mut ours: Vec<String> = v["files"]
        .as_array()
        .map(|f| {
            f.iter()
                .filter_map(|x| {
                    x["file"]
                        .as_str()
                        .filter(|name| unchanged(x, name))
                        .map(String::from)
                })
                .collect()
        })
        .unwrap_or_default();
    ours.push(MANIFEST.to_string());
    Some(ours)
}

/// The entries (files, folders, links) directly in `dir` that are not in `ours`, by name.
fn foreign_entries(dir: &Path, ours: &[String]) -> Result<Vec<PathBuf>, WriteError> {
    let mut out = Vec::new();
    for e in std::fs::read_dir(dir).map_err(io(dir))? {
        let e = e.map_err(io(dir))?;
        let name = e.file_name();
        if !ours.iter().any(|o| std::ffi::OsStr::new(o) == name) {
            out.push(e.path());
        }
    }
    out.sort();
    Ok(out)
}

/// Puts `from` (a file, folder or symbolic link) at `to`: files as hard links (the same bytes,
/// no copy) or copies where links cannot be made, folders entry by entry, links as links.
fn carry(from: &Path, to: &Path) -> Result<(), WriteError> {
    let meta = std::fs::symlink_metadata(from).map_err(io(from))?;
    if meta.file_type().is_symlink() {
        #[cfg(unix)]
        std::os::unix::fs::symlink(std::fs::read_link(from).map_err(io(from))?, to)
            .map_err(io(to))?;
        #[cfg(not(unix))]
        std::fs::copy(from, to).map_err(io(to))?;
    } else if meta.is_dir() {
        std::fs::create_dir(to).map_err(io(to))?;
        for e in std::fs::read_dir(from).map_err(io(from))? {
            let e = e.map_err(io(from))?;
            carry(&e.path(), &to.join(e.file_name()))?;
        }
    } else if std::fs::hard_link(from, to).is_err() {
        std::fs::copy(from, to).map_err(io(to))?;
    }
    Ok(())
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
        let mut carried = Vec::new();
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
            let ours = written_by_trackswing(target);
            carried = foreign_entries(target, ours.as_deref().unwrap_or_default())?;
            if ours.is_none() && !carried.is_empty() && !force {
                return Err(refuse(format!(
                    "is not empty and was not written by trackswing ({}); choose another folder, or pass --force to write the layers into it (its files are kept; any with the name of a layer is replaced)",
                    names(&carried)
                )));
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
            carried,
        })
    }

    /// The entries of the previous folder that trackswing did not write, which the new set
    /// keeps.
    pub fn carried(&self) -> &[PathBuf] {
        &self.carried
    }

    /// Where the writers put their files.
    pub fn dir(&self) -> &Path {
        &self.staging
    }

    /// Makes the staging folder the output folder, with the previous folder's entries that
    /// trackswing did not write carried over; the previous set is then removed.
    pub fn commit(self) -> Result<PathBuf, WriteError> {
        let target = self.target.clone();
        for from in &self.carried {
            let Some(name) = from.file_name() else {
                continue;
            };
            let to = self.staging.join(name);
            if std::fs::symlink_metadata(&to).is_ok() {
                // A layer of this run has the name (only with --force on a foreign folder,
                // which says so): the layer wins.
                continue;
            }
            carry(from, &to)?;
        }
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

/// Up to five names of `entries`, and how many more.
pub fn names(entries: &[PathBuf]) -> String {
    let mut v: Vec<String> = entries
        .iter()
        .take(5)
        .filter_map(|p| p.file_name().map(|n| n.to_string_lossy().into_owned()))
        .collect();
    if entries.len() > 5 {
        v.push(format!("and {} more", entries.len() - 5));
    }
    v.join(", ")
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
        std::fs::write(
            out.join(MANIFEST),
            r#"{"trackswing_version":"0","files":[{"file":"old_only.tif"}]}"#,
        )
        .unwrap();
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

    /// Regression, [trust] item 2: a re-run deleted the files a GIS analyst keeps beside the
    /// layers. Everything the previous manifest does not list survives, byte for byte, folders
    /// and links included; a layer the previous run wrote and this one does not is gone.
    #[test]
    fn files_trackswing_did_not_write_survive_a_rerun() {
        let d = tempfile::tempdir().unwrap();
        let out = d.path().join("out");
        std::fs::create_dir(&out).unwrap();
        std::fs::write(
            out.join(MANIFEST),
            r#"{"trackswing_version":"0","files":[{"file":"a.tif"},{"file":"gone.tif"}]}"#,
        )
        .unwrap();
        for (name, bytes) in [
            ("a.tif", &b"old layer"[..]),
            ("gone.tif", b"layer of the previous run only"),
            ("style.qml", b"<qgis/>"),
            ("a.tif.aux.xml", b"<PAMDataset/>"),
            ("project.qgz", b"PK"),
        ] {
            std::fs::write(out.join(name), bytes).unwrap();
        }
        std::fs::create_dir_all(out.join("notes/sub")).unwrap();
        std::fs::write(out.join("notes/sub/briefing.txt"), b"12Z call").unwrap();
        #[cfg(unix)]
        std::os::unix::fs::symlink("style.qml", out.join("default.qml")).unwrap();
        let s = Staging::begin(&out, &[], false).unwrap();
        assert_eq!(s.carried().len(), 4 + usize::from(cfg!(unix)));
        std::fs::write(s.dir().join("a.tif"), b"new layer").unwrap();
        s.commit().unwrap();
        let read = |n: &str| std::fs::read(out.join(n)).unwrap();
        assert_eq!(read("a.tif"), b"new layer");
        assert_eq!(read("style.qml"), b"<qgis/>");
        assert_eq!(read("a.tif.aux.xml"), b"<PAMDataset/>");
        assert_eq!(read("project.qgz"), b"PK");
        assert_eq!(read("notes/sub/briefing.txt"), b"12Z call");
        #[cfg(unix)]
        assert_eq!(
            std::fs::read_link(out.join("default.qml")).unwrap(),
            Path::new("style.qml")
        );
        assert!(
            !out.join("gone.tif").exists(),
            "the old set's own layer goes"
        );
        assert_eq!(
            std::fs::read_dir(d.path()).unwrap().count(),
            1,
            "nothing left beside"
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
        // With --force the folder is written into and its files are kept.
        let s = Staging::begin(&out, &[], true).unwrap();
        std::fs::write(s.dir().join("layer.tif"), b"layer").unwrap();
        s.commit().unwrap();
        assert_eq!(std::fs::read(out.join("holiday.jpg")).unwrap(), b"x");
        assert!(out.join("layer.tif").is_file());
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
