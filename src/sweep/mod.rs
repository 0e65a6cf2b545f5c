//! Parameter sweeps over case keys: grids, resumable runs, screening and
//! ranking.
//!
//! A grid is a list of axes `KEY=START:STOP:COUNT` over any numeric case key
//! ([`crate::case::Case::numeric_keys`]); several axes make a
//! multi-dimensional grid in row-major order (last axis fastest). The grid
//! is cut into *lines* along the fastest axis. Lines run in parallel (as
//! many as the thread pool and the memory budget allow); the points of a
//! line run in order, each Born loop starting from the converged Σ0 of its
//! predecessor when the energy grid and device size match.
//!
//! Every finished point is stored durably in a [`PointStore`] before it is
//! reported, and a point's warm start is read back from the stored Σ0 of its
//! predecessor when that predecessor was computed in an earlier run. A
//! point's inputs are therefore the same whether or not the sweep was
//! interrupted, and the final table is the same to the last bit.
//!
//! The observer can stop a sweep ([`Observer::cancelled`], asked before
//! each point): the points in flight finish and are stored, no other
//! starts, and the run returns [`SweepError::Cancelled`]; the same sweep
//! started again resumes from the store.
//!
//! What is computed at each point is a [`PointTask`]: [`ObservablesTask`]
//! for plain sweeps, [`screen::ScreenTask`] for figure-of-merit screening.

pub mod grid;
pub mod screen;
mod share;
pub mod store;

pub use grid::{Axis, Grid};
pub use share::{Share, SharePart};
pub use store::{MemoryStore, PointStore, StoreError};

use crate::case::{Case, CaseError};
use crate::observables::observe;
use crate::progress::{Observer, PointEvent, Silent};
use crate::scattering::ScatteringSelfEnergy;
use crate::scba::SolveError;
use crate::thermo::point::{PointStart, solve_point};
use std::sync::Mutex;
use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};

/// Why a sweep failed.
#[derive(Debug, thiserror::Error)]
pub enum SweepError {
    /// An axis could not be read.
    #[error("--vary `{spec}`: {reason}")]
    BadAxis {
        /// The axis as given.
        spec: String,
        /// What is wrong.
        reason: String,
    },
    /// The case could not be set to a grid point.
    #[error("grid point {point}: {source}")]
    Case {
        /// Point index.
        point: usize,
        /// The case error.
        source: Box<CaseError>,
    },
    /// A solve failed outright (a numerical fault, not slow convergence).
    #[error("grid point {point}: {source}")]
    Solve {
        /// Point index.
        point: usize,
        /// The solver error.
        source: SolveError,
    },
    /// A point task failed for another reason.
    #[error("grid point {point}: {message}")]
    Task {
        /// Point index.
        point: usize,
        /// What went wrong.
        message: String,
    },
    /// Storing a point failed.
    #[error(transparent)]
    Store(StoreError),
    /// The observer asked the sweep to stop ([`Observer::cancelled`]); the
    /// points finished before are kept in the store for the next run.
    #[error("the sweep was cancelled; the points finished so far are kept for the next run")]
    Cancelled,
}

/// What a task computed at one point.
#[derive(Clone, Debug)]
pub struct PointOutcome {
    /// One number per result column.
    pub values: Vec<f64>,
    /// The converged Σ0, offered as warm start to the next point of the line.
    pub sigma: Option<ScatteringSelfEnergy>,
    /// The converged electrostatic potential energy (eV per cell) of a
    /// point whose potential was solved, offered to the next point too.
    pub potential_ev: Option<Vec<f64>>,
}

/// The computation done at each grid point.
pub trait PointTask: Sync {
    /// Result column names (units in the names); one must be `converged`
    /// (1 or 0).
    fn columns(&self) -> Vec<String>;
    /// A text that changes whenever the task would compute something else
    /// (mode, temperatures, …); part of the store fingerprint.
    fn describe(&self) -> String;
    /// Compute one point; `warm` holds the predecessor's Σ0 when it fits
    /// and its potential when it has one.
    fn run(
        &self,
        index: usize,
        case: &Case,
        warm: PointStart<'_>,
    ) -> Result<PointOutcome, SweepError>;
}

/// How a sweep may use the machine.
#[derive(Clone, Copy, Debug, Default)]
pub struct SweepOptions {
    /// Most lines run at once (default: the threads of the rayon pool).
    pub max_parallel_lines: Option<usize>,
    /// Memory the sweep may use (bytes); with the per-point estimate
    /// ([`crate::case::Resolved::memory_estimate_bytes`]) this bounds the
    /// lines in flight. `None`: no bound.
    pub memory_budget_bytes: Option<u64>,
}

/// The finished table.
#[derive(Clone, Debug, PartialEq)]
#[non_exhaustive]
pub struct SweepTable {
    /// Column names: the axes, then the task's columns.
    pub columns: Vec<String>,
    /// One row per point, in grid order.
    pub rows: Vec<Vec<f64>>,
    /// Points computed in this run (the rest came from the store).
    pub computed: usize,
    /// Lines run at once.
    pub parallel_lines: usize,
    /// Where the points are kept ([`PointStore::location`]).
    pub store: String,
}

impl SweepTable {
    /// Index of a column.
    pub fn column(&self, name: &str) -> Option<usize> {
        self.columns.iter().position(|c| c == name)
    }

    /// Points whose Born loop did not converge.
    pub fn unconverged(&self) -> Vec<usize> {
        match self.column("converged") {
            Some(c) => (0..self.rows.len())
                .filter(|&i| self.rows[i][c] != 1.0)
                .collect(),
            None => Vec::new(),
        }
    }
}

/// The fingerprint of a sweep: case text, grid, task and program version.
pub fn sweep_fingerprint(case: &Case, grid: &Grid, task: &dyn PointTask) -> u64 {
    let axes: Vec<String> = grid.axes.iter().map(Axis::spec).collect();
    let axes = axes.join(" ");
    let case_text = case.to_toml_string();
    store::fingerprint(&[
        env!("CARGO_PKG_VERSION"),
        &case_text,
        &axes,
        &task.describe(),
    ])
}

/// Run (or resume) a sweep: every point of `grid` through `task`, each
/// finished point kept in `store` before `observer` hears of it. Points
/// already in the store (from an earlier run of the same sweep: open the
/// store by [`sweep_fingerprint`]) are read, not recomputed.
pub fn run(
    case: &Case,
    grid: &Grid,
    task: &dyn PointTask,
    store: &dyn PointStore,
    options: SweepOptions,
    observer: &mut (dyn Observer + Send),
) -> Result<SweepTable, SweepError> {
    let part = run_share(case, grid, task, store, options, Share::WHOLE, observer)?;
    SweepTable::assemble(grid, task, &[part], store.location())
}

/// Run (or resume) the lines of `grid` that `share` owns, as [`run`] does
/// for the whole grid; their rows. Every point is still checked first, so
/// bad input fails alike in every share before any point is computed. The
/// points of a line and their warm starts are those of a whole run, so
/// [`SweepTable::assemble`] of all shares gives the table of [`run`] to
/// the last bit.
pub fn run_share(
    case: &Case,
    grid: &Grid,
    task: &dyn PointTask,
    store: &dyn PointStore,
    options: SweepOptions,
    share: Share,
    observer: &mut (dyn Observer + Send),
) -> Result<SharePart, SweepError> {
    // Check every point before computing any: a bad value is bad input,
    // not a failure halfway through a long run.
    let largest = check_points(case, grid)?;
    let mut columns = grid.names();
    columns.extend(task.columns());
    let converged_col = columns
        .iter()
        .position(|c| c == "converged")
        .ok_or_else(|| SweepError::Task {
            point: 0,
            message: "the task has no `converged` column".into(),
        })?;
    let lines = share.lines(grid.lines());
    let parallel = parallel_lines(&options, lines.len(), largest);
    let runner = LineRunner {
        case,
        grid,
        task,
        store,
        width: columns.len(),
        converged_col,
        total: lines.len() * grid.line_length(),
        finished: AtomicUsize::new(0),
        computed: AtomicUsize::new(0),
        stop: AtomicBool::new(false),
        observer: Mutex::new(observer),
    };
    runner.run_lines(&lines, parallel)?;
    let rows = share
        .points(grid)
        .map(|index| {
            store
                .row(index, columns.len())
                .map(|row| (index, row))
                .ok_or_else(|| SweepError::Task {
                    point: index,
                    message: format!(
                        "the stored row is missing or unreadable in {}",
                        store.location()
                    ),
                })
        })
        .collect::<Result<Vec<_>, _>>()?;
    Ok(SharePart {
        rows,
        computed: runner.computed.into_inner(),
        parallel_lines: parallel,
    })
}

/// Resolve every point of the grid; the largest memory estimate of a point.
fn check_points(case: &Case, grid: &Grid) -> Result<u64, SweepError> {
    let mut largest = 0u64;
    for i in 0..grid.len() {
        let c = grid.case_at(case, i)?;
        let r = c.resolve().map_err(|e| SweepError::Case {
            point: i,
            source: Box::new(e),
        })?;
        largest = largest.max(r.memory_estimate_bytes());
    }
    Ok(largest)
}

/// Lines run at once: the thread pool's width (or the option), at most the
/// lines there are and what the memory budget holds.
fn parallel_lines(options: &SweepOptions, lines: usize, largest_point_bytes: u64) -> usize {
    let threads = rayon::current_num_threads().max(1);
    let mut parallel = options
        .max_parallel_lines
        .unwrap_or(threads)
        .clamp(1, lines.max(1));
    if let Some(budget) = options.memory_budget_bytes {
        let fit = (budget / largest_point_bytes.max(1)).max(1) as usize;
        parallel = parallel.min(fit);
    }
    parallel
}

/// The shared state of the worker threads of one sweep.
struct LineRunner<'a, 'o> {
    case: &'a Case,
    grid: &'a Grid,
    task: &'a dyn PointTask,
    store: &'a dyn PointStore,
    width: usize,
    converged_col: usize,
    /// Points this run reports (those of its share).
    total: usize,
    finished: AtomicUsize,
    computed: AtomicUsize,
    stop: AtomicBool,
    /// Events go to the observer one at a time.
    observer: Mutex<&'o mut (dyn Observer + Send)>,
}

impl LineRunner<'_, '_> {
    /// Work through the lines on `parallel` workers; the first error stops
    /// every worker after its current point.
    fn run_lines(&self, lines: &[usize], parallel: usize) -> Result<(), SweepError> {
        let next_line = AtomicUsize::new(0);
        let failure: Mutex<Option<SweepError>> = Mutex::new(None);
        let worker = || {
            loop {
                if self.stop.load(Ordering::Relaxed) {
                    return;
                }
                let Some(&line) = lines.get(next_line.fetch_add(1, Ordering::SeqCst)) else {
                    return;
                };
                if let Err(e) = self.work_line(line) {
                    self.stop.store(true, Ordering::SeqCst);
                    let mut slot = failure.lock().unwrap_or_else(|p| p.into_inner());
                    if slot.is_none() {
                        *slot = Some(e);
                    }
                    return;
                }
            }
        };
        if parallel == 1 {
            worker();
        } else {
            rayon::scope(|s| {
                for _ in 0..parallel {
                    s.spawn(|_| worker());
                }
            });
        }
        match failure.into_inner().unwrap_or_else(|p| p.into_inner()) {
            Some(e) => Err(e),
            None => Ok(()),
        }
    }

    /// The points of one line in order, each warm-started from its
    /// predecessor's Σ0 and potential (kept in memory, or read back from
    /// the store when the predecessor finished in an earlier run).
    fn work_line(&self, line: usize) -> Result<(), SweepError> {
        let line_len = self.grid.line_length();
        let first = line * line_len;
        let mut warm: Option<ScatteringSelfEnergy> = None;
        let mut potential: Option<Vec<f64>> = None;
        for index in first..first + line_len {
            if self.stop.load(Ordering::Relaxed) {
                return Ok(());
            }
            if self.cancelled() {
                return Err(SweepError::Cancelled);
            }
            if let Some(row) = self.store.row(index, self.width) {
                (warm, potential) = (None, None);
                self.report(index, false, &row);
                continue;
            }
            if warm.is_none() && potential.is_none() && index > first {
                warm = self.store.sigma(index - 1);
                potential = self.store.potential(index - 1);
            }
            let start = PointStart {
                sigma: warm.as_ref(),
                potential_ev: potential.as_deref(),
            };
            let (row, outcome) = self.compute(index, start)?;
            if let Some(s) = &outcome.sigma {
                self.store.put_sigma(index, s).map_err(SweepError::Store)?;
            }
            if let Some(u) = &outcome.potential_ev {
                self.store
                    .put_potential(index, u)
                    .map_err(SweepError::Store)?;
            }
            self.store.put_row(index, &row).map_err(SweepError::Store)?;
            if index >= first + 2 {
                self.store.remove_sigma(index - 2);
                self.store.remove_potential(index - 2);
            }
            (warm, potential) = (outcome.sigma, outcome.potential_ev);
            self.computed.fetch_add(1, Ordering::SeqCst);
            self.report(index, true, &row);
        }
        // The line is whole: its warm starts are no longer needed.
        for index in first..first + line_len {
            self.store.remove_sigma(index);
            self.store.remove_potential(index);
        }
        Ok(())
    }

    /// Run the task at point `index`; its row (axes, then the task's
    /// values) and what it offers the next point.
    fn compute(
        &self,
        index: usize,
        warm: PointStart<'_>,
    ) -> Result<(Vec<f64>, PointOutcome), SweepError> {
        let c = self.grid.case_at(self.case, index)?;
        let problem = &c
            .resolve()
            .map_err(|e| SweepError::Case {
                point: index,
                source: Box::new(e),
            })?
            .problem;
        let fits = |w: &&ScatteringSelfEnergy| {
            w.sites == problem.sites() && w.energies() == problem.grid.count
        };
        let start = PointStart {
            sigma: warm.sigma.filter(fits),
            potential_ev: warm
                .potential_ev
                .filter(|u| u.len() == problem.device.cells()),
        };
        let outcome = self.task.run(index, &c, start)?;
        let axes = self.grid.axes.len();
        if outcome.values.len() + axes != self.width {
            return Err(SweepError::Task {
                point: index,
                message: format!(
                    "the task returned {} values for {} columns",
                    outcome.values.len(),
                    self.width - axes
                ),
            });
        }
        let mut row = self.grid.values(index);
        row.extend_from_slice(&outcome.values);
        Ok((row, outcome))
    }

    /// Whether the observer asked the sweep to stop: asked before each
    /// point, so an interrupt takes effect after the points in flight.
    fn cancelled(&self) -> bool {
        let observer = self.observer.lock().unwrap_or_else(|p| p.into_inner());
        observer.cancelled()
    }

    /// Tell the observer that point `index` is stored.
    fn report(&self, index: usize, computed: bool, row: &[f64]) {
        let mut observer = self.observer.lock().unwrap_or_else(|p| p.into_inner());
        let finished = self.finished.fetch_add(1, Ordering::SeqCst) + 1;
        observer.point_finished(&PointEvent {
            index,
            finished,
            total: self.total,
            computed,
            converged: row[self.converged_col] == 1.0,
        });
    }
}

/// The plain sweep: one solve per point and every scalar observable, and
/// for each contact attached along the channel its level, temperature,
/// current and heat current (a probe scanned along the channel reads out
/// here).
#[derive(Clone, Debug, Default)]
pub struct ObservablesTask {
    /// Names of the contacts attached along the channel, in case order
    /// (empty for a two-terminal device).
    pub contacts: Vec<String>,
    /// The case solves its potential with the transport (`[electrostatics]`):
    /// every point solves its own, and the [`ELECTROSTATICS_COLUMNS`] say
    /// how.
    pub electrostatics: bool,
}

/// Per-contact columns, each `contact_<name>_<quantity>`.
const CONTACT_COLUMNS: [&str; 4] = [
    "fermi_level_ev",
    "temperature_k",
    "current_a",
    "heat_current_w",
];

impl ObservablesTask {
    /// The task for the contacts of a resolved case.
    pub fn of(resolved: &crate::case::Resolved) -> Self {
        Self {
            contacts: resolved
                .problem
                .contacts
                .iter()
                .map(|c| c.name.clone())
                .collect(),
            electrostatics: resolved.electrostatics.is_some(),
        }
    }
}

/// Columns a sweep adds when every point solves its potential: the
/// computed drop φ(first cell) − φ(last cell), the outer iterations, the
/// last potential change and the Poisson residual of the point
/// (`converged` then also needs the potential to have converged).
pub const ELECTROSTATICS_COLUMNS: [&str; 4] = [
    "potential_drop_v",
    "outer_iterations",
    "potential_change_ev",
    "poisson_residual",
];

/// Result columns of [`ObservablesTask`].
pub const OBSERVABLE_COLUMNS: [&str; 16] = [
    "voltage_v",
    "current_a",
    "current_right_a",
    "heat_current_left_w",
    "heat_current_right_w",
    "energy_current_left_w",
    "energy_current_right_w",
    "lattice_power_w",
    "electrical_power_w",
    "conductance_s",
    "ledger_charge_relative",
    "ledger_energy_relative",
    "ledger_heat_relative",
    "iterations",
    "final_residual",
    "converged",
];

impl PointTask for ObservablesTask {
    fn columns(&self) -> Vec<String> {
        let mut c: Vec<String> = OBSERVABLE_COLUMNS.iter().map(|s| s.to_string()).collect();
        for name in &self.contacts {
            c.extend(
                CONTACT_COLUMNS
                    .iter()
                    .map(|q| format!("contact_{name}_{q}")),
            );
        }
        if self.electrostatics {
            c.extend(ELECTROSTATICS_COLUMNS.iter().map(|s| s.to_string()));
        }
        c
    }

    fn describe(&self) -> String {
        // A two-terminal sweep keeps the description (and so the store
        // fingerprint) it always had.
        let mut d = match self.contacts.is_empty() {
            true => "observables".to_string(),
            false => format!("observables with contacts {}", self.contacts.join(",")),
        };
        if self.electrostatics {
            d.push_str(" with the potential solved at every point");
        }
        d
    }

    fn run(
        &self,
        index: usize,
        case: &Case,
        warm: PointStart<'_>,
    ) -> Result<PointOutcome, SweepError> {
        let r = case.resolve().map_err(|e| SweepError::Case {
            point: index,
            source: Box::new(e),
        })?;
        let es = r.electrostatics.as_ref();
        if es.is_some() != self.electrostatics {
            return Err(SweepError::Task {
                point: index,
                message: "the case's [electrostatics] differs from the sweep's columns".into(),
            });
        }
        let point = solve_point(&r.problem, es, &r.scba, warm, &mut Silent).map_err(|source| {
            SweepError::Solve {
                point: index,
                source,
            }
        })?;
        let converged = point.converged();
        let sol = point.solution;
        let o = observe(&sol);
        let rep = &sol.report;
        let mut values = vec![
            o.voltage_v,
            o.current_a,
            o.current_right_a,
            o.heat_current_left_w,
            o.heat_current_right_w,
            o.energy_current_left_w,
            o.energy_current_right_w,
            o.lattice_power_w,
            o.electrical_power_w,
            // NaN (written `NaN`) where V = 0 and I/V is undefined.
            o.conductance_s.unwrap_or(f64::NAN),
            o.ledger.charge_relative,
            o.ledger.energy_relative,
            o.ledger.heat_relative,
            rep.iterations as f64,
            rep.history.last().map(|h| h.residual).unwrap_or(0.0),
            if converged { 1.0 } else { 0.0 },
        ];
        if o.contacts.len() != self.contacts.len() {
            return Err(SweepError::Task {
                point: index,
                message: format!(
                    "{} contacts along the channel, the sweep's columns are for {}",
                    o.contacts.len(),
                    self.contacts.len()
                ),
            });
        }
        for c in &o.contacts {
            values.extend([
                c.fermi_level_ev,
                c.temperature_k,
                c.current_a,
                c.heat_current_w,
            ]);
        }
        if let Some(e) = &point.electrostatics {
            values.extend([
                e.potential_drop_v(),
                e.report.outer_iterations as f64,
                e.report.potential_change_ev,
                e.report.poisson_residual,
            ]);
        }
        let coherent = sol.problem.scattering.is_coherent();
        Ok(PointOutcome {
            values,
            sigma: (!coherent).then_some(sol.sigma),
            potential_ev: point.electrostatics.map(|e| e.potential_ev),
        })
    }
}
