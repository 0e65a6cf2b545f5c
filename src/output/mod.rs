//! Result files: atomic writers for CSV, JSON and .npy, and the staging of
//! whole result folders.
//!
//! Every file is written to a temporary name in the same folder and renamed,
//! so a crash never leaves a half-written file that looks whole. A result
//! folder is assembled in a staging folder beside its final place and
//! swapped in at the end: an interrupted run leaves the old folder (or, in
//! the instant between the two renames, the old folder under a `.old-`
//! name) and never a mix of old and new files.

pub mod plots;
pub mod report;
pub mod results;

use std::fs;
use std::io::Write;
use std::path::{Path, PathBuf};

/// I/O errors with the path involved.
#[derive(Debug, thiserror::Error)]
pub enum OutputError {
    /// A file or folder operation failed.
    #[error("{action} {path}: {source}")]
    Io {
        /// What was being done.
        action: &'static str,
        /// The path.
        path: PathBuf,
        /// The cause.
        source: std::io::Error,
    },
    /// Encoding a file failed.
    #[error("encoding {path}: {message}")]
    Encode {
        /// The path.
        path: PathBuf,
        /// What went wrong.
        message: String,
    },
    /// Drawing a figure failed or its data cannot be drawn.
    #[error("figure {figure}: {message}")]
    Plot {
        /// The figure (file name or title).
        figure: String,
        /// What went wrong, with the numbers involved.
        message: String,
    },
    /// A result folder cannot be reported on.
    #[error("report of {path}: {message}")]
    Report {
        /// The folder.
        path: PathBuf,
        /// What went wrong.
        message: String,
    },
}

fn io<'a>(action: &'static str, path: &'a Path) -> impl FnOnce(std::io::Error) -> OutputError + 'a {
    move |source| OutputError::Io {
        action,
        path: path.to_path_buf(),
        source,
    }
}

/// Write `bytes` to `path` through a temporary file and a rename.
pub fn atomic_write(path: &Path, bytes: &[u8]) -> Result<(), OutputError> {
    let dir = path.parent().unwrap_or(Path::new("."));
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default();
    let tmp = dir.join(format!(".{name}.tmp-{}", std::process::id()));
    {
        let mut f = fs::File::create(&tmp).map_err(io("creating", &tmp))?;
        f.write_all(bytes).map_err(io("writing", &tmp))?;
        f.sync_all().map_err(io("syncing", &tmp))?;
    }
    fs::rename(&tmp, path).map_err(io("renaming into place", path))
}

/// A table with named columns (units in the names) written as CSV.
pub fn csv_bytes(headers: &[&str], rows: impl IntoIterator<Item = Vec<f64>>) -> Vec<u8> {
    let mut w = csv::Writer::from_writer(Vec::new());
    w.write_record(headers).expect("in-memory CSV");
    for row in rows {
        w.write_record(row.iter().map(|v| format_number(*v)))
            .expect("in-memory CSV");
    }
    w.into_inner().expect("in-memory CSV")
}

/// Shortest text that reads back to the same f64.
pub fn format_number(v: f64) -> String {
    if v.is_finite() {
        format!("{v:e}")
    } else {
        v.to_string()
    }
}

/// Serialize an array as .npy bytes.
pub fn npy_bytes<A, D>(
    array: &ndarray::ArrayBase<A, D>,
    path: &Path,
) -> Result<Vec<u8>, OutputError>
where
    A: ndarray::Data,
    A::Elem: ndarray_npy::WritableElement,
    D: ndarray::Dimension,
{
    use ndarray_npy::WriteNpyExt;
    let mut buf = Vec::new();
    array.write_npy(&mut buf).map_err(|e| OutputError::Encode {
        path: path.to_path_buf(),
        message: e.to_string(),
    })?;
    Ok(buf)
}

/// A result folder being assembled.
pub struct Staging {
    final_dir: PathBuf,
    dir: PathBuf,
}

impl Staging {
    /// Start assembling `final_dir` (its parent is created if missing).
    pub fn new(final_dir: &Path) -> Result<Self, OutputError> {
        let parent = final_dir
            .parent()
            .filter(|p| !p.as_os_str().is_empty())
            .unwrap_or(Path::new("."));
        fs::create_dir_all(parent).map_err(io("creating", parent))?;
        let name = final_dir
            .file_name()
            .map(|n| n.to_string_lossy().into_owned())
            .unwrap_or_else(|| "result".into());
        let dir = parent.join(format!(".{name}.partial-{}", std::process::id()));
        if dir.exists() {
            fs::remove_dir_all(&dir).map_err(io("clearing", &dir))?;
        }
        fs::create_dir_all(&dir).map_err(io("creating", &dir))?;
        Ok(Self {
            final_dir: final_dir.to_path_buf(),
            dir,
        })
    }

    /// Path of a file inside the staging folder.
    pub fn path(&self, name: &str) -> PathBuf {
        self.dir.join(name)
    }

    /// Write one file into the staging folder.
    pub fn write(&self, name: &str, bytes: &[u8]) -> Result<(), OutputError> {
        atomic_write(&self.path(name), bytes)
    }

    /// Swap the staged folder into place.
    pub fn commit(self) -> Result<PathBuf, OutputError> {
        let old = self.final_dir.with_file_name(format!(
            ".{}.old-{}",
            self.final_dir
                .file_name()
                .map(|n| n.to_string_lossy().into_owned())
                .unwrap_or_default(),
            std::process::id()
        ));
        let had_old = self.final_dir.exists();
        if had_old {
            fs::rename(&self.final_dir, &old).map_err(io("moving aside", &self.final_dir))?;
        }
        fs::rename(&self.dir, &self.final_dir)
            .map_err(io("renaming into place", &self.final_dir))?;
        if had_old {
            fs::remove_dir_all(&old).map_err(io("removing", &old))?;
        }
        Ok(self.final_dir.clone())
    }
}

impl Drop for Staging {
    fn drop(&mut self) {
        // An abandoned staging folder (error path) is removed; after commit
        // it no longer exists.
        let _ = fs::remove_dir_all(&self.dir);
    }
}
