//! Typed summary.json of every command. Each struct serializes to the
//! file's keys; [`super::keys`] documents them with units and meanings.
//!
//! Objects computed elsewhere in the crate (the energy grid, the Born-loop
//! report, the ledger, linear-response details) are kept as JSON values
//! here: their own types define their keys.

use serde::{Deserialize, Deserializer, Serialize};
use serde_json::Value;
use std::collections::BTreeMap;

/// A number that JSON writes as `null` when it is NaN or infinite and
/// that reads back as NaN.
fn nan_from_null<'de, D: Deserializer<'de>>(d: D) -> Result<f64, D::Error> {
    Ok(Option::<f64>::deserialize(d)?.unwrap_or(f64::NAN))
}

/// Program name and version.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Program {
    /// `qheat`.
    pub name: String,
    /// Version of the program that wrote the file.
    pub version: String,
}

impl Program {
    /// This program.
    pub fn this() -> Self {
        Program {
            name: "qheat".into(),
            version: env!("CARGO_PKG_VERSION").into(),
        }
    }
}

/// The keys every summary starts with.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Header {
    /// Program that wrote the file.
    pub program: Program,
    /// Command: solve, coefficients, sweep, screen, generator, cooler.
    pub kind: String,
    /// Case name.
    pub case_name: String,
    /// Case file as given on the command line.
    pub case_file: String,
}

/// Lead settings of an operating point.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct OperatingPoint {
    /// µ_1 (eV).
    #[serde(deserialize_with = "nan_from_null")]
    pub fermi_level_left_ev: f64,
    /// µ_2 (eV).
    #[serde(deserialize_with = "nan_from_null")]
    pub fermi_level_right_ev: f64,
    /// T_1 (K).
    #[serde(deserialize_with = "nan_from_null")]
    pub temperature_left_k: f64,
    /// T_2 (K).
    #[serde(deserialize_with = "nan_from_null")]
    pub temperature_right_k: f64,
    /// V = V_1 − V_2 (V).
    #[serde(deserialize_with = "nan_from_null")]
    pub voltage_v: f64,
}

/// Size of the device.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct DeviceInfo {
    /// Cells.
    pub cells: usize,
    /// Orbitals per cell.
    pub orbitals_per_cell: usize,
    /// Cell spacing (nm).
    pub spacing_nm: f64,
    /// Spin degeneracy g_s.
    pub spin_degeneracy: f64,
}

/// A phonon mode as used on the energy grid.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct PhononInfo {
    /// ħω asked for (eV).
    pub requested_energy_ev: f64,
    /// ħω on the grid, a whole number of steps (eV).
    pub energy_ev: f64,
    /// ħω in grid steps.
    pub grid_steps: usize,
    /// Bath temperature (K).
    pub bath_temperature_k: f64,
    /// Largest coupling of the mode (eV²).
    pub max_coupling_ev2: f64,
}

/// A cell and a value there.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct CellValue {
    /// Cell index, from 0 at the left.
    pub cell: usize,
    /// Cell position (nm).
    pub x_nm: f64,
    /// The value (unit of the key holding it).
    #[serde(deserialize_with = "nan_from_null")]
    pub value: f64,
}

/// The scalar results of a solved operating point.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[allow(missing_docs)] // each key is documented in super::keys
pub struct SolveResults {
    #[serde(deserialize_with = "nan_from_null")]
    pub voltage_v: f64,
    #[serde(deserialize_with = "nan_from_null")]
    pub current_a: f64,
    #[serde(deserialize_with = "nan_from_null")]
    pub current_left_a: f64,
    #[serde(deserialize_with = "nan_from_null")]
    pub current_right_a: f64,
    #[serde(deserialize_with = "nan_from_null")]
    pub energy_current_left_w: f64,
    #[serde(deserialize_with = "nan_from_null")]
    pub energy_current_right_w: f64,
    #[serde(deserialize_with = "nan_from_null")]
    pub heat_current_left_w: f64,
    #[serde(deserialize_with = "nan_from_null")]
    pub heat_current_right_w: f64,
    #[serde(deserialize_with = "nan_from_null")]
    pub lattice_power_w: f64,
    #[serde(deserialize_with = "nan_from_null")]
    pub lattice_power_phonon_side_w: f64,
    #[serde(deserialize_with = "nan_from_null")]
    pub electrical_power_w: f64,
    pub conductance_s: Option<f64>,
    #[serde(deserialize_with = "nan_from_null")]
    pub contact_drop_left_v: f64,
    #[serde(deserialize_with = "nan_from_null")]
    pub interior_drop_v: f64,
    #[serde(deserialize_with = "nan_from_null")]
    pub contact_drop_right_v: f64,
    pub largest_drop_v: Option<CellValue>,
    pub hottest_cell_w: Option<CellValue>,
    pub coolest_cell_w: Option<CellValue>,
}

/// The local Fermi level's search and the cells it flagged.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct FermiLevelInfo {
    /// Interval searched for µ_i (eV).
    pub search_interval_ev: [f64; 2],
    /// Cells whose match lies outside the interval.
    pub outside_interval: usize,
    /// Cells whose match lies below the interval.
    pub cells_below_interval: Vec<usize>,
    /// Cells whose match lies above the interval.
    pub cells_above_interval: Vec<usize>,
    /// Cells without states.
    pub cells_without_states: Vec<usize>,
    /// What flagged cells hold in sites.csv.
    pub flagged_value: String,
}

/// summary.json of `qheat solve`.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[allow(missing_docs)] // each key is documented in super::keys
pub struct SolveSummary {
    #[serde(flatten)]
    pub header: Header,
    pub threads: usize,
    pub converged: bool,
    pub trustworthy: bool,
    pub coherent: bool,
    pub hermitian_part: String,
    pub operating_point: OperatingPoint,
    pub device: DeviceInfo,
    pub grid: Value,
    pub phonons: Vec<PhononInfo>,
    pub results: SolveResults,
    pub phonon_modes: Value,
    pub ledger: Value,
    pub local_fermi_level: FermiLevelInfo,
    pub scba: Value,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub lattice: Option<LatticeSummary>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub self_heating: Option<SelfHeatingSummary>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub movers: Option<MoversSummary>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub electrostatics: Option<ElectrostaticsSummary>,
    pub warnings: Vec<String>,
    pub notes: Vec<String>,
    pub resolved_case: String,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub channels: Option<ChannelSummary>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub result_files: Option<ResultFiles>,
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub contacts: Vec<ContactSummary>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub energy_split_ranks: Option<usize>,
}

impl ContactSummary {
    /// The entries of summary.json: each reading with its contact's
    /// coupling and polarisation.
    pub fn all(
        problem: &crate::model::Problem,
        readings: &[crate::observables::contacts::ContactReading],
    ) -> Vec<Self> {
        problem
            .contacts
            .iter()
            .zip(readings)
            .map(|(c, r)| ContactSummary {
                name: r.name.clone(),
                mode: c.mode.name().into(),
                cells: r.cells.clone(),
                x_nm: r.x_nm,
                gamma_ev: c.gamma_ev,
                fermi_level_ev: r.fermi_level_ev,
                temperature_k: r.temperature_k,
                solved: c.mode.is_floating(),
                particle_current_per_s: r.particle_current_per_s,
                current_a: r.current_a,
                heat_current_w: r.heat_current_w,
                energy_current_w: r.energy_current_w,
                polarisation: c.polarisation.map(|p| p.strength),
                polarisation_direction: c.polarisation.map(|p| p.direction),
            })
            .collect()
    }
}

/// One entry of the `contacts` list of summary.json: a contact attached
/// along the channel, its level (given or solved) and what it carries.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[allow(missing_docs)] // each key is documented in super::keys
pub struct ContactSummary {
    pub name: String,
    pub mode: String,
    pub cells: Vec<usize>,
    pub x_nm: f64,
    pub gamma_ev: f64,
    #[serde(deserialize_with = "nan_from_null")]
    pub fermi_level_ev: f64,
    #[serde(deserialize_with = "nan_from_null")]
    pub temperature_k: f64,
    pub solved: bool,
    pub particle_current_per_s: f64,
    pub current_a: f64,
    pub heat_current_w: f64,
    pub energy_current_w: f64,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub polarisation: Option<f64>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub polarisation_direction: Option<[f64; 3]>,
}

/// The `result_files` object of summary.json: present when some array
/// was reduced or left out to keep the result within its size budget.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[allow(missing_docs)] // each key is documented in super::keys
pub struct ResultFiles {
    pub budget_bytes: u64,
    pub reduced: Vec<ReducedFile>,
    pub left_out: Vec<LeftOutFile>,
    pub how_to_get_all: String,
}

/// A map written as block means instead of whole.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[allow(missing_docs)] // each key is documented in super::keys
pub struct ReducedFile {
    pub file: String,
    pub full_shape: Vec<usize>,
    pub written_shape: Vec<usize>,
    pub block: Vec<usize>,
    pub full_bytes: u64,
    pub reduction: String,
}

/// An array not written at all.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[allow(missing_docs)] // each key is documented in super::keys
pub struct LeftOutFile {
    pub file: String,
    pub bytes: u64,
    pub consequence: String,
}

/// The `channels` object of summary.json when the case names channels:
/// one entry per channel in each list, in the order of `names`.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[allow(missing_docs)] // each key is documented in super::keys
pub struct ChannelSummary {
    pub names: Vec<String>,
    pub orbitals: Vec<Vec<usize>>,
    pub current_left_a: Vec<f64>,
    pub current_right_a: Vec<f64>,
    pub heat_current_left_w: Vec<f64>,
    pub heat_current_right_w: Vec<f64>,
    pub lattice_power_w: Vec<f64>,
    /// (I_a − I_b)/(I_a + I_b) with exactly two channels, else null.
    pub polarization: Option<f64>,
}

/// The `movers` object of summary.json: the range of the right- and
/// left-movers' levels over the cells where they were found.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[allow(missing_docs)] // each key is documented in super::keys
pub struct MoversSummary {
    pub right_movers_range_ev: Option<[f64; 2]>,
    pub left_movers_range_ev: Option<[f64; 2]>,
    pub cells_matched: usize,
    pub cells_not_uniform: Vec<usize>,
    pub cells_without_propagating_states: Vec<usize>,
    pub cells_outside_interval: Vec<usize>,
}

/// The `self_heating` object of summary.json for a solve whose lattice is
/// damped (the electrons and the lattice solved together).
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[allow(missing_docs)] // each key is documented in super::keys
pub struct SelfHeatingSummary {
    pub hottest_lattice_k: f64,
    pub hottest_x_nm: f64,
    pub left_phonon_lead_heat_w: f64,
    pub right_phonon_lead_heat_w: f64,
    pub ledger_relative: f64,
    pub outer_iterations: usize,
    pub born_iterations: usize,
    pub last_change_k: f64,
    pub tolerance_k: f64,
    pub converged: bool,
}

/// The `electrostatics` object of summary.json for a solve with
/// `[electrostatics]` (the potential solved with the transport).
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[allow(missing_docs)] // each key is documented in super::keys
pub struct ElectrostaticsSummary {
    pub computed_drop_replaces_imposed: bool,
    pub potential_drop_v: f64,
    pub lowest_potential_energy_ev: f64,
    pub highest_potential_energy_ev: f64,
    pub highest_band_edge_ev: f64,
    pub outer_iterations: usize,
    pub born_passes: usize,
    pub potential_change_ev: f64,
    pub tolerance_ev: f64,
    pub poisson_residual: f64,
    pub born_residual: f64,
    pub converged: bool,
    #[serde(default)]
    pub coupling: String,
    /// Electrostatic potential energy U_es of each cell (eV); written to
    /// sites.csv, not to summary.json.
    #[serde(skip, default)]
    pub potential_energy_per_cell_ev: Vec<f64>,
    /// Electrons of each cell as the Poisson equation counts them
    /// (band-edge-aware energy weights); written to sites.csv, not to
    /// summary.json.
    #[serde(skip, default)]
    pub electrons_per_cell: Vec<f64>,
}

/// Where a failed solve broke down.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Fault {
    /// What failed.
    pub kind: String,
    /// Energy of the failure (eV), when known.
    pub energy_ev: Option<f64>,
    /// Cell of the failure, when known.
    pub cell: Option<usize>,
}

/// summary.json of a `qheat solve` that failed.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[allow(missing_docs)] // each key is documented in super::keys
pub struct FailedSolveSummary {
    #[serde(flatten)]
    pub header: Header,
    pub threads: usize,
    pub converged: bool,
    pub trustworthy: bool,
    pub error: String,
    pub fault: Fault,
    pub warnings: Vec<String>,
    pub resolved_case: String,
}

/// The `lattice` object of summary.json for a case with a `[lattice]`.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[allow(missing_docs)] // each key is documented in super::keys
pub struct LatticeSummary {
    pub temperature_k: f64,
    pub phonon_conductance_w_per_k: f64,
    pub phonon_conductance_source: crate::case::PhononConductanceSource,
    pub band_top_mev: f64,
    pub frequency_points: usize,
}

/// summary.json of `qheat coefficients`.
#[derive(Clone, Debug, PartialEq, Serialize)]
#[allow(missing_docs)] // each key is documented in super::keys
pub struct CoefficientsSummary {
    #[serde(flatten)]
    pub header: Header,
    pub threads: usize,
    pub coefficients: crate::thermo::Coefficients,
    pub response: Value,
    pub energy_grid: crate::thermo::common_grid::CommonGrid,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub lattice: Option<LatticeSummary>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub channels: Option<crate::thermo::channels::ChannelSeebeck>,
    pub warnings: Vec<String>,
    pub notes: Vec<String>,
    pub resolved_case: String,
}

/// One of the best points of a screen.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct BestPoint {
    /// Grid index.
    pub point: usize,
    /// Axis values of the point, by axis name.
    pub values: BTreeMap<String, f64>,
    /// The ranked value, under the ranked column's name.
    #[serde(flatten)]
    pub score: BTreeMap<String, f64>,
}

/// What a screen ranked by and its best points.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Ranking {
    /// The --rank setting.
    pub rank_by: crate::sweep::screen::ScreenTask,
    /// Column ranked by (largest first).
    pub ranked_column: String,
    /// The five best points.
    pub best: Vec<BestPoint>,
    /// Where the κ_ph of ZT came from (ZT and power-factor rankings).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub phonon_conductance_source: Option<crate::case::PhononConductanceSource>,
}

/// summary.json of `qheat sweep` and `qheat screen`.
#[derive(Clone, Debug, PartialEq, Serialize)]
#[allow(missing_docs)] // each key is documented in super::keys
pub struct GridSummary {
    #[serde(flatten)]
    pub header: Header,
    pub threads: usize,
    pub axes: Vec<crate::sweep::Axis>,
    pub order: String,
    pub points: usize,
    pub computed_this_run: usize,
    pub from_earlier_runs: usize,
    pub parallel_lines: usize,
    pub point_store: String,
    pub unconverged_points: Vec<usize>,
    pub converged: bool,
    pub columns: Vec<String>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub warm_start: Option<String>,
    #[serde(flatten, skip_serializing_if = "Option::is_none")]
    pub ranking: Option<Ranking>,
    pub resolved_case: String,
}

/// summary.json of `qheat generator` and `qheat cooler`: the curve's
/// result with the run's header.
#[derive(Clone, Debug, PartialEq, Serialize)]
#[allow(missing_docs)] // each key is documented in super::keys
pub struct CurveSummary<R> {
    #[serde(flatten)]
    pub result: R,
    #[serde(flatten)]
    pub header: Header,
    pub conventions: String,
    pub resolved_case: String,
}

/// What `qheat check --json` prints.
#[derive(Clone, Debug, PartialEq, Serialize)]
#[allow(missing_docs)] // each key is documented in super::keys
pub struct CheckOutput {
    pub case_name: String,
    pub cells: usize,
    pub orbitals_per_cell: usize,
    pub grid: Value,
    pub phonons: Vec<CheckPhonon>,
    pub memory_estimate_bytes: u64,
    pub warnings: Vec<String>,
    pub notes: Vec<String>,
    /// Estimated wall time of the solve (s): a guess.
    pub time_estimate_s: f64,
    /// Born iterations the time estimate assumes on the full grid.
    pub iteration_guess: usize,
    /// Coarse levels the time estimate assumes before the full grid,
    /// coarsest first (empty without a coarse start).
    pub coarse_levels_guess: Vec<CheckCoarseLevel>,
    /// All iterations the time estimate assumes, in full-grid iterations
    /// (a coarse level of every k-th energy counts 1/k per iteration).
    pub iteration_equivalents_guess: f64,
}

/// A coarse level as `qheat check --json` guesses it.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct CheckCoarseLevel {
    /// Every `factor`-th energy of the grid.
    pub factor: usize,
    /// Born iterations guessed for the level.
    pub iterations: usize,
}

/// A phonon mode as `qheat check --json` lists it.
#[derive(Clone, Debug, PartialEq, Serialize)]
#[allow(missing_docs)] // each key is documented in super::keys
pub struct CheckPhonon {
    pub requested_energy_ev: f64,
    pub energy_ev: f64,
    pub grid_steps: usize,
    pub bath_temperature_k: f64,
}

/// What `qheat report --json` prints.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct ReportOutput {
    /// Path of the page written.
    pub report: String,
    /// Its size in bytes.
    pub bytes: usize,
}

/// JSON text of a summary (pretty-printed). A negative zero (a sum that
/// is exactly zero, times −1, as the lattice power of a coherent device)
/// is written as 0.0: the sign of a zero carries no meaning and `-0.0`
/// only puzzles a reader.
pub fn to_text<T: Serialize>(summary: &T) -> String {
    positive_zeros(&serde_json::to_string_pretty(summary).expect("JSON of plain values"))
}

/// `json` with every number token `-0.0` (outside strings) written `0.0`.
fn positive_zeros(json: &str) -> String {
    let bytes = json.as_bytes();
    let mut out = String::with_capacity(json.len());
    let (mut in_string, mut escaped, mut start) = (false, false, 0);
    for (i, &c) in bytes.iter().enumerate() {
        if in_string {
            match (escaped, c) {
                (true, _) => escaped = false,
                (false, b'\\') => escaped = true,
                (false, b'"') => in_string = false,
                _ => {}
            }
            continue;
        }
        if c == b'"' {
            in_string = true;
        } else if c == b'-'
            && bytes[i..].starts_with(b"-0.0")
            && bytes
                .get(i + 4)
                .is_none_or(|d| matches!(d, b',' | b']' | b'}' | b' ' | b'\n'))
        {
            out.push_str(&json[start..i]);
            start = i + 1;
        }
    }
    out.push_str(&json[start..]);
    out
}

#[cfg(test)]
mod tests {
    #[test]
    fn negative_zeros_are_written_as_zeros() {
        let text = super::to_text(&serde_json::json!({
            "a": -0.0, "b": [1.5, -0.0], "c": -2.0, "d": -0.05, "e": "x = -0.0 V"
        }));
        let v: serde_json::Value = serde_json::from_str(&text).unwrap();
        assert_eq!(
            v["a"].as_f64().map(f64::is_sign_negative),
            Some(false),
            "{text}"
        );
        assert_eq!(
            v["b"][1].as_f64().map(f64::is_sign_negative),
            Some(false),
            "{text}"
        );
        assert_eq!(v["c"], -2.0);
        assert_eq!(v["d"], -0.05);
        assert_eq!(v["e"], "x = -0.0 V");
    }
}
