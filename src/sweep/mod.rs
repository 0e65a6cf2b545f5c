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
//! Every finished point is stored durably ([`store`]) before it is
//! reported, and a point's warm start is read back from the stored Σ0 of its
//! predecessor when that predecessor was computed in an earlier run. A
//! point's inputs are therefore the same whether or not the sweep was
//! interrupted, and the final table is the same to the last bit.
//!
//! What is computed at each point is a [`PointTask`]: [`ObservablesTask`]
//! for plain sweeps, [`screen::ScreenTask`] for figure-of-merit screening.

pub mod grid;
pub mod screen;
pub mod store;

pub use grid::{Axis, Grid};
pub use store::PointStore;

use crate::case::{Case, CaseError};
use crate::observables::observe;
use crate::output::OutputError;
use crate::scattering::ScatteringSelfEnergy;
use crate::scba::{Silent, SolveError, solve};
use std::path::Path;
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
    /// Storing or reading points failed.
    #[error(transparent)]
    Store(#[from] OutputError),
}

/// What a task computed at one point.
#[derive(Clone, Debug)]
pub struct PointOutcome {
    /// One number per result column.
    pub values: Vec<f64>,
    /// The converged Σ0, offered as warm start to the next point of the line.
    pub sigma: Option<ScatteringSelfEnergy>,
}

/// The computation done at each grid point.
pub trait PointTask: Sync {
    /// Result column names (units in the names); one must be `converged`
    /// (1 or 0).
    fn columns(&self) -> Vec<String>;
    /// A text that changes whenever the task would compute something else
    /// (mode, temperatures, …); part of the store fingerprint.
    fn describe(&self) -> String;
    /// Compute one point; `warm` is the predecessor's Σ0 when it fits.
    fn run(
        &self,
        index: usize,
        case: &Case,
        warm: Option<&ScatteringSelfEnergy>,
    ) -> Result<PointOutcome, SweepError>;
}

/// Per-point progress, reported after the point is stored.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct PointEvent {
    /// Grid index of the point.
    pub index: usize,
    /// Points finished so far (this run and earlier runs).
    pub finished: usize,
    /// Points in the grid.
    pub total: usize,
    /// True when computed in this run, false when found in the store.
    pub computed: bool,
    /// Whether the point's Born loop converged.
    pub converged: bool,
}

/// Sees each finished point. Called from worker threads.
pub trait SweepObserver: Sync {
    /// A point is stored.
    fn point_finished(&self, _event: &PointEvent) {}
}

/// An observer that does nothing.
pub struct Quiet;
impl SweepObserver for Quiet {}

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
pub struct SweepTable {
    /// Column names: the axes, then the task's columns.
    pub columns: Vec<String>,
    /// One row per point, in grid order.
    pub rows: Vec<Vec<f64>>,
    /// Points computed in this run (the rest came from the store).
    pub computed: usize,
    /// Lines run at once.
    pub parallel_lines: usize,
    /// The store folder.
    pub store_dir: std::path::PathBuf,
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

    /// The table as CSV bytes (shortest round-trip numbers: exact and
    /// byte-stable).
    pub fn csv(&self) -> Vec<u8> {
        let headers: Vec<&str> = self.columns.iter().map(String::as_str).collect();
        crate::output::csv_bytes(&headers, self.rows.iter().cloned())
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

/// Run (or resume) a sweep: every point of `grid` through `task`, points
/// stored under `result_dir/points/`. Points already stored by an earlier
/// run of the same sweep are read, not recomputed.
pub fn run(
    case: &Case,
    grid: &Grid,
    task: &dyn PointTask,
    result_dir: &Path,
    options: SweepOptions,
    observer: &dyn SweepObserver,
) -> Result<SweepTable, SweepError> {
    let total = grid.len();
    // Check every point before computing any: a bad value is bad input,
    // not a failure halfway through a long run.
    let mut largest = 0u64;
    for i in 0..total {
        let c = grid.case_at(case, i)?;
        let r = c.resolve().map_err(|e| SweepError::Case {
            point: i,
            source: Box::new(e),
        })?;
        largest = largest.max(r.memory_estimate_bytes());
    }
    let store = PointStore::open(result_dir, sweep_fingerprint(case, grid, task))?;
    let mut columns = grid.names();
    columns.extend(task.columns());
    let width = columns.len();
    let converged_col = columns
        .iter()
        .position(|c| c == "converged")
        .ok_or_else(|| SweepError::Task {
            point: 0,
            message: "the task has no `converged` column".into(),
        })?;

    let lines = grid.lines();
    let line_len = grid.line_length();
    let threads = rayon::current_num_threads().max(1);
    let mut parallel = options
        .max_parallel_lines
        .unwrap_or(threads)
        .clamp(1, lines.max(1));
    if let Some(budget) = options.memory_budget_bytes {
        let fit = (budget / largest.max(1)).max(1) as usize;
        parallel = parallel.min(fit);
    }

    let next_line = AtomicUsize::new(0);
    let finished = AtomicUsize::new(0);
    let computed = AtomicUsize::new(0);
    let stop = AtomicBool::new(false);
    let failure: Mutex<Option<SweepError>> = Mutex::new(None);

    let work_line = |line: usize| -> Result<(), SweepError> {
        let first = line * line_len;
        let mut warm: Option<ScatteringSelfEnergy> = None;
        for index in first..first + line_len {
            if stop.load(Ordering::Relaxed) {
                return Ok(());
            }
            if let Some(row) = store.row(index, width) {
                warm = None;
                let n = finished.fetch_add(1, Ordering::SeqCst) + 1;
                observer.point_finished(&PointEvent {
                    index,
                    finished: n,
                    total,
                    computed: false,
                    converged: row[converged_col] == 1.0,
                });
                continue;
            }
            if warm.is_none() && index > first {
                warm = store.sigma(index - 1);
            }
            let c = grid.case_at(case, index)?;
            let problem = &c
                .resolve()
                .map_err(|e| SweepError::Case {
                    point: index,
                    source: Box::new(e),
                })?
                .problem;
            let fits = warm
                .as_ref()
                .is_some_and(|w| w.sites == problem.sites() && w.energies() == problem.grid.count);
            let outcome = task.run(index, &c, if fits { warm.as_ref() } else { None })?;
            if outcome.values.len() + grid.axes.len() != width {
                return Err(SweepError::Task {
                    point: index,
                    message: format!(
                        "the task returned {} values for {} columns",
                        outcome.values.len(),
                        width - grid.axes.len()
                    ),
                });
            }
            let mut row = grid.values(index);
            row.extend_from_slice(&outcome.values);
            if let Some(s) = &outcome.sigma {
                store.put_sigma(index, s)?;
            }
            store.put_row(index, &row)?;
            if index >= first + 2 {
                store.remove_sigma(index - 2);
            }
            warm = outcome.sigma;
            computed.fetch_add(1, Ordering::SeqCst);
            let n = finished.fetch_add(1, Ordering::SeqCst) + 1;
            observer.point_finished(&PointEvent {
                index,
                finished: n,
                total,
                computed: true,
                converged: row[converged_col] == 1.0,
            });
        }
        // The line is whole: its warm starts are no longer needed.
        for index in first..first + line_len {
            store.remove_sigma(index);
        }
        Ok(())
    };
    let worker = || {
        loop {
            if stop.load(Ordering::Relaxed) {
                return;
            }
            let line = next_line.fetch_add(1, Ordering::SeqCst);
            if line >= lines {
                return;
            }
            if let Err(e) = work_line(line) {
                stop.store(true, Ordering::SeqCst);
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
    if let Some(e) = failure.into_inner().unwrap_or_else(|p| p.into_inner()) {
        return Err(e);
    }
    let mut rows = Vec::with_capacity(total);
    for index in 0..total {
        rows.push(store.row(index, width).ok_or_else(|| SweepError::Task {
            point: index,
            message: format!(
                "the stored row is missing or unreadable in {}",
                store.dir().display()
            ),
        })?);
    }
    Ok(SweepTable {
        columns,
        rows,
        computed: computed.into_inner(),
        parallel_lines: parallel,
        store_dir: store.dir().to_path_buf(),
    })
}

/// The plain sweep: one solve per point and every scalar observable.
pub struct ObservablesTask;

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
        OBSERVABLE_COLUMNS.iter().map(|s| s.to_string()).collect()
    }

    fn describe(&self) -> String {
        "observables".into()
    }

    fn run(
        &self,
        index: usize,
        case: &Case,
        warm: Option<&ScatteringSelfEnergy>,
    ) -> Result<PointOutcome, SweepError> {
        let r = case.resolve().map_err(|e| SweepError::Case {
            point: index,
            source: Box::new(e),
        })?;
        let sol =
            solve(&r.problem, &r.scba, warm, &mut Silent).map_err(|source| SweepError::Solve {
                point: index,
                source,
            })?;
        let o = observe(&sol);
        let rep = &sol.report;
        let values = vec![
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
            if rep.converged { 1.0 } else { 0.0 },
        ];
        let coherent = sol.problem.scattering.is_coherent();
        Ok(PointOutcome {
            values,
            sigma: (!coherent).then_some(sol.sigma),
        })
    }
}
