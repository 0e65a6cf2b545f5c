//! The files of a solved operating point.

use super::schema::summary::{
    CellValue, ChannelSummary, DeviceInfo, FermiLevelInfo, Header, LeftOutFile, MoversSummary,
    OperatingPoint, PhononInfo, Program, ReducedFile, ResultFiles, SolveResults, SolveSummary,
    to_text,
};
use super::schema::tables::{self, SolvePoint};
use super::sizes::{
    BlockMeans, ResultLimits, axis_means, block_means, block_means_of, block_sizes,
};
use super::{OutputError, Staging, npy_bytes};
use crate::observables::channels::ChannelObservables;
use crate::observables::{
    BondCurrent, FermiLevelStatus, LEDGER_COMPARES, Ledger, MoverLevels, MoverStatus, Observables,
    Occupation, POWER_SCALE, timed,
};
use crate::scba::Solution;
use serde_json::Value;

/// Program name and version, recorded in every summary.
pub fn program() -> Value {
    to_json(&Program::this())
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

/// The cell of the largest and of the smallest value of `v` (first one on
/// ties), NaN ignored.
fn extreme(v: &[f64], x_nm: &[f64], largest: bool) -> Option<CellValue> {
    let better = |a: f64, b: f64| if largest { a > b } else { a < b };
    let mut best: Option<usize> = None;
    for (i, &val) in v.iter().enumerate() {
        if val.is_finite() && best.is_none_or(|b| better(val, v[b])) {
            best = Some(i);
        }
    }
    best.map(|i| CellValue {
        cell: i,
        x_nm: x_nm[i],
        value: v[i],
    })
}

/// The scalar results of an operating point: every value the terminal
/// summary shows.
pub fn scalars(o: &Observables, coherent: bool) -> SolveResults {
    let s = &o.sites;
    let n = s.x_nm.len();
    let interior = &s.voltage_drop_v[..n.saturating_sub(1)];
    let largest_drop_v = interior
        .iter()
        .enumerate()
        .filter(|(_, d)| d.is_finite())
        .max_by(|a, b| a.1.abs().total_cmp(&b.1.abs()))
        .map(|(i, d)| CellValue {
            cell: i,
            x_nm: s.x_nm[i],
            value: *d,
        });
    SolveResults {
        voltage_v: o.voltage_v,
        current_a: o.current_a,
        current_left_a: o.current_left_a,
        current_right_a: o.current_right_a,
        energy_current_left_w: o.energy_current_left_w,
        energy_current_right_w: o.energy_current_right_w,
        heat_current_left_w: o.heat_current_left_w,
        heat_current_right_w: o.heat_current_right_w,
        lattice_power_w: o.lattice_power_w,
        lattice_power_phonon_side_w: o.lattice_power_phonon_side_w,
        electrical_power_w: o.electrical_power_w,
        conductance_s: o.conductance_s,
        contact_drop_left_v: o.contact_drop_left_v,
        interior_drop_v: interior.iter().sum(),
        contact_drop_right_v: o.contact_drop_right_v,
        largest_drop_v,
        hottest_cell_w: (!coherent)
            .then(|| extreme(&s.lattice_power_w, &s.x_nm, true))
            .flatten(),
        coolest_cell_w: (!coherent)
            .then(|| extreme(&s.lattice_power_w, &s.x_nm, false))
            .flatten(),
    }
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
pub fn fermi_level_info(o: &Observables) -> FermiLevelInfo {
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
    FermiLevelInfo {
        search_interval_ev: [s.fermi_level_interval_ev.0, s.fermi_level_interval_ev.1],
        outside_interval: below.len() + above.len(),
        cells_below_interval: below,
        cells_above_interval: above,
        cells_without_states: cells(FermiLevelStatus::NoStates),
        flagged_value: "NaN".into(),
    }
}

fn to_json<T: serde::Serialize>(v: &T) -> Value {
    serde_json::to_value(v).expect("JSON of plain values")
}

/// The header of a summary.
pub fn header(kind: &str, case_name: &str, case_file: &str) -> Header {
    Header {
        program: Program::this(),
        kind: kind.into(),
        case_name: case_name.into(),
        case_file: case_file.into(),
    }
}

/// summary.json of a solve.
pub fn solve_summary(sol: &Solution, o: &Observables, info: &RunInfo<'_>) -> SolveSummary {
    let p = &sol.problem;
    let phonons = p
        .scattering
        .phonons
        .iter()
        .map(|m| PhononInfo {
            requested_energy_ev: m.requested_energy_ev,
            energy_ev: m.energy_ev,
            grid_steps: m.steps,
            bath_temperature_k: m.bath_temperature_k,
            max_coupling_ev2: m.coupling_ev2.iter().copied().fold(0.0, f64::max),
        })
        .collect();
    SolveSummary {
        header: header("solve", info.case_name, info.case_file),
        threads: info.threads,
        converged: sol.report.converged,
        trustworthy: sol.report.converged,
        coherent: p.scattering.is_coherent(),
        hermitian_part: if sol.report.hermitian_part {
            "include"
        } else {
            "neglect"
        }
        .into(),
        operating_point: OperatingPoint {
            fermi_level_left_ev: p.left.fermi_level_ev,
            fermi_level_right_ev: p.right.fermi_level_ev,
            temperature_left_k: p.left.temperature_k,
            temperature_right_k: p.right.temperature_k,
            voltage_v: p.voltage_v(),
        },
        device: DeviceInfo {
            cells: p.device.cells(),
            orbitals_per_cell: p.device.orbitals,
            spacing_nm: p.device.spacing_nm,
            spin_degeneracy: p.spin_degeneracy,
        },
        grid: to_json(&p.grid),
        phonons,
        results: scalars(o, p.scattering.is_coherent()),
        phonon_modes: to_json(&o.phonon_modes),
        ledger: ledger_json(&o.ledger),
        local_fermi_level: fermi_level_info(o),
        scba: to_json(&sol.report),
        lattice: None,
        self_heating: None,
        movers: o.sites.movers.as_ref().map(movers_summary),
        electrostatics: None,
        warnings: info.warnings.to_vec(),
        notes: info.notes.to_vec(),
        resolved_case: info.case_toml.into(),
        channels: o.channels.as_ref().map(channel_summary),
        result_files: None,
        contacts: super::schema::summary::ContactSummary::all(p, &o.contacts),
        energy_split_ranks: None,
    }
}

/// The `channels` object of summary.json.
pub fn channel_summary(c: &ChannelObservables) -> ChannelSummary {
    ChannelSummary {
        names: c.names.clone(),
        orbitals: c.orbitals.clone(),
        current_left_a: c.current_left_a.clone(),
        current_right_a: c.current_right_a.clone(),
        heat_current_left_w: c.heat_current_left_w.clone(),
        heat_current_right_w: c.heat_current_right_w.clone(),
        lattice_power_w: c.lattice_power_w.clone(),
        polarization: c.polarization,
    }
}

/// The range of the movers' levels and the cells they were not found in.
fn movers_summary(m: &MoverLevels) -> MoversSummary {
    let range = |v: &[f64]| {
        let finite = v.iter().copied().filter(|x| x.is_finite());
        let lo = finite.clone().fold(f64::INFINITY, f64::min);
        let hi = finite.fold(f64::NEG_INFINITY, f64::max);
        (lo <= hi).then_some([lo, hi])
    };
    let cells = |want: MoverStatus| -> Vec<usize> {
        (0..m.status.len())
            .filter(|&i| m.status[i] == want)
            .collect()
    };
    MoversSummary {
        right_movers_range_ev: range(&m.right_ev),
        left_movers_range_ev: range(&m.left_ev),
        cells_matched: cells(MoverStatus::Matched).len(),
        cells_not_uniform: cells(MoverStatus::NotUniform),
        cells_without_propagating_states: cells(MoverStatus::NoPropagatingStates),
        cells_outside_interval: cells(MoverStatus::OutsideInterval),
    }
}

/// Write the files of a solve into a staging folder within the default
/// [`ResultLimits`]; see [`write_solve_files_within`].
pub fn write_solve_files(
    stage: &Staging,
    sol: &Solution,
    o: &Observables,
    summary: &SolveSummary,
) -> Result<(), OutputError> {
    let mut summary = summary.clone();
    write_solve_files_within(stage, sol, o, &mut summary, &ResultLimits::default())
}

/// Write the files of a solve into a staging folder: summary.json,
/// sites.csv, spectrum.csv, bond_current.npy and .npz, occupation.npz,
/// convergence.csv and, with scattering, the self-energy for warm starts.
///
/// Maps larger than `limits` allow are written as block means and a
/// self-energy larger than they allow is left out (see
/// [`super::sizes`]); `summary.result_files` is set to say which, by how
/// much and how to get all of it, before summary.json is written.
pub fn write_solve_files_within(
    stage: &Staging,
    sol: &Solution,
    o: &Observables,
    summary: &mut SolveSummary,
    limits: &ResultLimits,
) -> Result<(), OutputError> {
    let bond = BondCurrent::of(sol);
    let occupation = timed("occupation threshold", || Occupation::of(sol));
    let bond_shape = [bond.pairs, bond.energies];
    let plan = SizePlan::new(
        sol,
        bond_shape,
        [occupation.cells, occupation.energies],
        limits,
    );
    summary.result_files = plan.report(limits);
    stage.write("summary.json", to_text(summary).as_bytes())?;
    let point = SolvePoint {
        sol,
        o,
        electrostatics: summary.electrostatics.as_ref(),
    };
    for table in [tables::sites(), tables::spectrum(), tables::convergence()] {
        timed(table.file, || stage.write(table.file, &table.csv(&point)))?;
    }
    if o.channels.is_some() {
        for table in [tables::channel_sites(), tables::channel_spectrum()] {
            stage.write(table.file, &table.csv(&point))?;
        }
    }
    let bond = timed("bond-current means", || {
        map_means(bond_shape, plan.bond, |i, k| bond.value(i, k))
    });
    stage.write(
        "bond_current.npy",
        &npy_bytes(&bond.map, &stage.path("bond_current.npy"))?,
    )?;
    write_bond_current_npz(stage, sol, o, &bond)?;
    let shape = [occupation.cells, occupation.energies];
    let occupation = timed("occupation means", || {
        map_means(shape, plan.occupation, |i, k| occupation.value(i, k))
    });
    write_occupation_npz(stage, sol, o, &occupation)?;
    if !sol.problem.scattering.is_coherent() && plan.self_energy {
        timed("self-energy files", || write_self_energy(stage, sol))?;
    }
    if let Some(t) = &sol.lattice_temperature_k {
        let a = ndarray::Array1::from_vec(t.clone());
        stage.write(
            LATTICE_TEMPERATURE_FILE,
            &npy_bytes(&a, &stage.path(LATTICE_TEMPERATURE_FILE))?,
        )?;
    }
    Ok(())
}

/// The block means of a map given value by value, straight from the
/// values when it is reduced; a map written whole is stored first (the
/// same numbers either way, see [`block_means_of`]).
fn map_means(
    shape: [usize; 2],
    blocks: [usize; 2],
    value: impl Fn(usize, usize) -> f64 + Sync,
) -> BlockMeans {
    if blocks != [1, 1] {
        return block_means_of(shape, blocks, value);
    }
    let [n0, n1] = shape;
    let mut map = ndarray::Array2::zeros((n0, n1));
    if let Some(out) = map.as_slice_mut() {
        crate::observables::par_cell_rows(out, n1, |i, row| {
            for (k, v) in row.iter_mut().enumerate() {
                *v = value(i, k);
            }
        });
    }
    block_means(&map, blocks)
}

/// What of the arrays of a solve is written whole, reduced or left out.
struct SizePlan {
    /// Block sizes of the bond-current map ([1, 1]: whole).
    bond: [usize; 2],
    bond_shape: [usize; 2],
    /// Block sizes of the occupation map.
    occupation: [usize; 2],
    occupation_shape: [usize; 2],
    /// Whether the self-energy is written.
    self_energy: bool,
    /// Bytes of the two self-energy files when left out.
    self_energy_bytes: u64,
}

impl SizePlan {
    fn new(
        sol: &Solution,
        bond: [usize; 2],
        occupation: [usize; 2],
        limits: &ResultLimits,
    ) -> Self {
        let fit = |[n0, n1]: [usize; 2]| -> [usize; 2] {
            if limits.full_arrays {
                return [1, 1];
            }
            // The map's numbers plus its two axes and the file headers.
            let room = limits
                .array_bytes()
                .saturating_sub(8 * (n0 + n1) as u64 + 4096);
            block_sizes([n0, n1], usize::try_from(room / 8).unwrap_or(usize::MAX))
        };
        let self_energy_bytes = 24 * sol.sigma.inscatter.len() as u64;
        let scattering = !sol.problem.scattering.is_coherent();
        Self {
            bond: fit(bond),
            bond_shape: bond,
            occupation: fit(occupation),
            occupation_shape: occupation,
            self_energy: limits.full_arrays || self_energy_bytes <= limits.array_bytes(),
            self_energy_bytes: if scattering { self_energy_bytes } else { 0 },
        }
    }

    /// The `result_files` object, or `None` when everything is whole.
    fn report(&self, limits: &ResultLimits) -> Option<ResultFiles> {
        let mut reduced = Vec::new();
        let maps = [
            ("bond_current.npy", self.bond, self.bond_shape, "bonds"),
            (
                tables::BOND_CURRENT_NPZ,
                self.bond,
                self.bond_shape,
                "bonds",
            ),
            (
                tables::OCCUPATION_NPZ,
                self.occupation,
                self.occupation_shape,
                "cells",
            ),
        ];
        for (file, block, shape, along) in maps {
            if block == [1, 1] {
                continue;
            }
            reduced.push(ReducedFile {
                file: file.into(),
                full_shape: shape.to_vec(),
                written_shape: vec![shape[0].div_ceil(block[0]), shape[1].div_ceil(block[1])],
                block: block.to_vec(),
                full_bytes: 8 * (shape[0] * shape[1]) as u64,
                reduction: format!(
                    "block means over {} {along} × {} energies (the last block of an axis may \
                     be shorter); the axes are the means of each block's coordinates; a \
                     block's mean times its size is its sum, so sums and energy integrals are kept",
                    block[0], block[1]
                ),
            });
        }
        let mut left_out = Vec::new();
        if !self.self_energy && self.self_energy_bytes > 0 {
            left_out.push(LeftOutFile {
                file: SELF_ENERGY_FILES.join(", "),
                bytes: self.self_energy_bytes,
                consequence: "this folder cannot be used with --warm-start".into(),
            });
        }
        (!reduced.is_empty() || !left_out.is_empty()).then(|| ResultFiles {
            budget_bytes: limits.budget_bytes,
            reduced,
            left_out,
            how_to_get_all: "solve again with `qheat solve --full-arrays` (every array whole, \
                 the self-energy for warm starts included), or raise the budget with \
                 --result-budget-mb"
                .into(),
        })
    }
}

/// File name of the stored lattice temperatures of a self-heating solve
/// (one per orbital site, K), kept beside the self-energy for warm starts.
pub const LATTICE_TEMPERATURE_FILE: &str = "lattice_temperature.npy";

/// Read the lattice temperatures stored by a self-heating solve; `None`
/// when the folder has none (a solve without a heated lattice).
pub fn read_lattice_temperature(dir: &std::path::Path) -> Result<Option<Vec<f64>>, OutputError> {
    let path = dir.join(LATTICE_TEMPERATURE_FILE);
    if !path.exists() {
        return Ok(None);
    }
    let t: ndarray::Array1<f64> =
        ndarray_npy::read_npy(&path).map_err(|e| OutputError::Encode {
            path: path.clone(),
            message: e.to_string(),
        })?;
    Ok(Some(t.to_vec()))
}

/// The bond-current map with its axes as named arrays: `map`, `bond_x_nm`
/// (the midpoints between neighbouring cells) and `energy_ev`.
fn write_bond_current_npz(
    stage: &Staging,
    sol: &Solution,
    o: &Observables,
    map: &BlockMeans,
) -> Result<(), OutputError> {
    let path = stage.path(tables::BOND_CURRENT_NPZ);
    let encode = |e: &dyn std::fmt::Display| OutputError::Encode {
        path: path.clone(),
        message: e.to_string(),
    };
    let x = &o.sites.x_nm;
    let bonds: Vec<f64> = x.windows(2).map(|w| 0.5 * (w[0] + w[1])).collect();
    let bonds = ndarray::Array1::from(axis_means(&bonds, map.blocks[0]));
    let energies = axis_means(&sol.problem.grid.energies(), map.blocks[1]);
    let energies = ndarray::Array1::from(energies);
    let mut npz = ndarray_npy::NpzWriter::new(std::io::Cursor::new(Vec::new()));
    npz.add_array("map", &map.map).map_err(|e| encode(&e))?;
    npz.add_array("bond_x_nm", &bonds).map_err(|e| encode(&e))?;
    npz.add_array("energy_ev", &energies)
        .map_err(|e| encode(&e))?;
    let bytes = npz.finish().map_err(|e| encode(&e))?.into_inner();
    stage.write(tables::BOND_CURRENT_NPZ, &bytes)
}

/// The occupation map with its axes as named arrays: `map` (cells ×
/// energies), `x_nm` (the cell positions) and `energy_ev`.
fn write_occupation_npz(
    stage: &Staging,
    sol: &Solution,
    o: &Observables,
    map: &BlockMeans,
) -> Result<(), OutputError> {
    let path = stage.path(tables::OCCUPATION_NPZ);
    let encode = |e: &dyn std::fmt::Display| OutputError::Encode {
        path: path.clone(),
        message: e.to_string(),
    };
    let x = ndarray::Array1::from(axis_means(&o.sites.x_nm, map.blocks[0]));
    let energies = axis_means(&sol.problem.grid.energies(), map.blocks[1]);
    let energies = ndarray::Array1::from(energies);
    let mut npz = ndarray_npy::NpzWriter::new(std::io::Cursor::new(Vec::new()));
    npz.add_array("map", &map.map).map_err(|e| encode(&e))?;
    npz.add_array("x_nm", &x).map_err(|e| encode(&e))?;
    npz.add_array("energy_ev", &energies)
        .map_err(|e| encode(&e))?;
    let bytes = npz.finish().map_err(|e| encode(&e))?.into_inner();
    stage.write(tables::OCCUPATION_NPZ, &bytes)
}

/// File names of a stored scattering self-energy.
pub const SELF_ENERGY_FILES: [&str; 2] = ["self_energy_retarded.npy", "self_energy_in.npy"];

/// File names of a stored scattering self-energy on b × b blocks (coupling
/// matrices): shape (energies, cells, b, b), Σ^in_0 packed (the diagonal
/// as it is, above it the real parts, below it the imaginary parts of the
/// element above). Other names than the diagonal files, so that neither
/// is read as the other.
pub const SELF_ENERGY_BLOCK_FILES: [&str; 2] = [
    "self_energy_blocks_retarded.npy",
    "self_energy_blocks_in.npy",
];

fn write_self_energy(stage: &Staging, sol: &Solution) -> Result<(), OutputError> {
    let ns = sol.sigma.sites;
    let ne = sol.sigma.energies();
    let (names, shape) = match sol.sigma.blocks {
        None => (SELF_ENERGY_FILES, vec![ne, ns]),
        Some(b) => (SELF_ENERGY_BLOCK_FILES, vec![ne, ns / (b * b), b, b]),
    };
    let r =
        ndarray::ArrayD::from_shape_vec(shape.clone(), sol.sigma.retarded.clone()).expect("shape");
    let i = ndarray::ArrayD::from_shape_vec(shape, sol.sigma.inscatter.clone()).expect("shape");
    stage.write(names[0], &npy_bytes(&r, &stage.path(names[0]))?)?;
    stage.write(names[1], &npy_bytes(&i, &stage.path(names[1]))?)?;
    Ok(())
}

/// Read a stored scattering self-energy from a result folder.
pub fn read_self_energy(
    dir: &std::path::Path,
) -> Result<crate::scattering::ScatteringSelfEnergy, OutputError> {
    use ndarray_npy::read_npy;
    let blocks = dir.join(SELF_ENERGY_BLOCK_FILES[0]).exists();
    let names = if blocks {
        SELF_ENERGY_BLOCK_FILES
    } else {
        SELF_ENERGY_FILES
    };
    let rp = dir.join(names[0]);
    let ip = dir.join(names[1]);
    let r: ndarray::ArrayD<crate::C64> = read_npy(&rp).map_err(|e| OutputError::Encode {
        path: rp.clone(),
        message: e.to_string(),
    })?;
    let i: ndarray::ArrayD<f64> = read_npy(&ip).map_err(|e| OutputError::Encode {
        path: ip.clone(),
        message: e.to_string(),
    })?;
    if r.dim() != i.dim() {
        return Err(OutputError::Encode {
            path: ip,
            message: "the two self-energy files have different shapes".into(),
        });
    }
    let shape = r.shape().to_vec();
    let (sites, blocks) = match (blocks, shape.as_slice()) {
        (false, [_, ns]) => (*ns, None),
        (true, [_, n, b, c]) if b == c => (n * b * b, Some(*b)),
        _ => {
            return Err(OutputError::Encode {
                path: rp,
                message: format!(
                    "a self-energy of shape {shape:?}; expected (energies, sites) in {} or \
                     (energies, cells, b, b) in {}",
                    SELF_ENERGY_FILES[0], SELF_ENERGY_BLOCK_FILES[0]
                ),
            });
        }
    };
    Ok(crate::scattering::ScatteringSelfEnergy {
        sites,
        retarded: r.into_iter().collect(),
        inscatter: i.into_iter().collect(),
        blocks,
    })
}
