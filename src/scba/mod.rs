//! The self-consistent Born loop (SCBA).
//!
//! 1. Start from Σ0 = 0, from Σ0 of the same loop on coarser energy grids
//!    ([`coarse`]), or from a stored converged Σ0 (warm start).
//! 2. For every energy (independent, in parallel): RGF → diagonals of G^r,
//!    G^n, the bond flows and the terminal flows.
//! 3. Rebuild Σ0 from the local Green's functions on all energies.
//! 4. Mix (linear, or Anderson acceleration with a safeguard).
//! 5. Stop when the relative change of Σ^in_0 and Σ^out_0 is below the
//!    tolerance and each terminal current moved by less than
//!    tol·|I_α| + floor. Reaching the iteration limit gives a result flagged
//!    as not converged, never a silent answer.
//!
//! # Energy order
//!
//! With phonons, step 2 is by default split in two halves (see
//! [`EnergyOrder`]): the "red" energies are solved first, Σ0 is rebuilt on
//! the "black" energies from those fresh Green's functions, and then the
//! black energies are solved. A phonon of ħω = s·ΔE links E only to E ± ħω,
//! which lie in the other colour, so the Jacobian of the simultaneous
//! iteration has a spectrum symmetric about zero (±λ); red-black ordering
//! turns it into λ². Measured on cases-demo/peltier-barrier.toml: the
//! largest |λ| goes from 0.310 to 0.096 and linear mixing needs 10 instead
//! of 17 iterations. Each iteration is still one pass over the grid and both
//! halves run in parallel over their energies. Mixing acts on the whole Σ0;
//! its black rows are replaced by the rebuilt ones before they are used,
//! and the residual is that of the pair actually used, F(Σ0) − Σ0, so the
//! stopping test means the same in both orders.
//!
//! The returned [`Solution`] pairs the Green's functions with the Σ0 they
//! were computed from, so that j_1 + j_2 + j_0 = 0 holds at every energy to
//! rounding; the bath's own particle and energy balance then holds to the
//! SCBA tolerance.
//!
//! # Memory
//!
//! Only what the local self-energies need is kept across energies: the
//! diagonals of G^r and G^n, never whole blocks. With E energies, N cells,
//! b orbitals per cell, S = N·b orbital sites, T threads and Anderson depth
//! m, the peak of a Born solve is
//!
//! ```text
//! bytes ≈ E·S·(72 + 16·h) + E_m·S·P·A·q + 8·E·(N − 1) + 2·E·(16·b² + 64) + T·w
//! ```
//!
//! - 72 = 3 × 24: the input Σ0, its image F(Σ0) (Σ^r_0 complex + Σ^in_0
//!   real) and the local G^r, G^n of the pass;
//! - A = 2m + 2 vectors of P numbers per site and mixed energy for
//!   Anderson mixing (m residual differences, m update directions, the
//!   last residual and the last step), q = 4 bytes per number for the
//!   compact history (f32, the default) and 8 for the full one; P = 3
//!   (Re Σ^r, Im Σ^r, Σ^in) with dephasing or the Hermitian part, P = 2
//!   otherwise, when Re Σ^r is zero and not mixed; A = 0 for linear
//!   mixing, which keeps no history;
//! - E_m: the energies mixed, E or only the red half (see
//!   [`red_rows_only`]);
//! - 16·h: the phonon broadening and its Hilbert transform while Σ0 is
//!   rebuilt, when the Hermitian part (h = 1) is on;
//! - 8·E·(N − 1): the bond flows of the pass;
//! - 2·E·(16·b² + 64): the lead self-energies on the grid;
//! - w: the per-thread RGF workspace, 48·N·b² + 128·b² bytes for b > 1 and
//!   24·N for b = 1.
//!
//! With coupling matrices (Σ0 on b × b blocks, see
//! [`crate::scattering::GreenBlocks`]) Σ0, its image and the kept
//! diagonal blocks of G^r and G^n take N·b² numbers per energy instead of
//! S: bytes ≈ E·N·b²·(48 + 32 + 16·h) + E_m·N·b²·3·A·q + 24·E·S + the
//! same fixed terms, with P = 3 (the real part of the off-diagonal Σ^r_0
//! is always mixed).
//!
//! `Resolved::memory_estimate_bytes` evaluates this formula.

pub mod coarse;
pub mod contacts;
mod mixing;
mod params;
pub mod split;
mod undetermined;

pub use contacts::ContactFlows;
pub use mixing::{FusedUpdate, Mixer, RowHook};
pub use params::{CoarseStart, EnergyOrder, MixerHistory, Mixing, ScbaParams};
use split::Share;
pub use split::{ClusterSplit, EnergySplit, with_energy_split};
pub use undetermined::{IsolatedPart, UndeterminedOccupation};

use crate::C64;
use crate::leads::{LeadError, Side};
use crate::model::Problem;
pub use crate::progress::{IterationRecord, Observer, Silent};
use crate::rgf::{self, EnergyInput, EnergyOutput, RgfError, TerminalFlows, Workspace};
use crate::scattering::{GreenBlocks, HilbertTransform, LocalGreen, ScatteringSelfEnergy};
use faer::Mat;
use rayon::prelude::*;

/// Why a solve could not produce Green's functions.
#[derive(Debug, thiserror::Error, Clone, PartialEq)]
pub enum SolveError {
    /// A lead self-energy failed.
    #[error(transparent)]
    Lead(#[from] LeadError),
    /// The recursion met a non-finite value.
    #[error(transparent)]
    Rgf(#[from] RgfError),
    /// Inputs that do not fit together.
    #[error("{0}")]
    Invalid(String),
    /// The rebuilt scattering self-energy Σ0 held a non-finite value
    /// (reported at the lowest energy, then the first site, where it did).
    #[error(
        "non-finite scattering self-energy {part} at E = {energy_ev} eV in cell {cell} (Born iteration {iteration})"
    )]
    SelfEnergyNotFinite {
        /// Born iteration (1-based) whose output held it.
        iteration: usize,
        /// Energy (eV).
        energy_ev: f64,
        /// Cell index (0-based).
        cell: usize,
        /// Which part: "Σ^r_0" or "Σ^in_0".
        part: &'static str,
    },
    /// The Born loop ran away: its residual or a terminal current stopped
    /// being a finite number.
    #[error(
        "the Born loop diverged at iteration {iteration}: residual {residual:e}, currents {current_left_a:e} A / {current_right_a:e} A"
    )]
    Diverged {
        /// Born iteration (1-based).
        iteration: usize,
        /// Relative change of Σ0 in that iteration.
        residual: f64,
        /// Current from the left lead (A).
        current_left_a: f64,
        /// Current from the right lead (A).
        current_right_a: f64,
    },
    /// Part of the device has no path to a lead at some energies and only
    /// elastic dephasing reaches it, so its occupation is undetermined and
    /// the loop wanders there (the loop is stopped early, see
    /// [`UndeterminedOccupation`]).
    #[error("{0}")]
    Undetermined(Box<UndeterminedOccupation>),
    /// The observer asked the loop to stop ([`Observer::cancelled`]).
    #[error("the Born loop was cancelled after iteration {iteration}")]
    Cancelled {
        /// The last Born iteration finished (1-based).
        iteration: usize,
    },
}

impl SolveError {
    /// Where the fault appeared, when it has a place: (energy in eV, cell).
    /// The cell is `None` for a lead fault, which belongs to a contact.
    pub fn location(&self) -> Option<(f64, Option<usize>)> {
        match self {
            SolveError::Lead(
                LeadError::NotConverged { energy_ev, .. } | LeadError::NotFinite { energy_ev, .. },
            ) => Some((*energy_ev, None)),
            SolveError::Rgf(RgfError::NotFinite { energy_ev, cell }) => {
                Some((*energy_ev, Some(*cell)))
            }
            SolveError::SelfEnergyNotFinite {
                energy_ev, cell, ..
            } => Some((*energy_ev, Some(*cell))),
            SolveError::Undetermined(u) => u.location(),
            SolveError::Invalid(_) | SolveError::Diverged { .. } | SolveError::Cancelled { .. } => {
                None
            }
        }
    }

    /// A short name of the kind of fault, for machine-readable summaries.
    pub fn kind(&self) -> &'static str {
        match self {
            SolveError::Lead(_) => "lead self-energy",
            SolveError::Rgf(_) => "non-finite Green's function",
            SolveError::SelfEnergyNotFinite { .. } => "non-finite scattering self-energy",
            SolveError::Diverged { .. } => "diverged",
            SolveError::Undetermined(_) => "undetermined occupation",
            SolveError::Invalid(_) => "invalid input",
            SolveError::Cancelled { .. } => "cancelled",
        }
    }
}

/// Fails with the lowest energy, then the first site, where the rebuilt Σ0
/// of Born iteration `iteration` is not finite.
fn ensure_finite(
    sigma: &ScatteringSelfEnergy,
    problem: &Problem,
    iteration: usize,
) -> Result<(), SolveError> {
    let bad_r = sigma
        .retarded
        .iter()
        .position(|z| !(z.re.is_finite() && z.im.is_finite()));
    let bad_in = sigma.inscatter.iter().position(|v| !v.is_finite());
    let (idx, part) = match (bad_r, bad_in) {
        (None, None) => return Ok(()),
        (Some(r), Some(i)) if i < r => (i, "Σ^in_0"),
        (Some(r), _) => (r, "Σ^r_0"),
        (None, Some(i)) => (i, "Σ^in_0"),
    };
    Err(self_energy_fault(problem, sigma, iteration, idx, part))
}

/// The error for a non-finite Σ0 `part` at flat index `idx` of `sigma`'s
/// layout.
fn self_energy_fault(
    problem: &Problem,
    sigma: &ScatteringSelfEnergy,
    iteration: usize,
    idx: usize,
    part: &'static str,
) -> SolveError {
    let ns = sigma.sites.max(1);
    let per_cell = match sigma.blocks {
        Some(b) => b * b,
        None => problem.device.orbitals,
    };
    SolveError::SelfEnergyNotFinite {
        iteration,
        energy_ev: problem.grid.energy(idx / ns),
        cell: (idx % ns) / per_cell.max(1),
        part,
    }
}

/// The first non-finite value of energy row k of Σ0 (rows `r` of Σ^r_0,
/// `i` of Σ^in_0), as [`ensure_finite`] picks it: (flat index, part).
fn first_bad(k: usize, r: &[C64], i: &[f64]) -> Option<(usize, &'static str)> {
    let bad_r = r
        .iter()
        .position(|z| !(z.re.is_finite() && z.im.is_finite()));
    let bad_in = i.iter().position(|v| !v.is_finite());
    let (pos, part) = match (bad_r, bad_in) {
        (None, None) => return None,
        (Some(r), Some(i)) if i < r => (i, "Σ^in_0"),
        (Some(r), _) => (r, "Σ^r_0"),
        (None, Some(i)) => (i, "Σ^in_0"),
    };
    Some((k * r.len() + pos, part))
}

/// The sums of squares of [`relative_change`] over energy row k, from Σ0
/// `a` to the row (`r`, `i`) of its image (diagonal layout).
fn change_sums(a: &ScatteringSelfEnergy, k: usize, r: &[C64], i: &[f64]) -> [f64; 6] {
    let ns = r.len();
    let (ar, ai) = (
        &a.retarded[k * ns..(k + 1) * ns],
        &a.inscatter[k * ns..(k + 1) * ns],
    );
    row_change_sums(ar, ai, r, i)
}

/// [`change_sums`] from the row (`ar`, `ai`) of Σ0 to the row (`r`, `i`)
/// of its image.
fn row_change_sums(ar: &[C64], ai: &[f64], r: &[C64], i: &[f64]) -> [f64; 6] {
    let ns = r.len();
    let mut acc = [0.0; 6];
    for s in 0..ns {
        let (bi, aiv) = (i[s], ai[s]);
        let (bo, ao) = (-2.0 * r[s].im - bi, -2.0 * ar[s].im - aiv);
        let (br, arv) = (r[s].re, ar[s].re);
        acc[0] += (bi - aiv) * (bi - aiv);
        acc[1] += (bo - ao) * (bo - ao);
        acc[2] += (br - arv) * (br - arv);
        acc[3] += bi * bi;
        acc[4] += bo * bo;
        acc[5] += br * br;
    }
    acc
}

/// Lead self-energies on every grid energy (they do not change during the
/// Born loop).
#[derive(Clone, Debug)]
pub struct LeadTable {
    /// Σ_1(E_k).
    pub left: Vec<Mat<C64>>,
    /// Σ_2(E_k).
    pub right: Vec<Mat<C64>>,
}

impl LeadTable {
    /// Evaluate both leads on the grid of `problem`, in parallel.
    pub fn new(problem: &Problem) -> Result<Self, SolveError> {
        let b = problem.device.orbitals;
        for (side, c) in [(Side::Left, &problem.left), (Side::Right, &problem.right)] {
            if c.lead.orbitals() != b {
                return Err(SolveError::Invalid(format!(
                    "{side:?} lead has {} orbitals per cell, the device {b}",
                    c.lead.orbitals()
                )));
            }
        }
        let grid = &problem.grid;
        type Pair = (Mat<C64>, Mat<C64>);
        let pairs: Result<Vec<Pair>, LeadError> = (0..grid.count)
            .into_par_iter()
            .map(|k| {
                let e = grid.energy(k);
                Ok((
                    problem
                        .left
                        .lead
                        .self_energy(Side::Left, e, &problem.decimation)?,
                    problem
                        .right
                        .lead
                        .self_energy(Side::Right, e, &problem.decimation)?,
                ))
            })
            .collect();
        let (left, right) = pairs?.into_iter().unzip();
        Ok(Self { left, right })
    }
}

/// One pass of the recursion over all energies.
#[derive(Clone, Debug)]
pub struct Pass {
    /// Diagonal G^r and G^n per energy and orbital site.
    pub green: LocalGreen,
    /// Bond flows per energy, (N − 1) per energy (see [`rgf::EnergyOutput`]).
    pub bond: Vec<f64>,
    /// Terminal flows per energy.
    pub flows: Vec<TerminalFlows>,
    /// The diagonal blocks G^r_ii, G^n_ii of every cell and energy, kept
    /// when the scattering has coupling matrices (the block Born update
    /// needs them); `None` otherwise.
    pub blocks: Option<GreenBlocks>,
    /// Flows of the attached contacts per energy (empty without them).
    pub contact_flows: ContactFlows,
}

/// Run the recursion at every energy with the scattering self-energy
/// `sigma0`, in parallel over energies with one workspace per thread. The
/// attached contacts sit at the levels written in `problem`.
pub fn pass(
    problem: &Problem,
    leads: &LeadTable,
    sigma0: &ScatteringSelfEnergy,
    want_transmission: bool,
) -> Result<Pass, SolveError> {
    check_layout(problem, sigma0)?;
    let mut out = Pass::zeros(problem);
    let levels = contacts::given_levels(problem);
    pass_rows(
        problem,
        leads,
        sigma0,
        &levels,
        want_transmission,
        |_| true,
        &mut out,
    )?;
    Ok(out)
}

impl Pass {
    /// An all-zero pass shaped for `problem`.
    fn zeros(problem: &Problem) -> Self {
        let n = problem.device.cells();
        let ns = problem.sites();
        let ne = problem.grid.count;
        let nb = n.saturating_sub(1);
        Self {
            green: LocalGreen {
                sites: ns,
                retarded: vec![C64::new(0.0, 0.0); ne * ns],
                filled: vec![0.0; ne * ns],
            },
            bond: vec![0.0; ne * nb],
            flows: vec![TerminalFlows::default(); ne],
            blocks: problem
                .scattering
                .uses_blocks()
                .then(|| GreenBlocks::zeros(ne, n, problem.device.orbitals)),
            contact_flows: ContactFlows::zeros(problem),
        }
    }
}

/// An all-zero Σ0 in the layout the scattering of `problem` needs.
fn sigma_zeros(problem: &Problem) -> ScatteringSelfEnergy {
    let d = &problem.device;
    ScatteringSelfEnergy::zeros_for(
        &problem.scattering,
        problem.grid.count,
        d.cells(),
        d.orbitals,
    )
}

/// Fails when Σ0's layout (diagonal or blocks) is not the one the
/// scattering of `problem` needs, or its size does not fit the device.
fn check_layout(problem: &Problem, sigma0: &ScatteringSelfEnergy) -> Result<(), SolveError> {
    let want = sigma_zeros(problem);
    let want = ScatteringSelfEnergy {
        retarded: Vec::new(),
        inscatter: Vec::new(),
        ..want
    };
    if sigma0.blocks != want.blocks || sigma0.sites != want.sites {
        return Err(SolveError::Invalid(format!(
            "the scattering self-energy holds {}, but this device and scattering need {} \
             (hint: a self-energy from a case with coupling matrices fits only such a case, \
             and one from per-orbital couplings only those; start without it)",
            sigma0.layout(),
            want.layout()
        )));
    }
    Ok(())
}

/// Run the recursion at the energies `k` with `rows(k)` true, writing their
/// rows of `out` (other rows are left as they are). The attached contacts
/// sit at `levels` (see [`contacts`]).
fn pass_rows(
    problem: &Problem,
    leads: &LeadTable,
    sigma0: &ScatteringSelfEnergy,
    levels: &[(f64, f64)],
    want_transmission: bool,
    rows: impl Fn(usize) -> bool + Sync,
    out: &mut Pass,
) -> Result<(), SolveError> {
    if sigma0.blocks.is_some() || contacts::needs_blocks(problem) {
        let ctx = RowContext::new(problem, leads, sigma0, levels, want_transmission);
        return pass_rows_blocks(&ctx, rows, out);
    }
    let ctx = RowContext::new(problem, leads, sigma0, levels, want_transmission);
    let dev = &problem.device;
    let ns = dev.cells() * dev.orbitals;
    let mut empty_bonds = vec![0.0; problem.grid.count];
    let bond_rows = bond_rows(problem, &mut out.bond, &mut empty_bonds);
    let crow_len = out.contact_flows.row_len().max(1);
    let green = &mut out.green;
    green
        .retarded
        .par_chunks_mut(ns)
        .zip(green.filled.par_chunks_mut(ns))
        .zip(bond_rows.into_par_iter())
        .zip(out.flows.par_iter_mut())
        .zip(out.contact_flows.data.par_chunks_mut(crow_len))
        .enumerate()
        .filter(|(k, _)| rows(*k))
        .try_for_each_init(
            // Per thread: the RGF workspace, the lead in-scattering blocks
            // and the contacts' buffers, filled in place at each energy (no
            // allocation per energy).
            || RowScratch::new(problem, false),
            |sc, (k, ((((gr, gn), bd), fl), crow))| -> Result<(), SolveError> {
                let out = EnergyOutput {
                    retarded: gr,
                    filled: gn,
                    bond: bd,
                    full: None,
                };
                *fl = ctx.solve_diagonal(k, sc, out, crow)?;
                Ok(())
            },
        )
}

/// The bond-flow row of every energy (empty rows for a one-cell device,
/// which has no bonds; `empty` holds one number per energy for that).
fn bond_rows<'a>(
    problem: &Problem,
    bond: &'a mut [f64],
    empty: &'a mut [f64],
) -> Vec<&'a mut [f64]> {
    let nb = problem.device.cells().saturating_sub(1);
    if nb == 0 {
        empty.chunks_mut(1).map(|c| &mut c[..0]).collect()
    } else {
        bond.chunks_mut(nb).collect()
    }
}

/// What every energy of a pass shares.
struct RowContext<'a> {
    problem: &'a Problem,
    leads: &'a LeadTable,
    sigma0: &'a ScatteringSelfEnergy,
    levels: &'a [(f64, f64)],
    want_transmission: bool,
    /// Γ of one cell of each attached contact (b × b, row-major).
    gammas: Vec<Vec<C64>>,
    /// The floating contacts (one response recursion each).
    floating: Vec<usize>,
    /// Numbers per contact in a row of [`contacts::ContactFlows`].
    per_contact: usize,
}

/// Per-thread scratch of a pass: the RGF workspace, the lead in-scattering
/// blocks and the buffers of the attached contacts.
struct RowScratch {
    ws: Workspace,
    inl: Mat<C64>,
    inr: Mat<C64>,
    zero: Mat<C64>,
    sr: Vec<C64>,
    si: Vec<f64>,
    resp_in: Vec<f64>,
    gr2: Vec<C64>,
    gn2: Vec<f64>,
    bond2: Vec<f64>,
    br: Vec<C64>,
    bn: Vec<C64>,
    br2: Vec<C64>,
    bn2: Vec<C64>,
}

impl RowScratch {
    fn new(problem: &Problem, blocks: bool) -> Self {
        let (n, b) = (problem.device.cells(), problem.device.orbitals);
        let z = C64::new(0.0, 0.0);
        let with = !problem.contacts.is_empty();
        let len = if with {
            if blocks { n * b * b } else { n * b }
        } else {
            0
        };
        let resp = if problem.has_floating_contacts() {
            len
        } else {
            0
        };
        let own_blocks = with && blocks && problem.scattering.uses_blocks();
        let green_len = if blocks && !own_blocks { n * b * b } else { 0 };
        Self {
            ws: Workspace::new(n, b),
            inl: Mat::zeros(b, b),
            inr: Mat::zeros(b, b),
            zero: Mat::zeros(b, b),
            sr: vec![z; len],
            si: vec![0.0; len],
            resp_in: vec![0.0; resp],
            gr2: vec![z; if resp > 0 { n * b } else { 0 }],
            gn2: vec![0.0; if resp > 0 { n * b } else { 0 }],
            bond2: vec![0.0; if resp > 0 { n.saturating_sub(1) } else { 0 }],
            br: vec![z; green_len],
            bn: vec![z; green_len],
            br2: vec![z; if resp > 0 && blocks { n * b * b } else { 0 }],
            bn2: vec![z; if resp > 0 && blocks { n * b * b } else { 0 }],
        }
    }
}

impl<'a> RowContext<'a> {
    fn new(
        problem: &'a Problem,
        leads: &'a LeadTable,
        sigma0: &'a ScatteringSelfEnergy,
        levels: &'a [(f64, f64)],
        want_transmission: bool,
    ) -> Self {
        let b = problem.device.orbitals;
        let floating = contacts::floating_indices(problem);
        Self {
            problem,
            leads,
            sigma0,
            levels,
            want_transmission,
            gammas: problem
                .contacts
                .iter()
                .map(|c| contacts::gamma_block(c, b))
                .collect(),
            per_contact: 3 + floating.len(),
            floating,
        }
    }

    /// The lead part of the input at energy k (in-scattering written into
    /// the scratch); the scattering slices are left empty.
    fn lead_input<'s>(
        &'s self,
        k: usize,
        inl: &'s mut Mat<C64>,
        inr: &'s mut Mat<C64>,
    ) -> EnergyInput<'s> {
        let (problem, e) = (self.problem, self.problem.grid.energy(k));
        let (sl, sr) = (&self.leads.left[k], &self.leads.right[k]);
        inscatter_into(sl, problem.left.occupation(e), inl);
        inscatter_into(sr, problem.right.occupation(e), inr);
        EnergyInput {
            energy_ev: e,
            onsite: &problem.device.onsite,
            coupling: &problem.device.coupling,
            sigma_left: sl,
            sigma_right: sr,
            inscatter_left: inl,
            inscatter_right: inr,
            scatter_retarded: &[],
            scatter_in: &[],
            want_transmission: self.want_transmission,
        }
    }

    /// One energy on the diagonal route: Σ0 plus the contacts on the
    /// orbital sites, the recursion, and the contacts' records in `crow`.
    fn solve_diagonal(
        &self,
        k: usize,
        sc: &mut RowScratch,
        out: EnergyOutput<'_>,
        crow: &mut [f64],
    ) -> Result<TerminalFlows, SolveError> {
        let problem = self.problem;
        let ns = problem.sites();
        let e = problem.grid.energy(k);
        let sr_row = &self.sigma0.retarded[k * ns..(k + 1) * ns];
        let si_row = &self.sigma0.inscatter[k * ns..(k + 1) * ns];
        let with = !problem.contacts.is_empty();
        if with {
            sc.sr.copy_from_slice(sr_row);
            sc.si.copy_from_slice(si_row);
            contacts::add_diagonal(problem, self.levels, e, &mut sc.sr, &mut sc.si);
        }
        let RowScratch {
            ws,
            inl,
            inr,
            zero,
            sr,
            si,
            resp_in,
            gr2,
            gn2,
            bond2,
            ..
        } = sc;
        let (r, i) = if with {
            (&sr[..], &si[..])
        } else {
            (sr_row, si_row)
        };
        let input = EnergyInput {
            scatter_retarded: r,
            scatter_in: i,
            ..self.lead_input(k, inl, inr)
        };
        let EnergyOutput {
            retarded: gr,
            filled: gn,
            bond,
            full,
        } = out;
        let fl = rgf::solve_energy(
            &input,
            ws,
            EnergyOutput {
                retarded: &mut *gr,
                filled: &mut *gn,
                bond,
                full,
            },
        )?;
        if !with {
            return Ok(fl);
        }
        contacts::record_diagonal(problem, self.levels, e, gr, gn, self.per_contact, crow);
        let spare = Spare {
            ws,
            zero,
            resp_in,
            gr2,
            gn2,
            bond2,
            br2: &mut [],
            bn2: &mut [],
        };
        self.responses_diagonal(&input, spare, crow)?;
        Ok(fl)
    }
}

/// The scratch a response recursion writes into (see [`contacts`]).
struct Spare<'s> {
    ws: &'s mut Workspace,
    zero: &'s Mat<C64>,
    resp_in: &'s mut [f64],
    gr2: &'s mut [C64],
    gn2: &'s mut [f64],
    bond2: &'s mut [f64],
    br2: &'s mut [C64],
    bn2: &'s mut [C64],
}

impl RowContext<'_> {
    /// R_pq = Tr[Γ_p G Γ_q G†] for every probe q on the diagonal route: the
    /// G^n of a recursion whose only in-scattering is Γ_q, traced with Γ_p.
    fn responses_diagonal(
        &self,
        input: &EnergyInput<'_>,
        sp: Spare<'_>,
        crow: &mut [f64],
    ) -> Result<(), SolveError> {
        let problem = self.problem;
        let b = problem.device.orbitals;
        for (qi, &q) in self.floating.iter().enumerate() {
            sp.resp_in.fill(0.0);
            let cq = &problem.contacts[q];
            for s in contacts::contact_sites(cq, b) {
                sp.resp_in[s] = cq.gamma_ev;
            }
            let only_q = EnergyInput {
                inscatter_left: sp.zero,
                inscatter_right: sp.zero,
                scatter_in: sp.resp_in,
                want_transmission: false,
                ..*input
            };
            let o2 = EnergyOutput {
                retarded: &mut *sp.gr2,
                filled: &mut *sp.gn2,
                bond: &mut *sp.bond2,
                full: None,
            };
            rgf::solve_energy(&only_q, &mut *sp.ws, o2)?;
            for (p, c) in problem.contacts.iter().enumerate() {
                let r: f64 = contacts::contact_sites(c, b)
                    .map(|s| c.gamma_ev * sp.gn2[s])
                    .sum();
                crow[p * self.per_contact + 3 + qi] = r;
            }
        }
        Ok(())
    }

    /// [`RowContext::responses_diagonal`] on the block route (Σ^r as
    /// blocks in `r`).
    fn responses_blocks(
        &self,
        input: &EnergyInput<'_>,
        r: &[C64],
        sp: Spare<'_>,
        crow: &mut [f64],
    ) -> Result<(), SolveError> {
        let problem = self.problem;
        let b = problem.device.orbitals;
        let bb = b * b;
        for (qi, &q) in self.floating.iter().enumerate() {
            sp.resp_in.fill(0.0);
            for &c in &problem.contacts[q].cells {
                let cell = &mut sp.resp_in[c * bb..(c + 1) * bb];
                contacts::add_block(&self.gammas[q], b, 1.0, None, cell);
            }
            let only_q = EnergyInput {
                inscatter_left: sp.zero,
                inscatter_right: sp.zero,
                want_transmission: false,
                ..*input
            };
            let mut x2 = rgf::BlockExchange {
                scatter_retarded: r,
                scatter_in: sp.resp_in,
                green_retarded: &mut *sp.br2,
                green_filled: &mut *sp.bn2,
            };
            let o2 = EnergyOutput {
                retarded: &mut *sp.gr2,
                filled: &mut *sp.gn2,
                bond: &mut *sp.bond2,
                full: None,
            };
            rgf::solve_energy_with_blocks(&only_q, &mut *sp.ws, o2, &mut x2)?;
            for (p, c) in problem.contacts.iter().enumerate() {
                let gamma = &self.gammas[p];
                let r: f64 = (c.cells.iter())
                    .map(|&i| {
                        let at = i * bb..(i + 1) * bb;
                        contacts::block_traces(
                            gamma,
                            &x2.green_retarded[at.clone()],
                            &x2.green_filled[at],
                            b,
                        )
                        .1
                    })
                    .sum();
                crow[p * self.per_contact + 3 + qi] = r;
            }
        }
        Ok(())
    }
}

/// [`pass_rows`] on b × b blocks: for Σ0 on blocks, or for contacts with
/// spin-off-diagonal broadening. Keeps the diagonal blocks of G in
/// `out.blocks` when the scattering has coupling matrices.
fn pass_rows_blocks(
    ctx: &RowContext<'_>,
    rows: impl Fn(usize) -> bool + Sync,
    out: &mut Pass,
) -> Result<(), SolveError> {
    let problem = ctx.problem;
    let dev = &problem.device;
    let (n, b) = (dev.cells(), dev.orbitals);
    let ns = n * b;
    let ne = problem.grid.count;
    let mut empty_bonds = vec![0.0; ne];
    let bond_rows = bond_rows(problem, &mut out.bond, &mut empty_bonds);
    if ctx.sigma0.blocks.is_some() && out.blocks.is_none() {
        return Err(SolveError::Invalid(
            "a block self-energy for a pass without block storage".into(),
        ));
    }
    let kept: Vec<Option<(&mut [C64], &mut [C64])>> = match out.blocks.as_mut() {
        Some(blocks) => {
            let per = blocks.per_energy;
            blocks
                .retarded
                .chunks_mut(per)
                .zip(blocks.filled.chunks_mut(per))
                .map(Some)
                .collect()
        }
        None => (0..ne).map(|_| None).collect(),
    };
    let crow_len = out.contact_flows.row_len().max(1);
    let green = &mut out.green;
    green
        .retarded
        .par_chunks_mut(ns)
        .zip(green.filled.par_chunks_mut(ns))
        .zip(bond_rows.into_par_iter())
        .zip(out.flows.par_iter_mut())
        .zip(kept.into_par_iter())
        .zip(out.contact_flows.data.par_chunks_mut(crow_len))
        .enumerate()
        .filter(|(k, _)| rows(*k))
        .try_for_each_init(
            || RowScratch::new(problem, true),
            |sc, (k, (((((gr, gn), bd), fl), kept), crow))| -> Result<(), SolveError> {
                let out = EnergyOutput {
                    retarded: gr,
                    filled: gn,
                    bond: bd,
                    full: None,
                };
                *fl = ctx.solve_blocks(k, sc, out, kept, crow)?;
                Ok(())
            },
        )
}

impl RowContext<'_> {
    /// Σ0 of energy k as blocks (Σ^r row-major, Σ^in packed) plus the
    /// contacts, written into the scratch (Σ0 on the diagonal when it has
    /// no blocks).
    fn fill_blocks(&self, k: usize, sr: &mut [C64], si: &mut [f64]) {
        let problem = self.problem;
        let (n, b) = (problem.device.cells(), problem.device.orbitals);
        let bb = b * b;
        let s0 = self.sigma0;
        if s0.blocks.is_some() {
            let per = s0.sites;
            sr.copy_from_slice(&s0.retarded[k * per..(k + 1) * per]);
            si.copy_from_slice(&s0.inscatter[k * per..(k + 1) * per]);
        } else {
            sr.fill(C64::new(0.0, 0.0));
            si.fill(0.0);
            let ns = n * b;
            for s in 0..ns {
                let (i, o) = (s / b, s % b);
                sr[i * bb + o * b + o] = s0.retarded[k * ns + s];
                si[i * bb + o * b + o] = s0.inscatter[k * ns + s];
            }
        }
        let e = problem.grid.energy(k);
        for ((c, &level), gamma) in problem.contacts.iter().zip(self.levels).zip(&self.gammas) {
            let f = crate::units::fermi(e, level.0, level.1);
            for &i in &c.cells {
                let cell = i * bb..(i + 1) * bb;
                contacts::add_block(gamma, b, f, Some(&mut sr[cell.clone()]), &mut si[cell]);
            }
        }
    }

    /// One energy on the block route, the contacts' records in `crow`.
    fn solve_blocks(
        &self,
        k: usize,
        sc: &mut RowScratch,
        out: EnergyOutput<'_>,
        kept: Option<(&mut [C64], &mut [C64])>,
        crow: &mut [f64],
    ) -> Result<TerminalFlows, SolveError> {
        let problem = self.problem;
        let with = !problem.contacts.is_empty();
        if with {
            self.fill_blocks(k, &mut sc.sr, &mut sc.si);
        }
        let RowScratch {
            ws,
            inl,
            inr,
            zero,
            sr,
            si,
            resp_in,
            gr2,
            gn2,
            bond2,
            br,
            bn,
            br2,
            bn2,
        } = sc;
        let per = self.sigma0.sites;
        let (r, i): (&[C64], &[f64]) = if with {
            (sr, si)
        } else {
            let s0 = self.sigma0;
            (
                &s0.retarded[k * per..(k + 1) * per],
                &s0.inscatter[k * per..(k + 1) * per],
            )
        };
        let (g, gn) = match kept {
            Some((g, gn)) => (g, gn),
            None => (&mut br[..], &mut bn[..]),
        };
        let input = self.lead_input(k, inl, inr);
        let mut exchange = rgf::BlockExchange {
            scatter_retarded: r,
            scatter_in: i,
            green_retarded: &mut *g,
            green_filled: &mut *gn,
        };
        let fl = rgf::solve_energy_with_blocks(&input, ws, out, &mut exchange)?;
        if !with {
            return Ok(fl);
        }
        let e = problem.grid.energy(k);
        contacts::record_blocks(problem, self.levels, e, g, gn, self.per_contact, crow);
        let spare = Spare {
            ws,
            zero,
            resp_in,
            gr2,
            gn2,
            bond2,
            br2,
            bn2,
        };
        self.responses_blocks(&input, r, spare, crow)?;
        Ok(fl)
    }
}

/// Σ^in = Γ f with Γ = i(Σ − Σ†), written into `dst` (scalar for b = 1).
fn inscatter_into(sigma: &Mat<C64>, f: f64, dst: &mut Mat<C64>) {
    let b = sigma.nrows();
    if b == 1 {
        dst[(0, 0)] = C64::new(-2.0 * sigma[(0, 0)].im * f, 0.0);
        return;
    }
    for c in 0..b {
        for r in 0..b {
            let d = sigma[(r, c)] - sigma[(c, r)].conj();
            dst[(r, c)] = C64::new(-d.im, d.re) * f;
        }
    }
}

/// The convergence record of a solve.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct ScbaReport {
    /// True when the tolerance was met (always true without scattering).
    pub converged: bool,
    /// Born iterations done (0 for a coherent device).
    pub iterations: usize,
    /// Every iteration.
    pub history: Vec<IterationRecord>,
    /// The settings used.
    pub params: ScbaParams,
    /// Hermitian part of the phonon self-energy included or neglected.
    pub hermitian_part: bool,
    /// Started from a stored Σ0.
    pub warm_start: bool,
    /// The energy order used (`Simultaneous` for a coherent device).
    pub energy_order: EnergyOrder,
    /// With voltage or temperature probes: the largest relative residual
    /// of their zero-current conditions in the last pass (particle flow
    /// over its gross exchange, and heat flow likewise); `None` without
    /// probes.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub probe_residual: Option<f64>,
    /// The coarse levels run before this loop, coarsest first (empty when
    /// the loop started from zero or from a given Σ0 without them).
    pub coarse_levels: Vec<coarse::CoarseLevel>,
}

/// A solved operating point: the Green's functions and the Σ0 they were
/// computed from.
#[derive(Clone, Debug)]
pub struct Solution {
    /// The problem solved.
    pub problem: Problem,
    /// The last pass.
    pub pass: Pass,
    /// The scattering self-energy used in that pass.
    pub sigma: ScatteringSelfEnergy,
    /// Convergence record.
    pub report: ScbaReport,
    /// The lattice temperature (K) at each orbital site that set the phonon
    /// occupations, or `None` when every mode used its bath temperature.
    pub lattice_temperature_k: Option<Vec<f64>>,
}

/// Electric currents (I_1, I_2) in A from terminal flows.
pub fn terminal_currents(problem: &Problem, flows: &[TerminalFlows]) -> (f64, f64) {
    let scale = -crate::units::ELEMENTARY_CHARGE * problem.spin_degeneracy
        / crate::units::PLANCK_EV_S
        * problem.grid.step_ev;
    let (l, r) = flows
        .iter()
        .fold((0.0, 0.0), |(l, r), f| (l + f.left, r + f.right));
    (l * scale, r * scale)
}

/// Relative change of (Σ^in, Σ^out) from `a` to `b`.
pub fn relative_change(a: &ScatteringSelfEnergy, b: &ScatteringSelfEnergy) -> f64 {
    // Sums of squares in fixed chunks (in parallel), chunk sums added in
    // order: the same number for any thread count.
    const CHUNK: usize = 1 << 13;
    let n = a.inscatter.len();
    let parts: Vec<[f64; 6]> = (0..n.div_ceil(CHUNK))
        .into_par_iter()
        .map(|c| {
            let mut acc = [0.0; 6];
            for i in c * CHUNK..((c + 1) * CHUNK).min(n) {
                let (bi, ai) = (b.inscatter[i], a.inscatter[i]);
                let (bo, ao) = (b.outscatter(i), a.outscatter(i));
                let (br, ar) = (b.retarded[i].re, a.retarded[i].re);
                acc[0] += (bi - ai) * (bi - ai);
                acc[1] += (bo - ao) * (bo - ao);
                acc[2] += (br - ar) * (br - ar);
                acc[3] += bi * bi;
                acc[4] += bo * bo;
                acc[5] += br * br;
            }
            acc
        })
        .collect();
    let mut tot = [0.0; 6];
    for p in &parts {
        for (t, v) in tot.iter_mut().zip(p) {
            *t += v;
        }
    }
    change_ratio(tot)
}

/// The relative change from the sums of squares (ΔΣ^in, ΔΣ^out, ΔRe Σ^r,
/// Σ^in, Σ^out, Re Σ^r) of [`relative_change`].
fn change_ratio(tot: [f64; 6]) -> f64 {
    let [d_in, d_out, d_re, s_in, s_out, s_re] = tot.map(f64::sqrt);
    let scale = s_in + s_out + s_re;
    let change = d_in + d_out + d_re;
    if scale == 0.0 {
        // Against an all-zero output any change is infinitely large: a Σ0
        // so large that G underflows to zero must not pass for converged.
        return if change == 0.0 { 0.0 } else { f64::INFINITY };
    }
    change / scale
}

/// The red-black colouring for these settings: the band width w in grid
/// steps (energy k is red when ⌊k/w⌋ is even) and whether every phonon
/// links only energies of opposite colours; None for the simultaneous
/// order.
///
/// A mode of s steps flips the colour of every energy exactly when s/w is
/// odd, so with `Auto` the colouring is used when all modes have the same
/// power of two in their step count (w is then their greatest common
/// divisor); `RedBlack` uses the greatest common divisor whenever there are
/// phonons.
pub fn red_black_colouring(problem: &Problem, order: EnergyOrder) -> Option<(usize, bool)> {
    let steps: Vec<usize> = problem
        .scattering
        .phonons
        .iter()
        .map(|m| m.steps)
        .filter(|&s| s > 0)
        .collect();
    if steps.is_empty() || order == EnergyOrder::Simultaneous {
        return None;
    }
    fn gcd(a: usize, b: usize) -> usize {
        if b == 0 { a } else { gcd(b, a % b) }
    }
    let w = steps.iter().fold(0, |g, &s| gcd(g, s));
    let two_colours = steps.iter().all(|&s| (s / w) % 2 == 1);
    (two_colours || order == EnergyOrder::RedBlack).then_some((w, two_colours))
}

/// The band width w when the Anderson mixer needs only the red energy
/// rows (⌊k/w⌋ even): in red-black order with phonons that two-colour the
/// grid and neither dephasing nor the Hermitian part, every black row of
/// Σ0 is rebuilt from red Green's functions before it is used, so its
/// residual is zero and a mixed value there would be overwritten. `None`:
/// every row is mixed.
pub fn red_rows_only(problem: &Problem, order: EnergyOrder) -> Option<usize> {
    let scat = &problem.scattering;
    let hermitian = scat.hermitian_part && !scat.phonons.is_empty();
    match red_black_colouring(problem, order) {
        Some((w, true)) if !scat.has_dephasing() && !hermitian => Some(w),
        _ => None,
    }
}

/// How many energy rows the Anderson mixer keeps a history for (see
/// [`red_rows_only`]).
pub fn mixed_energy_rows(problem: &Problem, order: EnergyOrder) -> usize {
    let ne = problem.grid.count;
    match red_rows_only(problem, order) {
        Some(w) => (0..ne).filter(|k| (k / w).is_multiple_of(2)).count(),
        None => ne,
    }
}

/// Solve one operating point: a single pass for a coherent device, the Born
/// loop otherwise. `warm` is a Σ0 from a neighbouring operating point.
pub fn solve(
    problem: &Problem,
    params: &ScbaParams,
    warm: Option<&ScatteringSelfEnergy>,
    observer: &mut dyn Observer,
) -> Result<Solution, SolveError> {
    let leads = LeadTable::new(problem)?;
    solve_with_leads(problem, &leads, params, warm, observer)
}

/// [`solve`] with lead self-energies already evaluated.
pub fn solve_with_leads(
    problem: &Problem,
    leads: &LeadTable,
    params: &ScbaParams,
    warm: Option<&ScatteringSelfEnergy>,
    observer: &mut dyn Observer,
) -> Result<Solution, SolveError> {
    solve_in_lattice(problem, leads, None, params, warm, observer)
}

/// The Born loop with the phonon occupations taken from a lattice
/// temperature per orbital site (K): mode m at site s uses
/// N(ħω_m, T_L,s) in place of its bath temperature. `None` is [`solve`]
/// (the bath temperature everywhere). A uniform profile equal to the bath
/// temperature gives the same numbers as `None`, bit for bit.
pub fn solve_in_lattice(
    problem: &Problem,
    leads: &LeadTable,
    lattice_temperature_k: Option<&[f64]>,
    params: &ScbaParams,
    warm: Option<&ScatteringSelfEnergy>,
    observer: &mut dyn Observer,
) -> Result<Solution, SolveError> {
    let warm = warm.map(std::borrow::Cow::Borrowed);
    born_solve(
        problem,
        leads,
        lattice_temperature_k,
        params,
        warm,
        observer,
    )
}

/// The Born loop of [`solve_in_lattice`], its warm start borrowed or
/// owned: an outer loop that hands each Born solve the Σ0 of the last one
/// gives it away, and the loop iterates it in place instead of a copy.
pub(crate) fn born_solve(
    problem: &Problem,
    leads: &LeadTable,
    lattice_temperature_k: Option<&[f64]>,
    params: &ScbaParams,
    warm: Option<std::borrow::Cow<'_, ScatteringSelfEnergy>>,
    observer: &mut dyn Observer,
) -> Result<Solution, SolveError> {
    let ne = problem.grid.count;
    let ns = problem.sites();
    if let Some(t) = lattice_temperature_k {
        crate::scattering::check_lattice_temperature(t, ns).map_err(SolveError::Invalid)?;
    }
    let scat = &problem.scattering;
    let coherent = scat.is_coherent();
    let mut report = ScbaReport {
        converged: true,
        iterations: 0,
        history: Vec::new(),
        params: *params,
        hermitian_part: scat.hermitian_part && !scat.phonons.is_empty(),
        warm_start: warm.is_some() && !coherent,
        energy_order: EnergyOrder::Simultaneous,
        probe_residual: None,
        coarse_levels: Vec::new(),
    };
    let lattice = lattice_temperature_k.map(<[f64]>::to_vec);
    // Probes depend on G^n: a coherent device with probes iterates too.
    if coherent && !problem.has_floating_contacts() {
        let sigma = sigma_zeros(problem);
        let split = split::current();
        let levels = contacts::given_levels(problem);
        let maps = BornMaps::plain(problem, leads, &levels, true, split.as_deref());
        let mut pass = Pass::zeros(problem);
        pass_part(&maps, &sigma, |_| true, &mut pass)?;
        return Ok(Solution {
            problem: problem.clone(),
            pass,
            sigma,
            report,
            lattice_temperature_k: lattice,
        });
    }
    let warm_given = warm.is_some();
    let x = match warm {
        Some(w) => {
            check_layout(problem, &w).map_err(|e| match e {
                SolveError::Invalid(m) => SolveError::Invalid(format!("warm start: {m}")),
                other => other,
            })?;
            if w.energies() != ne {
                return Err(SolveError::Invalid(
                    "warm-start self-energy does not match this grid and device".into(),
                ));
            }
            w.into_owned()
        }
        None => {
            let factors = coarse::levels(problem, params);
            if factors.is_empty() {
                sigma_zeros(problem)
            } else {
                let t = lattice_temperature_k;
                let (x, done) = coarse::start(problem, leads, t, params, &factors, observer)?;
                report.coarse_levels = done;
                x
            }
        }
    };
    let nonzero = warm_given || !report.coarse_levels.is_empty();
    let born = BornLoop::new(problem, leads, lattice, params, report, nonzero);
    born.run(x, observer)
}

/// The state of one Born loop: what stays fixed while Σ0 is iterated.
struct BornLoop<'a> {
    problem: &'a Problem,
    leads: &'a LeadTable,
    lattice: Option<Vec<f64>>,
    params: &'a ScbaParams,
    report: ScbaReport,
    hilbert: Option<HilbertTransform>,
    /// Re Σ^r_0 is mixed (the Hermitian part or dephasing puts something
    /// there).
    mix_real_part: bool,
    /// Red-black band width, None for the simultaneous order.
    colour: Option<usize>,
    /// `black_ready` of the first iteration (see [`BornLoop::run`]).
    black_ready_at_start: bool,
    /// The watch over parts of the device cut off from the leads (None
    /// when there are none).
    isolation: Option<undetermined::Isolation>,
}

impl<'a> BornLoop<'a> {
    fn new(
        problem: &'a Problem,
        leads: &'a LeadTable,
        lattice: Option<Vec<f64>>,
        params: &'a ScbaParams,
        mut report: ScbaReport,
        warm: bool,
    ) -> Self {
        let scat = &problem.scattering;
        let hilbert = report
            .hermitian_part
            .then(|| HilbertTransform::new(problem.grid.count));
        // Re Σ^r_0 stays zero unless the Hermitian part or dephasing (whose
        // Σ^r is D·G^r) puts something there; then it need not be mixed.
        let has_dephasing = scat.has_dephasing();
        let colouring = red_black_colouring(problem, params.energy_order);
        report.energy_order = if colouring.is_some() {
            EnergyOrder::RedBlack
        } else {
            EnergyOrder::Simultaneous
        };
        // Red-black: an iteration solves the red energies, rebuilds Σ0 on the
        // black ones from every G at hand, then solves those. The first
        // iteration has no G on the black energies yet; they count as zero,
        // which loses nothing when the black Σ0 depends on red energies only
        // (two-colouring phonons alone) or when Σ0 starts from zero. A warm
        // start with dephasing or the Hermitian part would lose its black rows,
        // so its first iteration solves every energy from the same Σ0 instead.
        let black_needs_black =
            has_dephasing || report.hermitian_part || !colouring.is_some_and(|(_, two)| two);
        Self {
            problem,
            leads,
            lattice,
            params,
            // On blocks Σ^r_0 = −iΓ0/2 has real off-diagonal elements.
            mix_real_part: report.hermitian_part || has_dephasing || scat.uses_blocks(),
            report,
            hilbert,
            colour: colouring.map(|(w, _)| w),
            black_ready_at_start: !warm || !black_needs_black,
            isolation: undetermined::Isolation::new(problem, leads, params.tolerance),
        }
    }

    /// A fresh mixer for this loop (only the red rows when the black ones
    /// are rebuilt from them before use, see [`red_rows_only`]; only this
    /// process's rows when they are shared).
    fn mixer(&self, share: Option<&Share<'_>>) -> Mixer {
        let (problem, params) = (self.problem, self.params);
        let red_only = red_rows_only(problem, params.energy_order);
        let mut m = Mixer::with_rows(params.mixing, self.mix_real_part, params.history, red_only);
        if let Some(s) = share {
            m.share_rows(s.own().to_vec());
        }
        m
    }

    /// How the rows are shared after each pass under the energy split
    /// `split` (see [`Share`]): with more than one process, for a
    /// row-local model whose loop watches no cut-off part (that watch
    /// reads every row). `None`: every process holds every row after each
    /// pass and computes the rest of the iteration on all of them.
    fn share<'s>(&self, split: Option<&'s dyn EnergySplit>) -> Option<Share<'s>> {
        let problem = self.problem;
        let scat = &problem.scattering;
        let shared = scat.row_local() && self.isolation.is_none();
        let reach = scat.phonons.iter().map(|m| m.steps).collect();
        // The mixer's chunks run over the red rows or over all rows: align
        // the processes' blocks with them (not when the mixed rows of one
        // process interleave red and black bands).
        let red_only = red_rows_only(problem, self.params.energy_order).is_some();
        let align =
            (self.colour.is_none() || red_only).then(|| mixing::rows_per_chunk(problem.sites()));
        split
            .filter(|s| s.processes() > 1 && shared)
            .map(|s| Share::new(s, problem.grid.count, self.colour, reach, align))
    }

    /// Iterate from Σ0 = `x` until converged or out of budget.
    fn run(
        mut self,
        mut x: ScatteringSelfEnergy,
        observer: &mut dyn Observer,
    ) -> Result<Solution, SolveError> {
        let (problem, params) = (self.problem, self.params);
        // The energy split in force, if any (see `split`), and whether the
        // rows are shared after each pass as well.
        let split = split::current();
        let share = self.share(split.as_deref());
        let mut mixer = self.mixer(share.as_ref());
        let mut previous: Option<(f64, f64)> = None;
        // The Green's functions of the pass and the image F(Σ0) are rebuilt in
        // place every iteration. `black_ready`: the black rows of `p` hold G
        // from an earlier pass (or may count as zero, see `new`).
        let mut p = Pass::zeros(problem);
        let mut fx = sigma_zeros(problem);
        let mut black_ready = self.black_ready_at_start;
        // The levels of the attached contacts: probes float (see `contacts`).
        let mut levels = contacts::starting_levels(problem);
        let coherent = problem.scattering.is_coherent();
        // The black rows of the image are needed only by the cut-off watch
        // and a mixer that reads them.
        let image_black = self.isolation.is_some() || !mixer.reads_red_rows_only();
        loop {
            // The mixer's first pass is taken inside the image pass when it
            // can be (see `Mixer::begin_fused`), even if no step follows.
            let mut fused = share.is_none().then(|| mixer.begin_fused(&x)).flatten();
            let hook = fused.as_mut().map(|u| mixer.row_hook(u));
            let row_fn =
                (hook.as_ref()).map(|h| move |k: usize, x: &_, r: &_, i: &_| h.row(k, x, r, i));
            let maps = BornMaps {
                hilbert: self.hilbert.as_ref(),
                lattice: self.lattice.as_deref(),
                image_black,
                mixer_rows: row_fn.as_ref().map(|f| f as &MixerRows),
                ..BornMaps::plain(problem, self.leads, &levels, coherent, split.as_deref())
            };
            let iteration = self.report.iterations + 1;
            let order = self.colour.filter(|_| black_ready);
            let residual = match &share {
                Some(s) => sweep_shared(&maps, s, order, &mut x, &mut p, &mut fx, iteration),
                None => sweep(&maps, order, &mut x, &mut p, &mut fx, iteration),
            }?;
            let sums = hook.map(RowHook::into_sums);
            let fused = fused.zip(sums);
            black_ready = true;
            let (il, ir, current_change) =
                pass_currents(params, problem, &p, iteration, residual, &mut previous)?;
            let measures = (residual, current_change);
            let done = self.stops(&levels, &p, (&x, &fx), iteration, measures)?;
            let out_of_budget = iteration >= params.max_iterations;
            let step = if done || out_of_budget {
                "final"
            } else {
                contacts::float_levels(problem, &p, &mut levels);
                match fused {
                    Some((u, sums)) => mixer.finish_fused(u, sums, &mut x, &fx),
                    None => mix(&mut mixer, share.as_ref(), &mut x, &fx)?,
                }
            };
            let record = IterationRecord {
                iteration,
                residual,
                current_left_a: il,
                current_right_a: ir,
                current_change,
                step,
            };
            self.record(record, observer)?;
            if done || out_of_budget {
                self.report.converged = done;
                if let Some(s) = &share {
                    s.gather_all(&mut p, &mut x)?;
                }
                return Ok(self.solution(&levels, p, x));
            }
        }
    }

    /// Whether the loop has converged after `iteration` (counted in the
    /// report): the Σ0 residual and the currents' change (in units of
    /// their tolerance) of `measures`, and the floating probes' residual
    /// (kept in the report), all within tolerance. While it has not, the
    /// cut-off watch, if any, sees Σ0 and its image `sigma`.
    fn stops(
        &mut self,
        levels: &[(f64, f64)],
        p: &Pass,
        sigma: (&ScatteringSelfEnergy, &ScatteringSelfEnergy),
        iteration: usize,
        measures: (f64, f64),
    ) -> Result<bool, SolveError> {
        let (problem, params) = (self.problem, self.params);
        let (residual, current_change) = measures;
        self.report.iterations = iteration;
        let probe =
            (problem.has_floating_contacts()).then(|| contacts::probe_residual(problem, levels, p));
        self.report.probe_residual = probe;
        let currents_settled = current_change <= 1.0 || !params.settle_currents;
        let done = residual <= params.tolerance
            && currents_settled
            && probe.is_none_or(|r| r <= params.tolerance);
        if let (Some(watch), false) = (self.isolation.as_mut(), done) {
            watch.observe(problem, sigma.0, sigma.1, iteration, residual)?;
        }
        Ok(done)
    }

    /// Hand an iteration's record to the observer and keep it; a
    /// cancellation asked for by the observer ends the loop.
    fn record(
        &mut self,
        record: IterationRecord,
        observer: &mut dyn Observer,
    ) -> Result<(), SolveError> {
        observer.iteration(&record);
        let iteration = record.iteration;
        self.report.history.push(record);
        if observer.cancelled() {
            return Err(SolveError::Cancelled { iteration });
        }
        Ok(())
    }

    /// The solution of the loop: the pass `p` at Σ0 `x`, with the
    /// contacts' final `levels`.
    fn solution(self, levels: &[(f64, f64)], p: Pass, x: ScatteringSelfEnergy) -> Solution {
        Solution {
            problem: contacts::with_levels(self.problem, levels),
            pass: p,
            sigma: x,
            report: self.report,
            lattice_temperature_k: self.lattice,
        }
    }
}

/// The terminal currents of pass `p` and their change since `previous`
/// in units of the current tolerance (see [`current_change`]); `previous`
/// becomes these currents. A pass whose residual or currents are not
/// finite ends the loop with the iteration that produced it.
fn pass_currents(
    params: &ScbaParams,
    problem: &Problem,
    p: &Pass,
    iteration: usize,
    residual: f64,
    previous: &mut Option<(f64, f64)>,
) -> Result<(f64, f64, f64), SolveError> {
    let (il, ir) = terminal_currents(problem, &p.flows);
    ensure_not_diverged(iteration, residual, (il, ir))?;
    let floor = current_floor(params, problem, &p.flows);
    let change = current_change(params, (il, ir), *previous, floor);
    *previous = Some((il, ir));
    Ok((il, ir, change))
}

/// The mixer's step from Σ0 `x` with image `fx`, its sums added over the
/// processes when the rows are shared.
fn mix(
    mixer: &mut Mixer,
    share: Option<&Share<'_>>,
    x: &mut ScatteringSelfEnergy,
    fx: &ScatteringSelfEnergy,
) -> Result<&'static str, SolveError> {
    match share {
        Some(s) => mixer.update_shared(x, fx, &mut |parts, width| s.reduce(parts, width)),
        None => Ok(mixer.update(x, fx)),
    }
}

/// Fails when Born iteration `iteration` left a residual or a terminal
/// current (A) that is not a finite number.
fn ensure_not_diverged(
    iteration: usize,
    residual: f64,
    (il, ir): (f64, f64),
) -> Result<(), SolveError> {
    if residual.is_finite() && il.is_finite() && ir.is_finite() {
        return Ok(());
    }
    Err(SolveError::Diverged {
        iteration,
        residual,
        current_left_a: il,
        current_right_a: ir,
    })
}

/// The absolute part of the current test (A): the rounding level of a
/// terminal current, the number of energies times the machine epsilon
/// times the larger one-way flow of the two leads (inflow or outflow), and
/// never below `current_floor_a`.
///
/// A terminal current is a sum over the grid of differences of a lead's
/// inflow and outflow. At zero bias it is rounding noise of those flows
/// (measured: 1e-16 of the one-way flow from one iteration to the next on
/// a 225-energy barrier), and tol·|I| alone can never be met however well
/// Σ0 has converged. A sum of N such differences is not known better than
/// N·ε of the flows, so changes below that are not changes of the current.
/// Tolerance times the one-way flow would also end an equilibrium loop,
/// but under bias it let a loop stop with the current moving by more than
/// tol·|I| (at 50 mV on that barrier, one iteration early); the rounding
/// level keeps the test relative wherever |I| is resolved at all.
pub(crate) fn current_floor(
    params: &ScbaParams,
    problem: &Problem,
    flows: &[TerminalFlows],
) -> f64 {
    let scale = crate::units::ELEMENTARY_CHARGE * problem.spin_degeneracy
        / crate::units::PLANCK_EV_S
        * problem.grid.step_ev;
    // Inflow (gross + net)/2 and outflow (gross − net)/2 of each lead.
    let mut sums = [0.0; 4];
    for f in flows {
        sums[0] += 0.5 * (f.left_gross + f.left);
        sums[1] += 0.5 * (f.left_gross - f.left);
        sums[2] += 0.5 * (f.right_gross + f.right);
        sums[3] += 0.5 * (f.right_gross - f.right);
    }
    let one_way = sums.iter().fold(0.0, |m: f64, s| m.max(s.abs())) * scale;
    let rounding = flows.len() as f64 * f64::EPSILON;
    (rounding * one_way).max(params.current_floor_a)
}

/// Largest change of a terminal current since the last iteration, relative
/// to tol·|I| + `floor` (infinite at the first iteration; `floor` from
/// [`current_floor`]).
pub(crate) fn current_change(
    params: &ScbaParams,
    now: (f64, f64),
    previous: Option<(f64, f64)>,
    floor: f64,
) -> f64 {
    match previous {
        None => f64::INFINITY,
        Some((pl, pr)) => {
            let rel = |now: f64, before: f64| {
                (now - before).abs() / (params.tolerance * now.abs() + floor)
            };
            rel(now.0, pl).max(rel(now.1, pr))
        }
    }
}

/// What one Born iteration needs besides Σ0: the problem, the lead table,
/// the Hilbert-transform plan (Hermitian part on) and the lattice
/// temperature profile (None: bath temperatures).
struct BornMaps<'a> {
    problem: &'a Problem,
    leads: &'a LeadTable,
    hilbert: Option<&'a HilbertTransform>,
    lattice: Option<&'a [f64]>,
    /// The levels of the attached contacts in this iteration.
    levels: &'a [(f64, f64)],
    /// Also compute the coherent transmission (no scattering: a device
    /// that iterates only for its probes).
    transmission: bool,
    /// The processes sharing the energies of each pass (see [`split`]);
    /// `None`: this process computes them all.
    split: Option<&'a dyn EnergySplit>,
    /// The image F(Σ0) must hold the black rows too (red-black order);
    /// when false and they are their own image, they are not written.
    image_black: bool,
    /// Hands each row of the image built row by row to the mixer as it is
    /// built (see [`Mixer::begin_fused`]): energy index, Σ0, the row's
    /// Σ^r_0 and Σ^in_0.
    mixer_rows: Option<&'a MixerRows<'a>>,
}

/// What takes each image row to the mixer (see [`BornMaps::mixer_rows`]).
type MixerRows<'a> = dyn Fn(usize, &ScatteringSelfEnergy, &[C64], &[f64]) + Sync + 'a;

impl<'a> BornMaps<'a> {
    /// The maps at the bath temperatures without the Hermitian part.
    fn plain(
        problem: &'a Problem,
        leads: &'a LeadTable,
        levels: &'a [(f64, f64)],
        transmission: bool,
        split: Option<&'a dyn EnergySplit>,
    ) -> Self {
        Self {
            problem,
            leads,
            hilbert: None,
            lattice: None,
            levels,
            transmission,
            split,
            image_black: true,
            mixer_rows: None,
        }
    }
}

impl BornMaps<'_> {
    /// Rebuild the rows k of Σ0 with `rows(k)` true into `out`, handing
    /// each to `each` (see [`crate::scattering::Scattering::self_energy_rows_into`]).
    fn rebuild_rows<R: Send>(
        &self,
        pass: &Pass,
        out: &mut ScatteringSelfEnergy,
        rows: impl Fn(usize) -> bool + Sync,
        each: impl Fn(usize, &[C64], &[f64]) -> R + Sync,
    ) -> Vec<R> {
        let ne = self.problem.grid.count;
        let scat = &self.problem.scattering;
        scat.self_energy_rows_into(&pass.green, ne, self.lattice, out, rows, each)
    }

    /// Rebuild Σ0 from the local Green's functions of `pass` into `out`
    /// (from the diagonal blocks when the scattering has coupling
    /// matrices).
    fn rebuild(&self, pass: &Pass, out: &mut ScatteringSelfEnergy) {
        let ne = self.problem.grid.count;
        let scat = &self.problem.scattering;
        match &pass.blocks {
            Some(blocks) => {
                scat.self_energy_blocks_into(blocks, ne, self.hilbert, self.lattice, out)
            }
            None => scat.self_energy_at_into(&pass.green, ne, self.hilbert, self.lattice, out),
        }
    }
}

/// One Born iteration's passes: the Green's functions `p` of Σ0 = `x`
/// and the image F(x) in `fx`; returns the relative change from `x` to
/// F(x) (see [`relative_change`]). With `red_black = Some(w)` the red
/// energies are solved first and the black rows of `x` are replaced by Σ0
/// rebuilt from every G at hand (the black rows of `p` are taken from the
/// previous sweep) before the black energies are solved.
///
/// When each row of Σ0 needs G only at E and E ± ħω (no Hermitian part,
/// diagonal layout), the black rows are rebuilt straight into `x`, and the
/// finiteness check and the relative change are taken on each rebuilt row
/// while it is in cache: no separate passes over Σ0 and F(Σ0), the same
/// numbers (the change summed row by row). When moreover every black row
/// is built from red Green's functions only, the image of the black rows
/// is the rows just rebuilt, so they are copied rather than rebuilt again
/// (see [`image_change_local`]).
fn sweep(
    maps: &BornMaps<'_>,
    red_black: Option<usize>,
    x: &mut ScatteringSelfEnergy,
    p: &mut Pass,
    fx: &mut ScatteringSelfEnergy,
    iteration: usize,
) -> Result<f64, SolveError> {
    let problem = maps.problem;
    let local = p.blocks.is_none() && problem.scattering.row_local();
    let mut black_sums = None;
    match red_black {
        Some(w) => {
            let red = move |k: usize| (k / w).is_multiple_of(2);
            pass_part(maps, x, red, p)?;
            if local {
                // Black rows that are their own image and need not be
                // written there: their change sums are taken here.
                let own = black_from_red(problem, w) && !maps.image_black;
                let each = |k: usize, r: &[C64], i: &[f64]| {
                    (first_bad(k, r, i), own.then(|| row_change_sums(r, i, r, i)))
                };
                let rows = maps.rebuild_rows(p, x, |k| !red(k), each);
                if let Some((idx, part)) = rows.iter().find_map(|(bad, _)| *bad) {
                    // Report it where a rebuild of every row shows it
                    // first (the lowest energy), as the other route does.
                    maps.rebuild(p, fx);
                    ensure_finite(fx, problem, iteration)?;
                    return Err(self_energy_fault(problem, x, iteration, idx, part));
                }
                black_sums = own.then(|| rows.into_iter().filter_map(|(_, s)| s).collect());
            } else {
                maps.rebuild(p, fx);
                ensure_finite(fx, problem, iteration)?;
                copy_rows(fx, x, |k| !red(k));
            }
            pass_part(maps, x, |k| !red(k), p)?;
        }
        None => pass_part(maps, x, |_| true, p)?,
    }
    if local {
        let black_done = red_black.filter(|&w| black_from_red(problem, w));
        return image_change_local(maps, black_done, black_sums, x, p, fx, iteration);
    }
    maps.rebuild(p, fx);
    // A non-finite Σ0 would poison the next pass (or, with finite but huge
    // values, the mixer); stop here and say where it appeared.
    ensure_finite(fx, problem, iteration)?;
    Ok(relative_change(x, fx))
}

/// True when, in red-black order with band width `w`, every black row of
/// Σ0 is built from red Green's functions only: no dephasing (which reads
/// G at the row's own energy) and every phonon an odd multiple of w steps.
fn black_from_red(problem: &Problem, w: usize) -> bool {
    let scat = &problem.scattering;
    w > 0
        && !scat.has_dephasing()
        && (scat.phonons.iter()).all(|m| m.steps % w == 0 && (m.steps / w) % 2 == 1)
}

/// The image F(x) of a row-local model into `fx` and the relative change
/// from `x` to it (see [`relative_change`]), its finiteness checked row by
/// row. With `black_done = Some(w)` the black rows of `x` were rebuilt in
/// this sweep from red Green's functions that the black pass did not
/// touch ([`black_from_red`]): their image is those rows themselves, bit
/// for bit, so they are copied instead of rebuilt (no reads of G at
/// E ± ħω for half the grid), or with `black_sums` (their change sums,
/// taken when they were rebuilt) not written at all. The sums are added
/// in row order either way, so the change is the same number. Each row
/// rebuilt is handed to the mixer ([`BornMaps::mixer_rows`]) while in
/// cache.
fn image_change_local(
    maps: &BornMaps<'_>,
    black_done: Option<usize>,
    black_sums: Option<Vec<[f64; 6]>>,
    x: &ScatteringSelfEnergy,
    p: &Pass,
    fx: &mut ScatteringSelfEnergy,
    iteration: usize,
) -> Result<f64, SolveError> {
    let problem = maps.problem;
    let red = move |k: usize| black_done.is_none_or(|w| (k / w).is_multiple_of(2));
    let mixer_rows = maps.mixer_rows;
    let each = |k: usize, r: &[C64], i: &[f64]| {
        let row = (first_bad(k, r, i), change_sums(x, k, r, i));
        if let Some(mix) = mixer_rows {
            mix(k, x, r, i);
        }
        row
    };
    let rows = maps.rebuild_rows(p, fx, red, each);
    if let Some((idx, part)) = rows.iter().find_map(|(bad, _)| *bad) {
        return Err(self_energy_fault(problem, fx, iteration, idx, part));
    }
    let copied = match (black_done, black_sums) {
        (Some(_), Some(sums)) => sums,
        (Some(_), None) => copy_rows_with(x, fx, |k| !red(k), |k, r, i| change_sums(x, k, r, i)),
        (None, _) => Vec::new(),
    };
    let (mut from_red, mut from_black) = (rows.iter().map(|(_, s)| s), copied.iter());
    let mut tot = [0.0; 6];
    for k in 0..problem.grid.count {
        let sums = if red(k) {
            from_red.next()
        } else {
            from_black.next()
        };
        for (t, v) in tot.iter_mut().zip(sums.expect("one sum per energy row")) {
            *t += v;
        }
    }
    Ok(change_ratio(tot))
}

/// [`sweep`] with the rows shared between processes ([`Share`]): each
/// process runs the recursion, rebuilds Σ0 and takes the change only on
/// the energy rows it owns, with G at the rows of other processes that it
/// reads (the halo) handed over after each pass. The relative change is
/// the sum over all rows in row order, the same number as [`sweep`]'s for
/// the same Σ0. A row-local model only ([`Scattering::row_local`]).
///
/// [`Scattering::row_local`]: crate::scattering::Scattering::row_local
fn sweep_shared(
    maps: &BornMaps<'_>,
    share: &Share<'_>,
    red_black: Option<usize>,
    x: &mut ScatteringSelfEnergy,
    p: &mut Pass,
    fx: &mut ScatteringSelfEnergy,
    iteration: usize,
) -> Result<f64, SolveError> {
    let (problem, own) = (maps.problem, share.own());
    match red_black {
        Some(w) => {
            let red = move |k: usize| (k / w).is_multiple_of(2);
            pass_shared(maps, share, x, red, p, Ok(()))?;
            let black = |k: usize| !red(k) && own[k];
            let bad = maps.rebuild_rows(p, x, black, first_bad);
            // A non-finite black row travels with the black pass, so that
            // every process stops with it before any solves on it.
            let before = match bad.into_iter().flatten().next() {
                Some((idx, part)) => Err(self_energy_fault(problem, x, iteration, idx, part)),
                None => Ok(()),
            };
            pass_shared(maps, share, x, |k| !red(k), p, before)?;
        }
        None => pass_shared(maps, share, x, |_| true, p, Ok(()))?,
    }
    let black_done = red_black.filter(|&w| black_from_red(problem, w));
    let red = move |k: usize| black_done.is_none_or(|w| (k / w).is_multiple_of(2));
    let each = |k: usize, r: &[C64], i: &[f64]| (k, first_bad(k, r, i), change_sums(x, k, r, i));
    let rows = maps.rebuild_rows(p, fx, |k| red(k) && own[k], each);
    let local = match rows.iter().find_map(|(_, bad, _)| *bad) {
        Some((idx, part)) => Err(self_energy_fault(problem, fx, iteration, idx, part)),
        None => {
            let copied = match black_done {
                Some(_) => copy_rows_with(
                    x,
                    fx,
                    |k| !red(k) && own[k],
                    |k, r, i| (k, change_sums(x, k, r, i)),
                ),
                None => Vec::new(),
            };
            Ok(rows.iter().map(|&(k, _, s)| (k, s)).chain(copied).collect())
        }
    };
    Ok(change_ratio(share.row_sums(local)?))
}

/// The recursion at the energies k with `rows(k)` true that this process
/// owns (unless `before` already failed here), then the exchange that
/// hands every process what it needs of the others' rows (see
/// [`Share::exchange_pass`]).
fn pass_shared(
    maps: &BornMaps<'_>,
    share: &Share<'_>,
    sigma0: &ScatteringSelfEnergy,
    rows: impl Fn(usize) -> bool + Sync,
    p: &mut Pass,
    before: Result<(), SolveError>,
) -> Result<(), SolveError> {
    let (problem, leads, levels) = (maps.problem, maps.leads, maps.levels);
    let tr = maps.transmission;
    let local = before.and_then(|()| {
        let own = share.own();
        let mine = |k: usize| rows(k) && own[k];
        pass_rows(problem, leads, sigma0, levels, tr, mine, p)
    });
    share.exchange_pass(p, rows, local)
}

/// [`pass_rows`] at the energies k with `rows(k)` true, Σ0 = `sigma0`.
/// Under an energy split this process computes its part of them and the
/// split hands every process the others' rows (every process calls this
/// for every pass, so a failure on one ends them all alike).
fn pass_part(
    maps: &BornMaps<'_>,
    sigma0: &ScatteringSelfEnergy,
    rows: impl Fn(usize) -> bool + Sync,
    p: &mut Pass,
) -> Result<(), SolveError> {
    let (problem, leads, levels) = (maps.problem, maps.leads, maps.levels);
    let tr = maps.transmission;
    let Some(split) = maps.split else {
        return pass_rows(problem, leads, sigma0, levels, tr, rows, p);
    };
    let all: Vec<usize> = (0..problem.grid.count).filter(|&k| rows(k)).collect();
    let mut mine = vec![false; problem.grid.count];
    all[split.part(all.len())]
        .iter()
        .for_each(|&k| mine[k] = true);
    let local = pass_rows(problem, leads, sigma0, levels, tr, |k| mine[k], p);
    split.gather_rows(p, &all, local)
}

/// The Born map as the loop applies it in `order`, at Σ0 = `sigma`: the Σ0
/// actually used (black rows rebuilt in red-black order) and its image
/// F(Σ0). The black energies' previous Green's functions are those of
/// `sigma` itself, as in a loop that has settled. For studying the
/// iteration (e.g. its Jacobian); solves use [`solve`].
pub fn born_map(
    problem: &Problem,
    leads: &LeadTable,
    sigma: &ScatteringSelfEnergy,
    order: EnergyOrder,
) -> Result<(ScatteringSelfEnergy, ScatteringSelfEnergy), SolveError> {
    let ne = problem.grid.count;
    let hilbert = (problem.scattering.hermitian_part && !problem.scattering.phonons.is_empty())
        .then(|| HilbertTransform::new(ne));
    let mut x = sigma.clone();
    let mut p = pass(problem, leads, &x, false)?;
    let mut fx = sigma_zeros(problem);
    let colour = red_black_colouring(problem, order).map(|(w, _)| w);
    let levels = contacts::given_levels(problem);
    let maps = BornMaps {
        hilbert: hilbert.as_ref(),
        ..BornMaps::plain(problem, leads, &levels, false, None)
    };
    sweep(&maps, colour, &mut x, &mut p, &mut fx, 1)?;
    Ok((x, fx))
}

/// [`copy_rows`], handing each copied row to `each(k, Σ^r_0 row,
/// Σ^in_0 row)` while it is in cache; what `each` returns comes back in
/// row order.
fn copy_rows_with<R: Send>(
    src: &ScatteringSelfEnergy,
    dst: &mut ScatteringSelfEnergy,
    rows: impl Fn(usize) -> bool + Sync,
    each: impl Fn(usize, &[C64], &[f64]) -> R + Sync,
) -> Vec<R> {
    let ns = src.sites.max(1);
    dst.retarded
        .par_chunks_mut(ns)
        .zip(dst.inscatter.par_chunks_mut(ns))
        .zip(src.retarded.par_chunks(ns))
        .zip(src.inscatter.par_chunks(ns))
        .enumerate()
        .filter(|(k, _)| rows(*k))
        .map(|(k, (((dr, di), sr), si))| {
            dr.copy_from_slice(sr);
            di.copy_from_slice(si);
            each(k, dr, di)
        })
        .collect()
}

/// Copy the energy rows `k` of `src` with `rows(k)` true into `dst`.
fn copy_rows(
    src: &ScatteringSelfEnergy,
    dst: &mut ScatteringSelfEnergy,
    rows: impl Fn(usize) -> bool + Sync,
) {
    copy_rows_with(src, dst, rows, |_, _, _| ());
}
