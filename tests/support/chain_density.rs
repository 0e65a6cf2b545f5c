//! Shared by the electrostatics tests: a coherent chain in equilibrium
//! with leads that continue it, and the electron count of an infinite
//! tight-binding chain integrated with the transport count's
//! band-edge-aware weights or from the chain's exact density of states.

// Each test file that includes this uses part of it.
#![allow(dead_code)]

use qheat::device;
use qheat::electrostatics;
use qheat::grid::EnergyGrid;
use qheat::leads::{DecimationParams, Lead};
use qheat::model::{Contact, Problem};
use qheat::scattering::Scattering;

/// Temperature of the leads (K).
pub const T: f64 = 300.0;

/// A coherent effective-mass chain of `cells` cells of `spacing` nm, mass
/// `mass`, band edge 0, leads continuing it at Fermi level 0 on both
/// sides (equilibrium), energy grid [lo, hi] with step `step`.
pub fn chain(cells: usize, spacing: f64, mass: f64, grid: (f64, f64, f64)) -> Problem {
    let t = qheat::units::hopping_ev(mass, spacing);
    let dev = device::chain(spacing, t, 0.0, vec![0.0; cells]);
    let lead = Lead::Periodic {
        onsite: dev.onsite[0].clone(),
        hopping: dev.coupling[0].clone(),
    };
    let contact = || Contact {
        lead: lead.clone(),
        fermi_level_ev: 0.0,
        temperature_k: T,
    };
    Problem {
        device: dev,
        left: contact(),
        right: contact(),
        scattering: Scattering::default(),
        grid: EnergyGrid::covering(grid.0, grid.1, grid.2),
        spin_degeneracy: 2.0,
        decimation: DecimationParams::default(),
        contacts: Vec::new(),
    }
}

/// Electrons per cell (spin included) of an infinite chain with band
/// bottom `edge`, hopping `t`, Fermi level 0, integrated on the energies
/// `e` with the band-edge-aware weights the transport count uses; the
/// local density of states of the chain is 1/(π √((E − Ec)(Ec + 4t − E)))
/// per cell (common practice: the tight-binding chain, e.g. S. Datta,
/// Quantum Transport: Atom to Transistor, 2005).
pub fn chain_electrons(edge: f64, t: f64, e: &[f64], kt: f64) -> f64 {
    let q = electrostatics::edge_weights(e, &[edge]);
    e.iter()
        .zip(&q)
        .map(|(&en, &w)| {
            let x = en - edge;
            if x <= 0.0 || x >= 4.0 * t {
                return 0.0;
            }
            let rho = 1.0 / (std::f64::consts::PI * (x * (4.0 * t - x)).sqrt());
            2.0 * w * rho / (1.0 + (en / kt).exp())
        })
        .sum()
}

/// Electrons per cell (spin included) of an infinite chain with band
/// bottom `edge`, hopping `t`, Fermi level 0, from its exact density of
/// states: the diagonal of its Green's function, G(z) = 1/√((z − ε)² − 4t²)
/// with ε = edge + 2t (common practice: the tight-binding chain, e.g.
/// E. N. Economou, Green's Functions in Quantum Physics, 2006, ch. 5),
/// taken with the root that behaves as z − ε at infinity, summed over the
/// poles of the Fermi function as the engine's contour count does
/// (T. Ozaki, Phys. Rev. B 75, 035123 (2007)):
/// n = 2 [½ + 2k_BT Σ_p R_p Re G(i z_p k_BT)].
pub fn exact_chain_electrons(edge: f64, t: f64, kt: f64) -> f64 {
    let reach = (-edge).max(edge + 4.0 * t).abs() / kt;
    let poles = electrostatics::contour::FermiPoles::covering(reach);
    let eps = edge + 2.0 * t;
    let sum: f64 = poles
        .poles
        .iter()
        .zip(&poles.residues)
        .map(|(&z, &r)| {
            let x = num_complex::Complex64::new(-eps, z * kt);
            let g = ((x - 2.0 * t).sqrt() * (x + 2.0 * t).sqrt()).inv();
            r * g.re
        })
        .sum();
    2.0 * (0.5 + 2.0 * kt * sum)
}

/// The band bottom at which [`exact_chain_electrons`] equals `electrons`,
/// by bisection to 1e-13 eV (the count falls monotonically with the edge).
pub fn exact_neutral_edge(electrons: f64, t: f64, kt: f64) -> f64 {
    let (mut lo, mut hi) = (-0.5, 0.5);
    assert!(exact_chain_electrons(lo, t, kt) > electrons);
    assert!(exact_chain_electrons(hi, t, kt) < electrons);
    while hi - lo > 1e-13 {
        let mid = 0.5 * (lo + hi);
        if exact_chain_electrons(mid, t, kt) > electrons {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    0.5 * (lo + hi)
}
