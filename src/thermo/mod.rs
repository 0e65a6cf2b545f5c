//! Thermoelectric coefficients.
//!
//! Coherent transport: from the moments of the transmission
//! L_n = ∫ T(E)(E − µ)^n (−∂f/∂E) dE (plain sum on the grid),
//! G = (g_s e²/h) L0, S = −L1/(e T L0), Π = T S,
//! κ_e = (g_s/(h T))(L2 − L1²/L0)
//! (U. Sivan, Y. Imry, Phys. Rev. B 33, 551 (1986); P. N. Butcher,
//! J. Phys.: Condens. Matter 2, 4869 (1990)).
//! S < 0 when transport is carried above µ (electron-like).
//!
//! With scattering inside the device, the linear-response matrix is taken by
//! central finite differences through converged Born solutions, see
//! [`response`].
//!
//! Every operating point goes through [`point::solve_point`]: with
//! self-consistent electrostatics the potential of the device's charge is
//! solved again at each point (each finite-difference run, each point of a
//! generator or cooler curve), never imposed.

pub mod channels;
pub mod common_grid;
pub mod cooler;
pub mod generator;
pub mod of_case;
pub mod point;
pub mod response;

use crate::units::{ELEMENTARY_CHARGE, LORENZ_NUMBER, PLANCK, fermi_window};

/// Linear-response thermoelectric coefficients at (µ, T).
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
#[non_exhaustive]
pub struct Coefficients {
    /// Reference Fermi level µ (eV).
    pub fermi_level_ev: f64,
    /// Reference temperature T (K).
    pub temperature_k: f64,
    /// Electrical conductance G (S).
    pub conductance_s: f64,
    /// Seebeck coefficient S (V/K).
    pub seebeck_v_per_k: f64,
    /// Peltier coefficient Π (V).
    pub peltier_v: f64,
    /// Electronic thermal conductance κ_e at zero current (W/K).
    pub thermal_conductance_w_per_k: f64,
    /// Lorenz ratio κ_e/(G T) in units of L0 = (π²/3)(kB/e)².
    pub lorenz_ratio: f64,
    /// Power factor S² G (W/K²).
    pub power_factor_w_per_k2: f64,
    /// Phonon thermal conductance used for ZT (W/K).
    pub phonon_conductance_w_per_k: f64,
    /// Where κ_ph came from: computed from the case's lattice, given, or
    /// none (κ_ph = 0: ZT is then an upper bound).
    pub phonon_conductance_source: crate::case::PhononConductanceSource,
    /// ZT = S² G T/(κ_e + κ_ph).
    pub zt: f64,
    /// Kelvin relation residual |Π − T S|/|Π| (Onsager |M12 − M21|/|M12|
    /// for finite differences).
    pub kelvin_residual: f64,
    /// How the coefficients were obtained.
    pub method: String,
}

impl Coefficients {
    /// Fill the derived quantities from G, S, Π, κ_e. κ_ph counts as given
    /// (as none when it is 0); a caller that computed it from a lattice
    /// says so with [`Coefficients::with_phonon_source`].
    #[allow(clippy::too_many_arguments)]
    pub fn from_parts(
        fermi_level_ev: f64,
        temperature_k: f64,
        conductance_s: f64,
        seebeck_v_per_k: f64,
        peltier_v: f64,
        thermal_conductance_w_per_k: f64,
        phonon_conductance_w_per_k: f64,
        kelvin_residual: f64,
        method: &str,
    ) -> Self {
        let pf = seebeck_v_per_k * seebeck_v_per_k * conductance_s;
        Self {
            fermi_level_ev,
            temperature_k,
            conductance_s,
            seebeck_v_per_k,
            peltier_v,
            thermal_conductance_w_per_k,
            lorenz_ratio: thermal_conductance_w_per_k
                / (conductance_s * temperature_k * LORENZ_NUMBER),
            power_factor_w_per_k2: pf,
            phonon_conductance_w_per_k,
            phonon_conductance_source: if phonon_conductance_w_per_k == 0.0 {
                crate::case::PhononConductanceSource::None
            } else {
                crate::case::PhononConductanceSource::Given
            },
            zt: pf * temperature_k / (thermal_conductance_w_per_k + phonon_conductance_w_per_k),
            kelvin_residual,
            method: method.to_string(),
        }
    }
}

impl Coefficients {
    /// The same coefficients with κ_ph marked as coming from `source`.
    pub fn with_phonon_source(mut self, source: crate::case::PhononConductanceSource) -> Self {
        self.phonon_conductance_source = source;
        self
    }
}

/// The moments L0, L1 (eV), L2 (eV²) of a transmission on a uniform grid.
pub fn transmission_moments(
    energies: &[f64],
    transmission: &[f64],
    step_ev: f64,
    fermi_level_ev: f64,
    temperature_k: f64,
) -> [f64; 3] {
    let mut l = [0.0; 3];
    for (&e, &t) in energies.iter().zip(transmission) {
        let w = t * fermi_window(e, fermi_level_ev, temperature_k) * step_ev;
        let d = e - fermi_level_ev;
        l[0] += w;
        l[1] += w * d;
        l[2] += w * d * d;
    }
    l
}

/// Coherent coefficients from T(E).
pub fn from_transmission(
    energies: &[f64],
    transmission: &[f64],
    step_ev: f64,
    fermi_level_ev: f64,
    temperature_k: f64,
    spin_degeneracy: f64,
    phonon_conductance_w_per_k: f64,
) -> Coefficients {
    let [l0, l1, l2] = transmission_moments(
        energies,
        transmission,
        step_ev,
        fermi_level_ev,
        temperature_k,
    );
    let g0 = spin_degeneracy * ELEMENTARY_CHARGE * ELEMENTARY_CHARGE / PLANCK;
    let g = g0 * l0;
    let s = -l1 / (temperature_k * l0);
    let pi = -l1 / l0;
    let kappa = g0 * (l2 - l1 * l1 / l0) / temperature_k;
    let kelvin = (pi - temperature_k * s).abs() / pi.abs();
    Coefficients::from_parts(
        fermi_level_ev,
        temperature_k,
        g,
        s,
        pi,
        kappa,
        phonon_conductance_w_per_k,
        kelvin,
        "transmission moments",
    )
}

/// Coherent coefficients of a problem: one pass at the problem's grid,
/// T(E) from it, moments around µ = (µ1 + µ2)/2 and T = (T1 + T2)/2. The
/// problem should describe the device at zero bias.
pub fn coherent_coefficients(
    problem: &crate::model::Problem,
    phonon_conductance_w_per_k: f64,
) -> Result<Coefficients, crate::scba::SolveError> {
    let sol = crate::scba::solve(
        problem,
        &crate::scba::ScbaParams::default(),
        None,
        &mut crate::scba::Silent,
    )?;
    let t: Vec<f64> = sol.pass.flows.iter().map(|f| f.transmission).collect();
    let mu = 0.5 * (problem.left.fermi_level_ev + problem.right.fermi_level_ev);
    let temp = 0.5 * (problem.left.temperature_k + problem.right.temperature_k);
    Ok(from_transmission(
        &problem.grid.energies(),
        &t,
        problem.grid.step_ev,
        mu,
        temp,
        problem.spin_degeneracy,
        phonon_conductance_w_per_k,
    ))
}
