//! Command-level runs: what each command of the program does, as library
//! calls that return values.
//!
//! A run loads a case ([`Loaded`]), checks it ([`Loaded::check_output`]) or
//! solves it ([`solve()`]) and returns a result value that holds what was
//! computed: the summary (the same value summary.json holds), the per-cell
//! and per-energy tables, the bond-current map with its axes and the Born
//! loop's record. Nothing is written until the result is asked to write
//! itself ([`Solved::write`]), and then it writes exactly the result folder
//! the command line writes. The command line is a thin layer over this
//! module (it parses arguments, draws progress and prints); other front
//! ends (a Python module, notebooks, scripts) call the same functions.
//!
//! Solvers report progress through a [`crate::progress::Observer`], which
//! can also stop a long run: a solve or a coefficient run between Born
//! iterations, a generator or cooler curve between its solves, a sweep or
//! screen before its next point. A stopped run returns
//! [`SessionError::Cancelled`] and has written no result (a grid keeps the
//! points it finished in its store, so it resumes from them).

mod curves;
mod grids;
mod solve;
mod tables;

pub use curves::{
    CoefficientsRun, CoolerRun, GeneratorRun, MAX_CURVE_POINTS, Spelling, check_curve_options,
    coefficients, cooler, generator,
};
pub use grids::{GridKind, GridPlace, GridRun, MAX_GRID_POINTS, grid_run, parse_grid};
pub use solve::{SolveOptions, Solved, solve, write_failure};
pub use tables::{BondCurrentMap, columns};

use crate::case::{Case, CaseError, Resolved};
use crate::output::schema::summary::{CheckCoarseLevel, CheckOutput, CheckPhonon};
use crate::output::sizes::ResultLimits;
use crate::output::{FolderOptions, OtherFiles, OutputError};
use std::path::Path;

/// Why a command-level run failed.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum SessionError {
    /// The case (file or text) is wrong: the error names the file, line
    /// and key.
    #[error(transparent)]
    Case(#[from] CaseError),
    /// Other input that cannot be used (options, a warm-start folder, a
    /// solve beyond the memory available).
    #[error("{0}")]
    BadInput(String),
    /// A numerical fault of a solver that left no result.
    #[error("{0}")]
    Solver(String),
    /// The Born loop met a fault: the summary that says so (what the
    /// command line writes as summary.json of a failed solve) comes along.
    #[error("{error}")]
    Born {
        /// The fault.
        error: crate::scba::SolveError,
        /// The summary of the failed solve.
        failure: Box<crate::output::schema::summary::FailedSolveSummary>,
    },
    /// Reading or writing result files failed, or a result folder cannot
    /// take the result.
    #[error(transparent)]
    Output(#[from] OutputError),
    /// Reading or writing a grid's point store failed.
    #[error("{0}")]
    Io(String),
    /// The observer asked the run to stop; nothing was returned and no
    /// result written (a sweep or screen keeps the points it finished in
    /// its store, so the same run started again resumes).
    #[error(
        "the run was cancelled before it finished; no result was written (a sweep or screen keeps \
         its finished points for the next run)"
    )]
    Cancelled,
}

/// A case read and resolved, with the name of where it came from.
#[derive(Clone, Debug)]
pub struct Loaded {
    /// The case as read.
    pub case: Case,
    /// The case resolved into the problem and the solver settings.
    pub resolved: Resolved,
    /// Where the case came from (the file name as given), recorded in
    /// every summary.
    pub case_file: String,
}

impl Loaded {
    /// Read and resolve the case file at `path`.
    pub fn from_file(path: &Path) -> Result<Self, CaseError> {
        let case = Case::load(path)?;
        let resolved = case.resolve()?;
        Ok(Self {
            case,
            resolved,
            case_file: path.display().to_string(),
        })
    }

    /// Read and resolve a case from TOML text; `origin` names it in errors
    /// and summaries, `base_dir` is where the files it names are looked for.
    pub fn from_text(text: &str, origin: &str, base_dir: &Path) -> Result<Self, CaseError> {
        let case = Case::parse(text, origin, base_dir)?;
        let resolved = case.resolve()?;
        Ok(Self {
            case,
            resolved,
            case_file: origin.to_string(),
        })
    }

    /// What `qheat check --json` reports: the size of the device, its grid
    /// and phonon modes, the memory and time estimates, warnings and notes.
    pub fn check_output(&self, threads: usize) -> CheckOutput {
        let resolved = &self.resolved;
        let p = &resolved.problem;
        CheckOutput {
            case_name: self.case.name.clone(),
            cells: p.device.cells(),
            orbitals_per_cell: p.device.orbitals,
            grid: serde_json::to_value(&p.grid).expect("JSON of plain values"),
            phonons: p
                .scattering
                .phonons
                .iter()
                .map(|m| CheckPhonon {
                    requested_energy_ev: m.requested_energy_ev,
                    energy_ev: m.energy_ev,
                    grid_steps: m.steps,
                    bath_temperature_k: m.bath_temperature_k,
                })
                .collect(),
            memory_estimate_bytes: resolved.memory_estimate_bytes(),
            warnings: resolved.warnings.clone(),
            notes: resolved.notes.clone(),
            time_estimate_s: resolved.time_estimate_seconds(threads),
            iteration_guess: resolved.iteration_guess(),
            coarse_levels_guess: (resolved.coarse_iteration_guess().into_iter())
                .map(|(factor, iterations)| CheckCoarseLevel { factor, iterations })
                .collect(),
            iteration_equivalents_guess: resolved.iteration_equivalents_guess(),
        }
    }

    /// Refuse, before any work, a solve whose memory estimate exceeds 80 %
    /// of `available` bytes (`None`: not known, nothing refused), naming
    /// the settings that would fit with their estimates.
    pub fn refuse_beyond_memory(&self, available: Option<u64>) -> Result<(), SessionError> {
        self.refuse_beyond_memory_as(available, Spelling::Cli)
    }

    /// [`Loaded::refuse_beyond_memory`] with the option that runs anyway
    /// named as `spelling` names options.
    pub fn refuse_beyond_memory_as(
        &self,
        available: Option<u64>,
        spelling: Spelling,
    ) -> Result<(), SessionError> {
        let Some(available) = available else {
            return Ok(());
        };
        let limit = available / 10 * 8;
        let need = self.resolved.memory_estimate_bytes();
        if need <= limit {
            return Ok(());
        }
        let options: Vec<String> = self
            .resolved
            .memory_alternatives()
            .into_iter()
            .map(|(keys, bytes)| {
                let fits = if bytes <= limit { "fits" } else { "too much" };
                format!("  {keys}: about {} ({fits})", memory_size(bytes))
            })
            .collect();
        Err(SessionError::BadInput(format!(
            "this solve needs about {} by the memory estimate (`qheat check` shows it), more \
             than 80 % of the {} available (GiB = 2^30 bytes); nothing was run. Settings that \
             need less:\n{}\nhint: set one of them in the case (or use fewer cells), or pass \
             {} to run anyway",
            memory_size(need),
            memory_size(available),
            options.join("\n"),
            match spelling {
                Spelling::Cli => "--ignore-memory-estimate",
                Spelling::Keywords => "ignore_memory_estimate=True",
            }
        )))
    }
}

/// Refuse, before any work, a run whose energy-resolved arrays (the
/// memory estimate `estimate_bytes` of its case) exceed 80 % of
/// `available` bytes (`None`: not known, nothing refused): the check of
/// coefficients, curves and grids, whose runs each hold one solve's arrays
/// at a time.
pub fn refuse_arrays_beyond_memory(
    estimate_bytes: u64,
    available: Option<u64>,
) -> Result<(), SessionError> {
    match available {
        Some(avail) if estimate_bytes > avail / 10 * 8 => Err(SessionError::BadInput(format!(
            "this case needs about {:.1} GiB for its energy-resolved arrays but only {:.1} GiB are available; \
             use a coarser grid.step_ev, a narrower grid window, fewer cells, or linear mixing (mixing = \"linear\") \
             which keeps no history",
            estimate_bytes as f64 / (1u64 << 30) as f64,
            avail as f64 / (1u64 << 30) as f64
        ))),
        _ => Ok(()),
    }
}

/// Bytes in GiB (2^30), or MiB (2^20) below one GiB.
pub fn memory_size(bytes: u64) -> String {
    let b = bytes as f64;
    if b >= (1u64 << 30) as f64 {
        format!("{:.2} GiB", b / (1u64 << 30) as f64)
    } else {
        format!("{:.1} MiB", b / (1u64 << 20) as f64)
    }
}

/// How a result of `kind` goes into its folder.
pub fn folder(kind: &str, other_files: OtherFiles) -> FolderOptions {
    FolderOptions::new(kind).other_files(other_files)
}

/// How a result is written: what to do with files qheat did not write in
/// the folder, and the size limits of a solve's arrays and figures.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct WriteOptions {
    /// Files in the folder that qheat did not write: refuse (default) or
    /// keep them beside the result.
    pub other_files: OtherFiles,
    /// Size limits of a solve's arrays and figures.
    pub limits: ResultLimits,
}
