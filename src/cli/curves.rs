//! `qheat generator` and `qheat cooler`: power and efficiency against load
//! voltage, cooling power and COP against current.

use super::format::{number, si};
use super::progress::{CurveProgress, enabled};
use super::solve::load;
use super::{Common, Failure, check_memory, default_out, folder};
use qheat::leads::Side;
use qheat::output::manifest::check_folder;
use qheat::output::results::header;
use qheat::output::schema::summary::{CurveSummary, to_text};
use qheat::output::schema::tables;
use qheat::output::{FolderOptions, OtherFiles, Staging};
use qheat::thermo::cooler::{CoolerSettings, cooler as cooler_curve};
use qheat::thermo::generator::{CurveError, GeneratorSettings, generator as generator_curve};
use std::path::{Path, PathBuf};

impl From<CurveError> for Failure {
    fn from(e: CurveError) -> Self {
        match e {
            CurveError::Settings(_) | CurveError::Case(_) => Failure::BadInput(e.to_string()),
            _ => Failure::Solver(e.to_string()),
        }
    }
}

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

fn write(
    out_dir: &Path,
    options: &FolderOptions,
    csv_name: &str,
    csv: Vec<u8>,
    summary: &str,
    figures: Vec<(&'static str, String)>,
) -> Result<(), Failure> {
    let stage = Staging::with_options(out_dir, options)?;
    stage.write(csv_name, &csv)?;
    stage.write("summary.json", summary.as_bytes())?;
    for (name, svg) in figures {
        stage.write(name, svg.as_bytes())?;
    }
    stage.commit()?;
    Ok(())
}

fn flag(converged: bool, out_dir: &Path) -> Result<(), Failure> {
    if converged {
        Ok(())
    } else {
        Err(Failure::Solver(format!(
            "a Born loop (or a solve of the potential) did not converge; results in {} are flagged (converged = false)",
            out_dir.display()
        )))
    }
}

/// Most points on one curve: each is a full solve, and curves this fine
/// show nothing a coarser one does not.
pub const MAX_CURVE_POINTS: usize = 10_000;

/// Check --hot, --cold and --points before any work. `strict`: the hot lead
/// must be strictly hotter (a generator needs a temperature difference; a
/// cooler may also pump at ΔT = 0).
pub fn check_curve_options(
    hot: f64,
    cold: f64,
    points: usize,
    strict: bool,
) -> Result<(), Failure> {
    for (name, t) in [("--hot", hot), ("--cold", cold)] {
        if !(t.is_finite() && t > 0.0) {
            return Err(Failure::BadInput(format!(
                "{name}: expected a lead temperature in K > 0, found {t}"
            )));
        }
    }
    if strict && hot <= cold {
        let hint = if hot == cold {
            "a generator needs the hot lead hotter than the cold one"
        } else {
            "swap the two values"
        };
        return Err(Failure::BadInput(format!(
            "--hot {hot} --cold {cold}: expected --hot > --cold (the hot lead drives the generator), \
             found --hot ≤ --cold; hint: {hint}"
        )));
    }
    if !strict && hot < cold {
        return Err(Failure::BadInput(format!(
            "--hot {hot} --cold {cold}: expected --hot ≥ --cold (the cooler pumps heat from the cold \
             lead to the hot one), found --hot < --cold; hint: swap the two values"
        )));
    }
    if !(3..=MAX_CURVE_POINTS).contains(&points) {
        return Err(Failure::BadInput(format!(
            "--points: expected 3 to {MAX_CURVE_POINTS} points on the curve, found {points}"
        )));
    }
    Ok(())
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
    let (case, resolved) = load(path, common)?;
    check_memory(resolved.memory_estimate_bytes())?;
    let settings = GeneratorSettings::new(hot, cold, points);
    let out_dir: PathBuf = out
        .map(Path::to_path_buf)
        .unwrap_or_else(|| default_out(&case.name, "-generator"));
    let options = folder("generator", other_files);
    check_folder(&out_dir, &options)?;
    let mut progress = CurveProgress::new(enabled(common.quiet), &case.name);
    let r = generator_curve(&case, &settings, &mut progress);
    progress.finish();
    let r = r?;
    let csv = tables::generator().csv(&r);
    let text = to_text(&CurveSummary {
        result: &r,
        header: header("generator", &case.name, &path.display().to_string()),
        conventions: "hot lead = left (lead 1) at T_hot, cold lead = right (lead 2) at T_cold; V = V1 - V2 = -(µ1 - µ2)/e with µ1,2 = µ ∓ eV/2; I = I_1 into the device from lead 1; P = -I V delivered to the load; efficiency = P / J_Q,hot".into(),
        resolved_case: case.to_toml_string(),
    });
    let figures = qheat::output::plots::generator_figures(&r)?;
    write(&out_dir, &options, "generator.csv", csv, &text, figures)?;
    if common.json {
        println!("{text}");
    } else if !common.quiet {
        print_generator(&r, hot, cold);
        println!("results           {}", out_dir.display());
    }
    flag(r.converged, &out_dir)
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
    println!(
        "maximum cooling   {} at V = {}, I = {}",
        si(r.max_cooling_power_w, "W", 5),
        si(r.voltage_at_max_v, "V", 5),
        si(r.current_at_max_a, "A", 4)
    );
    println!(
        "at zero bias      {} (heat leaking into the cold lead is negative)",
        si(r.cooling_power_at_zero_bias_w, "W", 4)
    );
    println!(
        "COP               {:.4} at maximum cooling, {:.4} at best (V = {}); Carnot {:.4}{}",
        r.cop_at_max,
        r.max_cop,
        si(r.voltage_at_max_cop_v, "V", 5),
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
    println!("energy grid       curve: {}", r.energy_grid.describe());
    if let Some(g) = &r.coefficient_grid {
        println!("                  linear response: {}", g.describe());
    }
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
    let (case, resolved) = load(path, common)?;
    check_memory(resolved.memory_estimate_bytes())?;
    let settings = CoolerSettings::new(hot, cold, points)
        .with_cold_lead(cold_lead)
        .with_figure_of_merit(true);
    let out_dir: PathBuf = out
        .map(Path::to_path_buf)
        .unwrap_or_else(|| default_out(&case.name, "-cooler"));
    let options = folder("cooler", other_files);
    check_folder(&out_dir, &options)?;
    let mut progress = CurveProgress::new(enabled(common.quiet), &case.name);
    let r = cooler_curve(&case, &settings, &mut progress);
    progress.finish();
    let r = r?;
    let csv = tables::cooler().csv(&r);
    let (cold_name, hot_name) = match cold_lead {
        Side::Left => ("left (lead 1)", "right (lead 2)"),
        Side::Right => ("right (lead 2)", "left (lead 1)"),
    };
    let text = to_text(&CurveSummary {
        result: &r,
        header: header("cooler", &case.name, &path.display().to_string()),
        conventions: format!(
            "cold lead = {cold_name} at T_cold, hot lead = {hot_name} at T_hot; V = V1 - V2 = -(µ1 - µ2)/e with µ1,2 = µ ∓ eV/2; I = I_1 into the device from lead 1; cooling power = heat current out of the cold lead into the device; input power = I V; COP = cooling power / (I V), NaN where either is not positive"
        ),
        resolved_case: case.to_toml_string(),
    });
    let figures = qheat::output::plots::cooler_figures(&r)?;
    write(&out_dir, &options, "cooler.csv", csv, &text, figures)?;
    if common.json {
        println!("{text}");
    } else if !common.quiet {
        print_cooler(&r, hot, cold, (cold_name, hot_name));
        println!("results           {}", out_dir.display());
    }
    flag(r.converged, &out_dir)
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
