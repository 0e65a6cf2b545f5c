//! Leads of their own for `kind = "blocks"` devices: a periodic lead with
//! its own cell and coupling blocks (and the block that joins it to the
//! device), or a wide-band lead whose Γ differs between orbitals (one
//! value per orbital, or a full matrix inline or from a file).
//!
//! A lead's blocks have as many orbitals as a device cell (before spin
//! doubling, which the lead shares with the device). The cell block must be
//! Hermitian and a Γ matrix Hermitian and positive semi-definite, to the
//! same relative tolerance the device loader uses for its on-site blocks.

use super::super::blocks_file::{BlockFiles, pad_to};
use super::super::check::{Checker, MAX_ENERGY_EV, show, span_of};
use super::super::error::{CaseError, CaseErrorKind};
use super::super::raw::RawLead;
use super::device::{DeviceKind, DeviceSpec, read_named};
use super::leads::LeadModel;
use crate::C64;
use faer::Mat;
use std::path::PathBuf;
use toml::Spanned;

/// Relative size (of the largest element, at least 1 eV) of the defect
/// from Hermiticity, and of a negative eigenvalue of Γ, that is accepted
/// as rounding in a file.
const TOLERANCE: f64 = 1e-10;

/// A periodic lead with blocks of its own, as read (spinless, before the
/// device's spin doubling and the bias).
#[derive(Clone, Debug, PartialEq)]
pub(crate) struct OwnBlocks {
    /// Cell block of the lead (eV).
    pub onsite: Mat<C64>,
    /// Coupling H_n,n+1 between lead cells along +x (eV).
    pub coupling: Mat<C64>,
    /// Block joining lead and device along +x; `None`: the coupling.
    pub join: Option<Mat<C64>>,
    /// The files the blocks came from, for descriptions.
    pub paths: Vec<PathBuf>,
}

/// The keys that make a lead one of its own (blocks devices only).
fn own_keys(l: &RawLead) -> [(&'static str, bool); 6] {
    [
        ("wide_band_orbitals_ev", l.wide_band_orbitals_ev.is_some()),
        ("wide_band_matrix_ev", l.wide_band_matrix_ev.is_some()),
        ("wide_band_file", l.wide_band_file.is_some()),
        ("onsite_file", l.onsite_file.is_some()),
        ("coupling_file", l.coupling_file.is_some()),
        ("join_file", l.join_file.is_some()),
    ]
}

/// The span of a key of [`own_keys`].
fn own_span(l: &RawLead, key: &str) -> Option<std::ops::Range<usize>> {
    match key {
        "wide_band_orbitals_ev" => span_of(&l.wide_band_orbitals_ev),
        "wide_band_matrix_ev" => span_of(&l.wide_band_matrix_ev),
        "wide_band_file" => span_of(&l.wide_band_file),
        "onsite_file" => span_of(&l.onsite_file),
        "coupling_file" => span_of(&l.coupling_file),
        _ => span_of(&l.join_file),
    }
}

/// The lead model the keys of a lead of its own describe, or `None` when
/// the lead sets none of them. Refuses them beside a chain or strip
/// device, and two kinds of lead at once.
pub(crate) fn own_model(
    l: &RawLead,
    p: &str,
    ck: &Checker<'_>,
    device: &DeviceSpec,
    files: &mut BlockFiles,
) -> Result<Option<LeadModel>, CaseError> {
    let set: Vec<&str> = own_keys(l)
        .iter()
        .filter(|(_, s)| *s)
        .map(|(k, _)| *k)
        .collect();
    let Some(&first) = set.first() else {
        return Ok(None);
    };
    let b = match &device.kind {
        DeviceKind::Blocks { onsite, .. } => onsite.first().map_or(0, |m| m.nrows()),
        _ => {
            return Err(ck.ctx.invalid(
                own_span(l, first),
                &format!("{p}.{first}"),
                "no such key with kind = \"chain\" or \"strip\" (only for kind = \"blocks\"; \
                 a chain or strip lead takes band_edge_ev, effective_mass or wide_band_ev)",
                "it set",
            ));
        }
    };
    let wide: Vec<&str> = set
        .iter()
        .copied()
        .filter(|k| k.starts_with("wide"))
        .collect();
    if wide.len() > 1 || (wide.len() == 1 && set.len() > 1) {
        let other = set.iter().find(|k| **k != wide[0]).unwrap_or(&set[0]);
        return Err(ck.ctx.invalid(
            own_span(l, other),
            &format!("{p}.{other}"),
            &format!("one kind of lead (`{}` is set too)", wide[0]),
            format!("both `{}` and `{other}`", wide[0]),
        ));
    }
    let spin = device.spin_explicit;
    let model = match first {
        "wide_band_orbitals_ev" => per_orbital(l, p, ck, b, spin)?,
        "wide_band_matrix_ev" => inline_matrix(l, p, ck, b, spin)?,
        "wide_band_file" => file_matrix(l, p, ck, b, spin, files)?,
        _ => LeadModel::OwnBlocks(own_blocks(l, p, ck, b, files)?),
    };
    Ok(Some(model))
}

/// The sizes a Γ of a lead may have: b, or 2b with explicit spin.
fn gamma_sizes(b: usize, spin: bool) -> String {
    if spin {
        format!(
            "{b} (one per orbital, both spins alike) or {} (one per spin-orbital)",
            2 * b
        )
    } else {
        format!("{b}, the orbitals of a device cell")
    }
}

/// `wide_band_orbitals_ev`: Γ = diag(values).
fn per_orbital(
    l: &RawLead,
    p: &str,
    ck: &Checker<'_>,
    b: usize,
    spin: bool,
) -> Result<LeadModel, CaseError> {
    let v = l.wide_band_orbitals_ev.as_ref().expect("set");
    let key = format!("{p}.wide_band_orbitals_ev");
    let values = v.get_ref();
    if values.len() != b && !(spin && values.len() == 2 * b) {
        return Err(ck.ctx.invalid(
            Some(v.span()),
            &key,
            &format!("as many values as {}", gamma_sizes(b, spin)),
            format!("{} values", values.len()),
        ));
    }
    if let Some(x) = values
        .iter()
        .find(|x| !(x.is_finite() && **x >= 0.0 && **x <= MAX_ENERGY_EV))
    {
        return Err(ck.ctx.invalid(
            Some(v.span()),
            &key,
            "broadenings Γ_o in eV with 0 ≤ Γ_o ≤ 1e6",
            show(*x),
        ));
    }
    if values.iter().all(|x| *x == 0.0) {
        return Err(ck.ctx.invalid(
            Some(v.span()),
            &key,
            "at least one Γ_o > 0 (a lead with Γ = 0 takes no part)",
            "all zero",
        ));
    }
    let n = values.len();
    let gamma = Mat::from_fn(n, n, |r, c| {
        C64::new(if r == c { values[r] } else { 0.0 }, 0.0)
    });
    Ok(LeadModel::WideBandMatrix {
        gamma,
        source: format!("`{key}`"),
    })
}

/// `wide_band_matrix_ev`: a real symmetric Γ written as rows.
fn inline_matrix(
    l: &RawLead,
    p: &str,
    ck: &Checker<'_>,
    b: usize,
    spin: bool,
) -> Result<LeadModel, CaseError> {
    let v = l.wide_band_matrix_ev.as_ref().expect("set");
    let key = format!("{p}.wide_band_matrix_ev");
    let rows = v.get_ref();
    let n = rows.len();
    let square = rows.iter().all(|r| r.len() == n);
    if !square || (n != b && !(spin && n == 2 * b)) {
        let shape: Vec<String> = rows.iter().map(|r| r.len().to_string()).collect();
        return Err(ck.ctx.invalid(
            Some(v.span()),
            &key,
            &format!(
                "a square matrix of size {} (rows of equal length)",
                gamma_sizes(b, spin)
            ),
            format!("{n} rows of lengths [{}]", shape.join(", ")),
        ));
    }
    if let Some(x) = rows.iter().flatten().find(|x| !x.is_finite()) {
        return Err(ck
            .ctx
            .invalid(Some(v.span()), &key, "finite numbers", show(*x)));
    }
    let gamma = Mat::from_fn(n, n, |r, c| C64::new(rows[r][c], 0.0));
    check_gamma(&gamma, ck, Some(v.span()), &key, "in the matrix")?;
    Ok(LeadModel::WideBandMatrix {
        gamma,
        source: format!("`{key}`"),
    })
}

/// `wide_band_file`: a Hermitian Γ from a blocks file (one block).
fn file_matrix(
    l: &RawLead,
    p: &str,
    ck: &Checker<'_>,
    b: usize,
    spin: bool,
    files: &mut BlockFiles,
) -> Result<LeadModel, CaseError> {
    let name = l.wide_band_file.as_ref().expect("set");
    let key = format!("{p}.wide_band_file");
    let want = if spin { 2 * b } else { b };
    let (path, gamma) = one_block(name, &key, ck, b, files, |n| n == b || n == want)
        .map_err(|e| size_error(e, ck, name, &key, &gamma_sizes(b, spin)))?;
    let found = format!("in file `{}`", path.display());
    check_gamma(&gamma, ck, Some(name.span()), &key, &found)?;
    Ok(LeadModel::WideBandMatrix {
        gamma,
        source: format!("file `{}`", path.display()),
    })
}

/// A Γ matrix must be Hermitian, positive semi-definite and not zero.
fn check_gamma(
    gamma: &Mat<C64>,
    ck: &Checker<'_>,
    span: Option<std::ops::Range<usize>>,
    key: &str,
    found_in: &str,
) -> Result<(), CaseError> {
    let largest = crate::device::max_abs(gamma);
    let scale = largest.max(1.0);
    let (defect, row, col) = crate::device::hermiticity_defect(gamma);
    let refuse = |expected: &str, found: String| {
        Err(ck.ctx.error(
            CaseErrorKind::Invalid,
            span.clone(),
            Some(key),
            format!("expected {expected}, found {found}"),
        ))
    };
    if defect > TOLERANCE * scale {
        return refuse(
            "a Hermitian Γ (Γ = Γ†)",
            format!(
                "{found_in} |Γ − Γ†| = {defect:.3e} eV at ({row}, {col}) \
                 (hint: Γ_rc must equal the complex conjugate of Γ_cr)"
            ),
        );
    }
    if largest == 0.0 {
        return refuse(
            "a Γ with at least one element ≠ 0",
            format!("{found_in} all zero (a lead with Γ = 0 takes no part)"),
        );
    }
    let lowest = crate::device::lowest_eigenvalue(gamma);
    if lowest < -TOLERANCE * scale {
        return refuse(
            "a positive semi-definite Γ (every eigenvalue ≥ 0)",
            format!(
                "{found_in} a smallest eigenvalue of {lowest:.6e} eV \
                 (hint: a lead can only take electrons out at a rate ≥ 0 in every state)"
            ),
        );
    }
    Ok(())
}

/// Why one block could not be read: a message already made, or a size.
enum BlockError {
    Case(CaseError),
    Size { path: PathBuf, rows: usize },
    Count { path: PathBuf, count: usize },
}

/// The size of a lead's block against the device's.
fn size_error(
    e: BlockError,
    ck: &Checker<'_>,
    name: &Spanned<String>,
    key: &str,
    want: &str,
) -> CaseError {
    match e {
        BlockError::Case(e) => e,
        BlockError::Size { path, rows } => ck.ctx.error(
            CaseErrorKind::File,
            Some(name.span()),
            Some(key),
            format!(
                "expected a block of size {want}, found a {rows}×{rows} block in file `{}` \
                 (hint: a lead has as many orbitals as a device cell)",
                path.display()
            ),
        ),
        BlockError::Count { path, count } => ck.ctx.error(
            CaseErrorKind::File,
            Some(name.span()),
            Some(key),
            format!(
                "expected one block (shape (b, b) or (1, b, b)), found {count} blocks in file `{}` \
                 (hint: a periodic lead repeats a single cell)",
                path.display()
            ),
        ),
    }
}

/// The single block of the file `name` (a csv block padded up to b).
fn one_block(
    name: &Spanned<String>,
    key: &str,
    ck: &Checker<'_>,
    b: usize,
    files: &mut BlockFiles,
    size_ok: impl Fn(usize) -> bool,
) -> Result<(PathBuf, Mat<C64>), BlockError> {
    let (path, mut file) = read_named(name, key, ck, files).map_err(BlockError::Case)?;
    if file.blocks.len() != 1 {
        let count = file.blocks.len();
        return Err(BlockError::Count { path, count });
    }
    if file.from_csv {
        pad_to(&mut file.blocks, b);
    }
    let block = file.blocks.swap_remove(0);
    if !size_ok(block.nrows()) {
        let rows = block.nrows();
        return Err(BlockError::Size { path, rows });
    }
    Ok((path, block))
}

/// `onsite_file`, `coupling_file` and `join_file`: a periodic lead with
/// blocks of its own.
fn own_blocks(
    l: &RawLead,
    p: &str,
    ck: &Checker<'_>,
    b: usize,
    files: &mut BlockFiles,
) -> Result<OwnBlocks, CaseError> {
    let table = span_of(&l.join_file).or(span_of(&l.coupling_file));
    let on_name = ck.required(
        l.onsite_file.as_ref(),
        table.clone(),
        &format!("{p}.onsite_file"),
        "the lead's cell block (.npy or .csv) beside its coupling_file or join_file",
    )?;
    let co_name = ck.required(
        l.coupling_file.as_ref(),
        span_of(&l.onsite_file),
        &format!("{p}.coupling_file"),
        "the lead's coupling block between its cells (.npy or .csv) beside its onsite_file",
    )?;
    let want = format!("{b}×{b}, the size of a device cell");
    let mut read = |name: &Spanned<String>, part: &str| {
        let key = format!("{p}.{part}");
        one_block(name, &key, ck, b, files, |n| n == b)
            .map_err(|e| size_error(e, ck, name, &key, &want))
    };
    let (on_path, onsite) = read(on_name, "onsite_file")?;
    let (co_path, coupling) = read(co_name, "coupling_file")?;
    let join = match &l.join_file {
        Some(name) => Some(read(name, "join_file")?),
        None => None,
    };
    let (defect, row, col) = crate::device::hermiticity_defect(&onsite);
    if defect > TOLERANCE * crate::device::max_abs(&onsite).max(1.0) {
        return Err(ck.ctx.error(
            CaseErrorKind::File,
            Some(on_name.span()),
            Some(&format!("{p}.onsite_file")),
            format!(
                "expected a Hermitian cell block, found in file `{}`: |H − H†| reaches {defect:.3e} eV at ({row}, {col}) \
                 (hint: H_rc must equal the complex conjugate of H_cr)",
                on_path.display()
            ),
        ));
    }
    if crate::device::max_abs(&coupling) == 0.0 {
        return Err(zero_block(
            ck,
            co_name,
            &format!("{p}.coupling_file"),
            &co_path,
        ));
    }
    if let (Some(name), Some((path, m))) = (&l.join_file, &join)
        && crate::device::max_abs(m) == 0.0
    {
        return Err(zero_block(ck, name, &format!("{p}.join_file"), path));
    }
    let mut paths = vec![on_path, co_path];
    paths.extend(join.as_ref().map(|j| j.0.clone()));
    Ok(OwnBlocks {
        onsite,
        coupling,
        join: join.map(|j| j.1),
        paths,
    })
}

/// An all-zero coupling or joining block: no current could pass.
fn zero_block(
    ck: &Checker<'_>,
    name: &Spanned<String>,
    key: &str,
    path: &std::path::Path,
) -> CaseError {
    ck.ctx.error(
        CaseErrorKind::File,
        Some(name.span()),
        Some(key),
        format!(
            "expected a block with at least one element ≠ 0, found an all-zero block in file `{}` \
             (hint: a zero block passes no current)",
            path.display()
        ),
    )
}
