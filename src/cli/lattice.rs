//! The lattice part of `qheat solve` and `qheat coefficients`: its phonon
//! spectrum, summary object and terminal lines.

use super::Failure;
use qheat::case::Resolved;
use qheat::lattice::PhononSpectrum;
use qheat::output::schema::summary::LatticeSummary;

/// The phonon spectrum of the case's lattice (`None` without one),
/// computed once per lattice.
pub fn spectrum(resolved: &Resolved) -> Result<Option<&PhononSpectrum>, Failure> {
    resolved.phonon_spectrum().transpose().map_err(|e| {
        Failure::Solver(format!(
            "phonon spectrum of the case's [lattice]: {e}; nothing was written"
        ))
    })
}

/// Terminal lines of the lattice.
pub fn print_lattice(l: &LatticeSummary) {
    println!(
        "lattice           κ_ph = {:.5e} W/K at {} K (phonon band top ħω = {:.3} meV, {} frequency points)",
        l.phonon_conductance_w_per_k, l.temperature_k, l.band_top_mev, l.frequency_points
    );
    println!(
        "                  {}",
        l.phonon_conductance_source.describe()
    );
    println!("                  spectrum in phonon_spectrum.csv, phonon_transmission.svg");
}
