//! One operating point: the Born solve (with the joint lattice loop when
//! the lattice is heated, or with the electrostatics when the case asks
//! for it), its observables and summary, and the result folder.

use super::{Loaded, SessionError, WriteOptions, folder};
use crate::case::Resolved;
use crate::electrostatics;
use crate::lattice::PhononSpectrum;
use crate::observables::{Observables, ObserveOptions, observe_with, timed};
use crate::output::phonons::{lattice_summary, write_phonon_files};
use crate::output::results::{
    LATTICE_TEMPERATURE_FILE, RunInfo, header, read_lattice_temperature, read_self_energy,
    solve_summary, write_solve_files_within,
};
use crate::output::schema::summary::{
    ElectrostaticsSummary, FailedSolveSummary, Fault, SelfHeatingSummary, SolveSummary, to_text,
};
use crate::output::schema::tables::cell_lattice_temperature;
use crate::output::{OtherFiles, Staging};
use crate::progress::Observer;
use crate::scattering::ScatteringSelfEnergy;
use crate::scba::{Solution, SolveError, solve as born_solve};
use crate::selfheat::{self, FloatingProbes, SelfHeatReport, SelfHeatStart};
use std::path::Path;

/// How to run a solve besides the case.
#[derive(Clone, Copy, Debug, Default)]
pub struct SolveOptions<'a> {
    /// Start the Born loop from the self-energy (and, after a self-heating
    /// solve, the lattice temperatures) stored in this earlier result folder.
    pub warm_start: Option<&'a Path>,
    /// Worker threads, recorded in the summary.
    pub threads: usize,
}

/// A solved operating point: everything `qheat solve` computes, in memory.
#[derive(Clone, Debug)]
pub struct Solved {
    /// The case that was solved.
    pub loaded: Loaded,
    /// The solution of the Born loop (Green's functions, self-energy,
    /// convergence record).
    pub solution: Solution,
    /// Currents, heat currents, lattice power, ledger and the per-cell
    /// quantities.
    pub observables: Observables,
    /// The summary, as summary.json holds it (its `result_files` entry is
    /// set when the folder is written).
    pub summary: SolveSummary,
    heat: Option<SelfHeatRun>,
    es: Option<electrostatics::ElectrostaticsReport>,
}

/// What a warm start reads from an earlier result folder: its scattering
/// self-energy and, from a self-heating solve, its lattice temperatures.
struct WarmStart {
    sigma: ScatteringSelfEnergy,
    lattice_temperature_k: Option<Vec<f64>>,
}

/// What the joint electron–lattice loop adds to a solve.
#[derive(Clone, Debug)]
struct SelfHeatRun {
    report: SelfHeatReport,
    left_lead_heat_w: f64,
    right_lead_heat_w: f64,
}

/// What the self-consistent electrostatics adds to a solve.
struct EsRun {
    potential_ev: Vec<f64>,
    electrons: Vec<f64>,
    report: electrostatics::ElectrostaticsReport,
}

/// Why a solve gave no solution: a Born fault (a failed-solve summary) or
/// a fault of the lattice side.
enum RunError {
    Born(SolveError),
    Other(String),
}

/// Solve one operating point of `loaded` (what `qheat solve` computes),
/// reporting to `observer`, which may also stop the run.
pub fn solve(
    loaded: Loaded,
    options: &SolveOptions<'_>,
    observer: &mut dyn Observer,
) -> Result<Solved, SessionError> {
    let warm = match options.warm_start {
        Some(dir) => Some(read_warm_start(dir, &loaded.resolved)?),
        None => None,
    };
    let resolved = &loaded.resolved;
    let mut es_run = None;
    let result = match &resolved.electrostatics {
        Some(es) => run_electrostatics(resolved, es, observer).map(|(s, r)| {
            es_run = Some(r);
            (s, None)
        }),
        None => timed("Born loop", || run_solve(resolved, warm.as_ref(), observer)),
    };
    let (sol, heat) = match result {
        Ok(s) => s,
        Err(RunError::Other(message)) => return Err(SessionError::Solver(message)),
        Err(RunError::Born(SolveError::Cancelled { .. })) => return Err(SessionError::Cancelled),
        Err(RunError::Born(error)) => {
            let failure = Box::new(failed_summary(&loaded, options.threads, &error));
            return Err(SessionError::Born { error, failure });
        }
    };
    let o = timed("observables", || observe_solution(resolved, &sol))?;
    let case_toml = loaded.case.to_toml_string();
    let mut summary = timed("summary", || {
        solve_summary(&sol, &o, &run_info(&loaded, &case_toml, options.threads))
    });
    summary.self_heating = heat.as_ref().map(|h| self_heating_summary(&sol, &o, h));
    summary.electrostatics = es_run.as_ref().map(|r| electrostatics_summary(&sol, r));
    let es_stopped_short = es_run.as_ref().is_some_and(|r| !r.report.converged);
    if heat.as_ref().is_some_and(|h| !h.report.converged) || es_stopped_short {
        summary.converged = false;
        summary.trustworthy = false;
    }
    let t = mean_lead_temperature(resolved);
    summary.lattice = phonon_spectrum(resolved)?.map(|s| lattice_summary(resolved, s, t));
    Ok(Solved {
        solution: sol,
        observables: o,
        summary,
        heat,
        es: es_run.map(|r| r.report),
        loaded,
    })
}

/// What the summaries record about the run.
fn run_info<'a>(loaded: &'a Loaded, case_toml: &'a str, threads: usize) -> RunInfo<'a> {
    RunInfo {
        case_name: &loaded.case.name,
        case_file: &loaded.case_file,
        case_toml,
        warnings: &loaded.resolved.warnings,
        notes: &loaded.resolved.notes,
        threads,
    }
}

/// The lattice is described at the mean lead temperature.
fn mean_lead_temperature(resolved: &Resolved) -> f64 {
    0.5 * (resolved.problem.left.temperature_k + resolved.problem.right.temperature_k)
}

/// The phonon spectrum of the case's lattice (`None` without one),
/// computed once per lattice.
pub(super) fn phonon_spectrum(
    resolved: &Resolved,
) -> Result<Option<&PhononSpectrum>, SessionError> {
    resolved.phonon_spectrum().transpose().map_err(|e| {
        SessionError::Solver(format!(
            "phonon spectrum of the case's [lattice]: {e}; nothing was written"
        ))
    })
}

impl Solved {
    /// Write the result folder `qheat solve` writes into `dir` (staged and
    /// put in place at once) and return the summary as written (with its
    /// `result_files` entry).
    pub fn write(&self, dir: &Path, options: &WriteOptions) -> Result<SolveSummary, SessionError> {
        let resolved = &self.loaded.resolved;
        let phonons = phonon_spectrum(resolved)?;
        let mut summary = self.summary.clone();
        let stage = Staging::with_options(dir, &folder("solve", options.other_files))?;
        let (sol, o) = (&self.solution, &self.observables);
        timed("result files", || {
            write_solve_files_within(&stage, sol, o, &mut summary, &options.limits)
        })?;
        if let Some(s) = phonons {
            write_phonon_files(&stage, s, mean_lead_temperature(resolved))?;
        }
        let potential =
            (summary.electrostatics.as_ref()).map(|e| &e.potential_energy_per_cell_ev[..]);
        timed("figures", || {
            crate::output::plots::write_solve_plots_with_potential(
                &stage,
                sol,
                o,
                potential,
                &options.limits,
            )
        })?;
        timed("commit", || stage.commit())?;
        Ok(summary)
    }

    /// Whether every loop of the solve converged (the Born loop, and the
    /// joint lattice loop or the electrostatics when they ran).
    pub fn converged(&self) -> bool {
        self.summary.converged && self.solution.report.converged
    }

    /// Why the results are flagged as not converged, or `None` when they
    /// are not; `results` names where they are (e.g. "results in DIR").
    /// The electrostatics is named first, then the joint lattice loop,
    /// then the Born loop.
    pub fn not_converged(&self, results: &str) -> Option<String> {
        if let Some(r) = self.es.as_ref().filter(|r| !r.converged) {
            return Some(format!(
                "the electrostatics did not converge in {} outer iterations (last potential change \
                 {:.3e} eV against a tolerance of {:.1e} eV, Poisson residual {:.3e} electrons); \
                 {results} are flagged as not converged (hint: the last potential change is about how far the potential may still be from \
                 self-consistent; docs/electrostatics.md (\"Known problem\") describes the stalls known \
                 so far, such as a cell's electron count that jumps by a few per cent as a band \
                 edge crosses a grid energy; a smaller grid.step_ev ({:.1e} eV now) makes that \
                 ripple smaller)",
                r.outer_iterations,
                r.potential_change_ev,
                r.tolerance_ev,
                r.poisson_residual,
                self.solution.problem.grid.step_ev,
            ));
        }
        if let Some(h) = self.heat.as_ref().filter(|h| !h.report.converged) {
            return Some(format!(
                "the joint electron–lattice loop did not converge in {} outer iterations (last change \
                 of the lattice temperature {:.3e} K against a tolerance of {:.1e} K); {results} \
                 are flagged as not converged",
                h.report.iterations, h.report.last_change_k, h.report.params.tolerance_k,
            ));
        }
        let report = &self.solution.report;
        if report.converged {
            return None;
        }
        let last = report.history.last();
        Some(format!(
            "the Born loop did not converge in {} iterations (last residual {}, current change {:.2} of the allowance); \
             {results} are flagged as not converged",
            report.iterations,
            last.map(|h| format!("{:.1e}", h.residual))
                .unwrap_or_default(),
            last.map(|h| h.current_change).unwrap_or(f64::NAN),
        ))
    }
}

/// The observables of a solution, split by channel when the case names
/// channels.
fn observe_solution(resolved: &Resolved, sol: &Solution) -> Result<Observables, SessionError> {
    let mut o = observe_with(
        sol,
        &ObserveOptions {
            electron_temperature: resolved.fit_electron_temperature,
            movers: true,
            mover_maps: false,
        },
    );
    if let Some(set) = &resolved.channels {
        let split = timed("channels", || {
            crate::observables::channels::observe_channels(sol, set)
        })
        .map_err(|e| SessionError::Solver(format!("splitting the results by channel: {e}")))?;
        o.channels = Some(split);
    }
    Ok(o)
}

/// The warm-start data of `dir`; lattice temperatures of another site
/// count are refused, naming the folder.
fn read_warm_start(dir: &Path, resolved: &Resolved) -> Result<WarmStart, SessionError> {
    let bad = |e: crate::output::OutputError| SessionError::BadInput(format!("warm start: {e}"));
    let sigma = read_self_energy(dir).map_err(bad)?;
    let t = read_lattice_temperature(dir).map_err(bad)?;
    let sites = resolved.problem.device.cells() * resolved.problem.device.orbitals;
    if let Some(t) = t.as_ref().filter(|t| t.len() != sites) {
        return Err(SessionError::BadInput(format!(
            "--warm-start {}: expected {sites} lattice temperatures (one per orbital site of the \
             case), found {} in {}; hint: warm-start from a solve of the same device, or remove \
             that file to start the lattice from the bath temperature",
            dir.display(),
            t.len(),
            LATTICE_TEMPERATURE_FILE
        )));
    }
    Ok(WarmStart {
        sigma,
        lattice_temperature_k: t,
    })
}

/// The plain Born solve, or with a damped lattice the joint loop with the
/// phonon leads at the two contact temperatures.
fn run_solve(
    resolved: &Resolved,
    warm_start: Option<&WarmStart>,
    observer: &mut dyn Observer,
) -> Result<(Solution, Option<SelfHeatRun>), RunError> {
    let p = &resolved.problem;
    let warm = warm_start.map(|w| &w.sigma);
    let network = match resolved.probe_network() {
        Some(n) if !p.scattering.phonons.is_empty() => n.map_err(|e| {
            RunError::Other(format!(
                "phonon probes of the case's [lattice]: {e}; nothing was written"
            ))
        })?,
        _ => {
            return born_solve(p, &resolved.scba, warm, observer)
                .map(|s| (s, None))
                .map_err(RunError::Born);
        }
    };
    let mut probes = FloatingProbes::new(network, p.left.temperature_k, p.right.temperature_k);
    let start = SelfHeatStart {
        sigma: warm,
        lattice_temperature_k: warm_start.and_then(|w| w.lattice_temperature_k.as_deref()),
    };
    let params = resolved.self_heating;
    let s =
        selfheat::solve(p, &resolved.scba, &params, &mut probes, start, observer).map_err(|e| {
            match e {
                selfheat::SelfHeatError::Solve { source, .. } => RunError::Born(source),
                e => RunError::Other(format!("{e}; nothing was written")),
            }
        })?;
    let last = probes.last();
    let run = SelfHeatRun {
        report: s.report,
        left_lead_heat_w: last.map_or(f64::NAN, |l| l.left_lead_heat_w),
        right_lead_heat_w: last.map_or(f64::NAN, |l| l.right_lead_heat_w),
    };
    Ok((s.solution, Some(run)))
}

/// The transport solved with the potential of `[electrostatics]`; a
/// damped lattice (self-heating) is not combined with it yet.
fn run_electrostatics(
    resolved: &Resolved,
    es: &electrostatics::Electrostatics,
    observer: &mut dyn Observer,
) -> Result<(Solution, EsRun), RunError> {
    let p = &resolved.problem;
    if resolved.probe_network().is_some() && !p.scattering.phonons.is_empty() {
        return Err(RunError::Other(
            "[electrostatics] with a damped [lattice] (self-heating) is not available yet \
             (hint: set lattice.damping_per_ps = 0 or leave out [electrostatics]); nothing was written"
                .into(),
        ));
    }
    let sc = electrostatics::solve(p, es, &resolved.scba, None, None, observer)
        .map_err(RunError::Born)?;
    let run = EsRun {
        potential_ev: sc.potential_ev,
        electrons: sc.electrons,
        report: sc.report,
    };
    Ok((sc.solution, run))
}

/// The hottest cell of the lattice, the heat out of each phonon lead, the
/// lattice-heat ledger and the loop's record.
fn self_heating_summary(sol: &Solution, o: &Observables, h: &SelfHeatRun) -> SelfHeatingSummary {
    let (cell, hottest) = (0..sol.problem.device.cells())
        .map(|c| (c, cell_lattice_temperature(sol, c)))
        .fold((0, f64::NEG_INFINITY), |a, b| if b.1 > a.1 { b } else { a });
    let electron_loss = o.energy_current_left_w + o.energy_current_right_w;
    let phonon_out = h.left_lead_heat_w + h.right_lead_heat_w;
    SelfHeatingSummary {
        hottest_lattice_k: hottest,
        hottest_x_nm: o.sites.x_nm[cell],
        left_phonon_lead_heat_w: h.left_lead_heat_w,
        right_phonon_lead_heat_w: h.right_lead_heat_w,
        ledger_relative: (electron_loss - phonon_out).abs() / electron_loss.abs(),
        outer_iterations: h.report.iterations,
        born_iterations: h.report.born_iterations,
        last_change_k: h.report.last_change_k,
        tolerance_k: h.report.params.tolerance_k,
        converged: h.report.converged,
    }
}

/// The `electrostatics` object of summary.json.
fn electrostatics_summary(sol: &Solution, r: &EsRun) -> ElectrostaticsSummary {
    let u = &r.potential_ev;
    let fold = |f: fn(f64, f64) -> f64, init: f64| u.iter().copied().fold(init, f);
    ElectrostaticsSummary {
        computed_drop_replaces_imposed: true,
        potential_drop_v: u.last().copied().unwrap_or(0.0) - u.first().copied().unwrap_or(0.0),
        lowest_potential_energy_ev: fold(f64::min, f64::INFINITY),
        highest_potential_energy_ev: fold(f64::max, f64::NEG_INFINITY),
        highest_band_edge_ev: sol
            .problem
            .device
            .band_edge_ev
            .iter()
            .copied()
            .fold(f64::NEG_INFINITY, f64::max),
        outer_iterations: r.report.outer_iterations,
        born_passes: r.report.born_passes,
        potential_change_ev: r.report.potential_change_ev,
        tolerance_ev: r.report.tolerance_ev,
        poisson_residual: r.report.poisson_residual,
        born_residual: r.report.born_residual,
        converged: r.report.converged,
        coupling: r.report.coupling.name().into(),
        potential_energy_per_cell_ev: r.potential_ev.clone(),
        electrons_per_cell: r.electrons.clone(),
    }
}

/// The summary of a solve that failed, so nobody mistakes old files for it.
fn failed_summary(loaded: &Loaded, threads: usize, error: &SolveError) -> FailedSolveSummary {
    let location = error.location();
    FailedSolveSummary {
        header: header("solve", &loaded.case.name, &loaded.case_file),
        threads,
        converged: false,
        trustworthy: false,
        error: error.to_string(),
        fault: Fault {
            kind: error.kind().into(),
            energy_ev: location.map(|l| l.0),
            cell: location.and_then(|l| l.1),
        },
        warnings: loaded.resolved.warnings.clone(),
        resolved_case: loaded.case.to_toml_string(),
    }
}

/// Write the summary of a failed solve as the result of `dir`.
pub fn write_failure(
    dir: &Path,
    other_files: OtherFiles,
    failure: &FailedSolveSummary,
) -> Result<(), SessionError> {
    let stage = Staging::with_options(dir, &folder("failed-solve", other_files))?;
    stage.write("summary.json", to_text(failure).as_bytes())?;
    stage.commit()?;
    Ok(())
}
