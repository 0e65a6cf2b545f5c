//! `qheat sweep`: any numeric case key over a grid, resumable.
//!
//! The result folder is a working folder: `points/` keeps every finished
//! point so that the same command started again recomputes only what is
//! missing. The folder's manifest lists the store before the first point is
//! written; `sweep.csv`, the figures and `summary.json` are staged and put
//! in place together when the grid is complete, replacing those of the
//! previous result and keeping the store.

use super::progress::{PointProgress, enabled};
use super::solve::load_case;
use super::{Common, Failure, agreed, available_memory_bytes, check_memory, default_out};
use qheat::cluster::Cluster;
use qheat::session::{GridKind, GridPlace, GridRun, Loaded, grid_run};
use std::path::{Path, PathBuf};

/// Run a grid of `kind` with a progress bar into `out_dir` (points kept
/// there, the store first recorded in the folder's manifest), writing its
/// table, figures and summary.
///
/// Under MPI every rank calls this: the grid is agreed on (bad input ends
/// every rank with one message), each rank runs its share of the lines and
/// rank 0 alone writes the folder (see [`grid_run`]).
pub fn run_grid(
    loaded: &Loaded,
    vary: &[String],
    kind: GridKind,
    out_dir: &Path,
    other_files: qheat::output::OtherFiles,
    common: &Common,
    cluster: &Cluster,
) -> Result<GridRun, Failure> {
    let grid = agreed(
        cluster,
        qheat::session::parse_grid(&loaded.case, vary).map_err(Failure::from),
    )?;
    let share =
        qheat::sweep::Share::new(cluster.rank(), cluster.size()).expect("a rank is below the size");
    let points = share.points(&grid).count();
    let mut progress = PointProgress::new(enabled(common.quiet), points, &loaded.case.name);
    let place = GridPlace {
        dir: out_dir,
        other_files,
        threads: common.threads,
        memory_budget_bytes: available_memory_bytes().map(|b| b / 10 * 8),
        cluster,
    };
    let run = grid_run(loaded, grid, kind, &place, &mut progress);
    progress.finish();
    Ok(run?)
}

/// The case loaded and its memory estimate checked against the machine.
pub fn checked_load(path: &Path, common: &Common) -> Result<Loaded, Failure> {
    let loaded = load_case(path, common)?;
    check_memory(loaded.resolved.memory_estimate_bytes())?;
    Ok(loaded)
}

/// Exit code 2 when some point did not converge (results written, flagged).
pub fn convergence_outcome(run: &GridRun, out_dir: &Path) -> Result<(), Failure> {
    match run.not_converged(&out_dir.display().to_string()) {
        Some(message) => Err(Failure::Solver(message)),
        None => Ok(()),
    }
}

/// `qheat sweep CASE --vary KEY=START:STOP:COUNT ...`.
pub fn sweep(
    path: &Path,
    vary: &[String],
    out: Option<&Path>,
    other_files: qheat::output::OtherFiles,
    common: &Common,
    cluster: &Cluster,
) -> Result<(), Failure> {
    let loaded = agreed(cluster, checked_load(path, common))?;
    let out_dir: PathBuf = out
        .map(Path::to_path_buf)
        .unwrap_or_else(|| default_out(&loaded.case.name, "-sweep"));
    let run = run_grid(
        &loaded,
        vary,
        GridKind::Sweep,
        &out_dir,
        other_files,
        common,
        cluster,
    )?;
    if !cluster.is_root() {
        return convergence_outcome(&run, &out_dir);
    }
    let (grid, table) = (&run.grid, &run.table);
    if common.json {
        println!("{}", qheat::output::schema::summary::to_text(&run.summary));
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
        if loaded.resolved.electrostatics.is_some() {
            println!(
                "electrostatics    potential solved at every point, none imposed (sweep.csv: potential_drop_v, outer_iterations)"
            );
        }
        println!("results           {}", out_dir.join("sweep.csv").display());
    }
    convergence_outcome(&run, &out_dir)
}
