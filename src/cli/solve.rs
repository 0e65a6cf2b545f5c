//! `qheat check` and `qheat solve`.

use super::format::{residual, si};
use super::progress::{BornProgress, enabled};
use super::{Common, Failure, check_memory, default_out, folder, print_warnings};
use qheat::case::{Case, Resolved};
use qheat::observables::{Observables, ObserveOptions, observe_with};
use qheat::output::results::{RunInfo, read_self_energy, solve_summary, write_solve_files};
use qheat::output::{OtherFiles, Staging, manifest::check_folder};
use qheat::scba::{Solution, SolveError, solve as born_solve};
use std::path::Path;

/// Load and resolve a case, printing its warnings.
pub fn load(path: &Path, common: &Common) -> Result<(Case, Resolved), Failure> {
    let case = Case::load(path)?;
    let resolved = case.resolve()?;
    print_warnings(&resolved.warnings, &resolved.notes, common);
    Ok((case, resolved))
}

/// `qheat check CASE`.
pub fn check(path: &Path, common: &Common) -> Result<(), Failure> {
    let case = Case::load(path)?;
    let resolved = case.resolve()?;
    if common.json {
        let v = serde_json::json!({
            "case_name": case.name,
            "cells": resolved.problem.device.cells(),
            "orbitals_per_cell": resolved.problem.device.orbitals,
            "grid": resolved.problem.grid,
            "phonons": resolved.problem.scattering.phonons.iter().map(|m| serde_json::json!({
                "requested_energy_ev": m.requested_energy_ev, "energy_ev": m.energy_ev, "grid_steps": m.steps,
                "bath_temperature_k": m.bath_temperature_k})).collect::<Vec<_>>(),
            "memory_estimate_bytes": resolved.memory_estimate_bytes(),
            "warnings": resolved.warnings,
            "notes": resolved.notes,
        });
        println!("{}", serde_json::to_string_pretty(&v).expect("JSON"));
    } else if !common.quiet {
        print!("{}", resolved.describe());
    }
    Ok(())
}

/// Human summary of one operating point.
pub fn print_summary(sol: &Solution, o: &Observables, out: &Path) {
    let r = &sol.report;
    println!(
        "operating point   V = {}, T = {} K / {} K",
        si(o.voltage_v, "V", 4),
        sol.problem.left.temperature_k,
        sol.problem.right.temperature_k
    );
    if sol.problem.scattering.is_coherent() {
        println!("transport         coherent (no scattering inside the device)");
    } else {
        println!(
            "Born loop         {} after {} iterations ({} energy order), residual {}{}",
            if r.converged {
                "converged"
            } else {
                "NOT CONVERGED"
            },
            r.iterations,
            match r.energy_order {
                qheat::scba::EnergyOrder::RedBlack => "red-black",
                _ => "simultaneous",
            },
            r.history
                .last()
                .map(|h| residual(h.residual))
                .unwrap_or_default(),
            if r.hermitian_part {
                ", Hermitian part included"
            } else {
                ""
            }
        );
    }
    println!("current           I = {}", si(o.current_a, "A", 4));
    if let Some(g) = o.conductance_s {
        println!("conductance       G = I/V = {}", si(g, "S", 4));
    }
    println!(
        "heat current      left {}  right {}  (out of each contact into the device)",
        si(o.heat_current_left_w, "W", 4),
        si(o.heat_current_right_w, "W", 4)
    );
    println!(
        "electrical power  I·V = {}",
        si(o.electrical_power_w, "W", 4)
    );
    if sol.problem.scattering.phonons.is_empty() {
        println!(
            "lattice power     {} in total (electron side)",
            si(o.lattice_power_w, "W", 4)
        );
    } else {
        // The two routes agree at the fixed point of the Born loop.
        println!(
            "lattice power     electron side {}  phonon side {}",
            si(o.lattice_power_w, "W", 4),
            si(o.lattice_power_phonon_side_w, "W", 4)
        );
    }
    if !sol.problem.scattering.is_coherent() {
        let p = &o.sites.lattice_power_w;
        let (imax, pmax) =
            p.iter().enumerate().fold(
                (0, f64::NEG_INFINITY),
                |a, (i, &v)| if v > a.1 { (i, v) } else { a },
            );
        let (imin, pmin) =
            p.iter().enumerate().fold(
                (0, f64::INFINITY),
                |a, (i, &v)| if v < a.1 { (i, v) } else { a },
            );
        println!(
            "  hottest cell    x = {:.2} nm: {}",
            o.sites.x_nm[imax],
            si(pmax, "W", 3)
        );
        println!(
            "  coolest cell    x = {:.2} nm: {}",
            o.sites.x_nm[imin],
            si(pmin, "W", 3)
        );
    }
    let drops = &o.sites.voltage_drop_v;
    if let Some((i, d)) = drops
        .iter()
        .enumerate()
        .take(drops.len().saturating_sub(1))
        .max_by(|a, b| a.1.abs().total_cmp(&b.1.abs()))
    {
        println!(
            "largest drop      of the local Fermi level at x = {:.2} nm: {}",
            o.sites.x_nm[i],
            si(*d, "V", 3)
        );
    }
    if let (Some(first), Some(last)) = (
        o.sites.fermi_level_ev.first(),
        o.sites.fermi_level_ev.last(),
    ) {
        // Where the applied voltage goes: into the contacts (including the
        // quantum contact resistance) or across the device itself.
        println!(
            "Fermi-level drop  left contact {}, inside the device {}, right contact {}",
            si(o.contact_drop_left_v, "V", 3),
            si(first - last, "V", 3),
            si(drops.last().copied().unwrap_or(0.0), "V", 3)
        );
    }
    use qheat::observables::FermiLevelStatus;
    let st = &o.sites.fermi_level_status;
    let outside: Vec<String> = st
        .iter()
        .enumerate()
        .filter(|(_, f)| {
            matches!(
                f,
                FermiLevelStatus::BelowInterval | FermiLevelStatus::AboveInterval
            )
        })
        .map(|(i, _)| i.to_string())
        .collect();
    if !outside.is_empty() {
        let (lo, hi) = o.sites.fermi_level_interval_ev;
        println!(
            "local Fermi level outside [{lo:.3}, {hi:.3}] eV in {} cell(s): {} (written as NaN, \
             flagged in sites.csv)",
            outside.len(),
            outside.join(", ")
        );
    }
    let l = &o.ledger;
    println!(
        "ledger            charge {}  lattice {}  leads-lattice {}  heat {}  (relative residuals; \
         energy identity {})",
        residual(l.charge_relative),
        residual(l.lattice_relative),
        residual(l.leads_lattice_relative),
        residual(l.heat_relative),
        residual(l.energy_relative)
    );
    println!("results           {}", out.display());
}

/// `qheat solve CASE`.
pub fn solve(
    path: &Path,
    out: Option<&Path>,
    other_files: OtherFiles,
    warm_start: Option<&Path>,
    common: &Common,
) -> Result<(), Failure> {
    let (case, resolved) = load(path, common)?;
    check_memory(resolved.memory_estimate_bytes())?;
    let out_dir = out
        .map(Path::to_path_buf)
        .unwrap_or_else(|| default_out(&case.name, ""));
    // Refused before the work rather than after it.
    check_folder(&out_dir, &folder("solve", other_files))?;
    let warm = match warm_start {
        Some(dir) => {
            Some(read_self_energy(dir).map_err(|e| Failure::BadInput(format!("warm start: {e}")))?)
        }
        None => None,
    };
    let mut bar = BornProgress::new(enabled(common.quiet), resolved.scba.tolerance, &case.name);
    let result = born_solve(&resolved.problem, &resolved.scba, warm.as_ref(), &mut bar);
    bar.finish();
    let case_toml = case.to_toml_string();
    let info = RunInfo {
        case_name: &case.name,
        case_file: &path.display().to_string(),
        case_toml: &case_toml,
        warnings: &resolved.warnings,
        notes: &resolved.notes,
        threads: common.threads,
    };
    let sol = match result {
        Ok(s) => s,
        Err(e) => {
            write_failure(&out_dir, other_files, &info, &e)?;
            return Err(Failure::Solver(format!(
                "{e}; nothing trustworthy was computed (summary.json in {} says so)",
                out_dir.display()
            )));
        }
    };
    let o = observe_with(
        &sol,
        &ObserveOptions {
            electron_temperature: resolved.fit_electron_temperature,
        },
    );
    let summary = solve_summary(&sol, &o, &info);
    let stage = Staging::with_options(&out_dir, &folder("solve", other_files))?;
    write_solve_files(&stage, &sol, &o, &summary)?;
    qheat::output::plots::write_solve_plots(&stage, &sol, &o)?;
    stage.commit()?;
    if common.json {
        println!("{}", serde_json::to_string_pretty(&summary).expect("JSON"));
    } else if !common.quiet {
        print_summary(&sol, &o, &out_dir);
    }
    if !sol.report.converged {
        let last = sol.report.history.last();
        return Err(Failure::Solver(format!(
            "the Born loop did not converge in {} iterations (last residual {}, current change {:.2} of the allowance); \
             results in {} are flagged as not converged",
            sol.report.iterations,
            last.map(|h| residual(h.residual)).unwrap_or_default(),
            last.map(|h| h.current_change).unwrap_or(f64::NAN),
            out_dir.display()
        )));
    }
    Ok(())
}

/// A summary that says the run failed, so nobody mistakes old files for it.
fn write_failure(
    out_dir: &Path,
    other_files: OtherFiles,
    info: &RunInfo<'_>,
    error: &SolveError,
) -> Result<(), Failure> {
    let location = error.location();
    let v = serde_json::json!({
        "program": qheat::output::results::program(),
        "kind": "solve",
        "case_name": info.case_name,
        "case_file": info.case_file,
        "threads": info.threads,
        "converged": false,
        "trustworthy": false,
        "error": error.to_string(),
        "fault": {
            "kind": error.kind(),
            "energy_ev": location.map(|l| l.0),
            "cell": location.and_then(|l| l.1),
        },
        "warnings": info.warnings,
        "resolved_case": info.case_toml,
    });
    let stage = Staging::with_options(out_dir, &folder("failed-solve", other_files))?;
    stage.write(
        "summary.json",
        serde_json::to_string_pretty(&v).expect("JSON").as_bytes(),
    )?;
    stage.commit()?;
    Ok(())
}
