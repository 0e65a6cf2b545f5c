//! Files of a case's lattice: the phonon transmission spectrum with the
//! κph integrand (phonon_spectrum.csv), its figure
//! (phonon_transmission.svg) and the `lattice` object of summary.json.

use super::plots::{Series, line_chart_svg};
use super::schema::summary::LatticeSummary;
use super::schema::tables::{PhononPoints, phonon_spectrum};
use super::{OutputError, Staging};
use crate::case::{Resolved, phonon_energy_mev};
use crate::lattice::PhononSpectrum;

/// File name of the phonon transmission figure.
pub const PHONON_FIGURE: &str = "phonon_transmission.svg";

/// The `lattice` object of summary.json: κph of the lattice at
/// `temperature_k`, what ZT uses, the band top and the number of nodes.
pub fn lattice_summary(
    resolved: &Resolved,
    spectrum: &PhononSpectrum,
    temperature_k: f64,
) -> LatticeSummary {
    let top = resolved
        .lattice
        .as_ref()
        .map_or(f64::NAN, |l| phonon_energy_mev(l.band_top_rad_per_ps()));
    // A damped lattice conducts with its probes floating (what ZT uses);
    // a network that failed leaves the number undefined.
    let kappa = match resolved.probe_network() {
        Some(net) => net.map_or(f64::NAN, |n| n.floating_conductance(temperature_k)),
        None => spectrum.conductance(temperature_k),
    };
    LatticeSummary {
        temperature_k,
        phonon_conductance_w_per_k: kappa,
        phonon_conductance_source: resolved.phonon_conductance_source(),
        band_top_mev: top,
        frequency_points: spectrum.len(),
    }
}

/// Ξ against ħω (meV).
pub fn phonon_transmission_svg(spectrum: &PhononSpectrum) -> Result<String, OutputError> {
    let x: Vec<f64> = spectrum
        .omega_rad_per_ps
        .iter()
        .map(|&w| phonon_energy_mev(w))
        .collect();
    line_chart_svg(
        "Phonon transmission",
        "phonon energy ħω (meV)",
        "transmission Ξ",
        &[Series {
            label: "Ξ(ħω)",
            x: &x,
            y: &spectrum.transmission,
        }],
        &[],
    )
}

/// Writes phonon_spectrum.csv (integrand at `temperature_k`) and the
/// transmission figure into `stage`.
pub fn write_phonon_files(
    stage: &Staging,
    spectrum: &PhononSpectrum,
    temperature_k: f64,
) -> Result<(), OutputError> {
    let points = PhononPoints {
        spectrum,
        temperature_k,
    };
    let table = phonon_spectrum();
    stage.write(table.file, &table.csv(&points))?;
    stage.write(PHONON_FIGURE, phonon_transmission_svg(spectrum)?.as_bytes())
}
