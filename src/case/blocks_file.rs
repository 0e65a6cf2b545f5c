//! Hamiltonian blocks read from files for `kind = "blocks"`.
//!
//! Formats:
//! - `.npy`: float64 or complex128, shape (N, b, b) (one block per cell or
//!   per neighbouring pair) or (b, b) (a single block).
//! - `.csv`: header `cell,row,col,re_ev,im_ev`, one line per non-zero element,
//!   0-based indices; elements not listed are zero; the block count is the
//!   largest cell index + 1.

use crate::C64;
use faer::Mat;
use ndarray::ArrayD;
use std::path::Path;

/// Blocks read from one file.
#[derive(Clone, Debug)]
pub(crate) struct BlockFile {
    /// The blocks, all b×b.
    pub blocks: Vec<Mat<C64>>,
    /// True when the file held a single (b, b) block rather than a stack.
    pub single: bool,
    /// True for a .csv file, whose block size is only a lower bound (the
    /// largest index it lists) and may be padded with zeros.
    pub from_csv: bool,
}

/// The block size below which a file is considered reasonable: a guard
/// against a corrupt header asking for an absurd allocation.
const MAX_ELEMENTS: usize = 50_000_000;

/// Read a block file; errors are plain sentences naming the path.
pub(crate) fn read_blocks(path: &Path) -> Result<BlockFile, String> {
    let ext = path
        .extension()
        .and_then(|e| e.to_str())
        .map(str::to_ascii_lowercase);
    if !path.exists() {
        return Err(format!("file `{}` does not exist", path.display()));
    }
    match ext.as_deref() {
        Some("npy") => read_npy(path),
        Some("csv") => read_csv(path),
        _ => Err(format!(
            "file `{}` has an unknown extension (use .npy or .csv)",
            path.display()
        )),
    }
}

fn from_array(a: ArrayD<C64>, path: &Path) -> Result<BlockFile, String> {
    let shape = a.shape().to_vec();
    let (n, b, single) = match shape.as_slice() {
        [n, r, c] if r == c => (*n, *r, false),
        [r, c] if r == c => (1, *r, true),
        _ => {
            return Err(format!(
                "file `{}` holds an array of shape {:?}; expected (N, b, b) or (b, b)",
                path.display(),
                shape
            ));
        }
    };
    if b == 0 {
        return Err(format!("file `{}` holds empty 0×0 blocks", path.display()));
    }
    let flat: Vec<C64> = a.iter().copied().collect();
    if let Some(pos) = flat
        .iter()
        .position(|z| !z.re.is_finite() || !z.im.is_finite())
    {
        let (cell, rem) = (pos / (b * b), pos % (b * b));
        return Err(format!(
            "file `{}` has a non-finite element (NaN or infinity) in block {cell} at ({}, {})",
            path.display(),
            rem / b,
            rem % b
        ));
    }
    let blocks = (0..n)
        .map(|i| Mat::from_fn(b, b, |r, c| flat[i * b * b + r * b + c]))
        .collect();
    Ok(BlockFile {
        blocks,
        single,
        from_csv: false,
    })
}

fn read_npy(path: &Path) -> Result<BlockFile, String> {
    // Peek at the size first: a corrupt header must not trigger a huge read.
    let len = std::fs::metadata(path)
        .map_err(|e| format!("cannot read `{}`: {e}", path.display()))?
        .len();
    if len as usize / 8 > MAX_ELEMENTS {
        return Err(format!(
            "file `{}` is too large ({len} bytes)",
            path.display()
        ));
    }
    match ndarray_npy::read_npy::<_, ArrayD<f64>>(path) {
        Ok(a) => from_array(a.mapv(|x| C64::new(x, 0.0)), path),
        Err(real_err) => match ndarray_npy::read_npy::<_, ArrayD<C64>>(path) {
            Ok(a) => from_array(a, path),
            Err(_) => Err(format!(
                "cannot read `{}` as a float64 or complex128 .npy array: {real_err}",
                path.display()
            )),
        },
    }
}

struct Element {
    cell: usize,
    row: usize,
    col: usize,
    re_ev: f64,
    im_ev: f64,
}

/// The column names a csv block file must have, in order.
const CSV_HEADER: [&str; 5] = ["cell", "row", "col", "re_ev", "im_ev"];

fn read_csv(path: &Path) -> Result<BlockFile, String> {
    let mut reader = csv::ReaderBuilder::new()
        .trim(csv::Trim::All)
        .comment(Some(b'#'))
        .flexible(true)
        .from_path(path)
        .map_err(|e| format!("cannot read `{}`: {e}", path.display()))?;
    let header: Vec<String> = reader
        .headers()
        .map_err(|e| format!("cannot read the header of `{}`: {e}", path.display()))?
        .iter()
        .map(str::to_string)
        .collect();
    if header != CSV_HEADER {
        return Err(format!(
            "file `{}` has header `{}`; expected `{}`",
            path.display(),
            header.join(","),
            CSV_HEADER.join(",")
        ));
    }
    let mut elements = Vec::new();
    for rec in reader.records() {
        let rec = rec.map_err(|e| format!("file `{}`: {e}", path.display()))?;
        elements.push(csv_element(&rec, path)?);
        if elements.len() > MAX_ELEMENTS {
            return Err(format!("file `{}` has too many records", path.display()));
        }
    }
    csv_blocks(&elements, path)
}

/// One record of a csv block file: three indices and a complex value.
fn csv_element(rec: &csv::StringRecord, path: &Path) -> Result<Element, String> {
    let want = CSV_HEADER;
    let line = rec.position().map_or(0, |p| p.line());
    let at = |col: usize| {
        format!(
            "file `{}` line {line}, column `{}`",
            path.display(),
            want[col]
        )
    };
    if rec.len() != want.len() {
        return Err(format!(
            "file `{}` line {line}: expected {} fields ({}), found {}",
            path.display(),
            want.len(),
            want.join(","),
            rec.len()
        ));
    }
    let index = |col: usize| -> Result<usize, String> {
        rec[col].parse::<usize>().map_err(|_| {
            format!(
                "{}: expected a whole number ≥ 0, found `{}`",
                at(col),
                &rec[col]
            )
        })
    };
    let value = |col: usize| -> Result<f64, String> {
        match rec[col].parse::<f64>() {
            Ok(x) if x.is_finite() => Ok(x),
            Ok(x) => Err(format!(
                "{}: expected a finite number, found a non-finite value (NaN or infinity) `{x}`",
                at(col)
            )),
            Err(_) => Err(format!(
                "{}: expected a number in eV, found `{}`",
                at(col),
                &rec[col]
            )),
        }
    };
    Ok(Element {
        cell: index(0)?,
        row: index(1)?,
        col: index(2)?,
        re_ev: value(3)?,
        im_ev: value(4)?,
    })
}

/// The blocks the listed elements fill (elements not listed are zero).
fn csv_blocks(elements: &[Element], path: &Path) -> Result<BlockFile, String> {
    if elements.is_empty() {
        return Err(format!("file `{}` lists no elements", path.display()));
    }
    let n = elements.iter().map(|e| e.cell).max().unwrap_or(0) + 1;
    let b = elements.iter().map(|e| e.row.max(e.col)).max().unwrap_or(0) + 1;
    if n.saturating_mul(b).saturating_mul(b) > MAX_ELEMENTS {
        return Err(format!(
            "file `{}` asks for {n} blocks of {b}×{b}: too large",
            path.display()
        ));
    }
    let mut blocks = vec![Mat::<C64>::zeros(b, b); n];
    let mut seen = std::collections::HashSet::new();
    for e in elements {
        if !seen.insert((e.cell, e.row, e.col)) {
            return Err(format!(
                "file `{}` lists element (cell {}, row {}, col {}) twice",
                path.display(),
                e.cell,
                e.row,
                e.col
            ));
        }
        blocks[e.cell][(e.row, e.col)] = C64::new(e.re_ev, e.im_ev);
    }
    Ok(BlockFile {
        blocks,
        single: false,
        from_csv: true,
    })
}

/// Pad csv blocks to a common size b (a csv file only knows the largest
/// index it lists).
pub(crate) fn pad_to(blocks: &mut [Mat<C64>], b: usize) {
    for m in blocks.iter_mut() {
        if m.nrows() < b {
            let old = m.clone();
            *m = Mat::from_fn(b, b, |r, c| {
                if r < old.nrows() && c < old.ncols() {
                    old[(r, c)]
                } else {
                    C64::new(0.0, 0.0)
                }
            });
        }
    }
}

/// Block files read once per case: the first validation reads them from
/// disk, every later one (a case changed by [`super::Case::with`]) takes
/// them from here. Cloning shares the loaded blocks.
#[derive(Clone, Debug)]
pub(crate) struct BlockFiles {
    /// Folder against which relative file names resolve.
    base_dir: std::path::PathBuf,
    /// Files read so far, by full path.
    loaded: Vec<(std::path::PathBuf, std::sync::Arc<BlockFile>)>,
}

impl BlockFiles {
    /// No file read yet; names resolve against `base_dir`.
    pub fn new(base_dir: &Path) -> Self {
        Self {
            base_dir: base_dir.to_path_buf(),
            loaded: Vec::new(),
        }
    }

    /// The full path of a file named in the case.
    pub fn path(&self, name: &str) -> std::path::PathBuf {
        self.base_dir.join(name)
    }

    /// The blocks of `path`, read from disk the first time only.
    pub fn get(&mut self, path: &Path) -> Result<std::sync::Arc<BlockFile>, String> {
        if let Some((_, f)) = self.loaded.iter().find(|(p, _)| p == path) {
            return Ok(f.clone());
        }
        let f = std::sync::Arc::new(read_blocks(path)?);
        self.loaded.push((path.to_path_buf(), f.clone()));
        Ok(f)
    }
}
