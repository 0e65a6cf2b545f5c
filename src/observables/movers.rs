//! Right- and left-moving quasi-Fermi levels.
//!
//! The local Fermi level µ_i fills all states of a cell to one level. Out
//! of equilibrium the electrons moving to +x and those moving to −x come
//! from different places and are filled to different levels: at a barrier
//! the right-movers' level drops where the barrier starts reflecting, while
//! the left-movers' level jumps there; µ_i lies between the two.
//!
//! Where two neighbouring cells i, i+1 sit in a locally uniform stretch
//! (same on-site block, potential included, and the same coupling into,
//! between and out of them, to [`UNIFORM_TOLERANCE_EV`]), the solutions of
//! the Schrödinger equation on that pair are combinations of the 2b Bloch
//! modes of the uniform chain ψ_n = λⁿ u at that energy, found from the
//! quadratic eigenproblem τ λ² u − (E − h) λ u + τ† u = 0. A mode with
//! |λ| = 1 propagates, to +x when its particle flow −2 Im(λ u†τu) is
//! positive; the others are evanescent and carry no filling. With U the
//! 2b × 2b matrix of the modes' values on the pair (columns of unit norm,
//! degenerate modes of one direction orthonormalised), the correlation
//! function over the pair is written in that basis, c = U⁻¹ G^n U⁻†, and so
//! is the spectral function, a = U⁻¹ A U⁻†. Summing the diagonal over the
//! right-moving modes gives their filled states c₊(E) and their states
//! a₊(E); f₊ = c₊/a₊, and the same for the left-movers. A state fed by the
//! left lead alone has c = f_L a mode by mode, so f₊ = f_L exactly there.
//!
//! The movers' levels µ₊, µ₋ are the Fermi levels that, at the lattice
//! temperature of the cell, reproduce the movers' electrons:
//! Σ_k c₊(E_k) = Σ_k a₊(E_k) f(E_k; µ₊, T), by the same bisection as µ_i.
//!
//! This needs the full diagonal and first off-diagonal blocks of G^n and A
//! at every energy: one extra pass of the kernel at the converged
//! scattering self-energy, with two sets of sources (the true
//! in-scattering, and every source filled, which gives A = G^r Γ G^a in
//! the same block form). With one orbital per cell both sets ride on one
//! recursion, since G^r does not depend on the sources
//! ([`rgf::solve_two_sources_scalar`]), in plain numbers; larger blocks
//! solve each energy twice with full blocks. The mode bases are found once
//! per energy for every distinct uniform stretch. The values of pair
//! (i, i+1) are reported at cell i; the last cell has no pair.

use super::fermi_level::{FermiLevelStatus, FermiMatch, FermiTables, cell_lattice_temperatures};
use super::occupation::OCCUPATION_THRESHOLD;
use crate::C64;
use crate::leads::{Lead, mode_pencil};
use crate::model::Problem;
use crate::rgf::{
    self, EnergyInput, EnergyOutput, FullBlocks, ScalarFilled, ScalarSources, TwoSourceScratch,
    Workspace,
};
use crate::scba::{LeadTable, Solution, SolveError};
use faer::Mat;
use faer::linalg::solvers::DenseSolveCore;
use rayon::prelude::*;

/// Two blocks count as equal when no element differs by more than this
/// (eV) times (1 + the largest element): rounding of blocks built from the
/// same numbers, but a potential step of a micro-electronvolt is a step.
pub const UNIFORM_TOLERANCE_EV: f64 = 1e-9;

/// A mode propagates when ||λ| − 1| is below this.
const UNIT_CIRCLE: f64 = 1e-8;

/// How the movers' levels of one cell ended.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum MoverStatus {
    /// Both levels found.
    Matched,
    /// The pair (i, i+1) is not part of a uniform stretch: no Bloch modes.
    NotUniform,
    /// The last cell has no pair to its right.
    LastCell,
    /// No propagating states of one direction in the energy window.
    NoPropagatingStates,
    /// One mover's match lies outside the search interval of µ_i.
    OutsideInterval,
    /// The extra kernel pass failed (the levels are unknown).
    KernelFailed,
}

impl MoverStatus {
    /// Code written in sites.csv: 0 matched, 1 not uniform, 2 last cell,
    /// 3 no propagating states, 4 outside the search interval, 5 kernel
    /// failure.
    pub fn code(self) -> i64 {
        match self {
            Self::Matched => 0,
            Self::NotUniform => 1,
            Self::LastCell => 2,
            Self::NoPropagatingStates => 3,
            Self::OutsideInterval => 4,
            Self::KernelFailed => 5,
        }
    }
}

/// The movers' levels and fillings along the device; index i stands for
/// the pair of cells (i, i+1).
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct MoverLevels {
    /// µ₊ (eV): level of the electrons moving to +x; NaN unless matched.
    pub right_ev: Vec<f64>,
    /// µ₋ (eV): level of the electrons moving to −x; NaN unless matched.
    pub left_ev: Vec<f64>,
    /// How each cell ended.
    pub status: Vec<MoverStatus>,
    /// Electrons per cell in the right-moving modes (spin included,
    /// interference between the movers left out).
    pub electrons_right: Vec<f64>,
    /// Electrons per cell in the left-moving modes.
    pub electrons_left: Vec<f64>,
    /// f₊(x, E), shape (cells, energies); NaN where not uniform or the
    /// right-movers' states are below [`OCCUPATION_THRESHOLD`] of the
    /// largest. Empty (0 × 0) when computed without the maps
    /// ([`mover_levels_with`]).
    #[serde(skip)]
    pub occupation_right: ndarray::Array2<f64>,
    /// f₋(x, E), as `occupation_right`.
    #[serde(skip)]
    pub occupation_left: ndarray::Array2<f64>,
}

/// Filled states and states of the two movers of one pair at one energy:
/// [c₊, a₊, c₋, a₋]; NaN where the modes could not be separated (a band
/// edge, where two modes merge).
type Weights = [f64; 4];

fn same(a: &Mat<C64>, b: &Mat<C64>) -> bool {
    let mut scale: f64 = 0.0;
    let mut diff: f64 = 0.0;
    for c in 0..a.ncols() {
        for r in 0..a.nrows() {
            scale = scale.max(a[(r, c)].norm()).max(b[(r, c)].norm());
            diff = diff.max((a[(r, c)] - b[(r, c)]).norm());
        }
    }
    diff <= UNIFORM_TOLERANCE_EV * (1.0 + scale)
}

/// Whether each pair (i, i+1) is in a uniform stretch: equal on-site
/// blocks and the same coupling into cell i, between the two and out of
/// cell i+1 (at the device ends, the periodic lead's coupling; a wide-band
/// lead has none, so an end pair beside it is not uniform).
pub fn uniform_pairs(p: &Problem) -> Vec<bool> {
    let d = &p.device;
    let n = d.cells();
    let lead_hop = |lead: &Lead| lead.joining_block().cloned();
    let left = lead_hop(&p.left.lead);
    let right = lead_hop(&p.right.lead);
    (0..n.saturating_sub(1))
        .map(|i| {
            let tau = &d.coupling[i];
            let before = if i == 0 {
                left.as_ref()
            } else {
                Some(&d.coupling[i - 1])
            };
            let after = if i + 2 == n {
                right.as_ref()
            } else {
                d.coupling.get(i + 1)
            };
            same(&d.onsite[i], &d.onsite[i + 1])
                && before.is_some_and(|m| same(m, tau))
                && after.is_some_and(|m| same(m, tau))
        })
        .collect()
}

/// The mode basis of a uniform pair at one energy: the rows of U⁻¹ of the
/// right- and of the left-moving propagating modes.
struct PairBasis {
    right: Vec<Vec<C64>>,
    left: Vec<Vec<C64>>,
}

/// Unit-norm columns; modes of one direction with equal λ orthonormalised
/// among themselves (Gram–Schmidt), so that the sum of their weights does
/// not depend on how the eigensolver mixed them.
fn orthonormalise(cols: &mut [Vec<C64>], groups: &[(usize, C64)]) {
    for j in 0..cols.len() {
        for i in 0..j {
            let (di, li) = groups[i];
            let (dj, lj) = groups[j];
            if di == 0 || di != dj || (li - lj).norm() > 1e-6 {
                continue;
            }
            let dot: C64 = cols[i]
                .iter()
                .zip(&cols[j])
                .map(|(a, b)| a.conj() * b)
                .sum();
            let (head, tail) = cols.split_at_mut(j);
            for (x, y) in tail[0].iter_mut().zip(&head[i]) {
                *x -= dot * y;
            }
        }
        let norm = cols[j].iter().map(|z| z.norm_sqr()).sum::<f64>().sqrt();
        for z in cols[j].iter_mut() {
            *z /= norm;
        }
    }
}

/// Bloch modes of the uniform chain (h, τ) at energy `e` on a pair of
/// cells; `None` where they do not form a usable basis (a band edge).
fn pair_basis(e: f64, h: &Mat<C64>, tau: &Mat<C64>) -> Option<PairBasis> {
    let b = h.nrows();
    let (a, bm) = mode_pencil(e, h, tau);
    let eig = a.generalized_eigen(&bm).ok()?;
    let (u, sa, sb) = (eig.U(), eig.S_a(), eig.S_b());
    let mut cols = Vec::with_capacity(2 * b);
    // Direction: +1 right-moving, −1 left-moving, 0 evanescent; with λ.
    let mut kinds: Vec<(usize, C64)> = Vec::with_capacity(2 * b);
    for j in 0..2 * b {
        // Eigenvector (λu, u): the pair values are (u, λu).
        let col: Vec<C64> = (0..2 * b).map(|r| u[((r + b) % (2 * b), j)]).collect();
        let (alpha, beta) = (sa[j], sb[j]);
        let finite = beta.norm() > 1e-14 * alpha.norm();
        let lam = if finite {
            alpha / beta
        } else {
            C64::new(f64::INFINITY, 0.0)
        };
        let kind = if finite && (lam.norm() - 1.0).abs() < UNIT_CIRCLE {
            let ui = &col[..b];
            let mut s = C64::new(0.0, 0.0);
            for r in 0..b {
                for c in 0..b {
                    s += ui[r].conj() * tau[(r, c)] * ui[c];
                }
            }
            let flow = -2.0 * (lam * s).im;
            let size = ui.iter().map(|z| z.norm_sqr()).sum::<f64>() * (1.0 + tau.norm_l2());
            if flow.abs() <= 1e-9 * size {
                return None; // zero velocity: a band edge
            }
            if flow > 0.0 { 1 } else { 2 }
        } else {
            0
        };
        cols.push(col);
        kinds.push((kind, lam));
    }
    orthonormalise(&mut cols, &kinds);
    let umat = Mat::from_fn(2 * b, 2 * b, |r, c| cols[c][r]);
    let inv = umat.partial_piv_lu().inverse();
    let check = &umat * &inv;
    let off = (0..2 * b)
        .flat_map(|r| (0..2 * b).map(move |c| (r, c)))
        .map(|(r, c)| (check[(r, c)] - C64::new(f64::from(u8::from(r == c)), 0.0)).norm())
        .fold(0.0f64, f64::max);
    if off.is_nan() || off >= 1e-8 {
        return None;
    }
    let row = |m: usize| (0..2 * b).map(|c| inv[(m, c)]).collect::<Vec<_>>();
    let pick = |want: usize| {
        kinds
            .iter()
            .enumerate()
            .filter(|(_, k)| k.0 == want)
            .map(|(m, _)| row(m))
            .collect()
    };
    Some(PairBasis {
        right: pick(1),
        left: pick(2),
    })
}

/// w M w† for a row w and the 2b × 2b pair matrix M given element by
/// element (`at(r, c)`), summed row by row.
fn pair_form_at(w: &[C64], at: impl Fn(usize, usize) -> C64) -> f64 {
    let mut s = C64::new(0.0, 0.0);
    for r in 0..w.len() {
        for c in 0..w.len() {
            s += w[r] * at(r, c) * w[c].conj();
        }
    }
    s.re
}

/// w M w† for a row w and the pair matrix [[D_i, L†], [L, D_i+1]].
fn pair_form(w: &[C64], di: &Mat<C64>, dj: &Mat<C64>, lower: &Mat<C64>) -> f64 {
    let b = di.nrows();
    pair_form_at(w, |r, c| match (r < b, c < b) {
        (true, true) => di[(r, c)],
        (false, false) => dj[(r - b, c - b)],
        (false, true) => lower[(r - b, c)],
        (true, false) => lower[(c - b, r)].conj(),
    })
}

/// [`pair_form`] for one-orbital cells, from the scalar blocks of pair i.
fn pair_form_scalar(w: &[C64], m: &ScalarFilled, i: usize) -> f64 {
    let (di, dj) = (
        C64::new(m.diagonal[i], 0.0),
        C64::new(m.diagonal[i + 1], 0.0),
    );
    let lower = m.lower[i];
    pair_form_at(w, |r, c| match (r, c) {
        (0, 0) => di,
        (1, 1) => dj,
        (1, 0) => lower,
        _ => lower.conj(),
    })
}

/// Per-worker scratch of the movers' pass, reused for every energy: the
/// kernel's scratch and the mode bases of the current energy (one per
/// basis slot, see [`BasisOwners`]).
struct Scratch {
    kernel: Kernel,
    bases: Vec<Option<PairBasis>>,
}

/// The kernel's scratch: one-orbital cells take the scalar recursion that
/// carries both source sets at once; larger blocks take the block kernel
/// twice with full blocks.
enum Kernel {
    Scalar {
        two: TwoSourceScratch,
        /// Γ0 = −2 Im Σ^r_0 per cell: the bath's source when filled.
        filled_bath: Vec<f64>,
    },
    Blocks(Box<BlockScratch>),
}

/// The block kernel's workspace, its per-site outputs and the full blocks
/// of the two solves of an energy ([filled, states]).
struct BlockScratch {
    ws: Workspace,
    retarded: Vec<C64>,
    filled: Vec<f64>,
    bond: Vec<f64>,
    scatter_in: Vec<f64>,
    blocks: [FullBlocks; 2],
}

impl Scratch {
    fn new(p: &Problem) -> Self {
        let (n, b) = (p.device.cells(), p.device.orbitals);
        let kernel = if b == 1 {
            Kernel::Scalar {
                two: TwoSourceScratch::default(),
                filled_bath: Vec::with_capacity(n),
            }
        } else {
            Kernel::Blocks(Box::new(BlockScratch {
                ws: Workspace::new(n, b),
                retarded: vec![C64::new(0.0, 0.0); n * b],
                filled: vec![0.0; n * b],
                bond: vec![0.0; n.saturating_sub(1)],
                scatter_in: Vec::with_capacity(n * b),
                blocks: Default::default(),
            }))
        };
        Self {
            kernel,
            bases: Vec::new(),
        }
    }
}

/// Γ f of a one-orbital lead, as [`broadening`] computes its element.
fn broadening_scalar(sigma: C64, f: f64) -> f64 {
    let d = sigma - sigma.conj();
    -d.im * f
}

/// Both source sets of energy index k on one-orbital cells in one
/// recursion ([`rgf::solve_two_sources_scalar`]): the true sources into
/// `two.filled[0]`, every source filled (G^n = A) into `two.filled[1]`.
/// The numbers are those of two [`full_blocks`] calls, bit for bit.
fn scalar_blocks(
    sol: &Solution,
    leads: &LeadTable,
    k: usize,
    two: &mut TwoSourceScratch,
    filled_bath: &mut Vec<f64>,
) -> Result<(), SolveError> {
    let p = &sol.problem;
    let dev = &p.device;
    let ns = p.sites();
    let e = p.grid.energy(k);
    let retarded = &sol.sigma.retarded[k * ns..(k + 1) * ns];
    filled_bath.clear();
    filled_bath.extend(retarded.iter().map(|x| -2.0 * x.im));
    let (sl, sr) = (leads.left[k][(0, 0)], leads.right[k][(0, 0)]);
    let sources = [
        ScalarSources {
            left: broadening_scalar(sl, p.left.occupation(e)),
            right: broadening_scalar(sr, p.right.occupation(e)),
            scatter_in: &sol.sigma.inscatter[k * ns..(k + 1) * ns],
        },
        ScalarSources {
            left: broadening_scalar(sl, 1.0),
            right: broadening_scalar(sr, 1.0),
            scatter_in: filled_bath,
        },
    ];
    let input = EnergyInput {
        energy_ev: e,
        onsite: &dev.onsite,
        coupling: &dev.coupling,
        sigma_left: &leads.left[k],
        sigma_right: &leads.right[k],
        // Not read: the sources are `sources`.
        inscatter_left: &leads.left[k],
        inscatter_right: &leads.right[k],
        scatter_retarded: retarded,
        scatter_in: sources[0].scatter_in,
        want_transmission: false,
    };
    rgf::solve_two_sources_scalar(&input, sources, two)?;
    Ok(())
}

/// The kernel at energy index k with full blocks, into `s.blocks[0]`, or
/// with `spectral` into `s.blocks[1]`: then every source is filled (lead Γ
/// for Σ^in, Γ0 = −2 Im Σ^r_0 for the bath), so the filled blocks are
/// those of A.
fn full_blocks(
    sol: &Solution,
    leads: &LeadTable,
    k: usize,
    spectral: bool,
    s: &mut BlockScratch,
) -> Result<(), SolveError> {
    let p = &sol.problem;
    let dev = &p.device;
    let ns = p.sites();
    let e = p.grid.energy(k);
    let (fl, fr) = if spectral {
        (1.0, 1.0)
    } else {
        (p.left.occupation(e), p.right.occupation(e))
    };
    let inl = broadening(&leads.left[k], fl);
    let inr = broadening(&leads.right[k], fr);
    let retarded = &sol.sigma.retarded[k * ns..(k + 1) * ns];
    let scatter_in: &[f64] = if spectral {
        s.scatter_in.clear();
        s.scatter_in.extend(retarded.iter().map(|x| -2.0 * x.im));
        &s.scatter_in
    } else {
        &sol.sigma.inscatter[k * ns..(k + 1) * ns]
    };
    let input = EnergyInput {
        energy_ev: e,
        onsite: &dev.onsite,
        coupling: &dev.coupling,
        sigma_left: &leads.left[k],
        sigma_right: &leads.right[k],
        inscatter_left: &inl,
        inscatter_right: &inr,
        scatter_retarded: retarded,
        scatter_in,
        want_transmission: false,
    };
    let out = EnergyOutput {
        retarded: &mut s.retarded,
        filled: &mut s.filled,
        bond: &mut s.bond,
        full: Some(&mut s.blocks[usize::from(spectral)]),
    };
    rgf::solve_energy(&input, &mut s.ws, out)?;
    Ok(())
}

/// Γ f with Γ = i(Σ − Σ†).
fn broadening(sigma: &Mat<C64>, f: f64) -> Mat<C64> {
    let b = sigma.nrows();
    Mat::from_fn(b, b, |r, c| {
        let d = sigma[(r, c)] - sigma[(c, r)].conj();
        C64::new(-d.im, d.re) * f
    })
}

/// For each pair, the pair whose Bloch modes it is written in (`None`
/// where not uniform): the first pair of each run of uniform pairs with
/// equal on-site and coupling blocks. It depends on the device alone, so
/// it is found once for all energies.
fn basis_owners(p: &Problem, uniform: &[bool]) -> Vec<Option<usize>> {
    let dev = &p.device;
    let mut owner: Option<usize> = None;
    uniform
        .iter()
        .enumerate()
        .map(|(i, &u)| {
            if !u {
                return None;
            }
            let fresh = owner.is_none_or(|j| {
                !(same(&dev.onsite[j], &dev.onsite[i]) && same(&dev.coupling[j], &dev.coupling[i]))
            });
            if fresh {
                owner = Some(i);
            }
            owner
        })
        .collect()
}

/// The mode bases an energy needs: one per distinct owner pair
/// ([`basis_owners`]), where owners whose on-site and coupling blocks are
/// equal bit for bit (the two sides of a barrier, say) share one basis,
/// since [`pair_basis`] would give them the same numbers.
struct BasisOwners {
    /// The owner pair of each basis slot.
    owners: Vec<usize>,
    /// The basis slot of each pair; `None` where not uniform.
    slot: Vec<Option<usize>>,
}

impl BasisOwners {
    fn new(p: &Problem, uniform: &[bool]) -> Self {
        let dev = &p.device;
        let identical = |a: usize, b: usize| {
            let bits = |m: &Mat<C64>| -> Vec<u64> {
                (0..m.ncols())
                    .flat_map(|c| (0..m.nrows()).map(move |r| (r, c)))
                    .flat_map(|rc| [m[rc].re.to_bits(), m[rc].im.to_bits()])
                    .collect()
            };
            bits(&dev.onsite[a]) == bits(&dev.onsite[b])
                && bits(&dev.coupling[a]) == bits(&dev.coupling[b])
        };
        let mut owners: Vec<usize> = Vec::new();
        let mut last: Option<(usize, usize)> = None;
        let slot = basis_owners(p, uniform)
            .into_iter()
            .map(|owner| {
                let j = owner?;
                if let Some((o, s)) = last
                    && o == j
                {
                    return Some(s);
                }
                let s = match owners.iter().position(|&o| identical(o, j)) {
                    Some(s) => s,
                    None => {
                        owners.push(j);
                        owners.len() - 1
                    }
                };
                last = Some((j, s));
                Some(s)
            })
            .collect();
        Self { owners, slot }
    }
}

/// The movers' weights of every pair at energy index k into `out` (zeros
/// for pairs that are not uniform).
fn energy_weights(
    sol: &Solution,
    leads: &LeadTable,
    owners: &BasisOwners,
    k: usize,
    s: &mut Scratch,
    out: &mut [Weights],
) -> Result<(), SolveError> {
    let p = &sol.problem;
    let dev = &p.device;
    let e = p.grid.energy(k);
    match &mut s.kernel {
        Kernel::Scalar { two, filled_bath } => scalar_blocks(sol, leads, k, two, filled_bath)?,
        Kernel::Blocks(b) => {
            full_blocks(sol, leads, k, false, b)?;
            full_blocks(sol, leads, k, true, b)?;
        }
    }
    s.bases.clear();
    s.bases.extend(
        owners
            .owners
            .iter()
            .map(|&j| pair_basis(e, &dev.onsite[j], &dev.coupling[j])),
    );
    for (i, w) in out.iter_mut().enumerate() {
        let Some(slot) = owners.slot[i] else {
            *w = [0.0; 4];
            continue;
        };
        let Some(basis) = s.bases[slot].as_ref() else {
            *w = [f64::NAN; 4];
            continue;
        };
        *w = match &s.kernel {
            Kernel::Scalar { two, .. } => {
                let sum = |rows: &[Vec<C64>], m: &ScalarFilled| -> f64 {
                    rows.iter().map(|r| pair_form_scalar(r, m, i)).sum()
                };
                let [filled, states] = &two.filled;
                mover_weights(basis, |rows, side| sum(rows, [filled, states][side]))
            }
            Kernel::Blocks(b) => {
                let sum = |rows: &[Vec<C64>], m: &FullBlocks| -> f64 {
                    rows.iter()
                        .map(|r| {
                            pair_form(
                                r,
                                &m.filled_diagonal[i],
                                &m.filled_diagonal[i + 1],
                                &m.filled_lower[i],
                            )
                        })
                        .sum()
                };
                mover_weights(basis, |rows, side| sum(rows, &b.blocks[side]))
            }
        };
    }
    Ok(())
}

/// [c₊, a₊, c₋, a₋] from `sum(rows, 0)` (filled) and `sum(rows, 1)`
/// (states) over the right- and left-moving rows of `basis`.
fn mover_weights(basis: &PairBasis, sum: impl Fn(&[Vec<C64>], usize) -> f64) -> Weights {
    [
        sum(&basis.right, 0),
        sum(&basis.right, 1),
        sum(&basis.left, 0),
        sum(&basis.left, 1),
    ]
}

/// Energies solved together before their weights are folded into the
/// per-pair rows: enough to keep every thread busy, few enough that the
/// batch's weights (energies × pairs × 4 numbers) stay small.
const ENERGY_BATCH: usize = 64;

/// Pairs folded by one task: the batch is energy-major, so a few pairs at
/// a time read it in whole cache lines.
const PAIRS_AT_ONCE: usize = 16;

/// The movers' weights gathered per pair over all energies, without ever
/// holding every weight at once.
struct PairSums {
    /// Per pair, a₊(E_k) for every k, then a₋(E_k) (2 × energies numbers;
    /// NaN counted as 0).
    states: Vec<f64>,
    /// Per pair, Σ_k c₊(E_k) and Σ_k c₋(E_k), summed in energy order (NaN
    /// counted as 0).
    filled_sum: Vec<[f64; 2]>,
    /// When the fillings' maps are asked for, c₊ and c₋ per pair and
    /// energy as computed, laid out as `states`.
    filled: Option<Vec<f64>>,
}

fn clean(v: f64) -> f64 {
    if v.is_finite() { v } else { 0.0 }
}

/// Fold the weights of energies `k0..` (`batch`, energy-major, `pairs`
/// per energy) into `sums`.
fn fold_batch(batch: &[Weights], k0: usize, ne: usize, sums: &mut PairSums) {
    let pairs = sums.filled_sum.len();
    let energies = batch.len() / pairs;
    let rows = 2 * ne * PAIRS_AT_ONCE;
    sums.states
        .par_chunks_mut(rows)
        .zip(sums.filled_sum.par_chunks_mut(PAIRS_AT_ONCE))
        .enumerate()
        .for_each(|(t, (states, filled_sum))| {
            let first = t * PAIRS_AT_ONCE;
            for j in 0..energies {
                let row = &batch[j * pairs + first..j * pairs + first + filled_sum.len()];
                for (c, w) in row.iter().enumerate() {
                    states[c * 2 * ne + k0 + j] = clean(w[1]);
                    states[c * 2 * ne + ne + k0 + j] = clean(w[3]);
                    filled_sum[c][0] += clean(w[0]);
                    filled_sum[c][1] += clean(w[2]);
                }
            }
        });
    if let Some(filled) = sums.filled.as_mut() {
        filled
            .par_chunks_mut(rows)
            .enumerate()
            .for_each(|(t, out)| {
                let first = t * PAIRS_AT_ONCE;
                let count = out.len() / (2 * ne);
                for j in 0..energies {
                    let row = &batch[j * pairs + first..j * pairs + first + count];
                    for (c, w) in row.iter().enumerate() {
                        out[c * 2 * ne + k0 + j] = w[0];
                        out[c * 2 * ne + ne + k0 + j] = w[2];
                    }
                }
            });
    }
}

/// The movers' weights of every energy, folded per pair; the energies are
/// solved in batches of [`ENERGY_BATCH`] in parallel, each worker reusing
/// its scratch for every energy it solves.
fn pair_sums(sol: &Solution, uniform: &[bool], maps: bool) -> Result<PairSums, SolveError> {
    let p = &sol.problem;
    let leads = LeadTable::new(p)?;
    let ne = p.grid.count;
    let pairs = uniform.len();
    let owners = BasisOwners::new(p, uniform);
    let mut sums = PairSums {
        states: vec![0.0; 2 * ne * pairs],
        filled_sum: vec![[0.0; 2]; pairs],
        filled: maps.then(|| vec![0.0; 2 * ne * pairs]),
    };
    let pool = std::sync::Mutex::new(Vec::<Scratch>::new());
    let mut batch = vec![[0.0; 4]; ENERGY_BATCH * pairs];
    for k0 in (0..ne).step_by(ENERGY_BATCH) {
        let count = ENERGY_BATCH.min(ne - k0);
        let batch = &mut batch[..count * pairs];
        batch
            .par_chunks_mut(pairs)
            .enumerate()
            .try_for_each(|(j, out)| {
                let taken = pool.lock().map(|mut v| v.pop()).unwrap_or(None);
                let mut s = taken.unwrap_or_else(|| Scratch::new(p));
                let done = energy_weights(sol, &leads, &owners, k0 + j, &mut s, out);
                if let Ok(mut v) = pool.lock() {
                    v.push(s);
                }
                done
            })?;
        fold_batch(batch, k0, ne, &mut sums);
    }
    Ok(sums)
}

/// The right- and left-movers' levels and fillings of a solution (see the
/// module documentation), with the fillings' maps f₊, f₋.
pub fn mover_levels(sol: &Solution) -> MoverLevels {
    mover_levels_with(sol, true)
}

/// [`mover_levels`]; with `maps` false the fillings' maps are left empty
/// (0 × 0), which saves holding 2 × cells × energies numbers when only the
/// levels and the electrons are wanted (what a solve writes).
pub fn mover_levels_with(sol: &Solution, maps: bool) -> MoverLevels {
    let p = &sol.problem;
    let n = p.device.cells();
    let ne = p.grid.count;
    let uniform = uniform_pairs(p);
    let shape = if maps { (n, ne) } else { (0, 0) };
    let mut levels = MoverLevels {
        right_ev: vec![f64::NAN; n],
        left_ev: vec![f64::NAN; n],
        status: (0..n)
            .map(|i| match uniform.get(i) {
                None => MoverStatus::LastCell,
                Some(true) => MoverStatus::Matched,
                Some(false) => MoverStatus::NotUniform,
            })
            .collect(),
        electrons_right: vec![f64::NAN; n],
        electrons_left: vec![f64::NAN; n],
        occupation_right: ndarray::Array2::from_elem(shape, f64::NAN),
        occupation_left: ndarray::Array2::from_elem(shape, f64::NAN),
    };
    if !uniform.contains(&true) {
        return levels;
    }
    let sums = match super::timed("movers' kernel pass", || pair_sums(sol, &uniform, maps)) {
        Ok(s) => s,
        Err(_) => {
            for s in levels
                .status
                .iter_mut()
                .filter(|s| **s == MoverStatus::Matched)
            {
                *s = MoverStatus::KernelFailed;
            }
            return levels;
        }
    };
    if let Some(filled) = &sums.filled {
        fill_maps(&sums.states, filled, ne, &mut levels);
    }
    super::timed("movers' density matches", || {
        fill_levels(sol, &sums, &mut levels)
    });
    levels
}

/// The fillings' maps f± = c±/a± of every uniform pair, NaN where a± is
/// not above [`OCCUPATION_THRESHOLD`] of the largest a of the whole map.
fn fill_maps(states: &[f64], filled: &[f64], ne: usize, levels: &mut MoverLevels) {
    let largest = states.iter().copied().fold(0.0f64, f64::max);
    let floor = OCCUPATION_THRESHOLD * largest;
    let status = &levels.status;
    for (side, map) in [&mut levels.occupation_right, &mut levels.occupation_left]
        .into_iter()
        .enumerate()
    {
        let map = map.as_slice_mut().expect("a new map is contiguous");
        map.par_chunks_mut(ne)
            .enumerate()
            .filter(|(i, _)| status[*i] == MoverStatus::Matched)
            .for_each(|(i, row)| {
                let at = i * 2 * ne + side * ne;
                let (a, c) = (&states[at..at + ne], &filled[at..at + ne]);
                for (f, (&s, &c)) in row.iter_mut().zip(a.iter().zip(c)) {
                    *f = if s > floor { c / s } else { f64::NAN };
                }
            });
    }
}

/// From the weights folded per pair: the electrons and the levels of every
/// uniform pair, cell by cell in parallel (each is a density match).
fn fill_levels(sol: &Solution, sums: &PairSums, levels: &mut MoverLevels) {
    let p = &sol.problem;
    let ne = p.grid.count;
    let energies = p.grid.energies();
    let temps = cell_lattice_temperatures(sol);
    let tables = FermiTables::new(&energies, &temps);
    let per_cell = p.spin_degeneracy * p.grid.step_ev / (2.0 * std::f64::consts::PI) / 2.0;
    let status = &levels.status;
    let matched: Vec<Option<([FermiMatch; 2], [f64; 2])>> = sums
        .states
        .par_chunks(2 * ne)
        .zip(sums.filled_sum.par_iter())
        .enumerate()
        .map(|(i, (rows, filled))| {
            if status[i] != MoverStatus::Matched {
                return None;
            }
            let found = [0, 1].map(|side| {
                let a = &rows[side * ne..(side + 1) * ne];
                tables.match_cell(i, &energies, a, filled[side], temps[i])
            });
            Some((found, *filled))
        })
        .collect();
    for (i, m) in matched.into_iter().enumerate() {
        let Some((found, filled)) = m else { continue };
        levels.electrons_right[i] = filled[0] * per_cell;
        levels.electrons_left[i] = filled[1] * per_cell;
        let mut status = MoverStatus::Matched;
        for m in &found {
            status = match (status, m.status) {
                (MoverStatus::Matched, FermiLevelStatus::Matched) => MoverStatus::Matched,
                (MoverStatus::Matched, FermiLevelStatus::NoStates) => {
                    MoverStatus::NoPropagatingStates
                }
                (MoverStatus::Matched, _) => MoverStatus::OutsideInterval,
                (s, _) => s,
            };
        }
        levels.right_ev[i] = found[0].fermi_level_ev;
        levels.left_ev[i] = found[1].fermi_level_ev;
        levels.status[i] = status;
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::progress::Silent;
    use crate::scba::{ScbaParams, solve};

    /// A 40-cell chain (0.3 nm, m* = 0.07) with a 0.1 eV barrier on cells
    /// 18..22, periodic leads continuing its ends, Fermi levels 0.09 and
    /// 0.01 eV at 300 K, and a 36 meV optical phonon on every cell.
    fn barrier_problem() -> Problem {
        let t = crate::units::hopping_ev(0.07, 0.3);
        let u = (0..40)
            .map(|i| if (18..22).contains(&i) { 0.1 } else { 0.0 })
            .collect();
        let device = crate::device::chain(0.3, t, 0.0, u);
        let n = device.cells();
        let lead = |i: usize, j: usize| Lead::Periodic {
            onsite: device.onsite[i].clone(),
            hopping: device.coupling[j].clone(),
        };
        let (left, right) = (lead(0, 0), lead(n - 1, n - 2));
        let grid = crate::grid::EnergyGrid::covering(0.002, 0.4, 0.004);
        let steps = grid.steps_for(0.036);
        let phonon = crate::scattering::PhononMode {
            requested_energy_ev: 0.036,
            energy_ev: steps as f64 * grid.step_ev,
            steps,
            coupling_ev2: vec![2e-3; n],
            bath_temperature_k: 300.0,
            ..Default::default()
        };
        let contact = |lead, fermi_level_ev| crate::model::Contact {
            lead,
            fermi_level_ev,
            temperature_k: 300.0,
        };
        Problem {
            device,
            left: contact(left, 0.09),
            right: contact(right, 0.01),
            scattering: crate::scattering::Scattering {
                phonons: vec![phonon],
                ..Default::default()
            },
            grid,
            spin_degeneracy: 2.0,
            decimation: Default::default(),
            contacts: Vec::new(),
        }
    }

    /// On one-orbital cells the one-recursion scalar kernel gives the
    /// movers' weights of the two full-block solves bit for bit, at every
    /// energy: the levels, electrons and maps do not depend on which
    /// kernel the pass takes.
    #[test]
    fn scalar_kernel_gives_the_weights_of_two_full_block_solves() {
        let problem = barrier_problem();
        let sol = solve(&problem, &ScbaParams::default(), None, &mut Silent).unwrap();
        let p = &sol.problem;
        assert_eq!(p.device.orbitals, 1);
        let leads = LeadTable::new(p).unwrap();
        let uniform = uniform_pairs(p);
        let owners = BasisOwners::new(p, &uniform);
        // Left and right of the barrier share one basis.
        assert_eq!(owners.owners.len(), 2, "{:?}", owners.owners);
        let mut scalar = Scratch::new(p);
        assert!(matches!(scalar.kernel, Kernel::Scalar { .. }));
        let n = p.device.cells();
        let mut blocks = Scratch {
            kernel: Kernel::Blocks(Box::new(BlockScratch {
                ws: Workspace::new(n, 1),
                retarded: vec![C64::new(0.0, 0.0); n],
                filled: vec![0.0; n],
                bond: vec![0.0; n - 1],
                scatter_in: Vec::new(),
                blocks: Default::default(),
            })),
            bases: Vec::new(),
        };
        let (mut a, mut b) = (vec![[0.0; 4]; n - 1], vec![[0.0; 4]; n - 1]);
        let mut propagating = 0;
        for k in 0..p.grid.count {
            energy_weights(&sol, &leads, &owners, k, &mut scalar, &mut a).unwrap();
            energy_weights(&sol, &leads, &owners, k, &mut blocks, &mut b).unwrap();
            for (i, (x, y)) in a.iter().zip(&b).enumerate() {
                assert_eq!(
                    x.map(f64::to_bits),
                    y.map(f64::to_bits),
                    "E index {k}, pair {i}"
                );
                propagating += usize::from(x[1] > 0.0);
            }
        }
        assert!(
            propagating > 100,
            "{propagating} pair-energies with right-moving states"
        );
    }
}
