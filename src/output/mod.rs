//! Result files: atomic writers for CSV, JSON and .npy, and the staging of
//! whole result folders.
//!
//! Every file is written to a temporary name in the same folder and renamed,
//! so a crash never leaves a half-written file that looks whole. A result
//! folder is assembled in a staging folder beside its final place and
//! swapped in at the end: an interrupted run leaves the old folder (or, in
//! the instant between the two renames, the old folder under a `.old-`
//! name) and never a mix of old and new files. The next run into the same
//! folder removes the `.partial-` folders of runs that are no longer
//! running and puts a stranded `.old-` folder back.

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

/// `value` with an SI prefix and `digits` significant figures, e.g.
/// `-819.8 nA`; magnitudes below 1e-18 in scientific notation.
pub fn format_si(value: f64, unit: &str, digits: usize) -> String {
    if value == 0.0 {
        return format!("0 {unit}");
    }
    if !value.is_finite() {
        return format!("{value} {unit}");
    }
    const PREFIXES: [(&str, f64); 11] = [
        ("T", 1e12),
        ("G", 1e9),
        ("M", 1e6),
        ("k", 1e3),
        ("", 1.0),
        ("m", 1e-3),
        ("µ", 1e-6),
        ("n", 1e-9),
        ("p", 1e-12),
        ("f", 1e-15),
        ("a", 1e-18),
    ];
    let mag = value.abs();
    let Some((p, scale)) = PREFIXES.iter().copied().find(|(_, s)| mag >= *s * 0.9995) else {
        return format!("{value:.3e} {unit}");
    };
    let scaled = value / scale;
    let int_digits = (scaled.abs().log10().floor() as i64 + 1).max(1) as usize;
    let decimals = digits.saturating_sub(int_digits);
    format!("{scaled:.decimals$} {p}{unit}")
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

/// True when a process with this id is running. Linux answers through
/// /proc; elsewhere nothing can be told, and a folder counts as abandoned
/// only by its age.
fn process_alive(pid: u32) -> Option<bool> {
    if !Path::new("/proc/self").exists() {
        return None;
    }
    Some(Path::new("/proc").join(pid.to_string()).exists())
}

/// Staging folders older than this are abandoned where process ids cannot
/// be checked.
const ABANDONED_AFTER: std::time::Duration = std::time::Duration::from_secs(24 * 3600);

/// Remove what killed runs left beside `final_dir`: `.NAME.partial-PID`
/// folders (never complete, so never a result) and `.NAME.old-PID` folders.
/// An `.old-` folder is the previous complete result, moved aside in the
/// instant between the two renames of [`Staging::commit`]; if the final
/// folder is missing it is put back rather than removed. Folders of a
/// process that is still running are left alone.
fn clean_abandoned(parent: &Path, name: &str, final_dir: &Path) -> Result<(), OutputError> {
    let Ok(entries) = fs::read_dir(parent) else {
        return Ok(());
    };
    let partial = format!(".{name}.partial-");
    let old = format!(".{name}.old-");
    let me = std::process::id();
    for entry in entries.flatten() {
        let file_name = entry.file_name().to_string_lossy().into_owned();
        let (is_old, pid) = if let Some(p) = file_name.strip_prefix(&partial) {
            (false, p)
        } else if let Some(p) = file_name.strip_prefix(&old) {
            (true, p)
        } else {
            continue;
        };
        let Ok(pid) = pid.parse::<u32>() else {
            continue;
        };
        if pid == me {
            continue;
        }
        let abandoned = match process_alive(pid) {
            Some(alive) => !alive,
            None => entry
                .metadata()
                .and_then(|m| m.modified())
                .ok()
                .and_then(|t| t.elapsed().ok())
                .is_some_and(|age| age > ABANDONED_AFTER),
        };
        if !abandoned {
            continue;
        }
        let path = entry.path();
        if is_old && !final_dir.exists() {
            fs::rename(&path, final_dir).map_err(io("restoring", final_dir))?;
        } else {
            fs::remove_dir_all(&path).map_err(io("removing abandoned", &path))?;
        }
    }
    Ok(())
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
        clean_abandoned(parent, &name, final_dir)?;
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
