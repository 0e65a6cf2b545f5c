//! The phonon probe network as the lattice side of the joint loop.

use super::LatticeResponse;
use crate::lattice::{FloatParams, FloatingLattice, ProbeError, ProbeNetwork};

/// The lattice's answer from floating phonon probes: site s of the lattice
/// is orbital site s of the device (one displacement per orbital site), the
/// two phonon leads are held at the contact temperatures, and each damped
/// site floats at the temperature at which its phonons carry away exactly
/// the power the electrons deposit there
/// ([`ProbeNetwork::float_temperatures`]).
///
/// A site without damping has no reservoir and no temperature of its own;
/// the electrons may deposit nothing there (the network refuses a nonzero
/// power on it), so its phonon occupation does not matter. It is given the
/// mean contact temperature so the Born loop has a number to use.
pub struct FloatingProbes<'a> {
    network: &'a ProbeNetwork,
    left_k: f64,
    right_k: f64,
    params: FloatParams,
    last: Option<FloatingLattice>,
}

impl<'a> FloatingProbes<'a> {
    /// Probes of `network` between phonon leads at `left_k` and `right_k`
    /// (K), with the default Newton settings.
    pub fn new(network: &'a ProbeNetwork, left_k: f64, right_k: f64) -> Self {
        Self {
            network,
            left_k,
            right_k,
            params: FloatParams::default(),
            last: None,
        }
    }

    /// The same with other Newton settings.
    pub fn with_params(self, params: FloatParams) -> Self {
        Self { params, ..self }
    }

    /// The floating solve behind the last answer: where the heat left (the
    /// two phonon leads) and the probes' remaining imbalance. `None` before
    /// the first call.
    pub fn last(&self) -> Option<&FloatingLattice> {
        self.last.as_ref()
    }
}

impl LatticeResponse for FloatingProbes<'_> {
    type Error = ProbeError;

    fn temperatures(&mut self, power_w_per_site: &[f64]) -> Result<Vec<f64>, ProbeError> {
        let f = self.network.float_temperatures(
            self.left_k,
            self.right_k,
            power_w_per_site,
            &self.params,
        )?;
        let fill = 0.5 * (self.left_k + self.right_k);
        let t = f
            .temperatures_k
            .iter()
            .map(|&t| if t.is_nan() { fill } else { t })
            .collect();
        self.last = Some(f);
        Ok(t)
    }
}
