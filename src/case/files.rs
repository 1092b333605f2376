//! Paths and globbing: step patterns with one `*`, model folders (which files are model
//! output), and model files named on the command line.

use super::CaseError;
use std::path::{Path, PathBuf};

/// Expands `folder/prefix*suffix` to the matching files, sorted by name.
pub(super) fn expand_pattern(dir: &Path, pattern: &str) -> Result<Vec<PathBuf>, String> {
    let full = dir.join(pattern);
    let name = full
        .file_name()
        .and_then(|n| n.to_str())
        .ok_or_else(|| format!("'{pattern}' has no file name"))?
        .to_string();
    let parent = full.parent().unwrap_or(Path::new(".")).to_path_buf();
    let Some((prefix, suffix)) = name.split_once('*') else {
        let p = parent.join(&name);
        return if p.is_file() {
            Ok(vec![p])
        } else {
            Err(format!("file '{}' does not exist", p.display()))
        };
    };
    if suffix.contains('*') || parent.to_string_lossy().contains('*') {
        return Err(format!(
            "'{pattern}': only one '*', in the file name, is supported"
        ));
    }
    let entries = std::fs::read_dir(&parent)
        .map_err(|e| format!("cannot list '{}': {e}", parent.display()))?;
    let mut files: Vec<PathBuf> = entries
        .filter_map(|e| e.ok())
        .map(|e| e.path())
        .filter(|p| p.is_file())
        .filter(|p| {
            p.file_name().and_then(|n| n.to_str()).is_some_and(|n| {
                n.len() >= prefix.len() + suffix.len()
                    && n.starts_with(prefix)
                    && n.ends_with(suffix)
            })
        })
        .collect();
    files.sort();
    if files.is_empty() {
        return Err(format!(
            "no file in '{}' matches '{name}'",
            parent.display()
        ));
    }
    Ok(files)
}

/// Expands one `model` item: a folder (every regular file in it not starting with '.'), a
/// pattern with one `*`, or a file; sorted by name.
pub(super) fn expand_model(dir: &Path, item: &str) -> Result<ModelFiles, String> {
    let p = dir.join(item);
    if p.is_dir() {
        let entries =
            std::fs::read_dir(&p).map_err(|e| format!("cannot list '{}': {e}", p.display()))?;
        let mut all: Vec<PathBuf> = entries
            .filter_map(|e| e.ok())
            .map(|e| e.path())
            .filter(|f| {
                f.file_name()
                    .and_then(|n| n.to_str())
                    .is_some_and(|n| !n.starts_with('.'))
            })
            .collect();
        all.sort();
        // A file is left out only when neither its first octets nor its name say it is model
        // output: a damaged `step_002.grib2` must be named by the reader, not skipped.
        let (files, rest): (Vec<PathBuf>, Vec<PathBuf>) = all.into_iter().partition(|f| {
            f.is_file()
                && (named_as_model_output(f)
                    || !matches!(
                        crate::read::source::magic(f),
                        Ok(crate::read::source::Magic::Other) | Err(_)
                    ))
        });
        let (folders, skipped): (Vec<PathBuf>, Vec<PathBuf>) =
            rest.into_iter().partition(|f| f.is_dir());
        // A case folder (the case file beside one folder of model files, as `make-demo --grib2`
        // writes it): the one subfolder that holds model output is the model folder.
        if files.is_empty() {
            let inner: Vec<ModelFiles> = folders
                .iter()
                .filter_map(|f| expand_model(Path::new(""), &f.to_string_lossy()).ok())
                .collect();
            if let [one] = inner.as_slice() {
                let mut found = one.clone();
                found.skipped.splice(0..0, skipped);
                return Ok(found);
            }
        }
        if files.is_empty() {
            let names = |v: &[PathBuf], slash: &str| -> String {
                v.iter()
                    .filter_map(|f| f.file_name())
                    .map(|n| format!("{}{slash}", n.to_string_lossy()))
                    .collect::<Vec<_>>()
                    .join(", ")
            };
            let mut what = format!(
                "the folder '{}' holds no model output (GRIB, NetCDF or TIFF files)",
                p.display()
            );
            if !skipped.is_empty() {
                what += &format!("; its other files: {}", names(&skipped, ""));
            }
            if !folders.is_empty() {
                what += &format!(
                    "; its folders: {} (name the one that holds the model files)",
                    names(&folders, "/")
                );
            }
            return Err(what);
        }
        return Ok(ModelFiles { files, skipped });
    }
    Ok(ModelFiles {
        files: expand_pattern(dir, item)?,
        skipped: Vec::new(),
    })
}

/// Whether a file's extension is one model output comes with (GRIB, NetCDF, TIFF).
fn named_as_model_output(f: &Path) -> bool {
    const EXTENSIONS: [&str; 10] = [
        "grib2", "grb2", "gb2", "grib", "grb", "nc", "nc4", "netcdf", "tif", "tiff",
    ];
    f.extension()
        .and_then(|e| e.to_str())
        .is_some_and(|e| EXTENSIONS.iter().any(|x| x.eq_ignore_ascii_case(e)))
}

/// Model files found in folders, patterns and lists, and the files of those folders that are
/// not model output (a case file, a track, notes), which are left out.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct ModelFiles {
    /// The model files, in the order given (each folder's sorted by name).
    pub files: Vec<PathBuf>,
    /// Files in the folders that are not GRIB, NetCDF or TIFF, left out.
    pub skipped: Vec<PathBuf>,
}

impl ModelFiles {
    pub(super) fn extend(&mut self, other: ModelFiles) {
        self.files.extend(other.files);
        self.skipped.extend(other.skipped);
    }
}

/// One line saying which files of the model folders were left out; `None` when none were.
pub fn skipped_summary(skipped: &[PathBuf]) -> Option<String> {
    if skipped.is_empty() {
        return None;
    }
    let names: Vec<String> = skipped
        .iter()
        .take(5)
        .map(|f| {
            f.file_name()
                .unwrap_or(f.as_os_str())
                .to_string_lossy()
                .into_owned()
        })
        .collect();
    Some(format!(
        "skipped {} file{} in the model folder{} that {} not model output (not GRIB, NetCDF or TIFF by name or content): {}{}",
        skipped.len(),
        if skipped.len() == 1 { "" } else { "s" },
        if skipped.iter().filter_map(|f| f.parent()).collect::<std::collections::BTreeSet<_>>().len() == 1 { "" } else { "s" },
        if skipped.len() == 1 { "is" } else { "are" },
        names.join(", "),
        if skipped.len() > 5 { format!(" and {} more", skipped.len() - 5) } else { String::new() }
    ))
}

/// Model files named on the command line (`trackswing run FILES...`): each a file, a folder or
/// a pattern, relative to the current folder.
pub fn expand_model_args(items: &[PathBuf]) -> Result<ModelFiles, CaseError> {
    let mut found = ModelFiles::default();
    for item in items {
        let text = item.to_string_lossy();
        found.extend(
            expand_model(Path::new(""), &text).map_err(|what| CaseError::Invalid {
                path: PathBuf::from("command line"),
                field: text.to_string(),
                what,
            })?,
        );
    }
    Ok(found)
}
