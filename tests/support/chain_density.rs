//! The electron count of an infinite tight-binding chain integrated with
//! the transport count's band-edge-aware weights, shared by the
//! electrostatics tests.

use qheat::electrostatics;

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
