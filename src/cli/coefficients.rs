//! `qheat coefficients`: linear-response thermoelectric coefficients.

use super::format::si;
use super::progress::{BornProgress, enabled};
use super::solve::load_case;
use super::{Common, Failure, check_memory, default_out, folder};
use qheat::output::{OtherFiles, manifest::check_folder};
use qheat::session;
use qheat::thermo::Coefficients;
use qheat::thermo::common_grid::CommonGrid;
use std::path::Path;

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
    let loaded = load_case(path, common)?;
    check_memory(loaded.resolved.memory_estimate_bytes())?;
    let out_dir = out
        .map(Path::to_path_buf)
        .unwrap_or_else(|| default_out(&loaded.case.name, "-coefficients"));
    check_folder(&out_dir, &folder("coefficients", other_files))?;
    let tol = loaded.resolved.scba.tolerance.min(1e-12);
    let mut progress = BornProgress::new(enabled(common.quiet), tol, "linear response");
    let run = session::coefficients(loaded, common.threads, &mut progress);
    progress.finish();
    let run = run?;
    if !common.writes {
        return Ok(());
    }
    run.write(&out_dir, other_files)?;
    let summary = &run.summary;
    if common.json {
        println!("{}", qheat::output::schema::summary::to_text(summary));
    } else if !common.quiet {
        print_coefficients(&summary.coefficients);
        print_electrostatics(&summary.response);
        if let Some(ch) = &summary.channels {
            print_channel_seebeck(ch);
        }
        println!("energy grid       {}", grid_line(&summary.energy_grid));
        if let Some(l) = &summary.lattice {
            super::lattice::print_lattice(l);
        }
        println!("results           {}", out_dir.display());
    }
    Ok(())
}
