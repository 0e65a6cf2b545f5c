//! `qheat screen`: figure-of-merit screening over a grid, ranked.

use super::curves::check_curve_options;
use super::format::{number, si};
use super::solve::load;
use super::sweep::{convergence_outcome, grid_summary, parse_grid, run_grid};
use super::{Common, Failure, agreed, check_memory, default_out, folder};
use qheat::case::PhononConductanceSource;
use qheat::cluster::Cluster;
use qheat::output::schema::summary::{BestPoint, Ranking, to_text};
use qheat::output::schema::tables::grid_csv;
use qheat::output::{OtherFiles, Staging};
use qheat::sweep::screen::{CoolingCurve, Rank, ScreenTask, ranking, ranking_table};
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
    let loaded = load(path, common).and_then(|(case, resolved)| {
        check_memory(resolved.memory_estimate_bytes())?;
        let grid = parse_grid(&case, vary)?;
        Ok((case, grid))
    });
    let (case, grid) = agreed(cluster, loaded)?;
    let out_dir: PathBuf = out
        .map(Path::to_path_buf)
        .unwrap_or_else(|| default_out(&case.name, "-screen"));
    let task = ScreenTask::new(rank, cooling).expect("a cooler curve exactly for --rank cooling");
    let options = folder("screen", other_files).keeping_store();
    let table = run_grid(
        &case, &grid, &task, &out_dir, &options, common, &case.name, cluster,
    )?;
    if !cluster.is_root() {
        return convergence_outcome(&table, &out_dir);
    }
    let order = ranking(&table, rank.column())?;
    let stage = Staging::with_options(&out_dir, &options)?;
    let (rcols, rrows) = ranking_table(&table, &order);
    stage.write("screen.csv", &grid_csv(&table.columns, &table.rows))?;
    stage.write("ranking.csv", &grid_csv(&rcols, &rrows))?;
    for (name, svg) in
        qheat::output::plots::grid_figures(&grid, &table, &[rank.column()], "screen")?
    {
        stage.write(&name, svg.as_bytes())?;
    }
    if let Some(svg) = qheat::output::plots::ranking_figure(&grid, &table, &order, rank.column())? {
        stage.write("ranking.svg", svg.as_bytes())?;
    }
    let kph_source = match rank {
        Rank::Cooling => None,
        _ => Some(qheat::sweep::screen::phonon_conductance_source(
            &case, &grid.axes,
        )?),
    };
    let mut summary = grid_summary("screen", &case, path, &grid, &table, common);
    summary.ranking = Some(ranking_summary(&grid, &table, &order, task, kph_source));
    let text = to_text(&summary);
    stage.write("summary.json", text.as_bytes())?;
    stage.commit()?;
    if common.json {
        println!("{text}");
    } else if !common.quiet {
        print_ranking(&grid, &table, &order, rank, kph_source.as_ref(), &out_dir);
    }
    convergence_outcome(&table, &out_dir)
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
