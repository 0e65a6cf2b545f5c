//! The files of a solved operating point.

use super::{OutputError, Staging, csv_bytes, npy_bytes};
use crate::observables::{
    FermiLevelStatus, LEDGER_COMPARES, Ledger, Observables, POWER_SCALE, bond_current_map,
};
use crate::scba::Solution;
use crate::units::ELEMENTARY_CHARGE;
use serde_json::{Value, json};

/// Program name and version, recorded in every summary.
pub fn program() -> Value {
    json!({ "name": "qheat", "version": env!("CARGO_PKG_VERSION") })
}

/// Everything a solve summary records besides the solution itself.
pub struct RunInfo<'a> {
    /// Case name.
    pub case_name: &'a str,
    /// Case file as given.
    pub case_file: &'a str,
    /// The case as TOML text (after any edits from the command line).
    pub case_toml: &'a str,
    /// Warnings from resolving the case.
    pub warnings: &'a [String],
    /// Notes from resolving the case.
    pub notes: &'a [String],
    /// Worker threads used.
    pub threads: usize,
}

/// The scalar results of an operating point as JSON.
pub fn scalars(o: &Observables) -> Value {
    json!({
        "voltage_v": o.voltage_v,
        "current_a": o.current_a,
        "current_left_a": o.current_left_a,
        "current_right_a": o.current_right_a,
        "energy_current_left_w": o.energy_current_left_w,
        "energy_current_right_w": o.energy_current_right_w,
        "heat_current_left_w": o.heat_current_left_w,
        "heat_current_right_w": o.heat_current_right_w,
        "lattice_power_w": o.lattice_power_w,
        "lattice_power_phonon_side_w": o.lattice_power_phonon_side_w,
        "electrical_power_w": o.electrical_power_w,
        "conductance_s": o.conductance_s,
        "contact_drop_left_v": o.contact_drop_left_v,
    })
}

/// The ledger as JSON: every entry's residual, scale and ratio (the
/// fields of [`Ledger`]), what each entry compares, and the worst ratio of
/// the physics entries.
pub fn ledger_json(l: &Ledger) -> Value {
    let mut v = serde_json::to_value(l).expect("JSON of plain values");
    let compares: serde_json::Map<String, Value> = LEDGER_COMPARES
        .iter()
        .map(|(k, c)| (k.to_string(), Value::from(*c)))
        .collect();
    v["compares"] = Value::Object(compares);
    v["power_scale"] = Value::from(POWER_SCALE);
    v["worst_relative"] = Value::from(l.worst_relative());
    v["worst_relative_of"] = Value::from("charge, lattice, leads_lattice, heat");
    v
}

/// The local Fermi level's search interval and the cells whose match lies
/// outside it or that have no states (their µ_i is NaN, never clamped).
pub fn fermi_level_json(o: &Observables) -> Value {
    let s = &o.sites;
    let cells = |want: FermiLevelStatus| -> Vec<usize> {
        s.fermi_level_status
            .iter()
            .enumerate()
            .filter(|(_, f)| **f == want)
            .map(|(i, _)| i)
            .collect()
    };
    let below = cells(FermiLevelStatus::BelowInterval);
    let above = cells(FermiLevelStatus::AboveInterval);
    json!({
        "search_interval_ev": [s.fermi_level_interval_ev.0, s.fermi_level_interval_ev.1],
        "outside_interval": below.len() + above.len(),
        "cells_below_interval": below,
        "cells_above_interval": above,
        "cells_without_states": cells(FermiLevelStatus::NoStates),
        "flagged_value": "NaN",
    })
}

/// summary.json of a solve.
pub fn solve_summary(sol: &Solution, o: &Observables, info: &RunInfo<'_>) -> Value {
    let p = &sol.problem;
    let phonons: Vec<Value> = p
        .scattering
        .phonons
        .iter()
        .map(|m| {
            json!({
                "requested_energy_ev": m.requested_energy_ev,
                "energy_ev": m.energy_ev,
                "grid_steps": m.steps,
                "bath_temperature_k": m.bath_temperature_k,
                "max_coupling_ev2": m.coupling_ev2.iter().copied().fold(0.0, f64::max),
            })
        })
        .collect();
    json!({
        "program": program(),
        "kind": "solve",
        "case_name": info.case_name,
        "case_file": info.case_file,
        "threads": info.threads,
        "converged": sol.report.converged,
        "trustworthy": sol.report.converged,
        "coherent": p.scattering.is_coherent(),
        "hermitian_part": if sol.report.hermitian_part { "include" } else { "neglect" },
        "operating_point": {
            "fermi_level_left_ev": p.left.fermi_level_ev,
            "fermi_level_right_ev": p.right.fermi_level_ev,
            "temperature_left_k": p.left.temperature_k,
            "temperature_right_k": p.right.temperature_k,
            "voltage_v": p.voltage_v(),
        },
        "device": {
            "cells": p.device.cells(),
            "orbitals_per_cell": p.device.orbitals,
            "spacing_nm": p.device.spacing_nm,
            "spin_degeneracy": p.spin_degeneracy,
        },
        "grid": p.grid,
        "phonons": phonons,
        "results": scalars(o),
        "phonon_modes": o.phonon_modes,
        "ledger": ledger_json(&o.ledger),
        "local_fermi_level": fermi_level_json(o),
        "scba": sol.report,
        "warnings": info.warnings,
        "notes": info.notes,
        "resolved_case": info.case_toml,
    })
}

/// Write the files of a solve into a staging folder: summary.json,
/// sites.csv, spectrum.csv, bond_current.npy, convergence.csv and, with
/// scattering, the self-energy for warm starts.
pub fn write_solve_files(
    stage: &Staging,
    sol: &Solution,
    o: &Observables,
    summary: &Value,
) -> Result<(), OutputError> {
    let p = &sol.problem;
    stage.write(
        "summary.json",
        serde_json::to_string_pretty(summary)
            .expect("JSON of plain values")
            .as_bytes(),
    )?;
    let s = &o.sites;
    let potential = &p.device.potential_ev;
    let mut headers = vec![
        "x_nm",
        "band_edge_ev",
        "potential_ev",
        "fermi_level_local_ev",
        "fermi_level_status",
        "lattice_power_w",
        "electron_density_per_nm",
        "voltage_drop_v",
        "resistance_ohm",
    ];
    if s.electron_temperature_k.is_some() {
        headers.push("electron_temperature_local_k");
    }
    stage.write(
        "sites.csv",
        &csv_bytes(
            &headers,
            (0..s.x_nm.len()).map(|i| {
                let mut row = vec![
                    s.x_nm[i],
                    s.band_edge_ev[i],
                    potential[i],
                    s.fermi_level_ev[i],
                    s.fermi_level_status[i].code(),
                    s.lattice_power_w[i],
                    s.electron_density_per_nm[i],
                    s.voltage_drop_v[i],
                    s.resistance_ohm[i],
                ];
                if let Some(t) = &s.electron_temperature_k {
                    row.push(t[i]);
                }
                row
            }),
        ),
    )?;
    let sp = &o.spectrum;
    let e = ELEMENTARY_CHARGE;
    let mut headers = vec![
        "energy_ev",
        "electron_flow_left_a_per_ev",
        "electron_flow_right_a_per_ev",
        "electron_flow_bath_a_per_ev",
    ];
    if sp.transmission.is_some() {
        headers.push("transmission");
    }
    stage.write(
        "spectrum.csv",
        &csv_bytes(
            &headers,
            (0..sp.energy_ev.len()).map(|k| {
                let mut row = vec![
                    sp.energy_ev[k],
                    e * sp.flow_left[k],
                    e * sp.flow_right[k],
                    e * sp.flow_bath[k],
                ];
                if let Some(t) = &sp.transmission {
                    row.push(t[k]);
                }
                row
            }),
        ),
    )?;
    let map = bond_current_map(sol);
    stage.write(
        "bond_current.npy",
        &npy_bytes(&map, &stage.path("bond_current.npy"))?,
    )?;
    stage.write(
        "convergence.csv",
        &csv_bytes(
            &[
                "iteration",
                "residual",
                "current_left_a",
                "current_right_a",
                "current_change",
            ],
            sol.report.history.iter().map(|r| {
                vec![
                    r.iteration as f64,
                    r.residual,
                    r.current_left_a,
                    r.current_right_a,
                    r.current_change,
                ]
            }),
        ),
    )?;
    if !p.scattering.is_coherent() {
        write_self_energy(stage, sol)?;
    }
    Ok(())
}

/// File names of a stored scattering self-energy.
pub const SELF_ENERGY_FILES: [&str; 2] = ["self_energy_retarded.npy", "self_energy_in.npy"];

fn write_self_energy(stage: &Staging, sol: &Solution) -> Result<(), OutputError> {
    let ns = sol.sigma.sites;
    let ne = sol.sigma.energies();
    let r = ndarray::Array2::from_shape_vec((ne, ns), sol.sigma.retarded.clone()).expect("shape");
    let i = ndarray::Array2::from_shape_vec((ne, ns), sol.sigma.inscatter.clone()).expect("shape");
    stage.write(
        SELF_ENERGY_FILES[0],
        &npy_bytes(&r, &stage.path(SELF_ENERGY_FILES[0]))?,
    )?;
    stage.write(
        SELF_ENERGY_FILES[1],
        &npy_bytes(&i, &stage.path(SELF_ENERGY_FILES[1]))?,
    )?;
    Ok(())
}

/// Read a stored scattering self-energy from a result folder.
pub fn read_self_energy(
    dir: &std::path::Path,
) -> Result<crate::scattering::ScatteringSelfEnergy, OutputError> {
    use ndarray_npy::read_npy;
    let rp = dir.join(SELF_ENERGY_FILES[0]);
    let ip = dir.join(SELF_ENERGY_FILES[1]);
    let r: ndarray::Array2<crate::C64> = read_npy(&rp).map_err(|e| OutputError::Encode {
        path: rp.clone(),
        message: e.to_string(),
    })?;
    let i: ndarray::Array2<f64> = read_npy(&ip).map_err(|e| OutputError::Encode {
        path: ip.clone(),
        message: e.to_string(),
    })?;
    if r.dim() != i.dim() {
        return Err(OutputError::Encode {
            path: ip,
            message: "the two self-energy files have different shapes".into(),
        });
    }
    let sites = r.ncols();
    Ok(crate::scattering::ScatteringSelfEnergy {
        sites,
        retarded: r.into_iter().collect(),
        inscatter: i.into_iter().collect(),
    })
}
