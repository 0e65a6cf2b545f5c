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
use faer::linalg::solvers::DenseSolveCore;

mod scalar;

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

/// Terminal traces at one energy (dimensionless; multiply by g_s/h).
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct TerminalFlows {
    /// Tr[Σ^in_1 A_11 − Γ_1 G^n_11]: flow from the left lead into the device.
    pub left: f64,
    /// Tr[Σ^in_2 A_NN − Γ_2 G^n_NN]: flow from the right lead into the device.
    pub right: f64,
    /// Tr[Γ1 G^r_1N Γ2 G^a_N1] when asked for, else 0.
    pub transmission: f64,
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

/// Per-thread scratch space: left-connected blocks for every cell.
pub struct Workspace {
    g: Vec<Mat<C64>>,
    gn: Vec<Mat<C64>>,
    sg: Vec<C64>,
    sgn: Vec<C64>,
}

impl Workspace {
    /// Scratch space for `cells` cells of `orbitals` orbitals.
    pub fn new(cells: usize, orbitals: usize) -> Self {
        Self {
            g: (0..cells).map(|_| Mat::zeros(orbitals, orbitals)).collect(),
            gn: (0..cells).map(|_| Mat::zeros(orbitals, orbitals)).collect(),
            sg: vec![C64::new(0.0, 0.0); if orbitals == 1 { cells } else { 0 }],
            sgn: vec![C64::new(0.0, 0.0); if orbitals == 1 { cells } else { 0 }],
        }
    }
}

fn trace(m: &Mat<C64>) -> C64 {
    (0..m.nrows()).map(|i| m[(i, i)]).sum()
}

/// Trace of a product Tr[X Y] without forming it.
fn trace_product(x: &Mat<C64>, y: &Mat<C64>) -> C64 {
    let mut t = C64::new(0.0, 0.0);
    for r in 0..x.nrows() {
        for c in 0..x.ncols() {
            t += x[(r, c)] * y[(c, r)];
        }
    }
    t
}

fn spectral(g: &Mat<C64>) -> Mat<C64> {
    let b = g.nrows();
    Mat::from_fn(b, b, |r, c| {
        (g[(r, c)] - g[(c, r)].conj()) * C64::new(0.0, 1.0)
    })
}

fn is_finite(m: &Mat<C64>) -> bool {
    (0..m.nrows())
        .all(|r| (0..m.ncols()).all(|c| m[(r, c)].re.is_finite() && m[(r, c)].im.is_finite()))
}

/// Solve one energy point. Dispatches to the scalar path when b = 1.
pub fn solve_energy(
    input: &EnergyInput<'_>,
    ws: &mut Workspace,
    out: EnergyOutput<'_>,
) -> Result<TerminalFlows, RgfError> {
    let b = input.onsite[0].nrows();
    if b == 1 && out.full.is_none() {
        return scalar::solve_energy_scalar(input, ws, out);
    }
    solve_energy_blocks(input, ws, out)
}

fn solve_energy_blocks(
    input: &EnergyInput<'_>,
    ws: &mut Workspace,
    mut out: EnergyOutput<'_>,
) -> Result<TerminalFlows, RgfError> {
    let n = input.onsite.len();
    let b = input.onsite[0].nrows();
    if let Some(f) = out.full.as_deref_mut() {
        f.retarded_diagonal = vec![Mat::zeros(b, b); n];
        f.filled_diagonal = vec![Mat::zeros(b, b); n];
        f.retarded_lower = vec![Mat::zeros(b, b); n.saturating_sub(1)];
        f.filled_lower = vec![Mat::zeros(b, b); n.saturating_sub(1)];
    }
    let e = C64::new(input.energy_ev, 0.0);
    let last = n - 1;

    for i in 0..n {
        let h = &input.onsite[i];
        let mut m = Mat::from_fn(b, b, |r, c| -h[(r, c)]);
        let mut sin = Mat::<C64>::zeros(b, b);
        for o in 0..b {
            m[(o, o)] += e - input.scatter_retarded[i * b + o];
            sin[(o, o)] += C64::new(input.scatter_in[i * b + o], 0.0);
        }
        if i == 0 {
            m -= input.sigma_left;
            sin += input.inscatter_left;
        }
        if i == last {
            m -= input.sigma_right;
            sin += input.inscatter_right;
        }
        if i > 0 {
            let tau = &input.coupling[i - 1];
            let td = tau.adjoint();
            m -= td * &ws.g[i - 1] * tau;
            sin += td * &ws.gn[i - 1] * tau;
        }
        let g = m.partial_piv_lu().inverse();
        if !is_finite(&g) {
            return Err(RgfError::NotFinite {
                energy_ev: input.energy_ev,
                cell: i,
            });
        }
        ws.gn[i] = &g * &sin * g.adjoint();
        ws.g[i] = g;
    }

    // Backward sweep: ws.g / ws.gn are overwritten with the full G, G^n.
    for o in 0..b {
        out.retarded[last * b + o] = ws.g[last][(o, o)];
        out.filled[last * b + o] = ws.gn[last][(o, o)].re;
    }
    // G^r_1N for the transmission: G_iN = g_i τ_i G_i+1,N (left-connected g).
    let mut q: Option<Mat<C64>> = input.want_transmission.then(|| ws.g[last].clone());
    for i in (0..last).rev() {
        let tau = &input.coupling[i];
        let td = tau.adjoint();
        if let Some(r) = q.as_mut() {
            *r = &ws.g[i] * tau * &*r;
        }
        let (lo, hi) = ws.g.split_at_mut(i + 1);
        let (lon, hin) = ws.gn.split_at_mut(i + 1);
        let g = &lo[i];
        let gn = &lon[i];
        let big = &hi[0];
        let bign = &hin[0];
        let gt = g * tau; // g_i τ
        let tdg = td * g; // τ† g_i  (so G_{i+1,i} = G_{i+1} τ† g_i)
        let gr_full = g + &gt * big * &tdg;
        let gn_full = gn
            + &gt * bign * gt.adjoint()
            + &gt * big * td * gn
            + gn * tau * big.adjoint() * gt.adjoint();
        // G^n_{i+1,i} = G_{i+1} τ† g^n_i + G^n_{i+1} τ† g_i†
        let gn_below = big * td * gn + bign * td * g.adjoint();
        out.bond[i] = -2.0 * trace_product(tau, &gn_below).im;
        if let Some(f) = out.full.as_deref_mut() {
            f.retarded_lower[i] = big * &tdg;
            f.filled_lower[i] = gn_below.clone();
        }
        for o in 0..b {
            out.retarded[i * b + o] = gr_full[(o, o)];
            out.filled[i * b + o] = gn_full[(o, o)].re;
        }
        if !is_finite(&gr_full) || !is_finite(&gn_full) {
            return Err(RgfError::NotFinite {
                energy_ev: input.energy_ev,
                cell: i,
            });
        }
        ws.g[i] = gr_full;
        ws.gn[i] = gn_full;
    }

    if let Some(f) = out.full.as_deref_mut() {
        f.retarded_diagonal.clone_from(&ws.g);
        f.filled_diagonal.clone_from(&ws.gn);
    }
    let flow = |sigma: &Mat<C64>, sin: &Mat<C64>, g: &Mat<C64>, gn: &Mat<C64>| -> f64 {
        let gamma = crate::leads::broadening(sigma);
        (trace_product(sin, &spectral(g)) - trace_product(&gamma, gn)).re
    };
    let left = flow(input.sigma_left, input.inscatter_left, &ws.g[0], &ws.gn[0]);
    let right = flow(
        input.sigma_right,
        input.inscatter_right,
        &ws.g[last],
        &ws.gn[last],
    );
    let transmission = match q {
        Some(q) => {
            let gl = crate::leads::broadening(input.sigma_left);
            let gr = crate::leads::broadening(input.sigma_right);
            trace(&(&gl * &q * &gr * q.adjoint())).re
        }
        None => 0.0,
    };
    Ok(TerminalFlows {
        left,
        right,
        transmission,
    })
}
