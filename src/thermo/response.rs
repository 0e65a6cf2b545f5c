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
use super::point::{PointSolution, PointStart, solve_point};
use crate::case::ResponseSplit;
use crate::electrostatics::Electrostatics;
use crate::grid::EnergyGrid;
use crate::model::Problem;
use crate::observables::observe;
use crate::scattering::ScatteringSelfEnergy;
use crate::scba::{Observer, ScbaParams, ScbaReport, SolveError};
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
    /// With electrostatics: the potential solved at every run.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub electrostatics: Option<ResponseElectrostatics>,
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
    let at = Around {
        mu_ev,
        temperature_k,
        split,
    };
    linear_response_with(
        build,
        None,
        at,
        params,
        phonon_conductance_w_per_k,
        observer,
    )
}

/// The reference point of a linear response and how it is perturbed.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Around {
    /// Reference Fermi level µ (eV).
    pub mu_ev: f64,
    /// Reference temperature T (K).
    pub temperature_k: f64,
    /// How the perturbation is split between the leads.
    pub split: ResponseSplit,
}

/// The electrostatics of a linear response: every run solved its own
/// potential, warm-started from that of the unperturbed point.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct ResponseElectrostatics {
    /// True: the potential was solved at every run, none was imposed.
    pub potential_solved_at_every_run: bool,
    /// Outer iterations of the unperturbed point, then of the four runs.
    pub outer_iterations: Vec<usize>,
    /// Computed drop φ(first cell) − φ(last cell) (V) of the unperturbed
    /// point, then of the four runs.
    pub potential_drop_v: Vec<f64>,
    /// The outer tolerance the runs used (eV): the case's, tightened to
    /// 1e-3 δV so the potential's error moves G by well under 1e-6.
    pub tolerance_ev: f64,
    /// True when the potential converged in all five solves.
    pub converged: bool,
}

/// [`linear_response`] with the electrostatics of the device's own charge:
/// with `electrostatics`, the unperturbed point is solved first and every
/// perturbed run solves its own potential, starting from that point's
/// potential and Σ0; the outer tolerance is tightened to 1e-3 δV (an error
/// ε of the potential moves the currents by about ε/kT of themselves, and
/// 1e-3 δV/kT = 1e-6). Without it, exactly [`linear_response`].
pub fn linear_response_with(
    build: &dyn Fn(&OperatingPoint) -> Result<Problem, String>,
    electrostatics: Option<&Electrostatics>,
    at: Around,
    params: &ScbaParams,
    phonon_conductance_w_per_k: f64,
    observer: &mut dyn Observer,
) -> Result<(Coefficients, ResponseMatrix, Vec<ScbaReport>), ResponseError> {
    let Around {
        mu_ev,
        temperature_k,
        split,
    } = at;
    let (dv, dt) = difference_steps(temperature_k);
    let points = difference_points(mu_ev, temperature_k, split);
    let mut tight = *params;
    tight.tolerance = params.tolerance.min(1e-12);
    tight.current_floor_a = params.current_floor_a.min(1e-24);
    tight.max_iterations = params.max_iterations.max(100);
    let es = electrostatics.map(|e| Electrostatics {
        tolerance_ev: e.tolerance_ev.min(1e-3 * dv),
        ..e.clone()
    });
    let mut runs = Runs {
        build,
        es: es.as_ref(),
        params: &tight,
        split,
        first: None,
        warm: None,
        base: None,
        reports: Vec::new(),
        outer: Vec::new(),
    };
    if es.is_some() {
        let base = operating_point(mu_ev, temperature_k, 0.0, 0.0, split);
        runs.base(&base, observer)?;
    }
    let (ip, qp) = runs.run(&points[0], observer)?;
    let (im, qm) = runs.run(&points[1], observer)?;
    let (it_, qt) = runs.run(&points[2], observer)?;
    let (itm, qtm) = runs.run(&points[3], observer)?;
    let shared = runs.first.take().expect("four runs were built");
    let m11 = (ip - im) / (2.0 * dv);
    let m21 = (qp - qm) / (2.0 * dv);
    let m12 = temperature_k * (it_ - itm) / (2.0 * dt);
    let m22 = temperature_k * (qt - qtm) / (2.0 * dt);
    let electrostatics = es.as_ref().map(|e| runs.electrostatics(e.tolerance_ev));
    let es_converged = electrostatics.as_ref().is_none_or(|e| e.converged);
    let reports = runs.reports;
    let matrix = ResponseMatrix {
        m11,
        m12,
        m21,
        m22,
        delta_v: dv,
        delta_t_k: dt,
        split,
        onsager_residual: (m12 - m21).abs() / m12.abs(),
        converged: reports.iter().all(|r| r.converged) && es_converged,
        iterations: reports.iter().map(|r| r.iterations).collect(),
        grid: shared.grid.clone(),
        phonon_energies_ev: shared
            .scattering
            .phonons
            .iter()
            .map(|m| m.energy_ev)
            .collect(),
        electrostatics,
    };
    let c = coefficients_of(&matrix, mu_ev, temperature_k, phonon_conductance_w_per_k);
    Ok((c, matrix, reports))
}

/// The runs of one linear response: the problems they were built on, the
/// starts they hand on and what they report.
struct Runs<'a> {
    build: &'a dyn Fn(&OperatingPoint) -> Result<Problem, String>,
    es: Option<&'a Electrostatics>,
    params: &'a ScbaParams,
    split: ResponseSplit,
    /// The first problem built: every later one must share its grid.
    first: Option<Problem>,
    /// Without electrostatics: the Σ0 of the previous run.
    warm: Option<ScatteringSelfEnergy>,
    /// With electrostatics: the unperturbed point, every run's start.
    base: Option<PointSolution>,
    /// Born records of the four runs.
    reports: Vec<ScbaReport>,
    /// With electrostatics: outer iterations, computed drop and
    /// convergence of the unperturbed point and of each run.
    outer: Vec<(usize, f64, bool)>,
}

impl Runs<'_> {
    /// Build the problem at `op`; it must share the first one's grid.
    fn problem(&mut self, op: &OperatingPoint) -> Result<Problem, ResponseError> {
        let problem = (self.build)(op).map_err(ResponseError::Build)?;
        match &self.first {
            None => self.first = Some(problem.clone()),
            Some(f) => same_grid(f, &problem, self.reports.len() + 1)?,
        }
        Ok(problem)
    }

    /// Solve `op` from `start`, noting the electrostatics record.
    fn solve(
        &mut self,
        op: &OperatingPoint,
        start: PointStart<'_>,
        observer: &mut dyn Observer,
    ) -> Result<PointSolution, ResponseError> {
        let problem = self.problem(op)?;
        let point = solve_point(&problem, self.es, self.params, start, observer)?;
        if let Some(e) = &point.electrostatics {
            let r = &e.report;
            self.outer
                .push((r.outer_iterations, e.potential_drop_v(), r.converged));
        }
        Ok(point)
    }

    /// Solve the unperturbed point, the start of every run.
    fn base(
        &mut self,
        op: &OperatingPoint,
        observer: &mut dyn Observer,
    ) -> Result<(), ResponseError> {
        let point = self.solve(op, PointStart::default(), observer)?;
        self.base = Some(point);
        Ok(())
    }

    /// One run: its current and the heat current conjugate to the split.
    fn run(
        &mut self,
        op: &OperatingPoint,
        observer: &mut dyn Observer,
    ) -> Result<(f64, f64), ResponseError> {
        let base = self.base.take();
        let warm = self.warm.take();
        let start = match &base {
            Some(b) => b.as_start(),
            None => PointStart::sigma(warm.as_ref()),
        };
        let point = self.solve(op, start, observer);
        self.base = base;
        let sol = point?.solution;
        let o = observe(&sol);
        let jq = match self.split {
            ResponseSplit::Symmetric => 0.5 * (o.heat_current_left_w - o.heat_current_right_w),
            ResponseSplit::LeftOnly => o.heat_current_left_w,
        };
        if !sol.problem.scattering.is_coherent() {
            self.warm = Some(sol.sigma.clone());
        }
        self.reports.push(sol.report);
        Ok((o.current_a, jq))
    }

    /// The electrostatics record of the five solves.
    fn electrostatics(&self, tolerance_ev: f64) -> ResponseElectrostatics {
        ResponseElectrostatics {
            potential_solved_at_every_run: true,
            outer_iterations: self.outer.iter().map(|o| o.0).collect(),
            potential_drop_v: self.outer.iter().map(|o| o.1).collect(),
            tolerance_ev,
            converged: self.outer.iter().all(|o| o.2),
        }
    }
}
