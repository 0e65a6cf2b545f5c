//! `qheat coefficients`: linear-response thermoelectric coefficients.

use super::format::si;
use super::progress::enabled;
use super::solve::load;
use super::{Common, Failure, check_memory, default_out, folder};
use qheat::output::phonons::{lattice_summary, write_phonon_files};
use qheat::output::results::header;
use qheat::output::schema::summary::{CoefficientsSummary, to_text};
use qheat::output::{OtherFiles, Staging, manifest::check_folder};
use qheat::thermo::common_grid::CommonGrid;
use qheat::thermo::{Coefficients, of_case};
use std::path::Path;

/// Linear-response coefficients of a case, with a progress bar: the
/// coefficients, how they were obtained (as JSON) and the energy grid the
/// runs shared.
pub fn case_coefficients(
    case: &qheat::case::Case,
    quiet: bool,
) -> Result<(Coefficients, serde_json::Value, CommonGrid), Failure> {
    let tol = case.resolve()?.scba.tolerance.min(1e-12);
    let mut progress = super::progress::BornProgress::new(enabled(quiet), tol, "linear response");
    let set = of_case::case_coefficients(case, &mut progress).map_err(|e| match e {
        of_case::CoefficientError::Case(e) => Failure::from(e),
        other => Failure::Solver(other.to_string()),
    })?;
    progress.finish();
    let detail = match &set.response {
        Some(m) => serde_json::to_value(m).expect("JSON"),
        None => serde_json::json!({ "method": "transmission moments" }),
    };
    Ok((set.coefficients, detail, set.grid))
}

/// "common energy grid for the 4 runs: …" (or "for the run" with one).
pub fn grid_line(grid: &CommonGrid) -> String {
    let runs = match grid.operating_points {
        1 => "the run".to_string(),
        n => format!("the {n} runs"),
    };
    format!("common energy grid for {runs}: {}", grid.describe())
}

/// Print coefficients for people.
pub fn print_coefficients(c: &Coefficients) {
    println!(
        "around            µ = {:.4} eV, T = {} K ({})",
        c.fermi_level_ev, c.temperature_k, c.method
    );
    println!("conductance       G  = {}", si(c.conductance_s, "S", 5));
    println!("Seebeck           S  = {:.3} µV/K", c.seebeck_v_per_k * 1e6);
    println!("Peltier           Π  = {:.4} mV", c.peltier_v * 1e3);
    println!(
        "thermal cond.     κe = {}",
        si(c.thermal_conductance_w_per_k, "W/K", 5)
    );
    println!("Lorenz ratio      κe/(G T L0) = {:.5}", c.lorenz_ratio);
    println!(
        "power factor      S²G = {}",
        si(c.power_factor_w_per_k2, "W/K²", 4)
    );
    println!(
        "figure of merit   ZT = {:.4}  (κ_ph = {}; {})",
        c.zt,
        si(c.phonon_conductance_w_per_k, "W/K", 3),
        c.phonon_conductance_source.describe()
    );
    println!("Kelvin/Onsager    residual {:.1e}", c.kelvin_residual);
}

/// The line that says the potential was solved at every run, when the
/// case solves it with the transport.
fn print_electrostatics(detail: &serde_json::Value) {
    let Some(e) = detail.get("electrostatics") else {
        return;
    };
    let drop = e["potential_drop_v"]
        .get(0)
        .and_then(serde_json::Value::as_f64)
        .unwrap_or(f64::NAN);
    println!(
        "electrostatics    potential solved at every run, none imposed (outer iterations {}, unperturbed point first; tolerance {:.1e} eV); computed drop at equilibrium {:.3e} V",
        e["outer_iterations"],
        e["tolerance_ev"].as_f64().unwrap_or(f64::NAN),
        drop
    );
}

/// Terminal lines of the channel Seebeck coefficients.
fn print_channel_seebeck(ch: &qheat::thermo::channels::ChannelSeebeck) {
    use qheat::thermo::channels::ChannelSeebeck;
    match ch {
        ChannelSeebeck::Given(list) => {
            for c in list {
                println!(
                    "  channel {:<8} G = {}  S = {:.3} µV/K",
                    c.name,
                    si(c.conductance_s, "S", 5),
                    c.seebeck_v_per_k * 1e6
                );
            }
        }
        ChannelSeebeck::NotGiven(why) => println!("  channel Seebeck not given: {why}"),
    }
}

/// `qheat coefficients CASE`.
pub fn coefficients(
    path: &Path,
    out: Option<&Path>,
    other_files: OtherFiles,
    common: &Common,
) -> Result<(), Failure> {
    let (case, resolved) = load(path, common)?;
    check_memory(resolved.memory_estimate_bytes())?;
    let out_dir = out
        .map(Path::to_path_buf)
        .unwrap_or_else(|| default_out(&case.name, "-coefficients"));
    let options = folder("coefficients", other_files);
    check_folder(&out_dir, &options)?;
    let (c, detail, grid) = case_coefficients(&case, common.quiet)?;
    let channels = of_case::case_channel_seebeck(&case).map_err(|e| match e {
        of_case::CoefficientError::Case(e) => Failure::from(e),
        other => Failure::Solver(format!("channel coefficients: {other}")),
    })?;
    let phonons = super::lattice::spectrum(&resolved)?;
    let lattice = phonons.map(|s| lattice_summary(&resolved, s, c.temperature_k));
    let summary = CoefficientsSummary {
        header: header("coefficients", &case.name, &path.display().to_string()),
        threads: common.threads,
        coefficients: c.clone(),
        response: detail,
        energy_grid: grid.clone(),
        lattice: lattice.clone(),
        channels: channels.clone(),
        warnings: resolved.warnings.clone(),
        notes: resolved.notes.clone(),
        resolved_case: case.to_toml_string(),
    };
    let text = to_text(&summary);
    if !common.writes {
        return Ok(());
    }
    let stage = Staging::with_options(&out_dir, &options)?;
    stage.write("summary.json", text.as_bytes())?;
    if let Some(s) = phonons {
        write_phonon_files(&stage, s, c.temperature_k)?;
    }
    stage.commit()?;
    if common.json {
        println!("{text}");
    } else if !common.quiet {
        print_coefficients(&c);
        print_electrostatics(&summary.response);
        if let Some(ch) = &channels {
            print_channel_seebeck(ch);
        }
        println!("energy grid       {}", grid_line(&grid));
        if let Some(l) = &lattice {
            super::lattice::print_lattice(l);
        }
        println!("results           {}", out_dir.display());
    }
    Ok(())
}
