//! The lattice part of `qheat solve` and `qheat coefficients`: its
//! terminal lines.

use qheat::output::schema::summary::LatticeSummary;

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
