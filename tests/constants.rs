//! Constants against exact SI values. Source: BIPM, The International System
//! of Units (SI Brochure), 9th ed. (2019); E. Tiesinga et al., Rev. Mod. Phys.
//! 93, 025010 (2021) (CODATA 2018, from memory); thermal conductance quantum
//! after J. B. Pendry, J. Phys. A 16, 2161 (1983) (from memory). The
//! reference values are exact constants rounded to 12 significant figures,
//! so the last quoted digit alone may be off by up to 5e-12 relative (h/2e²
//! is 3.7e-12 from its quoted value): tolerance rel 1e-11.

#![allow(clippy::needless_range_loop)]

use qheat::units::*;

fn rel(a: f64, b: f64) -> f64 {
    (a - b).abs() / b.abs()
}

#[test]
fn conductance_quantum_and_resistance() {
    assert!(rel(CONDUCTANCE_QUANTUM, 7.74809172986e-5) < 1e-11);
    assert!(
        rel(
            PLANCK / (2.0 * ELEMENTARY_CHARGE * ELEMENTARY_CHARGE),
            12906.4037297
        ) < 1e-11
    );
}

#[test]
fn thermal_quantum_and_lorenz_number() {
    let per_k2 = std::f64::consts::PI.powi(2) * BOLTZMANN * BOLTZMANN / (3.0 * PLANCK);
    assert!(rel(per_k2, 9.46431151639e-13) < 1e-11);
    assert!(rel(per_k2 * 300.0, 2.83929345492e-10) < 1e-11);
    assert!(rel(LORENZ_NUMBER, 2.44300450907e-8) < 1e-11);
}

#[test]
fn thermal_voltage_and_kinetic_constant() {
    assert!(rel(BOLTZMANN * 300.0 / ELEMENTARY_CHARGE, 0.0258519997864) < 1e-11);
    // ħ²/(2 m0) with the CODATA 2018 electron mass; rel 1e-10 as listed.
    assert!(rel(hbar2_over_2m0_ev_nm2(), 0.0380998211615) < 1e-10);
}

/// Bose occupation and detailed balance: ħω = 50 meV at 300 K gives
/// N = 0.1689839773 and N/(N+1) = e^(−ħω/kT) = 0.1445562818; 10 meV gives
/// N = 2.11735465 (computed at 30 digits). rel 1e-9 at
/// the digits quoted.
#[test]
fn bose_occupation() {
    let n = bose(0.05, 300.0);
    assert!(rel(n, 0.1689839773) < 1e-9);
    assert!(rel(n / (n + 1.0), 0.1445562818) < 1e-9);
    assert!(rel(bose(0.01, 300.0), 2.11735465) < 1e-8);
}
