//! The lattice thermal conductance κ_ph that ZT needs, and where it comes
//! from: computed from the case's `[lattice]`, given as
//! `thermal.phonon_conductance_w_per_k` (which wins over a lattice), or
//! neither (κ_ph = 0, so ZT is an upper bound).
//!
//! The phonon spectrum Ξ(ω) of a lattice does not depend on the operating
//! point, so it is computed once, on first use, and shared by every copy of
//! the case made by [`super::Case::with`] whose lattice is unchanged: a
//! sweep over a Fermi level, a voltage or a temperature reuses it, a sweep
//! over a lattice key computes it again.

use super::resolve::Resolved;
use crate::lattice::{
    FloatParams, Lattice, LatticeError, PhononSpectrum, ProbeNetwork, SpectrumParams,
};
use std::sync::{Arc, OnceLock};

/// ħω in meV for an angular frequency in rad/ps.
pub fn phonon_energy_mev(omega_rad_per_ps: f64) -> f64 {
    crate::units::HBAR * omega_rad_per_ps * 1e12 / crate::units::ELEMENTARY_CHARGE * 1e3
}

/// Where the κ_ph used for ZT comes from.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum PhononConductanceSource {
    /// Computed from the case's `[lattice]` at the operating temperature.
    Lattice,
    /// Given as `thermal.phonon_conductance_w_per_k`.
    Given,
    /// Neither: κ_ph = 0 and ZT is an upper bound.
    None,
}

impl PhononConductanceSource {
    /// The word used in tables and summaries: `lattice`, `given`, `none`.
    pub fn name(self) -> &'static str {
        match self {
            Self::Lattice => "lattice",
            Self::Given => "given",
            Self::None => "none",
        }
    }

    /// A phrase for people: where κ_ph came from and what it means for ZT.
    pub fn describe(self) -> &'static str {
        match self {
            Self::Lattice => "κ_ph computed from the case's [lattice]",
            Self::Given => "κ_ph given (thermal.phonon_conductance_w_per_k)",
            Self::None => "no κ_ph (neither [lattice] nor a given value): ZT is an upper bound",
        }
    }
}

/// The phonon spectrum of a lattice and, when the lattice is damped, its
/// network of phonon probes; each computed on first use and shared by
/// clones (cheap to clone).
#[derive(Clone, Debug, Default)]
pub struct SpectrumCache {
    spectrum: Arc<OnceLock<Result<PhononSpectrum, LatticeError>>>,
    network: Arc<OnceLock<Result<ProbeNetwork, LatticeError>>>,
}

impl SpectrumCache {
    /// The spectrum of `lattice`, computed with the default frequency
    /// rule ([`SpectrumParams::default`]: κ_ph converged to a relative 1e-8
    /// at and between 1 K and 1000 K) the first time it is asked for.
    fn get(&self, lattice: &Lattice) -> Result<&PhononSpectrum, LatticeError> {
        self.spectrum
            .get_or_init(|| PhononSpectrum::compute(lattice, &SpectrumParams::default()))
            .as_ref()
            .map_err(Clone::clone)
    }

    /// The probe network of `lattice` on its spectrum's frequency nodes,
    /// computed the first time it is asked for.
    fn network(&self, lattice: &Lattice) -> Result<&ProbeNetwork, LatticeError> {
        let spectrum = self.get(lattice)?;
        self.network
            .get_or_init(|| ProbeNetwork::compute(lattice, spectrum))
            .as_ref()
            .map_err(Clone::clone)
    }

    /// True when the spectrum has been computed (or failed) already.
    pub fn is_computed(&self) -> bool {
        self.spectrum.get().is_some()
    }

    /// True when both handles share one spectrum.
    pub fn is_shared_with(&self, other: &SpectrumCache) -> bool {
        Arc::ptr_eq(&self.spectrum, &other.spectrum)
    }
}

/// True when two lattices have the same masses, force constants and leads
/// (so the same spectrum).
pub(crate) fn same_lattice(a: &Lattice, b: &Lattice) -> bool {
    use crate::lattice::PhononSide::{Left, Right};
    let same_blocks = |x: &[faer::Mat<f64>], y: &[faer::Mat<f64>]| {
        x.len() == y.len() && x.iter().zip(y).all(|(p, q)| p == q)
    };
    a.masses_u() == b.masses_u()
        && same_blocks(a.force_onsite(), b.force_onsite())
        && same_blocks(a.force_coupling(), b.force_coupling())
        && a.damping_per_ps() == b.damping_per_ps()
        && a.lead(Left) == b.lead(Left)
        && a.lead(Right) == b.lead(Right)
}

impl Resolved {
    /// Where κ_ph for ZT comes from: a given value wins over the lattice.
    pub fn phonon_conductance_source(&self) -> PhononConductanceSource {
        match (self.phonon_conductance_given, &self.lattice) {
            (true, _) => PhononConductanceSource::Given,
            (false, Some(_)) => PhononConductanceSource::Lattice,
            (false, None) => PhononConductanceSource::None,
        }
    }

    /// The phonon spectrum of the case's lattice (`None` without one);
    /// computed once and shared by every copy of the case with the same
    /// lattice.
    pub fn phonon_spectrum(&self) -> Option<Result<&PhononSpectrum, LatticeError>> {
        self.lattice
            .as_ref()
            .map(|l| self.phonon_spectrum_cache.get(l))
    }

    /// True when the case's lattice has a damped site (so phonon probes,
    /// and `solve` heats the lattice).
    pub fn lattice_is_damped(&self) -> bool {
        self.lattice
            .as_ref()
            .is_some_and(|l| l.damping_per_ps().iter().any(|&g| g > 0.0))
    }

    /// The probe network of a damped lattice (`None` without a lattice or
    /// without damping); computed once, on the spectrum's nodes, and
    /// shared like the spectrum.
    pub fn probe_network(&self) -> Option<Result<&ProbeNetwork, LatticeError>> {
        let l = self.lattice.as_ref().filter(|_| self.lattice_is_damped())?;
        Some(self.phonon_spectrum_cache.network(l))
    }

    /// κ_ph for ZT at `temperature_k` (W/K): the given value, the lattice's
    /// conductance at that temperature, or 0. A damped lattice conducts
    /// with its probes floating (each nets zero heat), so heat that leaves
    /// the coherent path through a probe and comes back counts.
    pub fn phonon_conductance_at(&self, temperature_k: f64) -> Result<f64, LatticeError> {
        if self.phonon_conductance_source() != PhononConductanceSource::Lattice {
            return Ok(self.phonon_conductance_w_per_k);
        }
        if let Some(net) = self.probe_network() {
            return Ok(net?.floating_conductance(temperature_k));
        }
        match self.phonon_spectrum() {
            Some(s) => Ok(s?.conductance(temperature_k)),
            None => Ok(0.0),
        }
    }

    /// Heat (W) that the lattice carries from a reservoir at `hot_k` to
    /// one at `cold_k`: J_ph from the spectrum with a lattice (with damping,
    /// the heat into the cold lead with every probe floating at zero net
    /// heat), κ_ph ΔT with
    /// a given κ_ph (it wins over the lattice, as for ZT), 0 with neither.
    pub fn phonon_heat_leak(&self, hot_k: f64, cold_k: f64) -> Result<f64, LatticeError> {
        let lattice_source = self.phonon_conductance_source() == PhononConductanceSource::Lattice;
        if let (true, Some(net)) = (lattice_source, self.probe_network()) {
            let sites = self
                .lattice
                .as_ref()
                .map_or(0, |l| l.damping_per_ps().len());
            return floating_leak(net?, sites, hot_k, cold_k);
        }
        match self.phonon_conductance_source() {
            PhononConductanceSource::Lattice => match self.phonon_spectrum() {
                Some(s) => Ok(s?.heat_current(hot_k, cold_k)),
                None => Ok(0.0),
            },
            _ => Ok(self.phonon_conductance_w_per_k * (hot_k - cold_k)),
        }
    }
}

/// Heat into the cold phonon lead (W) with the left lead at `hot_k`, the
/// right at `cold_k` and every probe floating with no power of its own.
fn floating_leak(
    net: &ProbeNetwork,
    sites: usize,
    hot_k: f64,
    cold_k: f64,
) -> Result<f64, LatticeError> {
    let zeros = vec![0.0; sites];
    net.float_temperatures(hot_k, cold_k, &zeros, &FloatParams::default())
        .map(|f| f.right_lead_heat_w)
        .map_err(|e| LatticeError::Invalid {
            what: "floating phonon probes".into(),
            problem: e.to_string(),
            hint: "check lattice.damping_per_ps and the contact temperatures".into(),
        })
}
