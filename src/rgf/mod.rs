//! Recursive Green's function kernel for one energy.
//!
//! Forward sweep of the left-connected g^r_i and g^n_i, backward sweep for
//! the diagonal blocks of G^r and G^n and the first off-diagonal blocks of
//! G^n (R. Lake, G. Klimeck, R. C. Bowen, D. Jovanovic, J. Appl. Phys. 81,
//! 7845 (1997); M. P. Anantram, M. S. Lundstrom, D. E. Nikonov, Proc. IEEE
//! 96, 1511 (2008)). With τ = H_i,i+1:
//!
//! ```text
//! g_i   = [E − H_ii − Σ_ii − τ_{i−1}† g_{i−1} τ_{i−1}]⁻¹
//! g^n_i = g_i [Σ^in_ii + τ_{i−1}† g^n_{i−1} τ_{i−1}] g_i†
//! G_ii  = g_i + g_i τ G_{i+1,i+1} τ† g_i
//! G^n_ii = g^n_i + g_i τ G^n_{i+1,i+1} τ† g_i† + g_i τ G_{i+1,i+1} τ† g^n_i
//!          + g^n_i τ G_{i+1,i+1}† τ† g_i†
//! G^n_{i+1,i} = G_{i+1,i+1} τ† g^n_i + G^n_{i+1,i+1} τ† g_i†
//! ```
//!
//! These follow from the Keldysh-space Dyson equation G = g + g τ G with the
//! Langreth rules; the dense-inversion test in `tests/rgf_dense.rs` is what
//! fixes them. Cost O(N b³) per energy; the workspace holds O(N b²).
//!
//! The kernel takes plain numbers (no configuration types, no I/O). Chains
//! with b = 1 take a scalar path with no matrix machinery.

use crate::C64;
use faer::Mat;

mod block;
mod scalar;

pub use scalar::{ScalarFilled, ScalarSources, TwoSourceScratch, solve_two_sources_scalar};

/// Inputs of one energy point.
#[derive(Clone, Copy)]
pub struct EnergyInput<'a> {
    /// Energy (eV).
    pub energy_ev: f64,
    /// On-site blocks H_ii.
    pub onsite: &'a [Mat<C64>],
    /// Couplings H_i,i+1.
    pub coupling: &'a [Mat<C64>],
    /// Retarded self-energy of the left lead on the first block.
    pub sigma_left: &'a Mat<C64>,
    /// Retarded self-energy of the right lead on the last block.
    pub sigma_right: &'a Mat<C64>,
    /// Σ^in of the left lead, Γ_1 f_1.
    pub inscatter_left: &'a Mat<C64>,
    /// Σ^in of the right lead, Γ_2 f_2.
    pub inscatter_right: &'a Mat<C64>,
    /// Diagonal of the scattering Σ^r_0 per orbital site (N·b).
    pub scatter_retarded: &'a [C64],
    /// Diagonal of the scattering Σ^in_0 per orbital site (N·b).
    pub scatter_in: &'a [f64],
    /// Also compute the coherent transmission Tr[Γ1 G^r_1N Γ2 G^a_N1].
    pub want_transmission: bool,
}

/// Outputs of one energy point, written into caller-owned slices.
pub struct EnergyOutput<'a> {
    /// Diagonal of G^r per orbital site (N·b), 1/eV.
    pub retarded: &'a mut [C64],
    /// Diagonal of G^n per orbital site (N·b), 1/eV.
    pub filled: &'a mut [f64],
    /// Bond flow Tr[i(H_i,i+1 G^n_i+1,i − G^n_i,i+1 H_i+1,i)] for each pair
    /// of neighbouring cells (N − 1), dimensionless; multiply by g_s/h for a
    /// particle flow per unit energy.
    pub bond: &'a mut [f64],
    /// When given, also the full blocks (for checks and orbital-resolved
    /// analysis); costs nothing when `None`.
    pub full: Option<&'a mut FullBlocks>,
}

/// Full diagonal and first lower off-diagonal blocks of G^r and G^n.
#[derive(Clone, Debug, Default)]
pub struct FullBlocks {
    /// G^r_ii.
    pub retarded_diagonal: Vec<Mat<C64>>,
    /// G^n_ii.
    pub filled_diagonal: Vec<Mat<C64>>,
    /// G^r_i+1,i.
    pub retarded_lower: Vec<Mat<C64>>,
    /// G^n_i+1,i.
    pub filled_lower: Vec<Mat<C64>>,
}

impl FullBlocks {
    /// Shape the four lists for `n` cells of `b` orbitals, keeping the
    /// blocks already there when they have that shape: the kernel
    /// overwrites every block, so a caller that passes the same
    /// `FullBlocks` for every energy allocates them once.
    fn prepare(&mut self, n: usize, b: usize) {
        fn fit(v: &mut Vec<Mat<C64>>, len: usize, b: usize) {
            if v.len() != len || v.first().is_some_and(|m| m.nrows() != b) {
                *v = vec![Mat::zeros(b, b); len];
            }
        }
        let lower = n.saturating_sub(1);
        fit(&mut self.retarded_diagonal, n, b);
        fit(&mut self.filled_diagonal, n, b);
        fit(&mut self.retarded_lower, lower, b);
        fit(&mut self.filled_lower, lower, b);
    }
}

/// Terminal traces at one energy (dimensionless; multiply by g_s/h).
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct TerminalFlows {
    /// Tr[Σ^in_1 A_11 − Γ_1 G^n_11]: flow from the left lead into the device.
    pub left: f64,
    /// Tr[Σ^in_2 A_NN − Γ_2 G^n_NN]: flow from the right lead into the device.
    pub right: f64,
    /// Tr[Γ1 G^r_1N Γ2 G^a_N1] when asked for, else 0.
    pub transmission: f64,
    /// Tr[Σ^in_1 A_11] + Tr[Γ_1 G^n_11]: inflow plus outflow of the left
    /// lead (the gross exchange, a scale for the net flow).
    pub left_gross: f64,
    /// The same for the right lead.
    pub right_gross: f64,
}

/// A numerical fault, with where it happened.
#[derive(Debug, thiserror::Error, Clone, PartialEq)]
pub enum RgfError {
    /// A non-finite value in a Green's function (singular block or overflow).
    #[error("non-finite Green's function at E = {energy_ev} eV in cell {cell}")]
    NotFinite {
        /// Energy (eV).
        energy_ev: f64,
        /// Cell index (0-based).
        cell: usize,
    },
}

/// Per-thread scratch space: left-connected blocks for every cell and the
/// temporaries of one cell, allocated once and reused for every energy.
///
/// Size: 3·N·b² + 8·b² complex numbers for b > 1 (g, g^n and g τ per cell),
/// 2·N complex numbers for b = 1.
pub struct Workspace {
    g: Vec<Mat<C64>>,
    gn: Vec<Mat<C64>>,
    block: Option<block::BlockScratch>,
    sg: Vec<C64>,
    sgn: Vec<f64>,
    cells: usize,
}

impl Workspace {
    /// Scratch space for `cells` cells of `orbitals` orbitals.
    pub fn new(cells: usize, orbitals: usize) -> Self {
        let mut ws = Self {
            g: Vec::new(),
            gn: Vec::new(),
            block: None,
            sg: Vec::new(),
            sgn: Vec::new(),
            cells,
        };
        if orbitals == 1 {
            ws.sg = vec![C64::new(0.0, 0.0); cells];
            ws.sgn = vec![0.0; cells];
        } else {
            ws.ensure_blocks(orbitals);
        }
        ws
    }

    fn ensure_blocks(&mut self, b: usize) {
        let ok = self.block.is_some() && self.g.first().is_some_and(|m| m.nrows() == b);
        if !ok {
            self.g = (0..self.cells).map(|_| Mat::zeros(b, b)).collect();
            self.gn = (0..self.cells).map(|_| Mat::zeros(b, b)).collect();
            self.block = Some(block::BlockScratch::new(self.cells, b));
        }
    }
}

/// Solve one energy point. Dispatches to the scalar path when b = 1 (with
/// or without full blocks).
pub fn solve_energy(
    input: &EnergyInput<'_>,
    ws: &mut Workspace,
    out: EnergyOutput<'_>,
) -> Result<TerminalFlows, RgfError> {
    let b = input.onsite[0].nrows();
    if b == 1 {
        return scalar::solve_energy_scalar(input, ws, out);
    }
    ws.ensure_blocks(b);
    block::solve_energy_blocks(input, ws, out, None)
}

/// The scattering self-energy as full b × b blocks per cell, and where the
/// diagonal blocks of G go: the exchange of the block path of the Born
/// loop. Every slice holds N·b² numbers, block i at i·b², row-major.
pub struct BlockExchange<'a> {
    /// Σ^r_0,ii (eV).
    pub scatter_retarded: &'a [C64],
    /// Σ^in_0,ii packed as b² reals: the diagonal, above it the real parts
    /// of the elements, below it (at the mirrored place) their imaginary
    /// parts.
    pub scatter_in: &'a [f64],
    /// Out: G^r_ii (1/eV).
    pub green_retarded: &'a mut [C64],
    /// Out: G^n_ii (1/eV).
    pub green_filled: &'a mut [C64],
}

/// [`solve_energy`] with the scattering self-energy given as blocks
/// (`exchange`; `input.scatter_retarded` and `input.scatter_in` are not
/// read) and the diagonal blocks of G^r and G^n written back into
/// `exchange`. Any b, b = 1 included, takes the block recursion.
pub fn solve_energy_with_blocks(
    input: &EnergyInput<'_>,
    ws: &mut Workspace,
    out: EnergyOutput<'_>,
    exchange: &mut BlockExchange<'_>,
) -> Result<TerminalFlows, RgfError> {
    let b = input.onsite[0].nrows();
    ws.ensure_blocks(b);
    block::solve_energy_blocks(input, ws, out, Some(exchange))
}
