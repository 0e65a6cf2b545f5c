//! Force-constant blocks, their checks and the mass weighting.

use super::{LatticeError, PhononSide, invalid};
use crate::C64;
use crate::units::RAD2_PER_PS2_PER_N_PER_M_PER_U;
use faer::Mat;

/// Force constants of one strip cell W wide with free edges: the
/// transverse spring `kt` between neighbours r and r+1, each bond counted
/// on the diagonal of both of its sites.
pub(super) fn transverse_block(width: usize, kt: f64) -> Mat<f64> {
    let mut m = Mat::zeros(width, width);
    for r in 0..width.saturating_sub(1) {
        m[(r, r)] += kt;
        m[(r + 1, r + 1)] += kt;
        m[(r, r + 1)] = -kt;
        m[(r + 1, r)] = -kt;
    }
    m
}

/// K_ii and K_i,i+1 of a strip of `cells` cells (chain: width 1) without
/// the lead bonds: `longitudinal` has one spring per internal bond pair of
/// cells (cells − 1), `transverse` one per cell.
pub(super) fn strip_blocks(
    width: usize,
    longitudinal: &[f64],
    transverse: &[f64],
    cells: usize,
) -> (Vec<Mat<f64>>, Vec<Mat<f64>>) {
    let onsite = (0..cells)
        .map(|i| {
            let mut m = transverse_block(width, transverse[i]);
            let left = if i > 0 { longitudinal[i - 1] } else { 0.0 };
            let right = if i + 1 < cells { longitudinal[i] } else { 0.0 };
            for r in 0..width {
                m[(r, r)] += left + right;
            }
            m
        })
        .collect();
    let coupling = longitudinal
        .iter()
        .map(|&k| Mat::from_fn(width, width, |r, c| if r == c { -k } else { 0.0 }))
        .collect();
    (onsite, coupling)
}

/// Adds the springs of the bonds to a lead to the diagonal of an end
/// block (acoustic sum rule). `contact` is K_lead,device (left) or
/// K_device,lead (right); its entries are minus the springs.
pub(super) fn add_lead_bonds(onsite: &mut Mat<f64>, contact: &Mat<f64>, side: PhononSide) {
    for r in 0..onsite.nrows() {
        let springs: f64 = match side {
            PhononSide::Left => (0..contact.nrows()).map(|l| -contact[(l, r)]).sum(),
            PhononSide::Right => (0..contact.ncols()).map(|l| -contact[(r, l)]).sum(),
        };
        onsite[(r, r)] += springs;
    }
}

/// Φ_ij = K_ij / (M_i M_j)^(1/2) in (rad/ps)² for a block between sites
/// with masses `rows` and `cols` (u).
pub(super) fn mass_weight(k: &Mat<f64>, rows: &[f64], cols: &[f64]) -> Mat<C64> {
    Mat::from_fn(k.nrows(), k.ncols(), |r, c| {
        C64::new(
            k[(r, c)] / (rows[r] * cols[c]).sqrt() * RAD2_PER_PS2_PER_N_PER_M_PER_U,
            0.0,
        )
    })
}

/// The dynamical blocks Φ_ii and Φ_i,i+1 of the device.
pub(super) fn dynamical_blocks(
    masses: &[f64],
    onsite: &[Mat<f64>],
    coupling: &[Mat<f64>],
) -> (Vec<Mat<C64>>, Vec<Mat<C64>>) {
    let b = onsite[0].nrows();
    let cell = |i: usize| &masses[i * b..(i + 1) * b];
    let d_on = onsite
        .iter()
        .enumerate()
        .map(|(i, k)| mass_weight(k, cell(i), cell(i)))
        .collect();
    let d_co = coupling
        .iter()
        .enumerate()
        .map(|(i, k)| mass_weight(k, cell(i), cell(i + 1)))
        .collect();
    (d_on, d_co)
}

/// Positive finite masses, one per site.
pub(super) fn check_masses(what: &str, masses: &[f64]) -> Result<(), LatticeError> {
    if let Some(i) = masses.iter().position(|m| !(m.is_finite() && *m > 0.0)) {
        return Err(invalid(
            format!("{what}[{i}]"),
            format!("mass {} u is not a finite positive number", masses[i]),
            "masses are in atomic mass units (u), for example 28.0855 for Si",
        ));
    }
    Ok(())
}

/// A b×b block of finite numbers; symmetric when `symmetric`.
pub(super) fn check_block(
    what: String,
    m: &Mat<f64>,
    b: usize,
    symmetric: bool,
) -> Result<(), LatticeError> {
    if m.nrows() != b || m.ncols() != b {
        return Err(invalid(
            what,
            format!("block is {}×{}, expected {b}×{b}", m.nrows(), m.ncols()),
            "every force-constant block has one row and column per site of a cell",
        ));
    }
    let mut scale: f64 = 0.0;
    for r in 0..b {
        for c in 0..b {
            if !m[(r, c)].is_finite() {
                return Err(invalid(
                    what,
                    format!("entry ({r}, {c}) is {}", m[(r, c)]),
                    "force constants are finite numbers in N/m",
                ));
            }
            scale = scale.max(m[(r, c)].abs());
        }
    }
    if symmetric {
        for r in 0..b {
            for c in 0..r {
                let d = (m[(r, c)] - m[(c, r)]).abs();
                if d > 1e-10 * scale.max(1.0) {
                    return Err(invalid(
                        what,
                        format!(
                            "not symmetric: entries ({r}, {c}) and ({c}, {r}) differ by {d:.3e} N/m"
                        ),
                        "an on-site force-constant block must equal its transpose",
                    ));
                }
            }
        }
    }
    Ok(())
}

/// Counts, shapes and values of the device inputs of [`super::Lattice::new`].
pub(super) fn validate(
    masses: &[f64],
    onsite: &[Mat<f64>],
    coupling: &[Mat<f64>],
) -> Result<(), LatticeError> {
    let n = onsite.len();
    if n == 0 {
        return Err(invalid(
            "force_onsite",
            "no blocks".into(),
            "give one on-site block per cell (at least one cell)",
        ));
    }
    let b = onsite[0].nrows();
    if coupling.len() + 1 != n {
        return Err(invalid(
            "force_coupling",
            format!("{} blocks for {n} cells", coupling.len()),
            "give one coupling block K_i,i+1 per neighbouring pair of cells (N − 1)",
        ));
    }
    if masses.len() != n * b {
        return Err(invalid(
            "masses_u",
            format!("{} masses for {n} cells of {b} sites", masses.len()),
            "give one mass per site, cell by cell",
        ));
    }
    check_masses("masses_u", masses)?;
    for (i, m) in onsite.iter().enumerate() {
        check_block(format!("force_onsite[{i}]"), m, b, true)?;
    }
    for (i, m) in coupling.iter().enumerate() {
        check_block(format!("force_coupling[{i}]"), m, b, false)?;
    }
    Ok(())
}
