//! The resolved transport problem handed to the solver: a device, two
//! contacts, the scattering inside and the energy grid. Built from a case
//! file by [`crate::case`], or directly in code.

use crate::device::Device;
use crate::grid::EnergyGrid;
use crate::leads::{DecimationParams, Lead};
use crate::scattering::Scattering;

/// A contact: a lead model with its Fermi level and temperature.
#[derive(Clone, Debug)]
pub struct Contact {
    /// Lead model.
    pub lead: Lead,
    /// Fermi level µ_α (eV), bias included.
    pub fermi_level_ev: f64,
    /// Temperature T_α (K).
    pub temperature_k: f64,
}

impl Contact {
    /// Fermi function of this contact at E (eV).
    pub fn occupation(&self, energy_ev: f64) -> f64 {
        crate::units::fermi(energy_ev, self.fermi_level_ev, self.temperature_k)
    }
}

/// Everything the solver needs for one operating point.
#[derive(Clone, Debug)]
pub struct Problem {
    /// Device Hamiltonian.
    pub device: Device,
    /// Contact 1 (left).
    pub left: Contact,
    /// Contact 2 (right).
    pub right: Contact,
    /// Scattering inside the device.
    pub scattering: Scattering,
    /// Energy grid.
    pub grid: EnergyGrid,
    /// Spin degeneracy g_s (2 unless spin is explicit in the orbitals).
    pub spin_degeneracy: f64,
    /// Lead decimation settings.
    pub decimation: DecimationParams,
}

impl Problem {
    /// Orbital sites N·b.
    pub fn sites(&self) -> usize {
        self.device.cells() * self.device.orbitals
    }

    /// Applied voltage V = V1 − V2 = −(µ1 − µ2)/e (V).
    pub fn voltage_v(&self) -> f64 {
        -(self.left.fermi_level_ev - self.right.fermi_level_ev)
    }
}
