//! Results split by channel (see [`crate::device::Channels`]).
//!
//! With P_c the projector on the orbitals of channel c (Σ_c P_c = 1):
//!
//! - flow from lead α into the device in channel c, per unit energy:
//!   j_α,c(E) = (g_s/h) Re Tr[P_c (Σ^in_α A − Γ_α G^n)] on the lead's end
//!   block. The real part is taken because the trace of a product with a
//!   projector need not be real when the lead mixes channels; the imaginary
//!   parts cancel in the sum over channels, so Σ_c j_α,c = j_α exactly.
//!   Currents I_α,c = −e ∫ j_α,c dE and heat currents
//!   J_Q,α,c = ∫ (E − µ_α) j_α,c dE follow as for the totals.
//! - coherent transmission of channel c, projected at the receiving lead:
//!   with electrons injected from the left lead alone (Σ^in_1 = Γ_1,
//!   Σ^in_2 = 0) the filled function at the right end block is
//!   X = G^r_N1 Γ_1 G^a_1N, and T_c(E) = Re Tr[P_c Γ_2 X]. It is the part of
//!   the flux leaving into the right lead that arrives in channel c, and
//!   Σ_c T_c = Tr[Γ_2 G^r_N1 Γ_1 G^a_1N] = T(E).
//! - electrons per cell in channel c, g_s Σ_k Σ_{o∈c} G^n_oo ΔE/2π, and the
//!   channel's local Fermi level, matched with its own spectral function
//!   and filled function: Σ_k Σ_{o∈c} G^n_oo = Σ_k Σ_{o∈c} A_oo f(E_k; µ, T)
//!   (NaN with a status where the channel has no states or no match).
//! - the channel's share of the lattice power of a cell, −∫ E j_0 dE over
//!   the orbital sites of the channel (the bath is diagonal per orbital
//!   site, so the shares add up to the cell's power).
//! - the spin polarisation of the current when there are exactly two
//!   channels a, b: (I_a − I_b)/(I_a + I_b), with I_c the current from the
//!   left lead.

use super::fermi_level::{FermiLevelStatus, cell_lattice_temperatures, match_fermi_level_checked};
use super::{flow_scale, lattice_power_per_site};
use crate::C64;
use crate::device::Channels;
use crate::rgf::{self, EnergyInput, EnergyOutput, FullBlocks, Workspace};
use crate::scba::{LeadTable, Solution, SolveError};
use crate::units::ELEMENTARY_CHARGE;
use faer::Mat;
use rayon::prelude::*;

/// Every result of an operating point split by channel. Vectors over
/// channels are in the order of [`Channels::list`].
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct ChannelObservables {
    /// Channel names.
    pub names: Vec<String>,
    /// Orbitals of a cell each channel holds.
    pub orbitals: Vec<Vec<usize>>,
    /// Current from the left contact into the device per channel, I_1,c (A).
    pub current_left_a: Vec<f64>,
    /// The same from the right contact, I_2,c (A).
    pub current_right_a: Vec<f64>,
    /// Heat current out of the left contact per channel, J_Q,1,c (W).
    pub heat_current_left_w: Vec<f64>,
    /// Heat current out of the right contact per channel, J_Q,2,c (W).
    pub heat_current_right_w: Vec<f64>,
    /// Lattice power per channel, all cells (W).
    pub lattice_power_w: Vec<f64>,
    /// Spin polarisation (I_a − I_b)/(I_a + I_b) of the left-contact current
    /// when there are exactly two channels (NaN at zero current).
    pub polarization: Option<f64>,
    /// j_1,c(E): particle flow per unit energy from the left lead,
    /// `[channel][energy]` (1/(eV s)).
    pub flow_left: Vec<Vec<f64>>,
    /// j_2,c(E) from the right lead, `[channel][energy]` (1/(eV s)).
    pub flow_right: Vec<Vec<f64>>,
    /// Coherent transmission per channel, projected at the right lead,
    /// `[channel][energy]`; `None` with scattering.
    pub transmission: Option<Vec<Vec<f64>>>,
    /// Electrons per cell, `[channel][cell]`.
    pub electrons: Vec<Vec<f64>>,
    /// The channel's local Fermi level per cell (eV), `[channel][cell]`; NaN
    /// where the status is not matched.
    pub fermi_level_ev: Vec<Vec<f64>>,
    /// How each match ended, `[channel][cell]`.
    pub fermi_level_status: Vec<Vec<FermiLevelStatus>>,
    /// Lattice power per cell, `[channel][cell]` (W).
    pub cell_lattice_power_w: Vec<Vec<f64>>,
}

/// Γ = i(Σ − Σ†) of a lead self-energy block.
fn broadening(sigma: &Mat<C64>) -> Mat<C64> {
    let b = sigma.nrows();
    Mat::from_fn(b, b, |r, c| {
        let d = sigma[(r, c)] - sigma[(c, r)].conj();
        C64::new(-d.im, d.re)
    })
}

/// f·M.
fn scaled(m: &Mat<C64>, f: f64) -> Mat<C64> {
    Mat::from_fn(m.nrows(), m.ncols(), |r, c| m[(r, c)] * f)
}

/// Re Tr[P_c M] for every channel c: the diagonal of M summed over the
/// orbitals of each channel.
fn channel_traces(m: &Mat<C64>, channels: &Channels) -> Vec<f64> {
    channels
        .list
        .iter()
        .map(|c| c.orbitals.iter().map(|&o| m[(o, o)].re).sum())
        .collect()
}

/// Σ^in A − Γ G^n on an end block, with Σ^in = Γ f.
fn lead_flow_matrix(gamma: &Mat<C64>, f: f64, g: &Mat<C64>, gn: &Mat<C64>) -> Mat<C64> {
    let b = g.nrows();
    let a = Mat::from_fn(b, b, |r, c| {
        let d = g[(r, c)] - g[(c, r)].conj();
        C64::new(-d.im, d.re)
    });
    let sin = scaled(gamma, f);
    &sin * &a - gamma * gn
}

/// Channel traces at one energy: flows from the left and right leads and,
/// when asked, the transmission per channel (all over g_s/h).
type EnergyTraces = (Vec<f64>, Vec<f64>, Option<Vec<f64>>);

/// The end-block traces at energy index `k`, from an RGF pass with full
/// blocks under the solution's own scattering self-energy.
fn energy_traces(
    sol: &Solution,
    leads: &LeadTable,
    channels: &Channels,
    k: usize,
    ws: &mut Workspace,
) -> Result<EnergyTraces, SolveError> {
    let p = &sol.problem;
    let dev = &p.device;
    let (n, b) = (dev.cells(), dev.orbitals);
    let ns = n * b;
    let e = p.grid.energy(k);
    let (sl, sr) = (&leads.left[k], &leads.right[k]);
    let (g1, g2) = (broadening(sl), broadening(sr));
    let (f1, f2) = (p.left.occupation(e), p.right.occupation(e));
    let in1 = scaled(&g1, f1);
    let in2 = scaled(&g2, f2);
    let mut retarded = vec![C64::new(0.0, 0.0); ns];
    let mut filled = vec![0.0; ns];
    let mut bond = vec![0.0; n.saturating_sub(1)];
    let mut full = FullBlocks::default();
    let mut run = |inl: &Mat<C64>, inr: &Mat<C64>, full: &mut FullBlocks| {
        let input = EnergyInput {
            energy_ev: e,
            onsite: &dev.onsite,
            coupling: &dev.coupling,
            sigma_left: sl,
            sigma_right: sr,
            inscatter_left: inl,
            inscatter_right: inr,
            scatter_retarded: &sol.sigma.retarded[k * ns..(k + 1) * ns],
            scatter_in: &sol.sigma.inscatter[k * ns..(k + 1) * ns],
            want_transmission: false,
        };
        let out = EnergyOutput {
            retarded: &mut retarded,
            filled: &mut filled,
            bond: &mut bond,
            full: Some(full),
        };
        rgf::solve_energy(&input, ws, out)
    };
    run(&in1, &in2, &mut full)?;
    let (g11, gn11) = (&full.retarded_diagonal[0], &full.filled_diagonal[0]);
    let (gnn, gnnn) = (&full.retarded_diagonal[n - 1], &full.filled_diagonal[n - 1]);
    let left = channel_traces(&lead_flow_matrix(&g1, f1, g11, gn11), channels);
    let right = channel_traces(&lead_flow_matrix(&g2, f2, gnn, gnnn), channels);
    let transmission = if p.scattering.is_coherent() {
        let zero = Mat::<C64>::zeros(b, b);
        run(&g1, &zero, &mut full)?;
        let x = &full.filled_diagonal[n - 1];
        Some(channel_traces(&(&g2 * x), channels))
    } else {
        None
    };
    Ok((left, right, transmission))
}

/// Per-channel flows per unit energy: (`[c][k]` left, `[c][k]` right,
/// `[c][k]` transmission) in 1/(eV s) (transmission dimensionless).
type ChannelSpectra = (Vec<Vec<f64>>, Vec<Vec<f64>>, Option<Vec<Vec<f64>>>);

fn channel_spectra(sol: &Solution, channels: &Channels) -> Result<ChannelSpectra, SolveError> {
    let p = &sol.problem;
    let leads = LeadTable::new(p)?;
    let (n, b) = (p.device.cells(), p.device.orbitals);
    let rows: Vec<EnergyTraces> = (0..p.grid.count)
        .into_par_iter()
        .map_init(
            || Workspace::new(n, b),
            |ws, k| energy_traces(sol, &leads, channels, k, ws),
        )
        .collect::<Result<_, _>>()?;
    let js = flow_scale(p);
    let nc = channels.len();
    let column = |pick: &dyn Fn(&EnergyTraces) -> &[f64], c: usize| -> Vec<f64> {
        rows.iter().map(|r| pick(r)[c]).collect()
    };
    let left = (0..nc)
        .map(|c| column(&|r| &r.0, c).iter().map(|v| v * js).collect())
        .collect();
    let right = (0..nc)
        .map(|c| column(&|r| &r.1, c).iter().map(|v| v * js).collect())
        .collect();
    let transmission = p.scattering.is_coherent().then(|| {
        (0..nc)
            .map(|c| column(&|r| r.2.as_deref().unwrap_or(&[]), c))
            .collect()
    });
    Ok((left, right, transmission))
}

/// Per cell and channel: electrons, the local Fermi match and the lattice
/// power, each `[channel][cell]`.
type CellProfiles = (
    Vec<Vec<f64>>,
    Vec<Vec<(f64, FermiLevelStatus)>>,
    Vec<Vec<f64>>,
);

fn cell_profiles(sol: &Solution, channels: &Channels) -> CellProfiles {
    let p = &sol.problem;
    let (n, b, ne) = (p.device.cells(), p.device.orbitals, p.grid.count);
    let ns = n * b;
    let energies = p.grid.energies();
    let temps = cell_lattice_temperatures(sol);
    let green = &sol.pass.green;
    let to_electrons = p.spin_degeneracy * p.grid.step_ev / (2.0 * std::f64::consts::PI);
    let power = lattice_power_per_site(sol);
    let mut electrons = Vec::with_capacity(channels.len());
    let mut levels = Vec::with_capacity(channels.len());
    let mut lattice = Vec::with_capacity(channels.len());
    for ch in &channels.list {
        let per_cell: Vec<(f64, (f64, FermiLevelStatus))> = (0..n)
            .into_par_iter()
            .map(|i| {
                let mut a = vec![0.0; ne];
                let mut filled = 0.0;
                for (k, ak) in a.iter_mut().enumerate() {
                    for &o in &ch.orbitals {
                        let idx = k * ns + i * b + o;
                        *ak += green.spectral(idx);
                        filled += green.filled[idx];
                    }
                }
                let m = match_fermi_level_checked(&energies, &a, filled, temps[i]);
                (filled * to_electrons, (m.fermi_level_ev, m.status))
            })
            .collect();
        electrons.push(per_cell.iter().map(|x| x.0).collect());
        levels.push(per_cell.iter().map(|x| x.1).collect());
        lattice.push(
            (0..n)
                .map(|i| ch.orbitals.iter().map(|&o| power[i * b + o]).sum())
                .collect(),
        );
    }
    (electrons, levels, lattice)
}

/// Every channel-resolved result of a solution. Runs one more pass of the
/// recursion with full end blocks (two without scattering, for the
/// transmission) under the solution's own scattering self-energy.
pub fn observe_channels(
    sol: &Solution,
    channels: &Channels,
) -> Result<ChannelObservables, SolveError> {
    let p = &sol.problem;
    if channels.orbitals != p.device.orbitals {
        return Err(SolveError::Invalid(format!(
            "channels cover {} orbitals per cell, the device has {}",
            channels.orbitals, p.device.orbitals
        )));
    }
    let (flow_left, flow_right, transmission) = channel_spectra(sol, channels)?;
    let (electrons, levels, cell_power) = cell_profiles(sol, channels);
    let de = p.grid.step_ev;
    let energies = p.grid.energies();
    let integrate = |flow: &[f64], weight: &dyn Fn(f64) -> f64| -> f64 {
        energies
            .iter()
            .zip(flow)
            .map(|(&e, j)| weight(e) * j)
            .sum::<f64>()
            * de
    };
    let (mu1, mu2) = (p.left.fermi_level_ev, p.right.fermi_level_ev);
    let current = |f: &Vec<Vec<f64>>| -> Vec<f64> {
        f.iter()
            .map(|j| -ELEMENTARY_CHARGE * integrate(j, &|_| 1.0))
            .collect()
    };
    let heat = |f: &Vec<Vec<f64>>, mu: f64| -> Vec<f64> {
        f.iter()
            .map(|j| ELEMENTARY_CHARGE * integrate(j, &|e| e - mu))
            .collect()
    };
    let current_left_a = current(&flow_left);
    let polarization = (current_left_a.len() == 2)
        .then(|| (current_left_a[0] - current_left_a[1]) / (current_left_a[0] + current_left_a[1]));
    Ok(ChannelObservables {
        names: channels.names(),
        orbitals: channels.list.iter().map(|c| c.orbitals.clone()).collect(),
        current_right_a: current(&flow_right),
        heat_current_left_w: heat(&flow_left, mu1),
        heat_current_right_w: heat(&flow_right, mu2),
        lattice_power_w: cell_power.iter().map(|v| v.iter().sum()).collect(),
        current_left_a,
        polarization,
        flow_left,
        flow_right,
        transmission,
        electrons,
        fermi_level_ev: levels
            .iter()
            .map(|l| l.iter().map(|x| x.0).collect())
            .collect(),
        fermi_level_status: levels
            .iter()
            .map(|l| l.iter().map(|x| x.1).collect())
            .collect(),
        cell_lattice_power_w: cell_power,
    })
}
