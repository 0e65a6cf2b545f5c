//! The conservation ledger and the lattice power seen from the phonons.
//!
//! Two routes lead to the power the electrons hand to the lattice:
//!
//! - the electron side, P_i = −∫ E j_0,i dE, with j_0 the particle flow
//!   from the scattering bath computed with the Σ0 that went into the last
//!   pass. Because j_1 + j_2 + j_0 = 0 holds at every energy of any pass,
//!   J_E,1 + J_E,2 = Σ_i P_i is an identity, true before convergence too;
//! - the phonon side, mode by mode, from the final Green's functions alone:
//!   P_m = ħω_m (emission rate − absorption rate) with
//!   emission rate  = (g_s/h) Σ_s D_m,s (N_m,s + 1) Σ_k G^n_s(E_k) G^p_s(E_k − ħω_m) ΔE,
//!   absorption rate = (g_s/h) Σ_s D_m,s N_m,s Σ_k G^n_s(E_k) G^p_s(E_k + ħω_m) ΔE,
//!   values outside the grid counted as zero. N_m,s is the occupation at
//!   the lattice temperature of site s when the solve carried a profile
//!   ([`crate::scba::Solution::lattice_temperature_k`]), the bath
//!   occupation otherwise: the same N_m,s that built Σ0.
//!
//! Where the second comes from: rebuild Σ^in_0 and Σ^out_0 of the phonons
//! from the final G (an electron reaches E by emission from E + ħω, with
//! weight N + 1, or by absorption from E − ħω, with weight N; it leaves E
//! likewise into empty states G^p at E ∓ ħω) and put them in
//! −∫ E (Σ^in G^p − Σ^out G^n) dE. Shifting the summation index by the
//! whole number of grid steps of ħω pairs every in-term with an out-term of
//! the same transition; the pair differs only in the energy E at which it
//! is counted, by exactly ħω, which leaves ħω × rate. Elastic dephasing
//! gives Σ^in G^p − Σ^out G^n = d (G^n G^p − G^p G^n) = 0 at every energy,
//! so its phonon-side power is exactly zero. At the fixed point of the Born
//! loop the rebuilt Σ0 equals the one fed in, so Σ_m P_m = Σ_i P_i; before
//! it they differ by an amount set by how far the loop is from its fixed
//! point. The same rebuilt Σ0 conserves particles exactly, so the charge
//! residual I_1 + I_2 also measures the distance from the fixed point.

use super::flow_scale;
use crate::C64;
use crate::scattering::{GreenBlocks, PhononMode, add_sandwich, spectral_into, trace_product_re};
use crate::scba::Solution;
use crate::units::ELEMENTARY_CHARGE;
use rayon::prelude::*;

/// Emission and absorption of one phonon mode, from the final Green's
/// functions.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct ModePower {
    /// ħω_m (eV), on the grid.
    pub energy_ev: f64,
    /// Phonons emitted per second, all sites.
    pub emission_per_s: f64,
    /// Phonons absorbed per second, all sites.
    pub absorption_per_s: f64,
    /// P_m = ħω_m (emission − absorption) (W), positive: lattice heated.
    pub power_w: f64,
}

impl ModePower {
    /// Gross power exchanged with the mode, ħω_m (emission + absorption) (W).
    pub fn gross_w(&self) -> f64 {
        self.energy_ev * ELEMENTARY_CHARGE * (self.emission_per_s + self.absorption_per_s)
    }
}

/// Emission, absorption and lattice power of every phonon mode, computed
/// from the Green's functions of the last pass alone (module docs).
pub fn phonon_side_power(sol: &Solution) -> Vec<ModePower> {
    if let Some(blocks) = &sol.pass.blocks {
        return phonon_side_power_blocks(sol, blocks);
    }
    let p = &sol.problem;
    let g = &sol.pass.green;
    let ns = g.sites;
    let ne = p.grid.count;
    let rate = flow_scale(p) * p.grid.step_ev;
    p.scattering
        .phonons
        .iter()
        .map(|m| {
            let occupation = m.site_occupations(ns, sol.lattice_temperature_k.as_deref());
            let w = m.steps;
            // Each site's sums over the energies in order, neighbouring
            // sites per task in parallel (whole pages of the energy-major
            // rows), then added up site by site in order
            // (the same sums as one loop).
            let sums = |first: usize, out: &mut [(f64, f64)]| {
                for k in 0..ne {
                    let row = k * ns + first;
                    for (c, (e_s, a_s)) in out.iter_mut().enumerate() {
                        let filled = g.filled[row + c];
                        if k >= w {
                            *e_s += filled * g.empty(row - w * ns + c);
                        }
                        if k + w < ne {
                            *a_s += filled * g.empty(row + w * ns + c);
                        }
                    }
                }
            };
            let mut per_site = vec![(0.0, 0.0); ns];
            let at_once = super::cells_per_task(ns);
            per_site
                .par_chunks_mut(at_once)
                .enumerate()
                .for_each(|(t, out)| sums(t * at_once, out));
            let (mut emit, mut absorb) = (0.0, 0.0);
            for (s, (&n, &(e_s, a_s))) in occupation.iter().zip(&per_site).enumerate() {
                let d = m.coupling_ev2[s];
                if d == 0.0 {
                    continue;
                }
                emit += d * (n + 1.0) * e_s;
                absorb += d * n * a_s;
            }
            let (emission_per_s, absorption_per_s) = (emit * rate, absorb * rate);
            ModePower {
                energy_ev: m.energy_ev,
                emission_per_s,
                absorption_per_s,
                power_w: m.energy_ev * ELEMENTARY_CHARGE * (emission_per_s - absorption_per_s),
            }
        })
        .collect()
}

/// [`phonon_side_power`] with sources on b × b blocks: a source M of cell
/// i emits at the rate (N + 1) Tr[M G^n(E) M G^p(E − ħω)] and absorbs at
/// N Tr[M G^n(E) M G^p(E + ħω)] (a per-site strength D: the diagonal
/// element alone), N at the cell's lattice temperature.
fn phonon_side_power_blocks(sol: &Solution, blocks: &GreenBlocks) -> Vec<ModePower> {
    let p = &sol.problem;
    let (ne, b) = (p.grid.count, blocks.orbitals);
    let cells = p.device.cells();
    let rate = flow_scale(p) * p.grid.step_ev;
    let lattice = sol.lattice_temperature_k.as_deref();
    p.scattering
        .phonons
        .iter()
        .map(|m| {
            let occupation = m.cell_occupations(cells, b, lattice);
            let (mut emit, mut absorb) = (0.0, 0.0);
            for (i, &n) in occupation.iter().enumerate() {
                let (e_i, a_i) = cell_exchange(blocks, m, i, ne);
                emit += (n + 1.0) * e_i;
                absorb += n * a_i;
            }
            let (emission_per_s, absorption_per_s) = (emit * rate, absorb * rate);
            ModePower {
                energy_ev: m.energy_ev,
                emission_per_s,
                absorption_per_s,
                power_w: m.energy_ev * ELEMENTARY_CHARGE * (emission_per_s - absorption_per_s),
            }
        })
        .collect()
}

/// Σ_k over sources of cell i of Tr[M G^n(E_k) M G^p(E_k ∓ ħω)]: (the
/// emission sum, the absorption sum), without Bose factors.
fn cell_exchange(blocks: &GreenBlocks, m: &PhononMode, i: usize, ne: usize) -> (f64, f64) {
    let b = blocks.orbitals;
    let bb = b * b;
    let diag = m.coupling_ev2.get(i * b..(i + 1) * b).unwrap_or(&[]);
    let mats = m.coupling_matrices.cell(i);
    let zero = C64::new(0.0, 0.0);
    let (mut left, mut tmp, mut empty) = (vec![zero; bb], vec![zero; bb], vec![zero; bb]);
    let block = |k: usize| k * blocks.per_energy + i * bb;
    let mut trace = |k: usize, kk: usize| -> f64 {
        let (gn, g) = (block(k), block(kk));
        let gn = &blocks.filled[gn..gn + bb];
        spectral_into(&blocks.retarded[g..g + bb], b, &mut empty);
        for (e, f) in empty.iter_mut().zip(&blocks.filled[g..g + bb]) {
            *e -= f;
        }
        let mut t: f64 = diag
            .iter()
            .enumerate()
            .map(|(o, d)| d * (gn[o * b + o] * empty[o * b + o]).re)
            .sum();
        for mm in mats {
            left.fill(zero);
            add_sandwich(mm, gn, 1.0, &mut left, &mut tmp);
            t += trace_product_re(&left, &empty, b);
        }
        t
    };
    let w = m.steps;
    let (mut e_s, mut a_s) = (0.0, 0.0);
    for k in 0..ne {
        if k >= w {
            e_s += trace(k, k - w);
        }
        if k + w < ne {
            a_s += trace(k, k + w);
        }
    }
    (e_s, a_s)
}

/// What a ledger entry compares and relative to what; the same words go
/// into summary.json and the report.
pub const LEDGER_COMPARES: [(&str, &str); 5] = [
    (
        "charge",
        "I_1 + I_2 (current into the device from both contacts, plus Σ_p I_p of the \
         contacts attached along the channel), relative to max(|I_1|, the solver's current \
         floor): zero at the fixed point of the Born loop",
    ),
    (
        "energy",
        "J_E,1 + J_E,2 (+ Σ_p J_E,p) − Σ_i P_i (energy loss of leads and attached contacts \
         against the electron-side lattice power), relative to the gross energy exchange \
         Σ_k |E_k| (inflow + outflow of leads, contacts and bath) e ΔE: an identity of every \
         pass, not a convergence check",
    ),
    (
        "lattice",
        "Σ_m P_m − Σ_i P_i (phonon-side lattice power from the final Green's functions \
         against the electron-side one from the Σ0 fed into the last pass), relative to \
         the power scale",
    ),
    (
        "leads_lattice",
        "J_E,1 + J_E,2 (+ Σ_p J_E,p) − Σ_m P_m (energy loss of leads and attached contacts \
         against the phonon-side lattice power), relative to the power scale",
    ),
    (
        "heat",
        "Σ_i P_i − (P_el + J_Q,1 + J_Q,2 + Σ_p J_Q,p), P_el = I·V − Σ_p (µ_p − µ_2) I_p/e \
         (I·V for two terminals), relative to the gross heat exchange \
         Σ_k Σ_α |E_k − µ_α| g_α e ΔE + |P_el| (g_α: inflow plus outflow of lead or \
         attached contact α)",
    ),
];

/// The power scale of the lattice entries, in words.
pub const POWER_SCALE: &str = "gross phonon exchange Σ_m ħω_m (emission + absorption) plus \
     the gross heat exchange of the leads Σ_k (|E_k − µ_1| g_1 + |E_k − µ_2| g_2) e ΔE + |I·V|";

/// Conservation ledger: each entry an absolute residual (A or W), the scale
/// it is measured against and the ratio. [`LEDGER_COMPARES`] says in words
/// what each entry compares.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct Ledger {
    /// I_1 + I_2 (A).
    pub charge_a: f64,
    /// max(|I_1|, current floor of the solver settings) (A).
    pub charge_scale_a: f64,
    /// |I_1 + I_2| / `charge_scale_a`.
    pub charge_relative: f64,
    /// J_E,1 + J_E,2 − Σ_i P_i (W). An identity: j_1 + j_2 + j_0 = 0 holds
    /// at every energy of every pass, so this stays at rounding level even
    /// far from convergence. Kept as a check of the bookkeeping, not of the
    /// physics; it does not enter [`Ledger::worst_relative`].
    pub energy_w: f64,
    /// |energy_w| / Σ_k |E_k| (g_1 + g_2 + g_0) e ΔE (gross exchange with
    /// leads and bath).
    pub energy_relative: f64,
    /// Σ_m P_m − Σ_i P_i (W): phonon-side against electron-side lattice power.
    pub lattice_w: f64,
    /// |lattice_w| / `power_scale_w`.
    pub lattice_relative: f64,
    /// J_E,1 + J_E,2 − Σ_m P_m (W): the leads' energy loss against the
    /// phonon-side lattice power.
    pub leads_lattice_w: f64,
    /// |leads_lattice_w| / `power_scale_w`.
    pub leads_lattice_relative: f64,
    /// Scale of the lattice entries (W): Σ_m ħω_m (emission + absorption)
    /// plus the gross heat exchange of the leads (see [`POWER_SCALE`]).
    pub power_scale_w: f64,
    /// Σ_i P_i − (I·V + J_Q,1 + J_Q,2) (W).
    pub heat_w: f64,
    /// |heat_w| / (Σ_k (|E_k − µ_1| g_1 + |E_k − µ_2| g_2) e ΔE + |I V|).
    pub heat_relative: f64,
}

impl Ledger {
    /// Largest relative residual of the entries that test the physics:
    /// charge, lattice, leads_lattice and heat (the energy identity is left
    /// out).
    pub fn worst_relative(&self) -> f64 {
        self.charge_relative
            .max(self.lattice_relative)
            .max(self.leads_lattice_relative)
            .max(self.heat_relative)
    }

    /// (name, relative residual) of every entry, in the order of
    /// [`LEDGER_COMPARES`].
    pub fn relative_entries(&self) -> [(&'static str, f64); 5] {
        [
            ("charge", self.charge_relative),
            ("energy", self.energy_relative),
            ("lattice", self.lattice_relative),
            ("leads_lattice", self.leads_lattice_relative),
            ("heat", self.heat_relative),
        ]
    }
}

/// |x| / scale, or |x| when the scale is zero.
pub(super) fn relative(x: f64, scale: f64) -> f64 {
    if scale > 0.0 {
        x.abs() / scale
    } else {
        x.abs()
    }
}
