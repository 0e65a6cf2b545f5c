//! Observables of a solved operating point (physics conventions of the
//! crate manual):
//!
//! - particle flow per unit energy from contact α into the device,
//!   j_α(E) = (g_s/h) Tr[Σ^in_α A − Γ_α G^n]; from the scattering bath at
//!   each orbital site j_0 = (g_s/h)(Σ^in_0 A − Γ0 G^n);
//! - electric current into the device I_α = −e ∫ j_α dE, energy current
//!   J_E,α = ∫ E j_α dE, heat current J_Q,α = ∫ (E − µ_α) j_α dE;
//! - lattice power at cell i, P_i = −∫ E j_0,i dE (positive: heated), per
//!   orbital site for a lattice heat-transport model
//!   ([`lattice_power_per_site`]), and the same power seen from the
//!   phonons, mode by mode (see [`ModePower`]);
//! - the conservation ledger; the local Fermi level by density matching;
//!   the energy-resolved bond current;
//! - the occupation map f(x, E) = Σ_o G^n_ii / Σ_o A_ii per cell;
//! - the levels µ₊, µ₋ to which the right- and the left-moving electrons
//!   are filled, where the device is locally uniform.
//!
//! - every one of these split by channel (a named group of the orbitals of
//!   a cell), in [`channels`].
//!
//! All energy integrals are plain sums Σ_k g(E_k) ΔE.

pub mod channels;
pub mod contacts;
mod fermi_level;
mod ledger;
mod movers;
mod occupation;
pub use fermi_level::{
    FermiLevelStatus, FermiMatch, FermiTable, LocalFermiLevel, cell_lattice_temperatures,
    fermi_search_interval, fit_fermi_level_and_temperature, lattice_temperature,
    local_electron_temperatures, local_fermi_levels, match_fermi_level_checked,
    match_fermi_level_in,
};
pub use ledger::{LEDGER_COMPARES, Ledger, ModePower, POWER_SCALE, phonon_side_power};
pub use movers::{
    MoverLevels, MoverStatus, UNIFORM_TOLERANCE_EV, mover_levels, mover_levels_with, uniform_pairs,
};
pub use occupation::{OCCUPATION_THRESHOLD, Occupation, occupation_map};

use crate::model::Problem;
use crate::scba::Solution;
use crate::units::{ELEMENTARY_CHARGE, PLANCK_EV_S};
use ledger::relative;

/// Particle flows per unit energy (1/(eV s)) for each energy.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct Spectrum {
    /// Energies (eV).
    pub energy_ev: Vec<f64>,
    /// j_1(E): electrons per second per eV entering from the left lead.
    pub flow_left: Vec<f64>,
    /// j_2(E): from the right lead.
    pub flow_right: Vec<f64>,
    /// j_0(E) summed over sites: from the scattering bath.
    pub flow_bath: Vec<f64>,
    /// Coherent transmission T(E); `None` with scattering.
    pub transmission: Option<Vec<f64>>,
}

/// Per-cell profile along the device.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct SiteProfile {
    /// Cell positions (nm).
    pub x_nm: Vec<f64>,
    /// Local band bottom (eV).
    pub band_edge_ev: Vec<f64>,
    /// Local Fermi level µ_i (eV); NaN where `fermi_level_status` is not
    /// [`FermiLevelStatus::Matched`] (never clamped to the search interval).
    pub fermi_level_ev: Vec<f64>,
    /// How the density match of each cell ended.
    pub fermi_level_status: Vec<FermiLevelStatus>,
    /// The interval searched for µ_i (eV): the energy grid widened by
    /// 60 k_B T on each side.
    pub fermi_level_interval_ev: (f64, f64),
    /// Lattice power P_i (W), positive = lattice heated.
    pub lattice_power_w: Vec<f64>,
    /// Electrons per nm along the device (spin included).
    pub electron_density_per_nm: Vec<f64>,
    /// Drop of the local Fermi level to the next cell, (µ_i − µ_i+1)/e (V),
    /// positive where the level falls along +x; 0 in the last cell, which
    /// has no next cell inside the device. The entries add up to the drop
    /// across the device, (µ_first − µ_last)/e; the drops into the contacts
    /// are [`Observables::contact_drop_left_v`] and
    /// [`Observables::contact_drop_right_v`].
    pub voltage_drop_v: Vec<f64>,
    /// Local resistance R_i = (µ_i − µ_i+1)/(−e I) (Ω), 0 in the last cell;
    /// with the resistances of the two contact drops, the sum is V/I. NaN
    /// at I = 0.
    pub resistance_ohm: Vec<f64>,
    /// Local electron temperature (K) when asked for.
    pub electron_temperature_k: Option<Vec<f64>>,
    /// The right- and left-movers' levels when asked for.
    pub movers: Option<MoverLevels>,
}

/// What to compute besides the always-present observables.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct ObserveOptions {
    /// Fit a local electron temperature per cell.
    pub electron_temperature: bool,
    /// Find the right- and left-movers' levels (one extra kernel pass
    /// with full blocks).
    pub movers: bool,
    /// With `movers`, also keep the movers' fillings' maps f₊, f₋
    /// (2 × cells × energies numbers, which no result file holds).
    pub mover_maps: bool,
}

/// Every scalar and profile of an operating point.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct Observables {
    /// V = V_1 − V_2 (V).
    pub voltage_v: f64,
    /// I = I_1 (A).
    pub current_a: f64,
    /// I_1 (A).
    pub current_left_a: f64,
    /// I_2 (A).
    pub current_right_a: f64,
    /// J_E,1 (W).
    pub energy_current_left_w: f64,
    /// J_E,2 (W).
    pub energy_current_right_w: f64,
    /// J_Q,1: heat current out of the left contact into the device (W).
    pub heat_current_left_w: f64,
    /// J_Q,2 (W).
    pub heat_current_right_w: f64,
    /// Σ_i P_i (W): lattice power from the electron side (the bath flow of
    /// the last pass).
    pub lattice_power_w: f64,
    /// Σ_m P_m (W): lattice power from the phonon side (emission minus
    /// absorption from the final Green's functions); equals
    /// `lattice_power_w` at the fixed point of the Born loop.
    pub lattice_power_phonon_side_w: f64,
    /// Emission, absorption and power of each phonon mode.
    pub phonon_modes: Vec<ModePower>,
    /// Power delivered by the contacts to the device, I·V (W); with
    /// attached contacts −Σ_α µ_α I_α/e over all of them, which is
    /// I·V − Σ_p (µ_p − µ_2) I_p/e.
    pub electrical_power_w: f64,
    /// Conductance I/V when V ≠ 0 (S).
    pub conductance_s: Option<f64>,
    /// Drop of the Fermi level from the left contact into the first cell
    /// (µ_1 − µ_first)/e (V).
    pub contact_drop_left_v: f64,
    /// Drop of the Fermi level from the last cell into the right contact
    /// (µ_last − µ_2)/e (V). With [`Observables::contact_drop_left_v`] and
    /// the per-cell drops it adds up to (µ_1 − µ_2)/e = −V.
    pub contact_drop_right_v: f64,
    /// Conservation ledger.
    pub ledger: Ledger,
    /// Profiles per cell.
    pub sites: SiteProfile,
    /// Energy-resolved flows.
    pub spectrum: Spectrum,
    /// Results split by channel, when the case names channels (filled by
    /// [`channels::observe_channels`]; `None` from [`observe`]).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub channels: Option<channels::ChannelObservables>,
    /// The contacts attached along the channel: levels and currents
    /// (empty for a two-terminal device).
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub contacts: Vec<contacts::ContactReading>,
}

/// Environment variable that makes [`timed`] print the wall time of each
/// phase of the work around the Born loop to standard error.
pub const PHASE_TIMES_ENV: &str = "QHEAT_PHASE_TIMES";

/// Run `f`, and when [`PHASE_TIMES_ENV`] is set (to anything but empty or
/// `0`) print `phase NAME: S s` with its wall time to standard error. A
/// coarse profile of a solve's phases without a profiler; without the
/// variable it costs one look-up of the environment per phase.
pub fn timed<T>(phase: &str, f: impl FnOnce() -> T) -> T {
    static ON: std::sync::OnceLock<bool> = std::sync::OnceLock::new();
    let on =
        *ON.get_or_init(|| std::env::var(PHASE_TIMES_ENV).is_ok_and(|v| !v.is_empty() && v != "0"));
    if !on {
        return f();
    }
    let start = std::time::Instant::now();
    let out = f();
    eprintln!("phase {phase}: {:.3} s", start.elapsed().as_secs_f64());
    out
}

/// g_s/h in 1/(eV s).
pub fn flow_scale(problem: &Problem) -> f64 {
    problem.spin_degeneracy / PLANCK_EV_S
}

/// Bath particle flow per orbital site j_0 / (g_s/h) at energy index k.
/// With Σ0 on b × b blocks, the diagonal element s of
/// Σ^in_0 A − Γ0 G^n of its cell: summed over the orbitals of a cell it is
/// the trace, the cell's bath flow.
fn bath_trace(sol: &Solution, k: usize, s: usize) -> f64 {
    if let Some(b) = sol.sigma.blocks {
        return block_bath_terms(sol, k, s, b).0;
    }
    let idx = k * sol.pass.green.sites + s;
    let sin = sol.sigma.inscatter[idx];
    let gamma = sol.sigma.gamma(idx);
    sin * sol.pass.green.spectral(idx) - gamma * sol.pass.green.filled[idx]
}

/// Inflow plus outflow of the bath at one orbital site, Σ^in_0 A + Γ0 G^n
/// over g_s/h (the gross exchange).
fn bath_gross(sol: &Solution, k: usize, s: usize) -> f64 {
    if let Some(b) = sol.sigma.blocks {
        return block_bath_terms(sol, k, s, b).1;
    }
    let idx = k * sol.pass.green.sites + s;
    (sol.sigma.inscatter[idx] * sol.pass.green.spectral(idx)).abs()
        + (sol.sigma.gamma(idx) * sol.pass.green.filled[idx]).abs()
}

/// (Re[Σ^in_0 A − Γ0 G^n]_ss, |Re[Σ^in_0 A]_ss| + |Re[Γ0 G^n]_ss|) for
/// orbital site s = i·b + o at energy k, from the blocks of cell i.
fn block_bath_terms(sol: &Solution, k: usize, s: usize, b: usize) -> (f64, f64) {
    let (i, o) = (s / b, s % b);
    let bb = b * b;
    let base = k * sol.sigma.sites + i * bb;
    let blocks = sol
        .pass
        .blocks
        .as_ref()
        .expect("diagonal blocks of G with a block Σ0");
    let sig = &sol.sigma.retarded[base..base + bb];
    let sin = &sol.sigma.inscatter[base..base + bb];
    let g = &blocks.retarded[base..base + bb];
    let gn = &blocks.filled[base..base + bb];
    let hermitian = |p: &[f64], r: usize, c: usize| match r.cmp(&c) {
        std::cmp::Ordering::Equal => crate::C64::new(p[r * b + c], 0.0),
        std::cmp::Ordering::Less => crate::C64::new(p[r * b + c], p[c * b + r]),
        std::cmp::Ordering::Greater => crate::C64::new(p[c * b + r], -p[r * b + c]),
    };
    let (mut inflow, mut outflow) = (0.0, 0.0);
    for c in 0..b {
        let a = (g[c * b + o] - g[o * b + c].conj()) * crate::C64::new(0.0, 1.0);
        // Γ0_oc = i(Σ^r_oc − conj Σ^r_co)
        let gamma = (sig[o * b + c] - sig[c * b + o].conj()) * crate::C64::new(0.0, 1.0);
        inflow += (hermitian(sin, o, c) * a).re;
        outflow += (gamma * gn[c * b + o]).re;
    }
    (inflow - outflow, inflow.abs() + outflow.abs())
}

/// Lattice power per orbital site (W): P_s = −∫ E j_0,s dE, positive where
/// the electrons heat the lattice. This is what a model of the lattice's own
/// heat transport takes as its source, one value per orbital site (index
/// s = i·b + o); summing the orbitals of each cell gives [`lattice_power`],
/// so Σ_s P_s = Σ_i P_i up to rounding.
pub fn lattice_power_per_site(sol: &Solution) -> Vec<f64> {
    use rayon::prelude::*;
    let p = &sol.problem;
    let scale = -ELEMENTARY_CHARGE * flow_scale(p) * p.grid.step_ev;
    (0..p.sites())
        .into_par_iter()
        .map(|s| {
            let acc: f64 = (0..p.grid.count)
                .map(|k| p.grid.energy(k) * bath_trace(sol, k, s))
                .sum();
            acc * scale
        })
        .collect()
}

/// Lattice power per cell (W): −∫ E j_0,i dE, orbitals of a cell summed
/// (the cells in parallel, up to 256 neighbouring cells at a time so that each
/// energy-major row is read in whole pages; each cell's sum runs over the
/// energies in order).
pub fn lattice_power(sol: &Solution) -> Vec<f64> {
    let p = &sol.problem;
    let b = p.device.orbitals;
    let scale = -ELEMENTARY_CHARGE * flow_scale(p) * p.grid.step_ev;
    per_cell_sums(p.device.cells(), |first, acc| {
        for k in 0..p.grid.count {
            let e = p.grid.energy(k);
            for (c, a) in acc.iter_mut().enumerate() {
                let i = first + c;
                let t: f64 = (0..b).map(|o| bath_trace(sol, k, i * b + o)).sum();
                *a += e * t;
            }
        }
        for a in acc.iter_mut() {
            *a *= scale;
        }
    })
}

/// Cells (or sites) one task of a per-cell pass over the energy-major
/// arrays takes, out of `n`: at most 256, so that each energy's row is read
/// a whole page at a time (one number per cache line, or a page for 16
/// numbers, was what such passes waited on at 10⁴ cells), and at least 16,
/// with about 32 tasks for a few thousand cells to keep every thread busy.
pub(crate) fn cells_per_task(n: usize) -> usize {
    (n / 32).clamp(16, 256)
}

/// One number per cell, `n` cells, [`cells_per_task`] at a time in
/// parallel: `fill(first, acc)` receives zeros for cells `first..` and
/// leaves each cell's number in them.
pub(crate) fn per_cell_sums(n: usize, fill: impl Fn(usize, &mut [f64]) + Sync) -> Vec<f64> {
    use rayon::prelude::*;
    let mut out = vec![0.0; n];
    let at_once = cells_per_task(n);
    out.par_chunks_mut(at_once)
        .enumerate()
        .for_each(|(t, acc)| fill(t * at_once, acc));
    out
}

/// The energy-resolved bond current read straight from a solution, value
/// by value: what [`bond_current_map`] holds, without storing it.
#[derive(Clone, Copy)]
pub struct BondCurrent<'a> {
    bond: &'a [f64],
    /// Bonds (cells − 1).
    pub pairs: usize,
    /// Energies of the grid.
    pub energies: usize,
    scale: f64,
}

impl<'a> BondCurrent<'a> {
    /// The bond current of `sol`.
    pub fn of(sol: &'a Solution) -> Self {
        let p = &sol.problem;
        Self {
            bond: &sol.pass.bond,
            pairs: p.device.cells().saturating_sub(1),
            energies: p.grid.count,
            scale: ELEMENTARY_CHARGE * flow_scale(p),
        }
    }

    /// The current between cells i and i + 1 at energy index k (A/eV).
    pub fn value(&self, i: usize, k: usize) -> f64 {
        self.bond[k * self.pairs + i] * self.scale
    }

    /// Every bond's current at energy index k, in the order of the bonds.
    pub fn at_energy(&self, k: usize) -> impl Iterator<Item = f64> + '_ {
        let scale = self.scale;
        self.bond[k * self.pairs..(k + 1) * self.pairs]
            .iter()
            .map(move |b| b * scale)
    }
}

/// Energy-resolved bond current as an electron flow per unit energy times e
/// (A/eV), positive for electrons moving to +x: shape (cells − 1) × energies.
pub fn bond_current_map(sol: &Solution) -> ndarray::Array2<f64> {
    let bond = BondCurrent::of(sol);
    let (pairs, ne) = (bond.pairs, bond.energies);
    let mut map = ndarray::Array2::zeros((pairs, ne));
    if let Some(out) = map.as_slice_mut() {
        par_cell_rows(out, ne, |i, row| {
            for (k, v) in row.iter_mut().enumerate() {
                *v = bond.value(i, k);
            }
        });
    }
    map
}

/// Fill the rows of a row-major (rows × `ne`) map in parallel, a few rows
/// per task: the sources are energy-major, so each task reads a few
/// neighbouring numbers of every energy's row rather than one.
pub(crate) fn par_cell_rows(out: &mut [f64], ne: usize, fill: impl Fn(usize, &mut [f64]) + Sync) {
    use rayon::prelude::*;
    const ROWS_AT_ONCE: usize = 16;
    if ne == 0 {
        return;
    }
    out.par_chunks_mut(ROWS_AT_ONCE * ne)
        .enumerate()
        .for_each(|(t, rows)| {
            for (r, row) in rows.chunks_mut(ne).enumerate() {
                fill(t * ROWS_AT_ONCE + r, row);
            }
        });
}

/// Compute every observable of a solution.
pub fn observe(sol: &Solution) -> Observables {
    observe_with(sol, &ObserveOptions::default())
}

/// [`observe`] with options.
pub fn observe_with(sol: &Solution, options: &ObserveOptions) -> Observables {
    let p = &sol.problem;
    let grid = &p.grid;
    let de = grid.step_ev;
    let e_c = ELEMENTARY_CHARGE;
    let (mu1, mu2) = (p.left.fermi_level_ev, p.right.fermi_level_ev);
    let (spectrum, [n1, n2, e1, e2, gross_e, gross_q]) = timed("flow sums", || flow_sums(sol));
    let to_amp = -e_c * de;
    let to_watt = e_c * de;
    let current_left_a = n1 * to_amp;
    let current_right_a = n2 * to_amp;
    let energy_current_left_w = e1 * to_watt;
    let energy_current_right_w = e2 * to_watt;
    let heat_current_left_w = energy_current_left_w - mu1 * n1 * to_watt;
    let heat_current_right_w = energy_current_right_w - mu2 * n2 * to_watt;
    let lattice = timed("lattice power", || lattice_power(sol));
    let lattice_power_w: f64 = lattice.iter().sum();
    let voltage_v = p.voltage_v();
    // The attached contacts' sums (all zero without them).
    let readings = timed("contacts", || contacts::contact_readings(sol));
    let [c_i, c_e, c_q, c_p, c_gross_q, c_gross_e] = contacts::ledger_terms(sol, &readings);
    let electrical_power_w = current_left_a * voltage_v + c_p;
    let charge_a = current_left_a + current_right_a + c_i;
    let energy_w = energy_current_left_w + energy_current_right_w + c_e - lattice_power_w;
    let heat_w =
        lattice_power_w - (electrical_power_w + heat_current_left_w + heat_current_right_w + c_q);
    let phonon_modes = timed("phonon-side power", || phonon_side_power(sol));
    let lattice_power_phonon_side_w: f64 = phonon_modes.iter().map(|m| m.power_w).sum();
    let gross_phonon_w: f64 = phonon_modes.iter().map(ModePower::gross_w).sum();
    let heat_scale_w = gross_q * e_c * de + c_gross_q + electrical_power_w.abs();
    let power_scale_w = gross_phonon_w + heat_scale_w;
    let charge_scale_a = current_left_a.abs().max(sol.report.params.current_floor_a);
    let lattice_w = lattice_power_phonon_side_w - lattice_power_w;
    let leads_lattice_w =
        energy_current_left_w + energy_current_right_w + c_e - lattice_power_phonon_side_w;
    let ledger = Ledger {
        charge_a,
        charge_scale_a,
        charge_relative: relative(charge_a, charge_scale_a),
        energy_w,
        energy_relative: relative(energy_w, gross_e * e_c * de + c_gross_e),
        lattice_w,
        lattice_relative: relative(lattice_w, power_scale_w),
        leads_lattice_w,
        leads_lattice_relative: relative(leads_lattice_w, power_scale_w),
        power_scale_w,
        heat_w,
        heat_relative: relative(heat_w, heat_scale_w),
    };

    let sites = site_profile(sol, options, lattice, current_left_a);
    let mu = &sites.fermi_level_ev;
    let contact_drop_left_v = mu1 - mu[0];
    let contact_drop_right_v = mu[mu.len() - 1] - mu2;
    let conductance_s = (voltage_v != 0.0).then(|| current_left_a / voltage_v);
    Observables {
        voltage_v,
        current_a: current_left_a,
        current_left_a,
        current_right_a,
        energy_current_left_w,
        energy_current_right_w,
        heat_current_left_w,
        heat_current_right_w,
        lattice_power_w,
        lattice_power_phonon_side_w,
        phonon_modes,
        electrical_power_w,
        conductance_s,
        contact_drop_left_v,
        contact_drop_right_v,
        ledger,
        sites,
        spectrum,
        channels: None,
        contacts: readings,
    }
}

/// The per-cell profiles: local Fermi levels and their drops, lattice
/// power (`lattice`, W per cell), density, local resistance at the current
/// I_1 = `current_left_a`, and what `options` asks for besides.
fn site_profile(
    sol: &Solution,
    options: &ObserveOptions,
    lattice: Vec<f64>,
    current_left_a: f64,
) -> SiteProfile {
    let p = &sol.problem;
    let levels = timed("local Fermi levels", || local_fermi_levels(sol));
    let n = p.device.cells();
    let mu = &levels.fermi_level_ev;
    let voltage_drop_v: Vec<f64> = (0..n)
        .map(|i| if i + 1 < n { mu[i] - mu[i + 1] } else { 0.0 })
        .collect();
    SiteProfile {
        x_nm: p.device.x_nm.clone(),
        band_edge_ev: p.device.band_edge_ev.clone(),
        fermi_level_ev: levels.fermi_level_ev,
        fermi_level_status: levels.status,
        fermi_level_interval_ev: levels.interval_ev,
        lattice_power_w: lattice,
        electron_density_per_nm: levels
            .electrons
            .iter()
            .map(|e| e / p.device.spacing_nm)
            .collect(),
        resistance_ohm: voltage_drop_v
            .iter()
            .map(|d| {
                if current_left_a != 0.0 {
                    d / -current_left_a
                } else {
                    f64::NAN
                }
            })
            .collect(),
        voltage_drop_v,
        electron_temperature_k: options
            .electron_temperature
            .then(|| timed("electron temperatures", || local_electron_temperatures(sol))),
        movers: options.movers.then(|| {
            timed("movers' levels", || {
                mover_levels_with(sol, options.mover_maps)
            })
        }),
    }
}

/// The energy-resolved flows and their sums over the grid (without ΔE):
/// [Σ j_1, Σ j_2, Σ E j_1, Σ E j_2, the gross energy exchange, the gross
/// heat exchange of the leads].
fn flow_sums(sol: &Solution) -> (Spectrum, [f64; 6]) {
    use rayon::prelude::*;
    let p = &sol.problem;
    let grid = &p.grid;
    let ns = p.sites();
    let js = flow_scale(p);
    let (mu1, mu2) = (p.left.fermi_level_ev, p.right.fermi_level_ev);
    let coherent = p.scattering.is_coherent();
    let mut spectrum = Spectrum {
        energy_ev: grid.energies(),
        flow_left: Vec::with_capacity(grid.count),
        flow_right: Vec::with_capacity(grid.count),
        flow_bath: Vec::with_capacity(grid.count),
        transmission: coherent.then(|| sol.pass.flows.iter().map(|f| f.transmission).collect()),
    };
    // The bath's sums over the sites of each energy (in site order), the
    // energies in parallel; the sums over energies below stay in order.
    let bath: Vec<(f64, f64)> = (0..sol.pass.flows.len())
        .into_par_iter()
        .map(|k| {
            let net = (0..ns).map(|s| bath_trace(sol, k, s)).sum::<f64>();
            let gross = (0..ns).map(|s| bath_gross(sol, k, s)).sum::<f64>();
            (net, gross)
        })
        .collect();
    let (mut n1, mut n2, mut e1, mut e2) = (0.0, 0.0, 0.0, 0.0);
    let (mut gross_e, mut gross_q) = (0.0, 0.0);
    for (k, (f, &(net, gross))) in sol.pass.flows.iter().zip(&bath).enumerate() {
        let e = grid.energy(k);
        let j1 = js * f.left;
        let j2 = js * f.right;
        let j0: f64 = js * net;
        let j0_gross: f64 = js * gross;
        let g1 = js * f.left_gross;
        let g2 = js * f.right_gross;
        spectrum.flow_left.push(j1);
        spectrum.flow_right.push(j2);
        spectrum.flow_bath.push(j0);
        n1 += j1;
        n2 += j2;
        e1 += e * j1;
        e2 += e * j2;
        gross_e += e.abs() * (g1 + g2 + j0_gross);
        gross_q += (e - mu1).abs() * g1 + (e - mu2).abs() * g2;
    }
    (spectrum, [n1, n2, e1, e2, gross_e, gross_q])
}
