//! Result files: atomic writers for CSV, JSON and .npy, and the result
//! folders they go into.
//!
//! Every file is written to a temporary name in the same folder and renamed,
//! so a crash never leaves a half-written file that looks whole. How a
//! result replaces the previous one in its folder, what qheat may and may
//! not remove there, and what an interrupted run leaves is described in
//! [`manifest`].

pub mod manifest;
pub mod memory;
pub mod phonons;
pub mod plots;
pub mod report;
pub mod results;
pub mod schema;
pub mod sizes;
pub mod sweep;

use std::fs;
use std::io::Write;
use std::path::{Path, PathBuf};

pub use manifest::{FolderOptions, OtherFiles, Staging};

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
    /// The result folder holds entries qheat did not write (and the caller
    /// did not allow writing beside them).
    #[error(
        "{}; qheat never removes or overwrites files it did not write",
        manifest::in_the_way_message(dir, entries)
    )]
    InTheWay {
        /// The result folder.
        dir: PathBuf,
        /// The entries in the way, sorted.
        entries: Vec<String>,
    },
    /// The result folder holds a sweep's point store, which this kind of
    /// result would replace.
    #[error(
        "the result folder {} holds the point store {} of a sweep or screen; a {kind} result would replace it, and the store is removed by no command",
        dir.display(),
        store.display()
    )]
    StoreInTheWay {
        /// The result folder.
        dir: PathBuf,
        /// The point store.
        store: PathBuf,
        /// The kind of result that was to be written.
        kind: String,
    },
    /// Another run is writing into the result folder.
    #[error(
        "another qheat run (process {pid}) is writing into {}; if no qheat is running any more, remove {}",
        dir.display(),
        dir.join(format!(".qheat-partial-{pid}")).display()
    )]
    Busy {
        /// The result folder.
        dir: PathBuf,
        /// Process id of the other run.
        pid: u32,
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

pub(crate) fn io<'a>(
    action: &'static str,
    path: &'a Path,
) -> impl FnOnce(std::io::Error) -> OutputError + 'a {
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

/// A table with named columns (units in the names) written as CSV, every
/// cell a number.
pub fn csv_bytes(headers: &[&str], rows: impl IntoIterator<Item = Vec<f64>>) -> Vec<u8> {
    cells_csv_bytes(
        headers,
        rows.into_iter()
            .map(|r| r.into_iter().map(schema::Cell::Num).collect()),
    )
}

/// A table with named columns written as CSV, each cell formatted by
/// [`schema::Cell::text`].
pub fn cells_csv_bytes(
    headers: &[&str],
    rows: impl IntoIterator<Item = Vec<schema::Cell>>,
) -> Vec<u8> {
    let mut w = csv::Writer::from_writer(Vec::new());
    w.write_record(headers).expect("in-memory CSV");
    for row in rows {
        w.write_record(row.iter().map(schema::Cell::text))
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

/// Text of a number for files and terminals: the shortest decimal that
/// reads back to the same f64, whole numbers without a decimal point, no
/// negative zero, and exponent form only below 1e-4 or from 1e15 on in
/// magnitude; NaN and infinities as `NaN`, `inf`, `-inf`.
pub fn format_number(v: f64) -> String {
    if !v.is_finite() {
        return v.to_string();
    }
    if v == 0.0 {
        return "0".into();
    }
    let mag = v.abs();
    if (1e-4..1e15).contains(&mag) {
        // Display gives the shortest round-trip digits without an exponent.
        format!("{v}")
    } else {
        format!("{v:e}")
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
