//! Self-heating: the electrons and the lattice solved together.
//!
//! The electrons hand power to the lattice through the phonon modes; the
//! lattice carries that heat away and, where it cannot do so fast enough,
//! warms up; a warmer lattice holds more phonons, which changes the phonon
//! self-energies and so the electrons. This module closes that loop.
//!
//! The electron side is the Born loop with a lattice temperature per orbital
//! site ([`crate::scba::solve_in_lattice`]): mode m at site s has the Bose
//! occupation N(ħω_m, T_L,s). Its output here is the power deposited at
//! each orbital site, P_s = −∫ E j_0,s dE
//! ([`crate::observables::lattice_power_per_site`], positive where the
//! lattice is heated). The lattice side is anything that implements
//! [`LatticeResponse`]: given P_s it returns the temperature T_L,s at which
//! every site carries away exactly the power it receives: the network of
//! phonon probes, one floating reservoir per damped site
//! ([`FloatingProbes`]), or any other model.
//!
//! # The iteration
//!
//! Start from a profile T⁰ (the bath temperature everywhere unless another
//! is given). Outer iteration j:
//!
//! 1. solve the Born loop at T^j, warm-started from the Σ0 of the previous
//!    outer iteration (or the given one);
//! 2. compute P_s from that solution and ask the lattice for R(P), its
//!    temperature profile;
//! 3. stop when max_s |R_s − T^j_s| ≤ `tolerance_k` and the Born solve of
//!    this iteration converged; the answer is the solution at T^j, whose
//!    profile reproduces itself through the lattice to within the tolerance;
//! 4. otherwise form T^(j+1) from T^j and the residual R − T^j by
//!    Anderson mixing (default depth 4, factor β = 1; depth 0 is linear
//!    mixing T^(j+1) = T^j + β (R − T^j)).
//!
//! Why Anderson: the map T → R(P(T)) has a Jacobian of the lattice's
//! thermal resistance times ∂P/∂T, and ∂P/∂T < 0 (a hotter lattice absorbs
//! more of what the electrons emit), so the plain update overshoots and
//! oscillates. Measured on a 12-cell biased chain whose hottest site rises
//! by about 22 K: the plain update contracts by about 0.4 per outer
//! iteration and needs 20 outer iterations (86 Born iterations) for
//! 10⁻⁶ K; Anderson, which fits the local slope from the history, needs 9
//! (40 Born iterations; a single cold Born solve takes 6). The vector is
//! one temperature per orbital site, so the history costs nothing next to
//! a Born solve.
//!
//! The tolerance is in kelvin. The temperatures cannot be more accurate than
//! the powers behind them: with a Born tolerance ε the powers carry a
//! relative error of order ε, so `tolerance_k` should stay above
//! (thermal resistance) × ε × |P|, the temperature rise times ε: the
//! defaults (10⁻⁶ K against a Born tolerance of 10⁻⁷) suit a rise of up to
//! about 10 K; for more, tighten the Born tolerance or loosen this one.
//!
//! Reaching the outer iteration limit gives a result flagged as not
//! converged, as the Born loop does; a failing Born solve or lattice is an
//! error.

use crate::model::Problem;
use crate::observables::lattice_power_per_site;
use crate::progress::{LatticeIterationRecord, Observer};
use crate::scattering::{ScatteringSelfEnergy, check_lattice_temperature};
use crate::scba::{LeadTable, ScbaParams, Solution, SolveError, solve_in_lattice};

mod mixing;
mod probes;
use mixing::TemperatureMixer;
pub use probes::FloatingProbes;

/// The lattice's side of the loop: the temperature each orbital site
/// settles at when it receives a given power from the electrons.
pub trait LatticeResponse {
    /// Why the lattice could not answer.
    type Error: std::error::Error + 'static;

    /// Lattice temperature (K) at each orbital site when site s receives
    /// `power_w_per_site[s]` (W; positive: heated, negative: cooled) from
    /// the electrons. Must return one finite temperature above 0 K per site.
    fn temperatures(&mut self, power_w_per_site: &[f64]) -> Result<Vec<f64>, Self::Error>;
}

/// Settings of the joint electron–lattice loop. Start from
/// [`SelfHeatParams::default`] and change what differs with the `with_…`
/// methods.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
#[non_exhaustive]
pub struct SelfHeatParams {
    /// Stop when no site's lattice temperature moves by more than this
    /// between the profile used and the lattice's answer (K).
    pub tolerance_k: f64,
    /// Outer iteration limit (each one a Born solve); reaching it gives a
    /// result flagged as not converged.
    pub max_iterations: usize,
    /// Mixing factor β in (0, 1] on the temperatures.
    pub mixing_factor: f64,
    /// Anderson history depth; 0 gives linear mixing.
    pub anderson_depth: usize,
}

impl SelfHeatParams {
    /// Default tolerance on the lattice temperature (K).
    pub const DEFAULT_TOLERANCE_K: f64 = 1e-6;
    /// Default outer iteration limit.
    pub const DEFAULT_MAX_ITERATIONS: usize = 50;
    /// Default mixing factor β.
    pub const DEFAULT_MIXING_FACTOR: f64 = 1.0;
    /// Default Anderson history depth.
    pub const DEFAULT_ANDERSON_DEPTH: usize = 4;

    /// These settings with Anderson history depth `anderson_depth` (0:
    /// linear mixing).
    pub fn with_anderson_depth(self, anderson_depth: usize) -> Self {
        Self {
            anderson_depth,
            ..self
        }
    }

    /// These settings with tolerance `tolerance_k` (K).
    pub fn with_tolerance_k(self, tolerance_k: f64) -> Self {
        Self {
            tolerance_k,
            ..self
        }
    }

    /// These settings with outer iteration limit `max_iterations`.
    pub fn with_max_iterations(self, max_iterations: usize) -> Self {
        Self {
            max_iterations,
            ..self
        }
    }

    /// These settings with mixing factor `mixing_factor`.
    pub fn with_mixing_factor(self, mixing_factor: f64) -> Self {
        Self {
            mixing_factor,
            ..self
        }
    }

    /// Checks the settings; the message names the setting, the value and
    /// the range expected.
    fn check(&self) -> Result<(), String> {
        if !(self.tolerance_k.is_finite() && self.tolerance_k > 0.0) {
            return Err(format!(
                "self-heating tolerance_k = {} K; expected a finite value above 0 \
                 (the default is {} K)",
                self.tolerance_k,
                Self::DEFAULT_TOLERANCE_K
            ));
        }
        if self.max_iterations == 0 {
            return Err("self-heating max_iterations = 0; expected at least 1".into());
        }
        if !(self.mixing_factor > 0.0 && self.mixing_factor <= 1.0) {
            return Err(format!(
                "self-heating mixing_factor = {}; expected a value in (0, 1] \
                 (1 takes the whole residual; smaller damps a strong feedback)",
                self.mixing_factor
            ));
        }
        Ok(())
    }
}

impl Default for SelfHeatParams {
    fn default() -> Self {
        Self {
            tolerance_k: Self::DEFAULT_TOLERANCE_K,
            max_iterations: Self::DEFAULT_MAX_ITERATIONS,
            mixing_factor: Self::DEFAULT_MIXING_FACTOR,
            anderson_depth: Self::DEFAULT_ANDERSON_DEPTH,
        }
    }
}

/// Where the loop starts: a lattice-temperature profile (K, one value per
/// orbital site; default: the bath temperature everywhere, see
/// [`bath_temperature`]) and a Σ0 for the first Born solve (default: zero).
#[derive(Clone, Copy, Debug, Default)]
pub struct SelfHeatStart<'a> {
    /// Starting lattice temperatures (K).
    pub lattice_temperature_k: Option<&'a [f64]>,
    /// Σ0 of a neighbouring solve.
    pub sigma: Option<&'a ScatteringSelfEnergy>,
}

/// The convergence record of the joint loop.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct SelfHeatReport {
    /// True when the temperatures met the tolerance and the last Born solve
    /// converged.
    pub converged: bool,
    /// Outer iterations done, which is also the number of Born solves.
    pub iterations: usize,
    /// Born iterations summed over all outer iterations.
    pub born_iterations: usize,
    /// max_s |T_L,s(lattice) − T_L,s(used)| of the last outer iteration (K).
    pub last_change_k: f64,
    /// Every outer iteration.
    pub history: Vec<LatticeIterationRecord>,
    /// The settings used.
    pub params: SelfHeatParams,
    /// Started from a given profile rather than the bath temperature.
    pub given_start: bool,
}

/// A self-consistent electron–lattice operating point.
#[derive(Clone, Debug)]
pub struct SelfHeatSolution {
    /// The Born solution at the final profile (it carries the profile as
    /// [`Solution::lattice_temperature_k`]).
    pub solution: Solution,
    /// The lattice temperature used in that solve (K), per orbital site.
    pub lattice_temperature_k: Vec<f64>,
    /// The lattice's answer to that solve's powers (K); within
    /// `tolerance_k` of `lattice_temperature_k` when converged.
    pub response_temperature_k: Vec<f64>,
    /// Power deposited at each orbital site by that solve (W).
    pub lattice_power_w: Vec<f64>,
    /// Convergence record.
    pub report: SelfHeatReport,
}

/// Why the joint loop stopped without an answer.
#[derive(Debug, thiserror::Error)]
pub enum SelfHeatError<E: std::error::Error + 'static> {
    /// A Born solve failed.
    #[error("Born solve in self-heating iteration {iteration}: {source}")]
    Solve {
        /// Outer iteration (1-based).
        iteration: usize,
        /// The fault.
        source: SolveError,
    },
    /// The lattice response failed.
    #[error("lattice response in self-heating iteration {iteration}: {source}")]
    Lattice {
        /// Outer iteration (1-based).
        iteration: usize,
        /// The fault.
        source: E,
    },
    /// Settings, a starting profile or a lattice answer that does not fit.
    #[error("{0}")]
    Invalid(String),
}

/// The temperature the loop starts from by default (K): the bath
/// temperature of the first phonon mode, or the mean of the contact
/// temperatures without phonons.
pub fn bath_temperature(problem: &Problem) -> f64 {
    problem
        .scattering
        .phonons
        .first()
        .map(|m| m.bath_temperature_k)
        .unwrap_or(0.5 * (problem.left.temperature_k + problem.right.temperature_k))
}

/// Solve the Born loop and the lattice temperatures to joint
/// self-consistency (module docs). Born progress and each outer iteration
/// go to `observer`.
pub fn solve<L: LatticeResponse + ?Sized>(
    problem: &Problem,
    scba: &ScbaParams,
    params: &SelfHeatParams,
    lattice: &mut L,
    start: SelfHeatStart<'_>,
    observer: &mut dyn Observer,
) -> Result<SelfHeatSolution, SelfHeatError<L::Error>> {
    params.check().map_err(SelfHeatError::Invalid)?;
    let ns = problem.sites();
    let mut t = match start.lattice_temperature_k {
        Some(t) => {
            check_lattice_temperature(t, ns)
                .map_err(|e| SelfHeatError::Invalid(format!("starting profile: {e}")))?;
            t.to_vec()
        }
        None => vec![bath_temperature(problem); ns],
    };
    let leads = LeadTable::new(problem).map_err(|source| SelfHeatError::Solve {
        iteration: 1,
        source,
    })?;
    let mut report = SelfHeatReport {
        converged: false,
        iterations: 0,
        born_iterations: 0,
        last_change_k: f64::INFINITY,
        history: Vec::new(),
        params: *params,
        given_start: start.lattice_temperature_k.is_some(),
    };
    let mut warm = start.sigma.cloned();
    let mut mixer = TemperatureMixer::new(params.anderson_depth, params.mixing_factor);
    loop {
        let iteration = report.iterations + 1;
        let solution = solve_in_lattice(problem, &leads, Some(&t), scba, warm.as_ref(), observer)
            .map_err(|source| SelfHeatError::Solve { iteration, source })?;
        let power = lattice_power_per_site(&solution);
        let response = lattice
            .temperatures(&power)
            .map_err(|source| SelfHeatError::Lattice { iteration, source })?;
        check_lattice_temperature(&response, ns)
            .map_err(|e| SelfHeatError::Invalid(format!("lattice response: {e}")))?;
        let change = max_change(&t, &response);
        let record = LatticeIterationRecord {
            iteration,
            temperature_change_k: change,
            born_iterations: solution.report.iterations,
            born_converged: solution.report.converged,
            lattice_power_w: power.iter().sum(),
        };
        observer.lattice_iteration(&record);
        report.history.push(record);
        report.iterations = iteration;
        report.born_iterations += solution.report.iterations;
        report.last_change_k = change;
        report.converged = change <= params.tolerance_k && solution.report.converged;
        if report.converged || iteration >= params.max_iterations {
            return Ok(SelfHeatSolution {
                solution,
                lattice_temperature_k: t,
                response_temperature_k: response,
                lattice_power_w: power,
                report,
            });
        }
        let residual: Vec<f64> = response.iter().zip(&t).map(|(r, t)| r - t).collect();
        t = mixer.next(&t, &residual);
        if check_lattice_temperature(&t, ns).is_err() {
            // An extrapolating step can overshoot below 0 K when the
            // lattice answers wildly; take the lattice's answer instead.
            t = response;
        }
        warm = Some(solution.sigma);
    }
}

/// max_s |b_s − a_s|, NaN-safe (a NaN counts as an infinite change).
fn max_change(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).fold(0.0, |m: f64, (x, y)| {
        let d = (y - x).abs();
        if d.is_nan() { f64::INFINITY } else { m.max(d) }
    })
}
