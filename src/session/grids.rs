//! Grids of operating points: `qheat sweep` (any numeric case key over a
//! grid) and `qheat screen` (a figure of merit over a grid, ranked).
//!
//! A grid keeps its finished points in a store inside its result folder so
//! that the same run started again recomputes only what is missing; a grid
//! run is therefore given its folder from the start, and writes the table,
//! figures and summary there when the grid is complete.

use super::{Loaded, SessionError, folder};
use crate::case::{Case, CaseErrorKind, CaseKey, PhononConductanceSource};
use crate::cluster::{Cluster, Fault};
use crate::output::manifest::claim_store;
use crate::output::results::header;
use crate::output::schema::summary::{BestPoint, GridSummary, Ranking, to_text};
use crate::output::schema::tables::grid_csv;
use crate::output::sweep::PointFolder;
use crate::output::{FolderOptions, OtherFiles, Staging};
use crate::progress::Observer;
use crate::sweep::screen::{CoolingCurve, Rank, ScreenTask, ranking, ranking_table};
use crate::sweep::{
    self, Axis, Grid, PointStore, PointTask, Share, SharePart, SweepError, SweepOptions, SweepTable,
};
use std::path::Path;

/// Most points in one grid: each is a full solve, and every point is
/// checked before the first is computed.
pub const MAX_GRID_POINTS: usize = 100_000;

/// Which grid command.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum GridKind {
    /// `qheat sweep`: currents, heat currents and powers at every point.
    Sweep,
    /// `qheat screen`: a figure of merit at every point, ranked best first
    /// (`cooling`: the cooler curve behind `Rank::Cooling`).
    Screen {
        /// The ranking quantity.
        rank: Rank,
        /// The cooler curve of `Rank::Cooling` (exactly then).
        cooling: Option<CoolingCurve>,
    },
}

/// A finished grid and what was written of it.
#[derive(Clone, Debug)]
pub struct GridRun {
    /// The grid's axes.
    pub grid: Grid,
    /// One row per point (row-major, last axis fastest).
    pub table: SweepTable,
    /// The points best first (screens only; empty for sweeps).
    pub order: Vec<usize>,
    /// Where κ_ph of a ZT or power-factor screen came from.
    pub phonon_conductance_source: Option<PhononConductanceSource>,
    /// The summary, as written to summary.json.
    pub summary: GridSummary,
}

impl GridRun {
    /// Which points did not converge (flagged in the table).
    pub fn unconverged(&self) -> Vec<usize> {
        self.table.unconverged()
    }

    /// Why the results are flagged, or `None`; `results` names where they
    /// are (e.g. "DIR").
    pub fn not_converged(&self, results: &str) -> Option<String> {
        let bad = self.table.unconverged();
        (!bad.is_empty()).then(|| {
            format!(
                "{} of {} points did not converge (first: point {}); they are flagged converged = false in {results}",
                bad.len(),
                self.table.rows.len(),
                bad[0],
            )
        })
    }
}

impl From<SweepError> for SessionError {
    fn from(e: SweepError) -> Self {
        match e {
            SweepError::BadAxis { .. } | SweepError::Case { .. } => {
                SessionError::BadInput(e.to_string())
            }
            SweepError::Solve { .. } | SweepError::Task { .. } => {
                SessionError::Solver(e.to_string())
            }
            SweepError::Store(_) => SessionError::Io(e.to_string()),
            SweepError::Cancelled => SessionError::Cancelled,
        }
    }
}

/// `; numeric keys of this case: …` after an unknown key without a close
/// match.
fn key_listing(case: &Case, suggested: bool) -> String {
    if suggested {
        String::new()
    } else {
        format!(
            "; numeric keys of this case: {}",
            case.numeric_keys().join(", ")
        )
    }
}

/// Parse `KEY=START:STOP:COUNT` specifications (`KEY1+KEY2` for keys set
/// together) into a grid, checking the keys and every value of every axis
/// against the case before anything is computed or written.
pub fn parse_grid(case: &Case, vary: &[String]) -> Result<Grid, SessionError> {
    let read_key = |k: &str| {
        k.parse::<CaseKey>().map_err(|e| {
            let e = case.unknown_key_error(&e);
            format!("{e}{}", key_listing(case, e.suggestion.is_some()))
        })
    };
    let axes = vary
        .iter()
        .map(|s| Axis::parse_with(s, read_key))
        .collect::<Result<Vec<_>, _>>()?;
    let grid = Grid::new(axes)?;
    check_axes(&grid, vary)?;
    // Every value of every axis, one key at a time: a value the key cannot
    // take is refused before the folder is claimed. Combinations of axes
    // are checked by the sweep itself.
    for (axis, spec) in grid.axes.iter().zip(vary) {
        for &key in &axis.keys {
            for value in (0..axis.count).map(|i| axis.value(i)) {
                case.with(key, value).map_err(|e| {
                    let listing = if e.kind == CaseErrorKind::UnknownKey {
                        key_listing(case, e.suggestion.is_some())
                    } else {
                        String::new()
                    };
                    SessionError::BadInput(format!("--vary `{spec}`: {e}{listing}"))
                })?;
            }
        }
    }
    Ok(grid)
}

/// Axes that repeat a key, repeat one value, or make too many points.
fn check_axes(grid: &Grid, vary: &[String]) -> Result<(), SessionError> {
    let mut seen: Vec<CaseKey> = Vec::new();
    let mut points: usize = 1;
    for (axis, spec) in grid.axes.iter().zip(vary) {
        if axis.count > 1 && axis.start == axis.stop {
            return Err(SessionError::BadInput(format!(
                "--vary `{spec}`: expected STOP different from START when COUNT > 1, found \
                 START = STOP = {} (all {} points would be the same); hint: COUNT = 1 for one value",
                axis.start, axis.count
            )));
        }
        for &key in &axis.keys {
            if seen.contains(&key) {
                return Err(SessionError::BadInput(format!(
                    "--vary `{spec}`: expected each key on one axis only, found `{key}` twice \
                     (the later value would overwrite the earlier); hint: one --vary per key"
                )));
            }
            seen.push(key);
        }
        points = points.saturating_mul(axis.count);
    }
    if points > MAX_GRID_POINTS {
        let found = if points == usize::MAX {
            "more than can be counted".to_string()
        } else {
            points.to_string()
        };
        return Err(SessionError::BadInput(format!(
            "--vary: expected at most {MAX_GRID_POINTS} grid points (each is a full solve), found {found}; \
             hint: smaller COUNT values"
        )));
    }
    Ok(())
}

/// Where a grid runs and what it may use.
#[derive(Clone, Copy, Debug)]
pub struct GridPlace<'a> {
    /// The result folder (also holding the finished points).
    pub dir: &'a Path,
    /// Files in it that qheat did not write: refuse or keep beside.
    pub other_files: OtherFiles,
    /// Worker threads (most lines of points at once), recorded in the summary.
    pub threads: usize,
    /// Memory the points in flight may use (bytes), `None`: no bound.
    pub memory_budget_bytes: Option<u64>,
    /// The processes sharing the grid ([`Cluster::single`] for one).
    pub cluster: &'a Cluster,
}

/// Run a sweep or screen of `loaded` over `grid` into `place.dir` and
/// write its table, figures and summary there (what `qheat sweep` and
/// `qheat screen` do).
pub fn grid_run(
    loaded: &Loaded,
    grid: Grid,
    kind: GridKind,
    place: &GridPlace<'_>,
    observer: &mut (dyn Observer + Send),
) -> Result<GridRun, SessionError> {
    let case = &loaded.case;
    let (name, task): (&str, Box<dyn PointTask>) = match kind {
        GridKind::Sweep => (
            "sweep",
            Box::new(sweep::ObservablesTask::of(&loaded.resolved)),
        ),
        GridKind::Screen { rank, cooling } => (
            "screen",
            Box::new(
                ScreenTask::new(rank, cooling)
                    .ok_or_else(|| {
                        SessionError::BadInput(
                            "a cooler curve is needed exactly for the cooling ranking".into(),
                        )
                    })?
                    .with_electrostatics(loaded.resolved.electrostatics.is_some()),
            ),
        ),
    };
    let options = folder(name, place.other_files).keeping_store();
    let table = shared_table(case, &grid, &*task, &options, place, observer)?;
    let mut run = GridRun {
        summary: grid_summary(name, loaded, &grid, &table, place.threads),
        grid,
        table,
        order: Vec::new(),
        phonon_conductance_source: None,
    };
    if !place.cluster.is_root() {
        // Rank 0 alone writes the folder.
        return Ok(run);
    }
    match kind {
        GridKind::Sweep => {
            let electrostatics = loaded.resolved.electrostatics.is_some();
            write_sweep(&mut run, electrostatics, place.dir, &options)?
        }
        GridKind::Screen { rank, cooling } => {
            let task = ScreenTask::new(rank, cooling)
                .expect("checked above")
                .with_electrostatics(loaded.resolved.electrostatics.is_some());
            write_screen(&mut run, case, task, place.dir, &options)?;
        }
    }
    Ok(run)
}

/// Run the share of `grid` that this process owns and gather every share's
/// rows into the table of the whole grid.
///
/// Under MPI every rank calls this: rank 0 claims the store first, then
/// each rank runs its share of the lines (whole lines, so every point has
/// the warm start it has in one process and its row the same bits) and
/// keeps each finished point in the store itself; the rows meet in one
/// gather, through which a failure on any rank ends every rank. Rank 0
/// also stores the gathered rows it cannot see (a store on a file system
/// the ranks do not share). With one process this is the plain run.
fn shared_table(
    case: &Case,
    grid: &Grid,
    task: &dyn PointTask,
    options: &FolderOptions,
    place: &GridPlace<'_>,
    observer: &mut (dyn Observer + Send),
) -> Result<SweepTable, SessionError> {
    let cluster = place.cluster;
    let claimed = match cluster.is_root() {
        true => claim_store(place.dir, options).map_err(SessionError::from),
        false => Ok(()),
    };
    // A rank's own failure is returned as it is (its kind and hints kept);
    // the others get it through the collective.
    if let Err(other) = cluster.agree(claimed.as_ref().map(|_| ()).map_err(fault)) {
        return Err(claimed.err().unwrap_or_else(|| from_fault(other)));
    }
    let share = Share::new(cluster.rank(), cluster.size()).expect("a rank is below the size");
    let sweep_options = SweepOptions {
        max_parallel_lines: Some(place.threads),
        memory_budget_bytes: place.memory_budget_bytes,
    };
    let run = PointFolder::open(place.dir, sweep::sweep_fingerprint(case, grid, task))
        .map_err(SessionError::from)
        .and_then(|store| {
            let part = sweep::run_share(case, grid, task, &store, sweep_options, share, observer)?;
            Ok((store, part))
        });
    let (store, part, own) = match run {
        Ok((store, part)) => (Some(store), Ok(part.to_bytes()), None),
        Err(e) => (None, Err(fault(&e)), Some(e)),
    };
    let parts = match cluster.gather(part) {
        Ok(parts) => parts,
        Err(other) => return Err(own.unwrap_or_else(|| from_fault(other))),
    };
    let parts = parts
        .iter()
        .map(|b| SharePart::from_bytes(b))
        .collect::<Option<Vec<_>>>()
        .ok_or_else(|| SessionError::Io("a rank sent rows that could not be read".into()))?;
    let store = store.expect("every rank that got here opened its store");
    let table = SweepTable::assemble(grid, task, &parts, store.location())?;
    if cluster.is_root() && cluster.size() > 1 {
        for (index, row) in table.rows.iter().enumerate() {
            if store.row(index, row.len()).is_none() {
                store.put_row(index, row).map_err(SweepError::Store)?;
            }
        }
    }
    Ok(table)
}

/// A failure handed to every rank, numbered like the command line's exit
/// codes (1 bad input, 2 solver, 3 files).
fn fault(e: &SessionError) -> Fault {
    let code = match e {
        SessionError::Case(_) | SessionError::BadInput(_) => 1,
        SessionError::Output(_) | SessionError::Io(_) => 3,
        _ => 2,
    };
    Fault {
        code,
        message: e.to_string(),
    }
}

/// The session error of a failure another rank handed over.
fn from_fault(f: Fault) -> SessionError {
    match f.code {
        1 => SessionError::BadInput(f.message),
        2 => SessionError::Solver(f.message),
        _ => SessionError::Io(f.message),
    }
}

/// The common part of a grid summary.
fn grid_summary(
    kind: &str,
    loaded: &Loaded,
    grid: &Grid,
    table: &SweepTable,
    threads: usize,
) -> GridSummary {
    let case = &loaded.case;
    GridSummary {
        header: header(kind, &case.name, &loaded.case_file),
        threads,
        axes: grid.axes.clone(),
        order: "row-major, last axis fastest".into(),
        points: grid.len(),
        computed_this_run: table.computed,
        from_earlier_runs: grid.len() - table.computed,
        parallel_lines: table.parallel_lines,
        point_store: table.store.clone(),
        unconverged_points: table.unconverged(),
        converged: table.unconverged().is_empty(),
        columns: table.columns.clone(),
        warm_start: None,
        ranking: None,
        resolved_case: case.to_toml_string(),
    }
}

/// sweep.csv, the figures and summary.json of a sweep.
fn write_sweep(
    run: &mut GridRun,
    electrostatics: bool,
    dir: &Path,
    options: &FolderOptions,
) -> Result<(), SessionError> {
    let (grid, table) = (&run.grid, &run.table);
    let stage = Staging::with_options(dir, options)?;
    stage.write("sweep.csv", &grid_csv(&table.columns, &table.rows))?;
    let quantities = [
        "current_a",
        "heat_current_left_w",
        "heat_current_right_w",
        "lattice_power_w",
        "electrical_power_w",
    ];
    for (name, svg) in crate::output::plots::grid_figures(grid, table, &quantities, "sweep")? {
        stage.write(&name, svg.as_bytes())?;
    }
    run.summary.warm_start = Some(if electrostatics {
        "the potential is solved at every point ([electrostatics]; columns potential_drop_v, outer_iterations, potential_change_ev, poisson_residual); each point starts from the converged potential and self-energy of the previous point along the last axis when the energy grid and device size match".into()
    } else {
        "each point's Born loop starts from the converged self-energy of the previous point along the last axis when the energy grid and device size match".into()
    });
    stage.write("summary.json", to_text(&run.summary).as_bytes())?;
    stage.commit()?;
    Ok(())
}

/// screen.csv, ranking.csv, the figures and summary.json of a screen.
fn write_screen(
    run: &mut GridRun,
    case: &Case,
    task: ScreenTask,
    dir: &Path,
    options: &FolderOptions,
) -> Result<(), SessionError> {
    let rank = task.rank();
    let (grid, table) = (&run.grid, &run.table);
    let order = ranking(table, rank.column())?;
    let stage = Staging::with_options(dir, options)?;
    let (rcols, rrows) = ranking_table(table, &order);
    stage.write("screen.csv", &grid_csv(&table.columns, &table.rows))?;
    stage.write("ranking.csv", &grid_csv(&rcols, &rrows))?;
    for (name, svg) in crate::output::plots::grid_figures(grid, table, &[rank.column()], "screen")?
    {
        stage.write(&name, svg.as_bytes())?;
    }
    if let Some(svg) = crate::output::plots::ranking_figure(grid, table, &order, rank.column())? {
        stage.write("ranking.svg", svg.as_bytes())?;
    }
    let kph_source = match rank {
        Rank::Cooling => None,
        _ => Some(crate::sweep::screen::phonon_conductance_source(
            case, &grid.axes,
        )?),
    };
    run.summary.ranking = Some(ranking_summary(grid, table, &order, task, kph_source));
    stage.write("summary.json", to_text(&run.summary).as_bytes())?;
    stage.commit()?;
    run.order = order;
    run.phonon_conductance_source = kph_source;
    Ok(())
}

/// The `ranking` object of summary.json: the five best points.
fn ranking_summary(
    grid: &Grid,
    table: &SweepTable,
    order: &[usize],
    task: ScreenTask,
    kph_source: Option<PhononConductanceSource>,
) -> Ranking {
    let column = task.rank().column();
    let c = table.column(column).expect("ranked column exists");
    Ranking {
        phonon_conductance_source: kph_source,
        rank_by: task,
        ranked_column: column.into(),
        best: order
            .iter()
            .take(5)
            .map(|&i| BestPoint {
                point: i,
                values: grid
                    .names()
                    .into_iter()
                    .zip(table.rows[i].iter().copied())
                    .collect(),
                score: [(column.to_string(), table.rows[i][c])].into(),
            })
            .collect(),
    }
}
