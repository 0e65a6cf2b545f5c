//! Linear response with scattering, by central finite differences through
//! converged Born solutions.
//!
//! Around (µ, T) the perturbation is split symmetrically,
//! µ1 = µ − eV/2, µ2 = µ + eV/2, T1 = T + ΔT/2, T2 = T − ΔT/2, with the
//! phonon bath held at T, and
//!
//! ```text
//! I   = M11 V + M12 ΔT/T
//! J_Q = M21 V + M22 ΔT/T,   J_Q = (J_Q,1 − J_Q,2)/2
//! ```
//!
//! J_Q is the flux conjugate to the symmetric split; with a bath (a third
//! reservoir) J_Q,1 alone is not, and M12 ≠ M21 by several percent for an
//! asymmetric device. The option [`ResponseSplit::LeftOnly`] perturbs lead 1 alone
//! (lead 2 and the bath at (µ, T)) and uses J_Q = J_Q,1. Each of the four
//! runs (V = ±δV, ΔT = 0 and ΔT = ±δT, V = 0) is a full converged solve.

use super::Coefficients;
use crate::case::ResponseSplit;
use crate::grid::EnergyGrid;
use crate::model::Problem;
use crate::observables::observe;
use crate::scba::{Observer, ScbaParams, ScbaReport, SolveError, solve};
use crate::units::thermal_energy_ev;

/// The operating point of one finite-difference run.
#[derive(Clone, Copy, Debug, PartialEq)]
#[non_exhaustive]
pub struct OperatingPoint {
    /// Fermi level of lead 1 (eV).
    pub fermi_level_left_ev: f64,
    /// Fermi level of lead 2 (eV).
    pub fermi_level_right_ev: f64,
    /// Temperature of lead 1 (K).
    pub temperature_left_k: f64,
    /// Temperature of lead 2 (K).
    pub temperature_right_k: f64,
    /// Phonon bath temperature (K).
    pub bath_temperature_k: f64,
    /// Applied voltage V = −(µ1 − µ2)/e (V).
    pub voltage_v: f64,
}

/// The response matrix and how it was obtained.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
#[non_exhaustive]
pub struct ResponseMatrix {
    /// ∂I/∂V (S).
    pub m11: f64,
    /// T ∂I/∂ΔT (A).
    pub m12: f64,
    /// ∂J_Q/∂V (A... W/V).
    pub m21: f64,
    /// T ∂J_Q/∂ΔT (W).
    pub m22: f64,
    /// Voltage step δV (V).
    pub delta_v: f64,
    /// Temperature step δT (K).
    pub delta_t_k: f64,
    /// Split used.
    pub split: ResponseSplit,
    /// |M12 − M21|/|M12|.
    pub onsager_residual: f64,
    /// True when all four runs converged.
    pub converged: bool,
    /// Born iterations of the four runs.
    pub iterations: Vec<usize>,
    /// The energy grid all four runs shared.
    pub grid: EnergyGrid,
    /// The phonon energies, snapped to that grid, all four runs shared (eV).
    pub phonon_energies_ev: Vec<f64>,
}

/// Operating point for (V, ΔT) around (µ, T) with a split.
pub fn operating_point(
    mu_ev: f64,
    t_k: f64,
    v: f64,
    dt: f64,
    split: ResponseSplit,
) -> OperatingPoint {
    match split {
        ResponseSplit::Symmetric => OperatingPoint {
            fermi_level_left_ev: mu_ev - 0.5 * v,
            fermi_level_right_ev: mu_ev + 0.5 * v,
            temperature_left_k: t_k + 0.5 * dt,
            temperature_right_k: t_k - 0.5 * dt,
            bath_temperature_k: t_k,
            voltage_v: v,
        },
        ResponseSplit::LeftOnly => OperatingPoint {
            fermi_level_left_ev: mu_ev - v,
            fermi_level_right_ev: mu_ev,
            temperature_left_k: t_k + dt,
            temperature_right_k: t_k,
            bath_temperature_k: t_k,
            voltage_v: v,
        },
    }
}

/// The steps δV = 1e-3 kT/e (V) and δT = 1e-3 T (K) around temperature T.
pub fn difference_steps(temperature_k: f64) -> (f64, f64) {
    (
        1e-3 * thermal_energy_ev(temperature_k),
        1e-3 * temperature_k,
    )
}

/// The operating points of the four runs in the order they are solved:
/// V = +δV, −δV (ΔT = 0), then ΔT = +δT, −δT (V = 0).
pub fn difference_points(
    mu_ev: f64,
    temperature_k: f64,
    split: ResponseSplit,
) -> [OperatingPoint; 4] {
    let (dv, dt) = difference_steps(temperature_k);
    [(dv, 0.0), (-dv, 0.0), (0.0, dt), (0.0, -dt)]
        .map(|(v, d)| operating_point(mu_ev, temperature_k, v, d, split))
}

/// Errors of the response calculation.
#[derive(Debug, thiserror::Error)]
pub enum ResponseError {
    /// The problem could not be built at an operating point.
    #[error("building the operating point failed: {0}")]
    Build(String),
    /// A solve failed.
    #[error(transparent)]
    Solve(#[from] SolveError),
    /// Two runs were built on different energy grids (or with differently
    /// snapped phonon energies): their difference would mix the change of
    /// grid into the response.
    #[error(
        "the finite-difference runs must share one energy grid, found {first} in the first run and {other} in run {run}: give grid.step_ev, grid.min_ev and grid.max_ev explicitly, or build every run on one grid"
    )]
    GridMoved {
        /// The first run's grid, in words.
        first: String,
        /// The differing run's grid, in words.
        other: String,
        /// Which run (1-based).
        run: usize,
    },
}

fn grid_words(p: &Problem) -> String {
    let ph: Vec<String> = p
        .scattering
        .phonons
        .iter()
        .map(|m| format!("{:e}", m.energy_ev))
        .collect();
    format!(
        "step {:e} eV from {:e} eV, {} points, phonon energies [{}] eV",
        p.grid.step_ev,
        p.grid.min_ev,
        p.grid.count,
        ph.join(", ")
    )
}

/// Run `run` of a linear response must share the first run's energy grid
/// and snapped phonon energies.
fn same_grid(first: &Problem, problem: &Problem, run: usize) -> Result<(), ResponseError> {
    let same_phonons = first.scattering.phonons.len() == problem.scattering.phonons.len()
        && first
            .scattering
            .phonons
            .iter()
            .zip(&problem.scattering.phonons)
            .all(|(a, b)| a.energy_ev == b.energy_ev && a.steps == b.steps);
    if first.grid != problem.grid || !same_phonons {
        return Err(ResponseError::GridMoved {
            first: grid_words(first),
            other: grid_words(problem),
            run,
        });
    }
    Ok(())
}

/// G, S, Π and κ_e from the response matrix: G = M11, S = M12/(T M11),
/// Π = M21/M11, κ_e = (M22 − M12 M21/M11)/T.
fn coefficients_of(
    matrix: &ResponseMatrix,
    mu_ev: f64,
    temperature_k: f64,
    phonon_conductance_w_per_k: f64,
) -> Coefficients {
    let (m11, m12, m21, m22) = (matrix.m11, matrix.m12, matrix.m21, matrix.m22);
    let g = m11;
    let s = m12 / (temperature_k * m11);
    let pi = m21 / m11;
    let kappa = (m22 - m12 * m21 / m11) / temperature_k;
    Coefficients::from_parts(
        mu_ev,
        temperature_k,
        g,
        s,
        pi,
        kappa,
        phonon_conductance_w_per_k,
        matrix.onsager_residual,
        match matrix.split {
            ResponseSplit::Symmetric => "finite differences, symmetric split",
            ResponseSplit::LeftOnly => "finite differences, lead 1 only",
        },
    )
}

/// Linear-response coefficients by finite differences. `build` returns the
/// problem at an operating point (it must apply the voltage to the device
/// potential as the case prescribes). δV = 1e-3 kT/e and δT = 1e-3 T keep
/// the central-difference error, (δ/kT)²/6 ≈ 2e-7, below 1e-6; the Born
/// tolerance is tightened to 1e-12 for the same reason, because the
/// differences are a 1e-3 part of the currents. All four problems must
/// share one energy grid and one set of snapped phonon energies
/// ([`ResponseError::GridMoved`] otherwise); see
/// [`super::common_grid::CommonGrid`] for choosing one.
pub fn linear_response(
    build: &dyn Fn(&OperatingPoint) -> Result<Problem, String>,
    mu_ev: f64,
    temperature_k: f64,
    split: ResponseSplit,
    params: &ScbaParams,
    phonon_conductance_w_per_k: f64,
    observer: &mut dyn Observer,
) -> Result<(Coefficients, ResponseMatrix, Vec<ScbaReport>), ResponseError> {
    let (dv, dt) = difference_steps(temperature_k);
    let points = difference_points(mu_ev, temperature_k, split);
    let mut tight = *params;
    tight.tolerance = params.tolerance.min(1e-12);
    tight.current_floor_a = params.current_floor_a.min(1e-24);
    tight.max_iterations = params.max_iterations.max(100);
    let mut warm = None;
    let mut reports = Vec::new();
    let mut first: Option<Problem> = None;
    let mut run = |op: &OperatingPoint| -> Result<(f64, f64), ResponseError> {
        let problem = build(op).map_err(ResponseError::Build)?;
        match &first {
            None => first = Some(problem.clone()),
            Some(f) => same_grid(f, &problem, reports.len() + 1)?,
        }
        let sol = solve(&problem, &tight, warm.as_ref(), observer)?;
        let o = observe(&sol);
        let jq = match split {
            ResponseSplit::Symmetric => 0.5 * (o.heat_current_left_w - o.heat_current_right_w),
            ResponseSplit::LeftOnly => o.heat_current_left_w,
        };
        if !problem.scattering.is_coherent() {
            warm = Some(sol.sigma.clone());
        }
        reports.push(sol.report);
        Ok((o.current_a, jq))
    };
    let (ip, qp) = run(&points[0])?;
    let (im, qm) = run(&points[1])?;
    let (it_, qt) = run(&points[2])?;
    let (itm, qtm) = run(&points[3])?;
    let shared = first.expect("four runs were built");
    let m11 = (ip - im) / (2.0 * dv);
    let m21 = (qp - qm) / (2.0 * dv);
    let m12 = temperature_k * (it_ - itm) / (2.0 * dt);
    let m22 = temperature_k * (qt - qtm) / (2.0 * dt);
    let onsager = (m12 - m21).abs() / m12.abs();
    let matrix = ResponseMatrix {
        m11,
        m12,
        m21,
        m22,
        delta_v: dv,
        delta_t_k: dt,
        split,
        onsager_residual: onsager,
        converged: reports.iter().all(|r| r.converged),
        iterations: reports.iter().map(|r| r.iterations).collect(),
        grid: shared.grid.clone(),
        phonon_energies_ev: shared
            .scattering
            .phonons
            .iter()
            .map(|m| m.energy_ev)
            .collect(),
    };
    let c = coefficients_of(&matrix, mu_ev, temperature_k, phonon_conductance_w_per_k);
    Ok((c, matrix, reports))
}
