//! Seebeck coefficient of each channel, where the channels do not mix.
//!
//! When no element of the device Hamiltonian, of the lead blocks or of the
//! scattering couples two channels, each channel is a transport problem of
//! its own in parallel with the others: its conductance and Seebeck
//! coefficient follow from its own transmission T_c(E) by the moments of
//! [`super::from_transmission`], G_c = (g_s e²/h) L0_c and
//! S_c = −L1_c/(e T L0_c). The totals are then G = Σ_c G_c and
//! S = Σ_c G_c S_c / Σ_c G_c (parallel conductors). Where the channels mix,
//! a channel has no transmission of its own (the T_c reported by a solve
//! depend on where they are projected), and no S_c is given.
//!
//! Only coherent transport is covered here: with scattering the channel
//! coefficients would need per-channel finite-difference runs.

use super::Coefficients;
use crate::C64;
use crate::device::Channels;
use crate::leads::Lead;
use crate::model::Problem;
use crate::scba::{ScbaParams, Silent, SolveError, solve};
use faer::Mat;

/// Coefficients of one channel.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct ChannelCoefficients {
    /// Channel name.
    pub name: String,
    /// Conductance G_c (S).
    pub conductance_s: f64,
    /// Seebeck coefficient S_c (V/K).
    pub seebeck_v_per_k: f64,
}

/// The channel Seebeck coefficients, or why they are not given.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum ChannelSeebeck {
    /// One entry per channel, in the order of the channel set.
    Given(Vec<ChannelCoefficients>),
    /// Not given, and why.
    NotGiven(String),
}

/// Relative size below which an element counts as zero when looking for
/// elements that couple two channels.
const MIXING_TOLERANCE: f64 = 1e-12;

/// Where a block couples two channels: "what (row, col)".
fn mixing_in(m: &Mat<C64>, channels: &Channels, what: &str, scale: f64) -> Option<String> {
    channels
        .mixing_element(m, MIXING_TOLERANCE * scale)
        .map(|(r, c, v)| {
            format!(
                "{what} couples orbital {r} (channel `{}`) to orbital {c} (channel `{}`) with an element of {v:.3e} eV",
                channels.list[channels.channel_of(r)].name,
                channels.list[channels.channel_of(c)].name
            )
        })
}

/// Why the channels of `problem` mix, or `None` when they do not: every
/// device block, both leads' blocks and the scattering's coupling matrices
/// are checked (per-orbital couplings never mix channels; a coupling
/// matrix with an element between two channels does).
pub fn channel_mixing(problem: &Problem, channels: &Channels) -> Option<String> {
    let dev = &problem.device;
    let scale = dev
        .onsite
        .iter()
        .chain(&dev.coupling)
        .map(crate::device::max_abs)
        .fold(0.0, f64::max)
        .max(1e-300);
    for (i, m) in dev.onsite.iter().enumerate() {
        if let Some(why) = mixing_in(
            m,
            channels,
            &format!("the on-site block of cell {i}"),
            scale,
        ) {
            return Some(why);
        }
    }
    for (i, m) in dev.coupling.iter().enumerate() {
        let what = format!("the coupling of cells {i} and {}", i + 1);
        if let Some(why) = mixing_in(m, channels, &what, scale) {
            return Some(why);
        }
    }
    if let Some(why) = scattering_mixing(problem, channels, scale) {
        return Some(why);
    }
    for (name, contact) in [("left", &problem.left), ("right", &problem.right)] {
        let blocks: Vec<(&str, &Mat<C64>)> = match &contact.lead {
            Lead::Periodic { onsite, hopping } => vec![("cell", onsite), ("coupling", hopping)],
            Lead::Joined {
                onsite,
                hopping,
                join,
            } => vec![("cell", onsite), ("coupling", hopping), ("joining", join)],
            Lead::WideBand { gamma } => vec![("broadening", gamma)],
        };
        for (part, m) in blocks {
            let what = format!("the {name} lead's {part} block");
            if let Some(why) = mixing_in(m, channels, &what, scale) {
                return Some(why);
            }
        }
    }
    None
}

/// Where a coupling matrix of the dephasing or of a phonon mode couples
/// two channels.
fn scattering_mixing(problem: &Problem, channels: &Channels, scale: f64) -> Option<String> {
    let sc = &problem.scattering;
    let mechanisms = std::iter::once(("the dephasing", &sc.dephasing_matrices)).chain(
        sc.phonons
            .iter()
            .map(|m| ("a phonon mode", &m.coupling_matrices)),
    );
    for (name, matrices) in mechanisms {
        for (i, sources) in matrices.per_cell.iter().enumerate() {
            for m in sources {
                let what = format!("a coupling matrix of {name} in cell {i}");
                if let Some(why) = mixing_in(m, channels, &what, scale) {
                    return Some(why);
                }
            }
        }
    }
    None
}

/// Channel coefficients of a coherent problem at zero bias, around
/// µ = (µ1 + µ2)/2 and T = (T1 + T2)/2 (as [`super::coherent_coefficients`]).
pub fn channel_seebeck(
    problem: &Problem,
    channels: &Channels,
) -> Result<ChannelSeebeck, SolveError> {
    if !problem.scattering.is_coherent() {
        return Ok(ChannelSeebeck::NotGiven(
            "the device scatters: channel coefficients are computed for coherent transport only"
                .into(),
        ));
    }
    if let Some(why) = channel_mixing(problem, channels) {
        return Ok(ChannelSeebeck::NotGiven(format!(
            "the channels mix, so a channel has no transmission of its own: {why}"
        )));
    }
    let sol = solve(problem, &ScbaParams::default(), None, &mut Silent)?;
    let split = crate::observables::channels::observe_channels(&sol, channels)?;
    let t = split
        .transmission
        .expect("a coherent solve gives channel transmissions");
    let mu = 0.5 * (problem.left.fermi_level_ev + problem.right.fermi_level_ev);
    let temp = 0.5 * (problem.left.temperature_k + problem.right.temperature_k);
    let energies = problem.grid.energies();
    let list = split
        .names
        .into_iter()
        .zip(&t)
        .map(|(name, tc)| {
            let c: Coefficients = super::from_transmission(
                &energies,
                tc,
                problem.grid.step_ev,
                mu,
                temp,
                problem.spin_degeneracy,
                0.0,
            );
            ChannelCoefficients {
                name,
                conductance_s: c.conductance_s,
                seebeck_v_per_k: c.seebeck_v_per_k,
            }
        })
        .collect();
    Ok(ChannelSeebeck::Given(list))
}
