//! Ξ(ω) at one frequency through the recursive Green's function kernel.

use super::{Lattice, LatticeError, PhononSide};
use crate::C64;
use crate::rgf::{EnergyInput, EnergyOutput, Workspace, solve_energy};
use faer::Mat;

/// Scratch space for [`Lattice::transmission`], allocated once per thread
/// and reused for every frequency.
pub struct TransmissionScratch {
    workspace: Workspace,
    retarded: Vec<C64>,
    filled: Vec<f64>,
    bond: Vec<f64>,
    damping: Vec<C64>,
    no_inscatter: Vec<f64>,
    zero_block: Mat<C64>,
}

impl TransmissionScratch {
    /// Scratch for `lattice`.
    pub fn new(lattice: &Lattice) -> Self {
        let (n, b) = (lattice.cells(), lattice.sites_per_cell());
        Self {
            workspace: Workspace::new(n, b),
            retarded: vec![C64::new(0.0, 0.0); n * b],
            filled: vec![0.0; n * b],
            bond: vec![0.0; n.saturating_sub(1)],
            damping: vec![C64::new(0.0, 0.0); n * b],
            no_inscatter: vec![0.0; n * b],
            zero_block: Mat::zeros(b, b),
        }
    }
}

impl Lattice {
    /// Retarded lead self-energies (Π_L, Π_R) on the end cells at ω
    /// (rad/ps), in (rad/ps)².
    pub fn lead_self_energies(&self, omega: f64) -> Result<(Mat<C64>, Mat<C64>), LatticeError> {
        let l = self
            .left_dyn
            .self_energy(omega, PhononSide::Left, &self.decimation)?;
        let r = self
            .right_dyn
            .self_energy(omega, PhononSide::Right, &self.decimation)?;
        Ok((l, r))
    }

    /// Phonon transmission Ξ(ω) = Tr[Λ_L D^r_1N Λ_R D^a_N1] at angular
    /// frequency ω (rad/ps), with the damping of [`Lattice::with_damping`]
    /// (Π_s,i = −iωγ_i) on the diagonal. The recursion is the electron
    /// kernel [`crate::rgf::solve_energy`] with ω² in place of the energy
    /// and no in-scattering. ω must be positive and off the lead band tops,
    /// where D^r is singular.
    pub fn transmission(
        &self,
        omega: f64,
        scratch: &mut TransmissionScratch,
    ) -> Result<f64, LatticeError> {
        if !(omega.is_finite() && omega > 0.0) {
            return Err(super::invalid(
                "omega_rad_per_ps",
                format!("{omega} is not a positive finite frequency"),
                "Ξ is evaluated at ω > 0 (D^r is singular at ω = 0)",
            ));
        }
        let (pl, pr) = self.lead_self_energies(omega)?;
        for (d, g) in scratch.damping.iter_mut().zip(&self.damping_per_ps) {
            *d = C64::new(0.0, -omega * g);
        }
        let input = EnergyInput {
            energy_ev: omega * omega,
            onsite: &self.dyn_onsite,
            coupling: &self.dyn_coupling,
            sigma_left: &pl,
            sigma_right: &pr,
            inscatter_left: &scratch.zero_block,
            inscatter_right: &scratch.zero_block,
            scatter_retarded: &scratch.damping,
            scatter_in: &scratch.no_inscatter,
            want_transmission: true,
        };
        let out = EnergyOutput {
            retarded: &mut scratch.retarded,
            filled: &mut scratch.filled,
            bond: &mut scratch.bond,
            full: None,
        };
        solve_energy(&input, &mut scratch.workspace, out)
            .map(|f| f.transmission)
            .map_err(|source| LatticeError::Kernel {
                omega_rad_per_ps: omega,
                source,
            })
    }
}
