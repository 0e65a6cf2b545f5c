//! Device Hamiltonians in block-tridiagonal form.
//!
//! A device is a chain of `cells` cells with `orbitals` orbitals each. The
//! Hamiltonian has on-site blocks H_ii (Hermitian) and couplings H_i,i+1;
//! H_i+1,i = H_i,i+1†. All device kinds (chain, strip, user blocks) produce this
//! one form, with the potential profile U(x) added to the on-site energies.

use crate::C64;
use faer::Mat;

pub mod channels;
pub use channels::{Channel, ChannelError, Channels, OTHER_CHANNEL};

/// A block-tridiagonal device Hamiltonian plus the geometry needed to report
/// results along the transport direction.
#[derive(Clone, Debug)]
pub struct Device {
    /// Distance between neighbouring cells (nm).
    pub spacing_nm: f64,
    /// Orbitals per cell (block size b).
    pub orbitals: usize,
    /// On-site blocks H_ii (eV), one per cell, potential included.
    pub onsite: Vec<Mat<C64>>,
    /// Coupling blocks H_i,i+1 (eV), one fewer than the cells.
    pub coupling: Vec<Mat<C64>>,
    /// Cell positions x_i = i·a (nm).
    pub x_nm: Vec<f64>,
    /// The potential U(x_i) added to every orbital of cell i (eV), bias included.
    pub potential_ev: Vec<f64>,
    /// Local band bottom of each cell (eV): the lowest energy of the periodic
    /// continuation of the cell, potential included. For a chain this is
    /// Ec(x_i).
    pub band_edge_ev: Vec<f64>,
}

/// Errors from building a device.
#[derive(Debug, thiserror::Error, PartialEq)]
pub enum DeviceError {
    /// A block has the wrong shape.
    #[error("block {what} of cell {cell} is {rows}×{cols}, expected {expected}×{expected}")]
    BlockShape {
        /// Which block ("on-site" or "coupling").
        what: &'static str,
        /// Cell index (0-based).
        cell: usize,
        /// Rows found.
        rows: usize,
        /// Columns found.
        cols: usize,
        /// Expected block size.
        expected: usize,
    },
    /// An on-site block is not Hermitian.
    #[error(
        "on-site block of cell {cell} is not Hermitian: |H - H†| reaches {deviation:.3e} eV at ({row}, {col})"
    )]
    NotHermitian {
        /// Cell index (0-based).
        cell: usize,
        /// Row of the worst element.
        row: usize,
        /// Column of the worst element.
        col: usize,
        /// Largest |H_rc − conj(H_cr)| (eV).
        deviation: f64,
    },
    /// Inconsistent counts or bad numbers.
    #[error("{0}")]
    Invalid(String),
}

/// A potential region: an offset or a linear ramp over [from, to) in x.
#[derive(Clone, Debug, PartialEq)]
pub struct PotentialRegion {
    /// Start of the region (nm), inclusive.
    pub from_nm: f64,
    /// End of the region (nm), exclusive.
    pub to_nm: f64,
    /// Potential at `from_nm` (eV).
    pub start_ev: f64,
    /// Potential at `to_nm` (eV); equal to `start_ev` for a flat offset.
    pub end_ev: f64,
}

impl PotentialRegion {
    /// A flat band offset.
    pub fn offset(from_nm: f64, to_nm: f64, offset_ev: f64) -> Self {
        Self {
            from_nm,
            to_nm,
            start_ev: offset_ev,
            end_ev: offset_ev,
        }
    }

    /// Contribution at position x (nm).
    pub fn value_at(&self, x_nm: f64) -> f64 {
        if x_nm < self.from_nm || x_nm >= self.to_nm {
            return 0.0;
        }
        let s = (x_nm - self.from_nm) / (self.to_nm - self.from_nm);
        self.start_ev + (self.end_ev - self.start_ev) * s
    }
}

/// Where the applied bias drops.
#[derive(Clone, Debug, PartialEq)]
pub enum BiasDrop {
    /// Entirely at the contacts: the channel stays flat.
    Leads,
    /// Linearly across [from_nm, to_nm]: the on-site energies get
    /// (µ1 − µ2)(½ − s(x)), s = clamp((x − x0)/(x1 − x0), 0, 1).
    Linear {
        /// Start of the drop (nm).
        from_nm: f64,
        /// End of the drop (nm).
        to_nm: f64,
    },
}

/// The potential profile U(x_i) of every cell: regions summed, plus the
/// bias drop for lead Fermi levels µ1, µ2 (eV).
pub fn potential_profile(
    x_nm: &[f64],
    regions: &[PotentialRegion],
    drop: &BiasDrop,
    mu_left_ev: f64,
    mu_right_ev: f64,
) -> Vec<f64> {
    x_nm.iter()
        .map(|&x| {
            let mut u: f64 = regions.iter().map(|r| r.value_at(x)).sum();
            if let BiasDrop::Linear { from_nm, to_nm } = drop {
                let s = ((x - from_nm) / (to_nm - from_nm)).clamp(0.0, 1.0);
                u += (mu_left_ev - mu_right_ev) * (0.5 - s);
            }
            u
        })
        .collect()
}

/// Cell positions 0, a, 2a, … (nm).
pub fn cell_positions(cells: usize, spacing_nm: f64) -> Vec<f64> {
    (0..cells).map(|i| i as f64 * spacing_nm).collect()
}

fn scalar_block(v: f64) -> Mat<C64> {
    Mat::from_fn(1, 1, |_, _| C64::new(v, 0.0))
}

/// Effective-mass chain (b = 1): hopping t, on-site Ec + U_i + 2t, coupling −t.
/// `potential_ev` carries U_i (one entry per cell), `band_edge_ev` is Ec.
pub fn chain(
    spacing_nm: f64,
    hopping_ev: f64,
    band_edge_ev: f64,
    potential_ev: Vec<f64>,
) -> Device {
    let cells = potential_ev.len();
    let onsite = potential_ev
        .iter()
        .map(|u| scalar_block(band_edge_ev + u + 2.0 * hopping_ev))
        .collect();
    let coupling = (0..cells.saturating_sub(1))
        .map(|_| scalar_block(-hopping_ev))
        .collect();
    let edges = potential_ev.iter().map(|u| band_edge_ev + u).collect();
    Device {
        spacing_nm,
        orbitals: 1,
        onsite,
        coupling,
        x_nm: cell_positions(cells, spacing_nm),
        potential_ev,
        band_edge_ev: edges,
    }
}

/// On-site block of a square-lattice strip W sites wide with hard walls:
/// (Ec + U + 4t) on the diagonal and −t between transverse neighbours.
pub fn strip_onsite(width: usize, hopping_ev: f64, energy_ev: f64) -> Mat<C64> {
    Mat::from_fn(width, width, |r, c| {
        if r == c {
            C64::new(energy_ev + 4.0 * hopping_ev, 0.0)
        } else if r.abs_diff(c) == 1 {
            C64::new(-hopping_ev, 0.0)
        } else {
            C64::new(0.0, 0.0)
        }
    })
}

/// Coupling block −t·I of a strip.
pub fn strip_coupling(width: usize, hopping_ev: f64) -> Mat<C64> {
    Mat::from_fn(width, width, |r, c| {
        if r == c {
            C64::new(-hopping_ev, 0.0)
        } else {
            C64::new(0.0, 0.0)
        }
    })
}

/// Energy of transverse mode n (1-based) of a hard-wall strip measured from
/// the band edge: 2t(1 − cos(nπ/(W+1))).
pub fn strip_mode_energy(width: usize, hopping_ev: f64, n: usize) -> f64 {
    2.0 * hopping_ev * (1.0 - (n as f64 * std::f64::consts::PI / (width as f64 + 1.0)).cos())
}

/// Square-lattice strip: `width` sites across (b = W), one cell per entry
/// of `potential_ev`.
pub fn strip(
    width: usize,
    spacing_nm: f64,
    hopping_ev: f64,
    band_edge_ev: f64,
    potential_ev: Vec<f64>,
) -> Device {
    let cells = potential_ev.len();
    let onsite = potential_ev
        .iter()
        .map(|u| strip_onsite(width, hopping_ev, band_edge_ev + u))
        .collect();
    let coupling = (0..cells.saturating_sub(1))
        .map(|_| strip_coupling(width, hopping_ev))
        .collect();
    let lowest = strip_mode_energy(width, hopping_ev, 1);
    let edges = potential_ev
        .iter()
        .map(|u| band_edge_ev + u + lowest)
        .collect();
    Device {
        spacing_nm,
        orbitals: width,
        onsite,
        coupling,
        x_nm: cell_positions(cells, spacing_nm),
        potential_ev,
        band_edge_ev: edges,
    }
}

/// Largest |H_rc − conj(H_cr)| and where it sits.
pub fn hermiticity_defect(m: &Mat<C64>) -> (f64, usize, usize) {
    let mut worst = (0.0, 0, 0);
    for r in 0..m.nrows() {
        for c in 0..m.ncols() {
            let d = (m[(r, c)] - m[(c, r)].conj()).norm();
            if d > worst.0 {
                worst = (d, r, c);
            }
        }
    }
    worst
}

/// User blocks: `onsite` (one per cell) and `coupling` (one per neighbouring
/// pair, or a single block used for every pair). The potential U_i is added
/// to the diagonal of H_ii. Checks shapes and Hermiticity (tolerance
/// 1e-10 eV relative to the largest element).
pub fn blocks(
    spacing_nm: f64,
    onsite: Vec<Mat<C64>>,
    coupling: Vec<Mat<C64>>,
    potential_ev: Vec<f64>,
) -> Result<Device, DeviceError> {
    let cells = onsite.len();
    if cells == 0 {
        return Err(DeviceError::Invalid("no on-site blocks given".into()));
    }
    let b = onsite[0].nrows();
    if potential_ev.len() != cells {
        return Err(DeviceError::Invalid(format!(
            "potential has {} entries for {} cells",
            potential_ev.len(),
            cells
        )));
    }
    let coupling = match coupling.len() {
        n if n + 1 == cells => coupling,
        1 => vec![coupling[0].clone(); cells - 1],
        n => {
            return Err(DeviceError::Invalid(format!(
                "{n} coupling blocks for {cells} cells: give {} (one per neighbouring pair) or 1 (used for every pair)",
                cells - 1
            )));
        }
    };
    check_blocks(&onsite, &coupling, b)?;
    let onsite: Vec<Mat<C64>> = onsite
        .into_iter()
        .zip(&potential_ev)
        .map(|(mut m, &u)| {
            for o in 0..b {
                m[(o, o)] += C64::new(u, 0.0);
            }
            m
        })
        .collect();
    let band_edge_ev = block_band_edges(&onsite, &coupling);
    Ok(Device {
        spacing_nm,
        orbitals: b,
        onsite,
        coupling,
        x_nm: cell_positions(cells, spacing_nm),
        potential_ev,
        band_edge_ev,
    })
}

/// Every on-site block b×b and Hermitian (1e-10 relative to its largest
/// element), every coupling block b×b.
fn check_blocks(onsite: &[Mat<C64>], coupling: &[Mat<C64>], b: usize) -> Result<(), DeviceError> {
    for (cell, m) in onsite.iter().enumerate() {
        if m.nrows() != b || m.ncols() != b {
            return Err(DeviceError::BlockShape {
                what: "on-site",
                cell,
                rows: m.nrows(),
                cols: m.ncols(),
                expected: b,
            });
        }
        let scale = max_abs(m).max(1.0);
        let (dev, row, col) = hermiticity_defect(m);
        if dev > 1e-10 * scale {
            return Err(DeviceError::NotHermitian {
                cell,
                row,
                col,
                deviation: dev,
            });
        }
    }
    for (cell, m) in coupling.iter().enumerate() {
        if m.nrows() != b || m.ncols() != b {
            return Err(DeviceError::BlockShape {
                what: "coupling",
                cell,
                rows: m.nrows(),
                cols: m.ncols(),
                expected: b,
            });
        }
    }
    Ok(())
}

/// The lowest band energy of each cell continued periodically with the
/// coupling on its right (on its left for the last cell).
fn block_band_edges(onsite: &[Mat<C64>], coupling: &[Mat<C64>]) -> Vec<f64> {
    let cells = onsite.len();
    (0..cells)
        .map(|i| {
            let hop = if i + 1 < cells {
                &coupling[i]
            } else if i > 0 {
                &coupling[i - 1]
            } else {
                // A single cell: no periodic continuation is known; use the
                // lowest level of the cell itself.
                let b = onsite[i].nrows();
                return lowest_band_energy(&onsite[i], &Mat::zeros(b, b));
            };
            lowest_band_energy(&onsite[i], hop)
        })
        .collect()
}

/// Largest element modulus of a block.
pub fn max_abs(m: &Mat<C64>) -> f64 {
    let mut v: f64 = 0.0;
    for r in 0..m.nrows() {
        for c in 0..m.ncols() {
            v = v.max(m[(r, c)].norm());
        }
    }
    v
}

/// Lowest eigenvalue of a Hermitian block (eV).
pub fn lowest_eigenvalue(m: &Mat<C64>) -> f64 {
    if m.nrows() == 1 {
        return m[(0, 0)].re;
    }
    let ev = m
        .self_adjoint_eigenvalues(faer::Side::Lower)
        .expect("Hermitian eigenvalues of a finite block");
    ev.into_iter().fold(f64::INFINITY, f64::min)
}

/// Range of the band of a periodic chain with cell block `onsite` and
/// coupling `hop` = H_n,n+1: (lowest, highest) energy over the Brillouin
/// zone. Exact for b = 1; for b > 1 sampled on 257 wave numbers, then
/// refined by golden section around the extreme samples.
pub fn band_range(onsite: &Mat<C64>, hop: &Mat<C64>) -> (f64, f64) {
    let b = onsite.nrows();
    if b == 1 {
        let e = onsite[(0, 0)].re;
        let t = hop[(0, 0)].norm();
        return (e - 2.0 * t, e + 2.0 * t);
    }
    let bloch = |k: f64| -> Mat<C64> {
        let ph = C64::new(k.cos(), k.sin());
        Mat::from_fn(b, b, |r, c| {
            onsite[(r, c)] + hop[(r, c)] * ph + hop[(c, r)].conj() * ph.conj()
        })
    };
    let eigs = |k: f64| -> Vec<f64> {
        bloch(k)
            .self_adjoint_eigenvalues(faer::Side::Lower)
            .expect("Hermitian eigenvalues")
    };
    let n = 257;
    let dk = 2.0 * std::f64::consts::PI / (n - 1) as f64;
    let mut lo = (f64::INFINITY, 0.0);
    let mut hi = (f64::NEG_INFINITY, 0.0);
    for j in 0..n {
        let k = -std::f64::consts::PI + j as f64 * dk;
        let e = eigs(k);
        let (emin, emax) = (e[0], e[e.len() - 1]);
        if emin < lo.0 {
            lo = (emin, k);
        }
        if emax > hi.0 {
            hi = (emax, k);
        }
    }
    let refine = |k0: f64, sign: f64| -> f64 {
        let f = |k: f64| {
            let e = eigs(k);
            sign * if sign > 0.0 { e[0] } else { e[e.len() - 1] }
        };
        let (mut a, mut c) = (k0 - dk, k0 + dk);
        let g = 0.5 * (5f64.sqrt() - 1.0);
        for _ in 0..60 {
            let x1 = c - g * (c - a);
            let x2 = a + g * (c - a);
            if f(x1) < f(x2) {
                c = x2;
            } else {
                a = x1;
            }
        }
        sign * f(0.5 * (a + c))
    };
    (refine(lo.1, 1.0).min(lo.0), refine(hi.1, -1.0).max(hi.0))
}

/// Lowest energy of the periodic continuation of a cell (eV).
pub fn lowest_band_energy(onsite: &Mat<C64>, hop: &Mat<C64>) -> f64 {
    band_range(onsite, hop).0
}

impl Device {
    /// Number of cells N.
    pub fn cells(&self) -> usize {
        self.onsite.len()
    }

    /// Device length N·a (nm).
    pub fn length_nm(&self) -> f64 {
        self.cells() as f64 * self.spacing_nm
    }

    /// Lowest band bottom over all cells (eV).
    pub fn lowest_band_edge(&self) -> f64 {
        self.band_edge_ev
            .iter()
            .copied()
            .fold(f64::INFINITY, f64::min)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn strip_band_bottom_is_first_mode() {
        let t = 1.0;
        let on = strip_onsite(5, t, 0.0);
        let hop = strip_coupling(5, t);
        let (lo, hi) = band_range(&on, &hop);
        assert!((lo - strip_mode_energy(5, t, 1)).abs() < 1e-10, "{lo}");
        assert!(
            (hi - (4.0 * t + strip_mode_energy(5, t, 5))).abs() < 1e-10,
            "{hi}"
        );
    }

    #[test]
    fn linear_drop_splits_bias_symmetrically() {
        let x = cell_positions(11, 1.0);
        let u = potential_profile(
            &x,
            &[],
            &BiasDrop::Linear {
                from_nm: 0.0,
                to_nm: 10.0,
            },
            -0.05,
            0.05,
        );
        assert!((u[0] + 0.05).abs() < 1e-15);
        assert!((u[10] - 0.05).abs() < 1e-15);
        assert!(u[5].abs() < 1e-15);
    }
}
