//! Physical constants (CODATA 2018 exact SI values) and unit conversions.
//!
//! Every constant of the project lives here. Energies inside the engine are
//! in eV, lengths in nm, temperatures in K; conversions to SI happen only at
//! the edges (currents in A, powers in W).

/// Elementary charge e in C (exact since the 2019 SI).
pub const ELEMENTARY_CHARGE: f64 = 1.602_176_634e-19;
/// Planck constant h in J s (exact).
pub const PLANCK: f64 = 6.626_070_15e-34;
/// Boltzmann constant kB in J/K (exact).
pub const BOLTZMANN: f64 = 1.380_649e-23;
/// Electron rest mass m0 in kg (CODATA 2018).
pub const ELECTRON_MASS: f64 = 9.109_383_701_5e-31;
/// Atomic mass unit u in kg (CODATA 2018).
pub const ATOMIC_MASS_UNIT: f64 = 1.660_539_066_60e-27;

/// Planck constant in eV s.
pub const PLANCK_EV_S: f64 = PLANCK / ELEMENTARY_CHARGE;
/// Reduced Planck constant ħ in J s.
pub const HBAR: f64 = PLANCK / (2.0 * std::f64::consts::PI);
/// Squared angular frequency (rad/ps)² of a spring of 1 N/m on a mass of
/// 1 u: 10⁻²⁴ / u ≈ 602.2, the factor from k/M in (N/m)/u to the unit of the
/// lattice dynamical matrix.
pub const RAD2_PER_PS2_PER_N_PER_M_PER_U: f64 = 1e-24 / ATOMIC_MASS_UNIT;
/// Boltzmann constant in eV/K.
pub const BOLTZMANN_EV_PER_K: f64 = BOLTZMANN / ELEMENTARY_CHARGE;

/// Conductance quantum 2e²/h in S (two spin channels).
pub const CONDUCTANCE_QUANTUM: f64 = 2.0 * ELEMENTARY_CHARGE * ELEMENTARY_CHARGE / PLANCK;

/// Lorenz number L0 = (π²/3)(kB/e)² in W Ω K⁻².
pub const LORENZ_NUMBER: f64 = std::f64::consts::PI * std::f64::consts::PI / 3.0
    * (BOLTZMANN / ELEMENTARY_CHARGE)
    * (BOLTZMANN / ELEMENTARY_CHARGE);

/// ħ²/(2 m0) in eV nm².
pub fn hbar2_over_2m0_ev_nm2() -> f64 {
    HBAR * HBAR / (2.0 * ELECTRON_MASS) / ELEMENTARY_CHARGE * 1e18
}

/// Nearest-neighbour hopping t = ħ²/(2 m* a²) in eV for an effective mass
/// (units of m0) and a lattice spacing in nm.
pub fn hopping_ev(effective_mass: f64, spacing_nm: f64) -> f64 {
    hbar2_over_2m0_ev_nm2() / (effective_mass * spacing_nm * spacing_nm)
}

/// Thermal energy kB T in eV.
pub fn thermal_energy_ev(temperature_k: f64) -> f64 {
    BOLTZMANN_EV_PER_K * temperature_k
}

/// Fermi-Dirac occupation 1/(1 + exp((E − µ)/kB T)), energies in eV.
///
/// Written so that it neither overflows nor loses the exponentially small
/// tail: for large positive arguments it returns exp(−x)/(1 + exp(−x)).
pub fn fermi(energy_ev: f64, fermi_level_ev: f64, temperature_k: f64) -> f64 {
    let x = (energy_ev - fermi_level_ev) / thermal_energy_ev(temperature_k);
    if x > 0.0 {
        let e = (-x).exp();
        e / (1.0 + e)
    } else {
        1.0 / (1.0 + x.exp())
    }
}

/// −∂f/∂E in 1/eV.
pub fn fermi_window(energy_ev: f64, fermi_level_ev: f64, temperature_k: f64) -> f64 {
    let kt = thermal_energy_ev(temperature_k);
    let f = fermi(energy_ev, fermi_level_ev, temperature_k);
    f * (1.0 - f) / kt
}

/// Bose-Einstein occupation 1/(exp(ħω/kB T) − 1) of a mode of energy ħω (eV).
pub fn bose(energy_ev: f64, temperature_k: f64) -> f64 {
    let x = energy_ev / thermal_energy_ev(temperature_k);
    1.0 / x.exp_m1()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn fermi_is_symmetric_and_bounded() {
        for &x in &[-800.0, -3.0, 0.0, 2.0, 900.0] {
            let f = fermi(x * 0.0258, 0.0, 300.0);
            let g = fermi(-x * 0.0258, 0.0, 300.0);
            assert!((0.0..=1.0).contains(&f));
            assert!((f + g - 1.0).abs() < 1e-15);
        }
    }
}
