//! The resolved transport problem handed to the solver: a device, two
//! contacts, any contacts attached along the channel, the scattering inside
//! and the energy grid. Built from a case file by [`crate::case`], or
//! directly in code.

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
    /// Contacts attached along the channel (voltage and temperature
    /// probes, polarised contacts); empty for a two-terminal device.
    pub contacts: Vec<AttachedContact>,
}

/// How the level of an attached contact is set.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum ContactMode {
    /// Fermi level and temperature given.
    Fixed,
    /// A voltage probe: the temperature is given, the Fermi level is solved
    /// so that no particle current flows into the contact.
    Voltage,
    /// A temperature probe: Fermi level and temperature are solved so that
    /// neither particles nor heat flow into the contact.
    Temperature,
}

impl ContactMode {
    /// True for the probes, whose level the solver finds.
    pub fn is_floating(self) -> bool {
        self != ContactMode::Fixed
    }

    /// The mode's name as a case file writes it.
    pub fn name(self) -> &'static str {
        match self {
            ContactMode::Fixed => "fixed",
            ContactMode::Voltage => "voltage",
            ContactMode::Temperature => "temperature",
        }
    }
}

/// Spin polarisation of an attached contact (explicit spin only).
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
pub struct Polarisation {
    /// Strength P, 0 ≤ P ≤ 1 (1: an ideal polariser).
    pub strength: f64,
    /// Unit vector n̂ of the majority spin (x, y, z); z is the spin axis of
    /// the orbitals ("up" = +z).
    pub direction: [f64; 3],
}

/// A wide-band contact attached to some cells along the channel.
///
/// On every orbital site of its cells it adds the broadening Γ = γ·1, so
/// Σ^r = −iΓ/2 and Σ^in = Γ f(E) with the contact's Fermi function. With
/// explicit spin (orbitals 0..b/2 of a cell spin up, b/2..b spin down,
/// orbital o paired with o + b/2) a polarised contact has on each pair the
/// 2 × 2 block Γ = γ (1 + P σ·n̂), σ the Pauli matrices with σ_z = diag(1, −1)
/// in the (up, down) order: P = 0 is the plain contact, P = 1 couples only
/// the spin along n̂ (with 2γ).
#[derive(Clone, Debug, PartialEq)]
pub struct AttachedContact {
    /// Name (for outputs and messages).
    pub name: String,
    /// Cells it touches (0-based, ascending, no repeats).
    pub cells: Vec<usize>,
    /// Coupling strength γ (eV).
    pub gamma_ev: f64,
    /// Fixed or floating.
    pub mode: ContactMode,
    /// Fermi level µ_p (eV): given for a fixed contact; for a probe the
    /// starting guess before a solve and the solved value in
    /// [`crate::scba::Solution::problem`].
    pub fermi_level_ev: f64,
    /// Temperature T_p (K): given unless the contact is a temperature
    /// probe; solved as µ_p is otherwise.
    pub temperature_k: f64,
    /// Spin polarisation, `None` for an unpolarised contact.
    pub polarisation: Option<Polarisation>,
}

impl AttachedContact {
    /// Fermi function of this contact at E (eV).
    pub fn occupation(&self, energy_ev: f64) -> f64 {
        crate::units::fermi(energy_ev, self.fermi_level_ev, self.temperature_k)
    }
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

    /// True when some attached contact is a probe (its level is solved).
    pub fn has_floating_contacts(&self) -> bool {
        self.contacts.iter().any(|c| c.mode.is_floating())
    }
}
