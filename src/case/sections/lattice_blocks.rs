//! `[lattice]` of a device of blocks: the user's force-constant blocks and
//! masses, with one lattice site per orbital site of the electron model (so
//! the lattice temperature of a site is the temperature at that orbital).
//!
//! - `force_onsite_file`: the on-site blocks K_ii (N/m), real and
//!   symmetric, one per cell or a single block for every cell. The
//!   diagonal holds the springs of every bond of a site, the bonds to
//!   neighbouring cells and to the leads included, as in a periodic
//!   crystal; so every row of the force constants sums to zero when the
//!   lattice obeys the acoustic sum rule (a rigid shift costs nothing).
//! - `force_coupling_file`: K_i,i+1 (N/m), N − 1 blocks or a single one.
//! - masses: `mass_u` (every site), `masses_u` (one per site of a cell,
//!   the same in every cell) or `masses_file` (`.npy`, one cell or every
//!   cell); `[[lattice.region]]` `mass_u` replaces every site of a cell.
//!
//! Each phonon lead continues its end cell: the end on-site block and
//! masses repeated, joined through the end coupling block. Checks: the
//! on-site blocks are symmetric, the leads are stable (no ω² < 0 anywhere
//! in their bands: an error naming the files), and a warning when a row of
//! the force constants does not sum to zero within 1e-9 of its largest
//! entry.

use super::super::blocks_file::{BlockFiles, pad_to};
use super::super::check::Checker;
use super::super::error::{CaseError, CaseErrorKind};
use super::super::raw::RawLattice;
use super::device::{DeviceKind, DeviceSpec};
use super::lattice::mass;
use crate::lattice::{Lattice, LatticeError, PhononSide};
use faer::Mat;
use std::ops::Range;
use std::path::{Path, PathBuf};
use toml::Spanned;

/// Largest |row sum| of the force constants, relative to the row's
/// largest entry, before a warning that the acoustic sum rule is broken.
pub(crate) const SUM_RULE_TOLERANCE: f64 = 1e-9;

/// The force constants and masses of a blocks lattice.
#[derive(Clone, Debug, PartialEq)]
pub(crate) struct ForceBlocks {
    /// Mass of every site, cell by cell (N·b, u), before regions.
    pub masses_u: Vec<f64>,
    /// K_ii per cell (N/m), every bond on the diagonal.
    pub onsite: Vec<Mat<f64>>,
    /// K_i,i+1 (N/m), N − 1 blocks.
    pub coupling: Vec<Mat<f64>>,
    /// The blocks that continue the lattice into the left and right leads.
    pub ends: (Mat<f64>, Mat<f64>),
    /// The two force files, for messages.
    pub onsite_path: PathBuf,
    pub coupling_path: PathBuf,
}

impl ForceBlocks {
    /// Validate the blocks keys of `[lattice]` against a blocks device.
    pub fn from_raw(
        l: &RawLattice,
        ck: &Checker<'_>,
        device: &DeviceSpec,
        span: &Option<Range<usize>>,
        files: &mut BlockFiles,
        warnings: &mut Vec<String>,
    ) -> Result<Self, CaseError> {
        refuse_spring_keys(l, ck)?;
        let DeviceKind::Blocks { onsite, .. } = &device.kind else {
            unreachable!("blocks lattice on a device of blocks only")
        };
        let (cells, b) = (device.cells, onsite[0].nrows());
        let on_key = "lattice.force_onsite_file";
        let co_key = "lattice.force_coupling_file";
        let what = "a path to force-constant blocks in N/m (.npy or .csv)";
        let on_name = ck.required(l.force_onsite_file.as_ref(), span.clone(), on_key, what)?;
        let co_name = ck.required(l.force_coupling_file.as_ref(), span.clone(), co_key, what)?;
        let (onsite_path, on) = read_forces(on_name, on_key, ck, files, b)?;
        let (coupling_path, co) = read_forces(co_name, co_key, ck, files, b)?;
        let at = |name: &Spanned<String>, key: &str, expected: &str, found: String| {
            ck.ctx.error(
                CaseErrorKind::File,
                Some(name.span()),
                Some(key),
                format!("expected {expected}, found {found}"),
            )
        };
        let onsite = per_cell(on, cells).map_err(|found| {
            at(
                on_name,
                on_key,
                &format!("{cells} blocks (one per cell) or 1"),
                found,
            )
        })?;
        check_symmetric(&onsite, &onsite_path).map_err(|(e, f)| at(on_name, on_key, &e, f))?;
        let (coupling, ends) = per_pair(co, cells).map_err(|found| {
            at(
                co_name,
                co_key,
                &format!(
                    "{} blocks (one per neighbouring pair) or 1",
                    cells.max(2) - 1
                ),
                found,
            )
        })?;
        let masses_u = masses(l, ck, span, files, (cells, b))?;
        let blocks = Self {
            masses_u,
            onsite,
            coupling,
            ends,
            onsite_path,
            coupling_path,
        };
        blocks.check_stable_leads(ck, on_name, on_key)?;
        warnings.extend(blocks.sum_rule_warning());
        Ok(blocks)
    }

    /// The lattice, with `cell_masses[c]` (from regions) replacing the
    /// masses of every site of cell c where given.
    pub fn build(&self, cell_masses: &[Option<f64>]) -> Result<Lattice, LatticeError> {
        let b = self.onsite[0].nrows();
        let masses = self
            .masses_u
            .iter()
            .enumerate()
            .map(|(i, &m)| cell_masses.get(i / b).copied().flatten().unwrap_or(m))
            .collect();
        Lattice::continued_blocks(
            masses,
            self.onsite.clone(),
            self.coupling.clone(),
            self.ends.clone(),
        )
    }

    /// An error when a lead (the end cells repeated) has ω² < 0 anywhere
    /// in its band: such force constants describe no stable crystal.
    fn check_stable_leads(
        &self,
        ck: &Checker<'_>,
        name: &Spanned<String>,
        key: &str,
    ) -> Result<(), CaseError> {
        let files = format!(
            "`{}` and `{}`",
            self.onsite_path.display(),
            self.coupling_path.display()
        );
        let lattice = self.build(&[]).map_err(|e| {
            ck.ctx.error(
                CaseErrorKind::File,
                Some(name.span()),
                Some(key),
                format!(
                    "expected force-constant blocks that form a lattice, found in {files}: {e}"
                ),
            )
        })?;
        for (side, cell) in [
            (PhononSide::Left, 0),
            (PhononSide::Right, self.onsite.len() - 1),
        ] {
            let (low, high) = lattice.lead_band_range_rad2_per_ps2(side);
            if low < -1e-9 * high.abs() {
                return Err(ck.ctx.error(
                    CaseErrorKind::File,
                    Some(name.span()),
                    Some(key),
                    format!(
                        "expected a dynamical matrix with no negative eigenvalue on the band of the \
                         lead that continues cell {cell}, found ω² = {low:.4e} (rad/ps)² in {files}; \
                         hint: a stable lattice has a positive diagonal (the sum of the springs of \
                         every bond of a site, lead bonds too) and couplings of minus the springs"
                    ),
                ));
            }
        }
        Ok(())
    }

    /// A warning when some row of the force constants (with the end blocks
    /// continuing into the leads) does not sum to zero.
    fn sum_rule_warning(&self) -> Option<String> {
        let n = self.onsite.len();
        let mut worst: Option<(f64, usize, usize, f64)> = None;
        for (i, k) in self.onsite.iter().enumerate() {
            let left = if i == 0 {
                &self.ends.0
            } else {
                &self.coupling[i - 1]
            };
            let right = if i + 1 == n {
                &self.ends.1
            } else {
                &self.coupling[i]
            };
            for r in 0..k.nrows() {
                let entries = (0..k.ncols()).flat_map(|c| [k[(r, c)], right[(r, c)], left[(c, r)]]);
                let (sum, scale) =
                    entries.fold((0.0, 0.0_f64), |(s, m), x| (s + x, m.max(x.abs())));
                let rel = sum.abs() / scale.max(f64::MIN_POSITIVE);
                if rel > SUM_RULE_TOLERANCE && worst.is_none_or(|w| rel > w.0) {
                    worst = Some((rel, i, r, sum));
                }
            }
        }
        worst.map(|(rel, cell, row, sum)| {
            format!(
                "lattice.force_onsite_file: row {row} of cell {cell} of the force constants \
                 (`{}` with `{}`) sums to {sum:.3e} N/m, {rel:.1e} of its largest entry: the \
                 acoustic sum rule is broken, so a rigid shift costs energy and long waves do \
                 not pass (hint: put the sum of the springs of every bond of a site on its \
                 diagonal, the bonds to the leads included)",
                self.onsite_path.display(),
                self.coupling_path.display()
            )
        })
    }
}

/// The keys of a chain or strip lattice, refused for blocks.
fn refuse_spring_keys(l: &RawLattice, ck: &Checker<'_>) -> Result<(), CaseError> {
    let why = "with device.kind = \"blocks\" (the force files hold the springs, and the phonon \
               leads continue the end blocks; hint: remove it)";
    ck.unused(&l.spring_n_per_m, "lattice.spring_n_per_m", why)?;
    ck.unused(
        &l.transverse_spring_n_per_m,
        "lattice.transverse_spring_n_per_m",
        why,
    )?;
    ck.unused(&l.left, "lattice.left", why)?;
    ck.unused(&l.right, "lattice.right", why)?;
    for (i, r) in l.region.iter().flatten().enumerate() {
        let key = format!("lattice.region.{i}.spring_n_per_m");
        ck.unused(&r.get_ref().spring_n_per_m, &key, why)?;
    }
    Ok(())
}

/// Real b×b blocks from a file (a csv file padded to b).
fn read_forces(
    name: &Spanned<String>,
    key: &str,
    ck: &Checker<'_>,
    files: &mut BlockFiles,
    b: usize,
) -> Result<(PathBuf, Vec<Mat<f64>>), CaseError> {
    let path = files.path(name.get_ref());
    let fail = |m: String| {
        ck.ctx.error(
            CaseErrorKind::File,
            Some(name.span()),
            Some(key),
            format!("expected a readable file of real force-constant blocks, found: {m}"),
        )
    };
    let file = files.get(&path).map_err(fail)?;
    let mut blocks = file.blocks.clone();
    if file.from_csv {
        pad_to(&mut blocks, b);
    }
    let size = blocks[0].nrows();
    if size != b {
        return Err(fail(format!(
            "`{}` holds {size}×{size} blocks, while the device has {b} orbital sites per cell \
             (the lattice has one site per orbital site)",
            path.display()
        )));
    }
    let mut real = Vec::with_capacity(blocks.len());
    for (i, m) in blocks.iter().enumerate() {
        if let Some((r, c)) = (0..b * b)
            .map(|x| (x / b, x % b))
            .find(|&(r, c)| m[(r, c)].im != 0.0)
        {
            return Err(fail(format!(
                "`{}` block {i} entry ({r}, {c}) has imaginary part {} (force constants are real)",
                path.display(),
                m[(r, c)].im
            )));
        }
        real.push(Mat::from_fn(b, b, |r, c| m[(r, c)].re));
    }
    Ok((path, real))
}

/// One on-site block per cell: the file's stack (N blocks) or its single
/// block repeated; otherwise the count found.
fn per_cell(blocks: Vec<Mat<f64>>, cells: usize) -> Result<Vec<Mat<f64>>, String> {
    match blocks.len() {
        1 => Ok(vec![blocks[0].clone(); cells]),
        n if n == cells => Ok(blocks),
        n => Err(format!("{n} blocks for a device of {cells} cells")),
    }
}

/// The N − 1 coupling blocks and the two end blocks that continue into the
/// leads: the file's stack (its first and last block continue) or its
/// single block everywhere.
type Pairs = (Vec<Mat<f64>>, (Mat<f64>, Mat<f64>));

fn per_pair(blocks: Vec<Mat<f64>>, cells: usize) -> Result<Pairs, String> {
    let n = blocks.len();
    if n == 1 {
        let k = blocks[0].clone();
        return Ok((vec![k.clone(); cells - 1], (k.clone(), k)));
    }
    if n + 1 == cells {
        let ends = (blocks[0].clone(), blocks[n - 1].clone());
        return Ok((blocks, ends));
    }
    Err(format!("{n} blocks for a device of {cells} cells"))
}

/// Every on-site block equal to its transpose (within 1e-10 of its
/// largest entry); the error is (expected, found).
fn check_symmetric(onsite: &[Mat<f64>], path: &Path) -> Result<(), (String, String)> {
    for (i, m) in onsite.iter().enumerate() {
        let b = m.nrows();
        let scale = (0..b * b)
            .map(|x| m[(x / b, x % b)].abs())
            .fold(0.0, f64::max);
        for r in 0..b {
            for c in 0..r {
                let d = (m[(r, c)] - m[(c, r)]).abs();
                if d > 1e-10 * scale.max(1.0) {
                    return Err((
                        "symmetric on-site force-constant blocks (K_ii equal to its transpose)"
                            .into(),
                        format!(
                            "in `{}` block {i}: entries ({r}, {c}) = {} and ({c}, {r}) = {} N/m",
                            path.display(),
                            m[(r, c)],
                            m[(c, r)]
                        ),
                    ));
                }
            }
        }
    }
    Ok(())
}

/// The masses of every site (N·b): exactly one of `mass_u`, `masses_u`
/// and `masses_file`.
fn masses(
    l: &RawLattice,
    ck: &Checker<'_>,
    span: &Option<Range<usize>>,
    files: &BlockFiles,
    (cells, b): (usize, usize),
) -> Result<Vec<f64>, CaseError> {
    let given = [
        l.mass_u.is_some(),
        l.masses_u.is_some(),
        l.masses_file.is_some(),
    ];
    if given.iter().filter(|&&g| g).count() != 1 {
        return Err(ck.ctx.invalid(
            span.clone(),
            "lattice.masses_u",
            "exactly one of lattice.mass_u (every site), lattice.masses_u (one per orbital site \
             of a cell) and lattice.masses_file (.npy) for device.kind = \"blocks\"",
            format!("{} of them", given.iter().filter(|&&g| g).count()),
        ));
    }
    if let Some(m) = mass(ck, &l.mass_u, "lattice.mass_u")? {
        return Ok(vec![m; cells * b]);
    }
    if let Some(list) = &l.masses_u {
        let key = "lattice.masses_u";
        let per_cell = list.get_ref();
        if per_cell.len() != b {
            return Err(ck.ctx.invalid(
                Some(list.span()),
                key,
                &format!("{b} masses (one per orbital site of a cell)"),
                format!("{} values", per_cell.len()),
            ));
        }
        check_mass_values(per_cell, ck, Some(list.span()), key)?;
        return Ok(per_cell.repeat(cells));
    }
    let name = l.masses_file.as_ref().expect("one of the three is given");
    let path = files.path(name.get_ref());
    let key = "lattice.masses_file";
    let values = read_masses(&path, (cells, b)).map_err(|m| {
        ck.ctx.error(
            CaseErrorKind::File,
            Some(name.span()),
            Some(key),
            format!("expected a float64 .npy of shape ({b}) or ({cells}, {b}), found: {m}"),
        )
    })?;
    check_mass_values(&values, ck, Some(name.span()), key)?;
    Ok(values)
}

fn check_mass_values(
    values: &[f64],
    ck: &Checker<'_>,
    span: Option<Range<usize>>,
    key: &str,
) -> Result<(), CaseError> {
    match values
        .iter()
        .position(|&m| !(m.is_finite() && m > 0.0 && m <= super::lattice::MAX_MASS_U))
    {
        None => Ok(()),
        Some(i) => Err(ck.ctx.invalid(
            span,
            key,
            &format!("masses in u, > 0 and ≤ {:e}", super::lattice::MAX_MASS_U),
            format!("{} at site {i}", values[i]),
        )),
    }
}

/// One mass per site of every cell from a `.npy` file of shape (b) (the
/// same in every cell) or (N, b).
fn read_masses(path: &Path, (cells, b): (usize, usize)) -> Result<Vec<f64>, String> {
    if path
        .extension()
        .is_none_or(|e| !e.eq_ignore_ascii_case("npy"))
    {
        return Err(format!(
            "file `{}` (masses are read from .npy files)",
            path.display()
        ));
    }
    let a: ndarray::ArrayD<f64> = ndarray_npy::read_npy(path)
        .map_err(|e| format!("`{}` unreadable as float64 .npy: {e}", path.display()))?;
    let values: Vec<f64> = a.iter().copied().collect();
    match a.shape() {
        [n] if *n == b => Ok(values.repeat(cells)),
        [n, m] if *n == cells && *m == b => Ok(values),
        shape => Err(format!("`{}` of shape {shape:?}", path.display())),
    }
}
