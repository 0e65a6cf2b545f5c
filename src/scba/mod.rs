//! The self-consistent Born loop (SCBA).
//!
//! 1. Start from Σ0 = 0 or a stored converged Σ0 (warm start).
//! 2. For every energy (independent, in parallel): RGF → diagonals of G^r,
//!    G^n, the bond flows and the terminal flows.
//! 3. Rebuild Σ0 from the local Green's functions on all energies.
//! 4. Mix (linear, or Anderson acceleration with a safeguard).
//! 5. Stop when the relative change of Σ^in_0 and Σ^out_0 is below the
//!    tolerance and each terminal current moved by less than
//!    tol·|I_α| + floor. Reaching the iteration limit gives a result flagged
//!    as not converged, never a silent answer.
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
//! bytes ≈ E·S·(72 + 24·A + 8 + 16·h) + 8·E·(N − 1) + 2·E·(16·b² + 64) + T·w
//! ```
//!
//! - 72 = 3 × 24: the input Σ0, its image F(Σ0) (Σ^r_0 complex + Σ^in_0
//!   real) and the local G^r, G^n of the pass;
//! - A = 2m + 3 vectors of (Re Σ^r, Im Σ^r, Σ^in) for Anderson mixing (last
//!   input and residual, m differences of each, one residual buffer);
//!   A = 0 for linear mixing, which keeps no history;
//! - 8 + 16·h: the phonon broadening while Σ0 is rebuilt, plus two columns
//!   buffers when the Hermitian part (h = 1) is on;
//! - 8·E·(N − 1): the bond flows of the pass;
//! - 2·E·(16·b² + 64): the lead self-energies on the grid;
//! - w: the per-thread RGF workspace, 48·N·b² + 128·b² bytes for b > 1 and
//!   24·N for b = 1.
//!
//! `Resolved::memory_estimate_bytes` evaluates this formula.

mod mixing;
mod params;

pub use mixing::Mixer;
pub use params::{Mixing, ScbaParams};

use crate::C64;
use crate::leads::{LeadError, Side};
use crate::model::Problem;
use crate::rgf::{self, EnergyInput, EnergyOutput, RgfError, TerminalFlows, Workspace};
use crate::scattering::{HilbertTransform, LocalGreen, ScatteringSelfEnergy};
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
            SolveError::Invalid(_) | SolveError::Diverged { .. } => None,
        }
    }

    /// A short name of the kind of fault, for machine-readable summaries.
    pub fn kind(&self) -> &'static str {
        match self {
            SolveError::Lead(_) => "lead self-energy",
            SolveError::Rgf(_) => "non-finite Green's function",
            SolveError::SelfEnergyNotFinite { .. } => "non-finite scattering self-energy",
            SolveError::Diverged { .. } => "diverged",
            SolveError::Invalid(_) => "invalid input",
        }
    }
}

/// First (energy index, site, part) where Σ0 is not finite.
fn first_non_finite(sigma: &ScatteringSelfEnergy) -> Option<(usize, usize, &'static str)> {
    let ns = sigma.sites.max(1);
    let bad_r = sigma
        .retarded
        .iter()
        .position(|z| !(z.re.is_finite() && z.im.is_finite()));
    let bad_in = sigma.inscatter.iter().position(|v| !v.is_finite());
    let (idx, part) = match (bad_r, bad_in) {
        (None, None) => return None,
        (Some(r), Some(i)) if i < r => (i, "Σ^in_0"),
        (Some(r), _) => (r, "Σ^r_0"),
        (None, Some(i)) => (i, "Σ^in_0"),
    };
    Some((idx / ns, idx % ns, part))
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
}

/// Run the recursion at every energy with the scattering self-energy
/// `sigma0`, in parallel over energies with one workspace per thread.
pub fn pass(
    problem: &Problem,
    leads: &LeadTable,
    sigma0: &ScatteringSelfEnergy,
    want_transmission: bool,
) -> Result<Pass, SolveError> {
    let dev = &problem.device;
    let n = dev.cells();
    let b = dev.orbitals;
    let ns = n * b;
    let ne = problem.grid.count;
    let nb = n.saturating_sub(1).max(1);
    let mut green = LocalGreen {
        sites: ns,
        retarded: vec![C64::new(0.0, 0.0); ne * ns],
        filled: vec![0.0; ne * ns],
    };
    let mut bond = vec![0.0; ne * nb];
    let mut flows = vec![TerminalFlows::default(); ne];
    green
        .retarded
        .par_chunks_mut(ns)
        .zip(green.filled.par_chunks_mut(ns))
        .zip(bond.par_chunks_mut(nb))
        .zip(flows.par_iter_mut())
        .enumerate()
        .try_for_each_init(
            // Per thread: the RGF workspace and the two lead in-scattering
            // blocks, filled in place at each energy (no allocation per energy).
            || {
                (
                    Workspace::new(n, b),
                    Mat::<C64>::zeros(b, b),
                    Mat::<C64>::zeros(b, b),
                )
            },
            |(ws, inl, inr), (k, (((gr, gn), bd), fl))| -> Result<(), SolveError> {
                let e = problem.grid.energy(k);
                let sl = &leads.left[k];
                let sr = &leads.right[k];
                inscatter_into(sl, problem.left.occupation(e), inl);
                inscatter_into(sr, problem.right.occupation(e), inr);
                let input = EnergyInput {
                    energy_ev: e,
                    onsite: &dev.onsite,
                    coupling: &dev.coupling,
                    sigma_left: sl,
                    sigma_right: sr,
                    inscatter_left: inl,
                    inscatter_right: inr,
                    scatter_retarded: &sigma0.retarded[k * ns..(k + 1) * ns],
                    scatter_in: &sigma0.inscatter[k * ns..(k + 1) * ns],
                    want_transmission,
                };
                *fl = rgf::solve_energy(
                    &input,
                    ws,
                    EnergyOutput {
                        retarded: gr,
                        filled: gn,
                        bond: &mut bd[..n - 1],
                        full: None,
                    },
                )?;
                Ok(())
            },
        )?;
    if n == 1 {
        bond.clear();
    }
    Ok(Pass { green, bond, flows })
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

/// What one Born iteration did.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct IterationRecord {
    /// Iteration number (1-based).
    pub iteration: usize,
    /// Relative change of (Σ^in_0, Σ^out_0) between input and output.
    pub residual: f64,
    /// Current from the left lead with the input Σ0 (A).
    pub current_left_a: f64,
    /// Current from the right lead with the input Σ0 (A).
    pub current_right_a: f64,
    /// Largest change of a terminal current since the last iteration,
    /// relative to tol·|I| + floor (converged when ≤ 1).
    pub current_change: f64,
    /// Which update was used next ("linear", "anderson", "restart").
    pub step: &'static str,
}

/// Sees each Born iteration (progress bars, logs). Solvers never print.
pub trait Observer {
    /// Called after every iteration.
    fn iteration(&mut self, _record: &IterationRecord) {}
}

/// An observer that does nothing.
pub struct Silent;
impl Observer for Silent {}

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
    let ne = problem.grid.count;
    let ns = problem.sites();
    let scat = &problem.scattering;
    let coherent = scat.is_coherent();
    let mut report = ScbaReport {
        converged: true,
        iterations: 0,
        history: Vec::new(),
        params: *params,
        hermitian_part: scat.hermitian_part && !scat.phonons.is_empty(),
        warm_start: warm.is_some() && !coherent,
    };
    if coherent {
        let sigma = ScatteringSelfEnergy::zeros(ne, ns);
        let pass = pass(problem, leads, &sigma, true)?;
        return Ok(Solution {
            problem: problem.clone(),
            pass,
            sigma,
            report,
        });
    }
    let mut x = match warm {
        Some(w) if w.sites == ns && w.energies() == ne => w.clone(),
        Some(_) => {
            return Err(SolveError::Invalid(
                "warm-start self-energy does not match this grid and device".into(),
            ));
        }
        None => ScatteringSelfEnergy::zeros(ne, ns),
    };
    let hilbert = report.hermitian_part.then(|| HilbertTransform::new(ne));
    let mut mixer = Mixer::new(params.mixing);
    let mut previous: Option<(f64, f64)> = None;
    loop {
        let p = pass(problem, leads, &x, false)?;
        let (il, ir) = terminal_currents(problem, &p.flows);
        let fx = scat.self_energy(&p.green, ne, hilbert.as_ref());
        // A non-finite Σ0 would poison the next pass (or, with finite but
        // huge values, the mixer); stop here and say where it appeared.
        if let Some((k, site, part)) = first_non_finite(&fx) {
            return Err(SolveError::SelfEnergyNotFinite {
                iteration: report.iterations + 1,
                energy_ev: problem.grid.energy(k),
                cell: site / problem.device.orbitals.max(1),
                part,
            });
        }
        let residual = relative_change(&x, &fx);
        if !(residual.is_finite() && il.is_finite() && ir.is_finite()) {
            return Err(SolveError::Diverged {
                iteration: report.iterations + 1,
                residual,
                current_left_a: il,
                current_right_a: ir,
            });
        }
        let current_change = match previous {
            None => f64::INFINITY,
            Some((pl, pr)) => {
                let rel = |now: f64, before: f64| {
                    (now - before).abs() / (params.tolerance * now.abs() + params.current_floor_a)
                };
                rel(il, pl).max(rel(ir, pr))
            }
        };
        previous = Some((il, ir));
        report.iterations += 1;
        let done = residual <= params.tolerance && current_change <= 1.0;
        let out_of_budget = report.iterations >= params.max_iterations;
        let step = if done || out_of_budget {
            "final"
        } else {
            mixer.update(&mut x, &fx)
        };
        let record = IterationRecord {
            iteration: report.iterations,
            residual,
            current_left_a: il,
            current_right_a: ir,
            current_change,
            step,
        };
        observer.iteration(&record);
        report.history.push(record);
        if done || out_of_budget {
            report.converged = done;
            return Ok(Solution {
                problem: problem.clone(),
                pass: p,
                sigma: x,
                report,
            });
        }
    }
}
