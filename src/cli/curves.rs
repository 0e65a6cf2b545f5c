//! `qheat generator` and `qheat cooler`: power and efficiency against load
//! voltage, cooling power and COP against current.

use super::format::{number, si};
use super::progress::{CurveProgress, enabled};
use super::solve::load_case;
use super::{Common, Failure, check_memory, default_out, folder};
use qheat::leads::Side;
use qheat::output::OtherFiles;
use qheat::output::manifest::check_folder;
use qheat::output::schema::summary::to_text;
use qheat::session::{self, Spelling};
use std::path::{Path, PathBuf};

/// `--cold-lead`: the library's sides, by their names.
pub fn side_parser() -> impl clap::builder::TypedValueParser<Value = Side> {
    use clap::builder::{PossibleValue, PossibleValuesParser, TypedValueParser};
    let help = |s: Side| match s {
        Side::Left => "Lead 1",
        Side::Right => "Lead 2",
    };
    PossibleValuesParser::new(Side::ALL.map(|s| PossibleValue::new(s.name()).help(help(s))))
        .try_map(|s| s.parse::<Side>())
}

/// Check --hot, --cold and --points before any work. `strict`: the hot lead
/// must be strictly hotter (a generator needs a temperature difference; a
/// cooler may also pump at ΔT = 0).
pub fn check_curve_options(
    hot: f64,
    cold: f64,
    points: usize,
    strict: bool,
) -> Result<(), Failure> {
    Ok(session::check_curve_options(
        hot,
        cold,
        points,
        strict,
        Spelling::Cli,
    )?)
}

/// The outcome of a written curve: exit code 2 when a solve did not
/// converge.
fn flag(not_converged: Option<String>) -> Result<(), Failure> {
    match not_converged {
        Some(message) => Err(Failure::Solver(message)),
        None => Ok(()),
    }
}

/// Terminal lines of a generator curve (all but the results folder).
fn print_generator(r: &qheat::thermo::generator::GeneratorReport, hot: f64, cold: f64) {
    println!(
        "generator         hot lead left at {hot} K, cold lead right at {cold} K, µ = {:.4} eV",
        r.fermi_level_ev
    );
    println!(
        "device            S = {:.3} µV/K, ZT = {:.4} at {} K (linear response)",
        r.coefficients.seebeck_v_per_k * 1e6,
        r.coefficients.zt,
        number(0.5 * (hot + cold))
    );
    println!(
        "open circuit      V_oc = {}  (linear estimate −SΔT = {}); short circuit I = {}",
        si(r.open_circuit_voltage_v, "V", 5),
        si(r.open_circuit_voltage_estimate_v, "V", 5),
        si(r.short_circuit_current_a, "A", 4)
    );
    println!(
        "maximum power     P = {} at V = {} (I = {})",
        si(r.max_power_w, "W", 5),
        si(r.voltage_at_max_power_v, "V", 5),
        si(r.current_at_max_power_a, "A", 4)
    );
    println!(
        "efficiency        at maximum power {:.6}  (linear response (η_C/2)ZT/(ZT+2) = {:.6})",
        r.efficiency_at_max_power, r.efficiency_at_max_power_linear
    );
    println!(
        "                  maximum {:.6} at V = {}  (Ioffe with this ZT {:.6})",
        r.max_efficiency,
        si(r.voltage_at_max_efficiency_v, "V", 5),
        r.ioffe_max_efficiency
    );
    println!(
        "bounds            Carnot η_C = {:.6}, Curzon-Ahlborn η_CA = {:.6}",
        r.carnot_efficiency, r.curzon_ahlborn_efficiency
    );
    print_leak(
        r.lattice_heat_leak_w,
        r.phonon_conductance_source,
        "added to the heat drawn from the hot side",
    );
    print_electrostatics(r.electrostatics.as_ref(), r.solves);
    println!("energy grid       curve: {}", r.energy_grid.describe());
    println!(
        "                  linear response: {}",
        r.coefficient_grid.describe()
    );
}

/// `qheat generator CASE --hot K --cold K`.
pub fn generator(
    path: &Path,
    hot: f64,
    cold: f64,
    points: usize,
    out: Option<&Path>,
    other_files: OtherFiles,
    common: &Common,
) -> Result<(), Failure> {
    check_curve_options(hot, cold, points, true)?;
    let loaded = load_case(path, common)?;
    check_memory(loaded.resolved.memory_estimate_bytes())?;
    let out_dir: PathBuf = out
        .map(Path::to_path_buf)
        .unwrap_or_else(|| default_out(&loaded.case.name, "-generator"));
    check_folder(&out_dir, &folder("generator", other_files))?;
    let mut progress = CurveProgress::new(enabled(common.quiet), &loaded.case.name);
    let run = session::generator(loaded, hot, cold, points, &mut progress);
    progress.finish();
    let run = run?;
    run.write(&out_dir, other_files)?;
    if common.json {
        println!("{}", to_text(&run.summary()));
    } else if !common.quiet {
        print_generator(&run.report, hot, cold);
        println!("results           {}", out_dir.display());
    }
    flag(run.not_converged(&format!("results in {}", out_dir.display())))
}

/// Terminal lines of a cooler curve (all but the results folder).
fn print_cooler(
    r: &qheat::thermo::cooler::CoolerReport,
    hot: f64,
    cold: f64,
    (cold_name, hot_name): (&str, &str),
) {
    println!(
        "cooler            cold lead {cold_name} at {cold} K, hot lead {hot_name} at {hot} K, µ = {:.4} eV",
        r.fermi_level_ev
    );
    if r.max_at_range_end {
        println!(
            "maximum cooling   at least {} at V = {}, I = {}: the end of the range, where the \
             cooling power was still rising (a higher bias may cool more; see range)",
            si(r.max_cooling_power_w, "W", 5),
            si(r.voltage_at_max_v, "V", 5),
            si(r.current_at_max_a, "A", 4)
        );
    } else {
        println!(
            "maximum cooling   {} at V = {}, I = {}",
            si(r.max_cooling_power_w, "W", 5),
            si(r.voltage_at_max_v, "V", 5),
            si(r.current_at_max_a, "A", 4)
        );
    }
    println!(
        "at zero bias      {} (heat leaking into the cold lead is negative)",
        si(r.cooling_power_at_zero_bias_w, "W", 4)
    );
    let best = if r.max_cop.is_infinite() {
        "unbounded as V → 0 (equal temperatures: nothing leaks at zero bias)".to_string()
    } else {
        format!(
            "{:.4} at best (V = {})",
            r.max_cop,
            si(r.voltage_at_max_cop_v, "V", 5)
        )
    };
    println!(
        "COP               {:.4} at maximum cooling, {best}; Carnot {:.4}{}",
        r.cop_at_max,
        r.carnot_cop,
        match (r.ioffe_max_cop, &r.coefficients) {
            (Some(i), Some(c)) => format!(", Ioffe {i:.4} with ZT = {:.4}", c.zt),
            _ => String::new(),
        }
    );
    print_leak(
        r.lattice_heat_leak_w,
        r.phonon_conductance_source,
        "subtracted from the cooling power",
    );
    print_electrostatics(r.electrostatics.as_ref(), r.solves);
    print_range(&r.range);
    println!("energy grid       curve: {}", r.energy_grid.describe());
    if let Some(g) = &r.coefficient_grid {
        println!("                  linear response: {}", g.describe());
    }
}

/// The cooler's range and why its march out in bias stopped there.
fn print_range(range: &qheat::thermo::cooler::CoolerRange) {
    use qheat::thermo::cooler::RangeEnd;
    let why = match range.reason {
        RangeEnd::FellBack => "the cooling power fell back by half its rise",
        RangeEnd::LevelledOff => "the cooling power levelled off",
        RangeEnd::BiasLimit => "the bias limit",
        RangeEnd::NotConverged => "a solve past it did not converge",
        RangeEnd::StepLimit => "the step limit",
    };
    let mut line = format!(
        "range             0 to {} in {} steps of kT/e; stopped at {why}",
        si(range.end_v, "V", 4),
        range.steps
    );
    if let Some(l) = range.limit_v {
        line += &format!(" (limit {})", si(l, "V", 4));
    }
    if let Some(v) = range.not_converged_at_v {
        line += &format!(" (not converged at {})", si(v, "V", 4));
    }
    println!("{line}");
}

/// `qheat cooler CASE --hot K --cold K`.
#[allow(clippy::too_many_arguments)]
pub fn cooler(
    path: &Path,
    hot: f64,
    cold: f64,
    points: usize,
    cold_lead: Side,
    out: Option<&Path>,
    other_files: OtherFiles,
    common: &Common,
) -> Result<(), Failure> {
    check_curve_options(hot, cold, points, false)?;
    let loaded = load_case(path, common)?;
    check_memory(loaded.resolved.memory_estimate_bytes())?;
    let out_dir: PathBuf = out
        .map(Path::to_path_buf)
        .unwrap_or_else(|| default_out(&loaded.case.name, "-cooler"));
    check_folder(&out_dir, &folder("cooler", other_files))?;
    let mut progress = CurveProgress::new(enabled(common.quiet), &loaded.case.name);
    let run = session::cooler(loaded, hot, cold, points, cold_lead, &mut progress);
    progress.finish();
    let run = run?;
    run.write(&out_dir, other_files)?;
    if common.json {
        println!("{}", to_text(&run.summary()));
    } else if !common.quiet {
        print_cooler(&run.report, hot, cold, run.lead_names());
        println!("results           {}", out_dir.display());
    }
    flag(run.not_converged(&format!("results in {}", out_dir.display())))
}

/// The line that says the potential was solved at every point of a curve.
fn print_electrostatics(e: Option<&qheat::thermo::generator::CurveElectrostatics>, solves: usize) {
    if let Some(e) = e {
        println!(
            "electrostatics    potential solved at every point ({solves} solves, {} outer iterations in all), none imposed; the curve's potential_drop_v gives the computed drop{}",
            e.outer_iterations,
            if e.converged {
                ""
            } else {
                " (NOT converged everywhere)"
            }
        );
    }
}

/// The lattice's heat leak line of a generator or cooler.
fn print_leak(leak_w: f64, source: qheat::case::PhononConductanceSource, what: &str) {
    use qheat::case::PhononConductanceSource as S;
    match source {
        S::None => println!("lattice heat      none ({})", source.describe()),
        _ => println!(
            "lattice heat      {} from hot to cold, {what} ({})",
            super::format::si(leak_w, "W", 4),
            source.name()
        ),
    }
}
