//! Where the case file is: for errors that name the setting and for paths relative to it.

use super::CaseError;
use std::path::{Path, PathBuf};

/// Where the case file is, for errors and relative paths.
pub(super) struct Here<'a> {
    pub(super) path: &'a Path,
    pub(super) dir: &'a Path,
}

impl Here<'_> {
    /// An error about a setting, or about a flag when `field` is one (`--units`).
    pub(super) fn invalid(&self, field: &str, what: String) -> CaseError {
        if field.starts_with("--") {
            CaseError::Flag {
                flag: field.to_string(),
                what,
            }
        } else {
            CaseError::Invalid {
                path: self.path.to_path_buf(),
                field: field.to_string(),
                what,
            }
        }
    }

    /// A file named by a setting, relative to the case file, which must exist.
    pub(super) fn existing(&self, field: &str, rel: &str) -> Result<PathBuf, CaseError> {
        let p = self.dir.join(rel);
        if p.is_file() {
            Ok(p)
        } else {
            Err(self.invalid(field, format!("file '{}' does not exist", p.display())))
        }
    }
}
