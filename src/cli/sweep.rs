//! `qheat sweep`: any numeric case key over a grid, resumable.
//!
//! The result folder is a working folder: `points/` keeps every finished
//! point so that the same command started again recomputes only what is
//! missing. The folder's manifest lists the store before the first point is
//! written; `sweep.csv`, the figures and `summary.json` are staged and put
//! in place together when the grid is complete, replacing those of the
//! previous result and keeping the store.

use super::progress::{PointProgress, enabled};
use super::solve::load;
use super::{
    Common, Failure, agreed, available_memory_bytes, check_memory, default_out, folder, gathered,
};
use qheat::case::{Case, CaseKey};
use qheat::cluster::Cluster;
use qheat::output::manifest::claim_store;
use qheat::output::results::header;
use qheat::output::schema::summary::{GridSummary, to_text};
use qheat::output::schema::tables::grid_csv;
use qheat::output::sweep::PointFolder;
use qheat::output::{FolderOptions, OtherFiles, Staging};
use qheat::sweep::{
    self, Axis, Grid, PointStore, PointTask, Share, SharePart, SweepError, SweepOptions, SweepTable,
};
use std::path::{Path, PathBuf};

impl From<SweepError> for Failure {
    fn from(e: SweepError) -> Self {
        match e {
            SweepError::BadAxis { .. } | SweepError::Case { .. } => {
                Failure::BadInput(e.to_string())
            }
            SweepError::Solve { .. } | SweepError::Task { .. } => Failure::Solver(e.to_string()),
            SweepError::Store(_) => Failure::Io(e.to_string()),
        }
    }
}

/// Most points in one grid: each is a full solve, and every point is
/// checked before the first is computed.
pub const MAX_GRID_POINTS: usize = 100_000;

/// Parse the --vary options into a grid, checking the keys against the case.
pub fn parse_grid(case: &Case, vary: &[String]) -> Result<Grid, Failure> {
    // Key names become typed keys here, once; an unknown one is reported
    // with the close matches among this case's keys (or all of them).
    let read_key = |k: &str| {
        k.parse::<CaseKey>().map_err(|e| {
            let e = case.unknown_key_error(&e);
            let listing = if e.suggestion.is_none() {
                format!(
                    "; numeric keys of this case: {}",
                    case.numeric_keys().join(", ")
                )
            } else {
                String::new()
            };
            format!("{e}{listing}")
        })
    };
    let axes = vary
        .iter()
        .map(|s| Axis::parse_with(s, read_key))
        .collect::<Result<Vec<_>, _>>()?;
    let grid = Grid::new(axes)?;
    let mut seen: Vec<CaseKey> = Vec::new();
    let mut points: usize = 1;
    for (axis, spec) in grid.axes.iter().zip(vary) {
        if axis.count > 1 && axis.start == axis.stop {
            return Err(Failure::BadInput(format!(
                "--vary `{spec}`: expected STOP different from START when COUNT > 1, found \
                 START = STOP = {} (all {} points would be the same); hint: COUNT = 1 for one value",
                axis.start, axis.count
            )));
        }
        for &key in &axis.keys {
            if seen.contains(&key) {
                return Err(Failure::BadInput(format!(
                    "--vary `{spec}`: expected each key on one axis only, found `{key}` twice \
                     (the later value would overwrite the earlier); hint: one --vary per key"
                )));
            }
            seen.push(key);
        }
        points = points.saturating_mul(axis.count);
    }
    if points > MAX_GRID_POINTS {
        return Err(Failure::BadInput(format!(
            "--vary: expected at most {MAX_GRID_POINTS} grid points (each is a full solve), found {}; \
             hint: smaller COUNT values",
            if points == usize::MAX {
                "more than can be counted".to_string()
            } else {
                points.to_string()
            }
        )));
    }
    // Every value of every axis, one key at a time, before the folder is
    // claimed: a value the key cannot take (a fractional count, a negative
    // temperature, a missing [[phonon]] entry) is refused before anything
    // is written. Combinations of axes are checked by the sweep itself.
    for (axis, spec) in grid.axes.iter().zip(vary) {
        for &key in &axis.keys {
            for value in (0..axis.count).map(|i| axis.value(i)) {
                case.with(key, value).map_err(|e| {
                    let listing = if e.suggestion.is_none()
                        && e.kind == qheat::case::CaseErrorKind::UnknownKey
                    {
                        format!(
                            "; numeric keys of this case: {}",
                            case.numeric_keys().join(", ")
                        )
                    } else {
                        String::new()
                    };
                    Failure::BadInput(format!("--vary `{spec}`: {e}{listing}"))
                })?;
            }
        }
    }
    Ok(grid)
}

/// Run a grid with a progress bar into `out_dir` (points kept there, the
/// store first recorded in the folder's manifest).
///
/// Under MPI every rank calls this: rank 0 claims the store first, then
/// each rank runs its share of the lines (whole lines, so every point has
/// the warm start it has in one process and its row the same bits) and
/// keeps each finished point in the store itself; the rows meet in one
/// gather, through which a failure on any rank ends every rank. Rank 0
/// also stores the gathered rows it cannot see (a store on a file system
/// the ranks do not share).
#[allow(clippy::too_many_arguments)]
pub fn run_grid(
    case: &Case,
    grid: &Grid,
    task: &dyn PointTask,
    out_dir: &Path,
    options: &FolderOptions,
    common: &Common,
    label: &str,
    cluster: &Cluster,
) -> Result<SweepTable, Failure> {
    let claimed = match cluster.is_root() {
        true => claim_store(out_dir, options).map_err(Failure::from),
        false => Ok(()),
    };
    agreed(cluster, claimed)?;
    let share = Share::new(cluster.rank(), cluster.size()).expect("a rank is below the size");
    let store = PointFolder::open(out_dir, sweep::sweep_fingerprint(case, grid, task));
    let points = share.points(grid).count();
    let mut progress = PointProgress::new(enabled(common.quiet), points, label);
    let options = SweepOptions {
        max_parallel_lines: Some(common.threads),
        memory_budget_bytes: available_memory_bytes().map(|b| b / 10 * 8),
    };
    let part = store.map_err(Failure::from).and_then(|store| {
        let part = sweep::run_share(case, grid, task, &store, options, share, &mut progress);
        Ok((store, part?))
    });
    progress.finish();
    let (store, part) = match part {
        Ok((store, part)) => (Some(store), Ok(part.to_bytes())),
        Err(f) => (None, Err(f)),
    };
    let parts = gathered(cluster, part)?
        .iter()
        .map(|b| SharePart::from_bytes(b))
        .collect::<Option<Vec<_>>>()
        .ok_or_else(|| Failure::Io("a rank sent rows that could not be read".into()))?;
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

/// The common part of a grid summary.
pub fn grid_summary(
    kind: &str,
    case: &Case,
    path: &Path,
    grid: &Grid,
    table: &SweepTable,
    common: &Common,
) -> GridSummary {
    GridSummary {
        header: header(kind, &case.name, &path.display().to_string()),
        threads: common.threads,
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

/// Exit code 2 when some point did not converge (results written, flagged).
pub fn convergence_outcome(table: &SweepTable, out_dir: &Path) -> Result<(), Failure> {
    let bad = table.unconverged();
    if bad.is_empty() {
        Ok(())
    } else {
        Err(Failure::Solver(format!(
            "{} of {} points did not converge (first: point {}); they are flagged converged = false in {}",
            bad.len(),
            table.rows.len(),
            bad[0],
            out_dir.display()
        )))
    }
}

/// `qheat sweep CASE --vary KEY=START:STOP:COUNT ...`.
pub fn sweep(
    path: &Path,
    vary: &[String],
    out: Option<&Path>,
    other_files: OtherFiles,
    common: &Common,
    cluster: &Cluster,
) -> Result<(), Failure> {
    let loaded = load(path, common).and_then(|(case, resolved)| {
        check_memory(resolved.memory_estimate_bytes())?;
        let grid = parse_grid(&case, vary)?;
        Ok((case, resolved, grid))
    });
    let (case, resolved, grid) = agreed(cluster, loaded)?;
    let out_dir: PathBuf = out
        .map(Path::to_path_buf)
        .unwrap_or_else(|| default_out(&case.name, "-sweep"));
    let options = folder("sweep", other_files).keeping_store();
    let task = sweep::ObservablesTask::of(&resolved);
    let table = run_grid(
        &case, &grid, &task, &out_dir, &options, common, &case.name, cluster,
    )?;
    if !cluster.is_root() {
        return convergence_outcome(&table, &out_dir);
    }
    let stage = Staging::with_options(&out_dir, &options)?;
    stage.write("sweep.csv", &grid_csv(&table.columns, &table.rows))?;
    let quantities = [
        "current_a",
        "heat_current_left_w",
        "heat_current_right_w",
        "lattice_power_w",
        "electrical_power_w",
    ];
    for (name, svg) in qheat::output::plots::grid_figures(&grid, &table, &quantities, "sweep")? {
        stage.write(&name, svg.as_bytes())?;
    }
    let mut summary = grid_summary("sweep", &case, path, &grid, &table, common);
    summary.warm_start = Some(
        "each point's Born loop starts from the converged self-energy of the previous point along the last axis when the energy grid and device size match".into(),
    );
    let text = to_text(&summary);
    stage.write("summary.json", text.as_bytes())?;
    stage.commit()?;
    if common.json {
        println!("{text}");
    } else if !common.quiet {
        println!(
            "sweep             {} points over {} ({} computed now, {} from earlier runs, {} line(s) at once)",
            grid.len(),
            grid.names().join(" × "),
            table.computed,
            grid.len() - table.computed,
            table.parallel_lines
        );
        let bad = table.unconverged();
        println!(
            "Born loop         {}",
            if bad.is_empty() {
                "converged at every point".to_string()
            } else {
                format!("NOT CONVERGED at {} point(s): {:?}", bad.len(), bad)
            }
        );
        println!("results           {}", out_dir.join("sweep.csv").display());
    }
    convergence_outcome(&table, &out_dir)
}
