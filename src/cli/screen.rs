//! `qheat screen`: figure-of-merit screening over a grid, ranked.

use super::curves::check_curve_options;
use super::format::{number, si};
use super::sweep::{checked_load, convergence_outcome, run_grid};
use super::{Common, Failure, agreed, default_out};
use qheat::case::PhononConductanceSource;
use qheat::cluster::Cluster;
use qheat::output::OtherFiles;
use qheat::session::GridKind;
use qheat::sweep::screen::{CoolingCurve, Rank};
use qheat::sweep::{Grid, SweepTable};
use std::path::{Path, PathBuf};

/// `--rank`: the library's ranking quantities, by their names.
pub fn rank_parser() -> impl clap::builder::TypedValueParser<Value = Rank> {
    use clap::builder::{PossibleValue, PossibleValuesParser, TypedValueParser};
    let help = |r: Rank| match r {
        Rank::Zt => "Linear-response ZT",
        Rank::PowerFactor => "Power factor S²G",
        Rank::Cooling => "Maximum cooling power (needs --hot and --cold)",
    };
    PossibleValuesParser::new(Rank::ALL.map(|r| PossibleValue::new(r.name()).help(help(r))))
        .try_map(|s| s.parse::<Rank>())
}

/// `qheat screen CASE --vary ... --rank ...`.
#[allow(clippy::too_many_arguments)]
pub fn screen(
    path: &Path,
    vary: &[String],
    rank: Rank,
    hot: Option<f64>,
    cold: Option<f64>,
    points: Option<usize>,
    out: Option<&Path>,
    other_files: OtherFiles,
    common: &Common,
    cluster: &Cluster,
) -> Result<(), Failure> {
    let cooling = cooling_curve(rank, hot, cold, points)?;
    let loaded = agreed(cluster, checked_load(path, common))?;
    let out_dir: PathBuf = out
        .map(Path::to_path_buf)
        .unwrap_or_else(|| default_out(&loaded.case.name, "-screen"));
    let kind = GridKind::Screen { rank, cooling };
    let run = run_grid(&loaded, vary, kind, &out_dir, other_files, common, cluster)?;
    if !cluster.is_root() {
        return convergence_outcome(&run, &out_dir);
    }
    if common.json {
        println!("{}", qheat::output::schema::summary::to_text(&run.summary));
    } else if !common.quiet {
        if loaded.resolved.electrostatics.is_some() {
            println!(
                "electrostatics    potential solved at every run of every point, none imposed"
            );
        }
        let kph_source = run.phonon_conductance_source.as_ref();
        print_ranking(
            &run.grid, &run.table, &run.order, rank, kph_source, &out_dir,
        );
    }
    convergence_outcome(&run, &out_dir)
}

/// The cooler curve behind `--rank cooling`, from `--hot`, `--cold` and
/// `--points`; those options are refused with any other ranking.
fn cooling_curve(
    rank: Rank,
    hot: Option<f64>,
    cold: Option<f64>,
    points: Option<usize>,
) -> Result<Option<CoolingCurve>, Failure> {
    if rank != Rank::Cooling {
        let given: Vec<&str> = [
            ("--hot", hot.is_some()),
            ("--cold", cold.is_some()),
            ("--points", points.is_some()),
        ]
        .iter()
        .filter(|(_, g)| *g)
        .map(|(n, _)| *n)
        .collect();
        if !given.is_empty() {
            return Err(Failure::BadInput(format!(
                "{}: expected only with --rank cooling (they set up its cooler curves), \
                 found with another --rank; hint: leave them out or use --rank cooling",
                given.join(", ")
            )));
        }
        return Ok(None);
    }
    let points = points.unwrap_or(21);
    let (Some(hot_k), Some(cold_k)) = (hot, cold) else {
        return Err(Failure::BadInput(
            "--rank cooling needs --hot K and --cold K (the right lead is the cold one)".into(),
        ));
    };
    check_curve_options(hot_k, cold_k, points, false)?;
    if !(cold_k > 0.0 && hot_k >= cold_k && hot_k.is_finite()) {
        return Err(Failure::BadInput(format!(
            "expected --hot ≥ --cold > 0, found --hot {hot_k} --cold {cold_k}"
        )));
    }
    Ok(Some(CoolingCurve {
        hot_k,
        cold_k,
        points,
    }))
}

/// Whether point `i`'s largest cooling power is only a lower bound: its
/// curve was still rising at the end of its range.
fn at_range_end(table: &SweepTable, i: usize) -> bool {
    (table.column("max_at_range_end")).is_some_and(|c| table.rows[i][c] == 1.0)
}

/// Terminal lines: the five best points and where the ranking is.
fn print_ranking(
    grid: &Grid,
    table: &SweepTable,
    order: &[usize],
    rank: Rank,
    kph_source: Option<&PhononConductanceSource>,
    out_dir: &Path,
) {
    let c = table.column(rank.column()).expect("ranked column exists");
    println!(
        "screen            {} points over {}, ranked by {}",
        grid.len(),
        grid.names().join(" × "),
        rank.column()
    );
    for (r, &i) in order.iter().take(5).enumerate() {
        let vals: Vec<String> = grid
            .names()
            .iter()
            .zip(&table.rows[i])
            .map(|(k, v)| format!("{k} = {}", number(*v)))
            .collect();
        let score = table.rows[i][c];
        let shown = match rank {
            Rank::Zt => format!("ZT = {score:.4}"),
            Rank::PowerFactor => format!("S²G = {}", si(score, "W/K²", 4)),
            Rank::Cooling if at_range_end(table, i) => format!(
                "cooling power ≥ {} (still rising at the range end)",
                si(score, "W", 4)
            ),
            Rank::Cooling => format!("cooling power = {}", si(score, "W", 4)),
        };
        println!(
            "  #{:<3} point {:<4} {}  ({})",
            r + 1,
            i,
            shown,
            vals.join(", ")
        );
    }
    if let Some(src) = kph_source {
        println!("κ_ph              {}", src.describe());
    }
    println!(
        "results           {}",
        out_dir.join("ranking.csv").display()
    );
}
