//! Case files: one TOML file describes one device and operating point.
//!
//! Two steps, as in the contract: the file is read into raw serde structs
//! that mirror it (every value with its byte span, unknown keys refused),
//! then one fallible conversion checks every value and builds the
//! [`Resolved`] problem. [`Case::load`] does both, so a case that loads also
//! resolves; errors name the file, line, column, dotted key, what was
//! expected and what was found.
//!
//! # Keys
//!
//! | key | meaning | default |
//! |---|---|---|
//! | `name` | case name | required |
//! | `spin_degeneracy` | 1 or 2 | 2 |
//! | `device.kind` | `"chain"`, `"strip"` or `"blocks"` | required |
//! | `device.spacing_nm` | cell spacing a | required |
//! | `device.length_nm` | chain/strip: N·a (N = length/spacing must be whole) | required |
//! | `device.effective_mass` | chain/strip: m*/m0; t = ħ²/(2 m* a²) | required |
//! | `device.band_edge_ev` | chain/strip: Ec | 0 |
//! | `device.width_sites` | strip: W | required |
//! | `device.onsite_file`, `device.coupling_file` | blocks: .npy or .csv, relative to the case file | required |
//! | `device.cells` | blocks: N when the on-site file holds one (b, b) block | — |
//! | `[[device.region]]` `from_nm`, `to_nm`, `offset_ev` or `start_ev` + `end_ev` | potential regions, summed | none |
//! | `leads.left/right.fermi_level_ev`, `temperature_k` | zero-bias µ0, T | required |
//! | `leads.*.band_edge_ev`, `effective_mass` | chain/strip: an energy-selective lead | the end cell |
//! | `leads.*.wide_band_ev` | Γ of a wide-band lead (Σ = −iΓ/2 on each orbital of the end cell) | — |
//! | `bias.voltage_v` | V: µL = µL0 − V/2, µR = µR0 + V/2 | 0 |
//! | `bias.drop` | `"leads"` or `{ linear = { from_nm, to_nm } }` | `"leads"` |
//! | `[[phonon]]` `energy_ev`, `coupling_ev2`, `from_nm`, `to_nm`, `bath_temperature_k` | Einstein modes | bath: mean lead T |
//! | `dephasing.strength_ev2`, `from_nm`, `to_nm` | elastic dephasing | none |
//! | `grid.step_ev`, `min_ev`, `max_ev` | energy grid | see [`Resolved`] |
//! | `grid.allow_coarse_phonon_snap` | `true` accepts a phonon energy moved by more than 5 % when snapped to the grid | false |
//! | `solver.*` | `tolerance`, `max_iterations`, `mixing`, `mixing_factor`, `anderson_depth`, `anderson_damping`, `hermitian_part`, `energy_order` (`auto`, `simultaneous`, `red-black`: see [`crate::scba::EnergyOrder`]), `current_floor_a`, `decimation_eta_ev`, `decimation_tolerance_ev` | 1e-7, 300, anderson, 0.5, 6, 1.0, neglect, auto, 1e-18, 1e-7, 1e-13 |
//! | `response.split` | `"symmetric"` or `"left-only"` | symmetric |
//! | `thermal.phonon_conductance_w_per_k` | κ_ph for ZT | 0 (noted) |
//! | `profile.electron_temperature` | `"off"` or `"fit"`: also fit a local electron temperature per cell from the energy density | off |
//!
//! # Leads
//!
//! By default a lead is the periodic continuation of the device's end cell
//! (its on-site block with the potential there, and the end coupling
//! block). With `drop = "leads"` the end cells carry no bias, so the lead
//! bands stay put while the Fermi levels move; with a linear drop the end
//! cells (and so the leads) follow the biased potential. An energy-selective
//! chain/strip lead uses its own band edge and/or mass; its coupling block
//! (−t_lead) also couples it to the device.
//!
//! # Energy grid defaults
//!
//! - step: kB·T_min/10 (T over the two leads). A step above kB·T_min is an
//!   error, above kB·T_min/4 a warning.
//! - min: half a step above the lowest band edge over the device cells and
//!   the periodic leads (a point exactly on a lead band edge makes
//!   E − H − Σ singular). With wide-band leads on both sides there is no
//!   lead edge; the window starts max(20 kT_max, 10 Γ) below the lower of
//!   the lowest device level and the lower Fermi level.
//! - max: max(µL, µR) + 20·kB·T_max + the largest snapped ħω.
//!
//! Phonon energies (0 < ħω ≤ 0.5 eV, and below the width of the energy
//! window) are snapped to a whole number of grid steps; a change of more
//! than 1 % is a warning, of more than 5 % an error unless
//! `grid.allow_coarse_phonon_snap = true`.
//!
//! `[[phonon]]` and `[[device.region]]` hold one table per entry (double
//! brackets); every other section is a single `[table]`. Writing one form
//! for the other is an error that names the header to write.

mod blocks_file;
mod error;
mod raw;
mod resolve;
mod spec;

pub use error::{CaseError, CaseErrorKind, close_matches, edit_distance, line_column};
pub use resolve::Resolved;
pub use spec::ResponseSplit;

use error::ErrorContext;
use std::path::{Path, PathBuf};

/// A validated case file.
#[derive(Clone, Debug)]
pub struct Case {
    /// The case name.
    pub name: String,
    /// Where the case came from (the file path, or the origin given to
    /// [`Case::parse`]).
    pub origin: String,
    /// Folder against which relative file names resolve.
    pub base_dir: PathBuf,
    /// The TOML document as parsed (edited by [`Case::with_value`]).
    document: toml::Table,
    /// The original text, kept for [`Case::to_toml_string`] while unedited.
    text: String,
    /// Keys changed by [`Case::with_value`], in order.
    edits: Vec<(String, f64)>,
    resolved: Resolved,
}

/// The kind of value a numeric key holds.
#[derive(Clone, Copy, PartialEq)]
enum Num {
    Float,
    Int,
}

/// Every numeric key, as a dotted pattern; `#` stands for an array index.
const NUMERIC_KEYS: &[(&str, Num)] = &[
    ("spin_degeneracy", Num::Int),
    ("device.spacing_nm", Num::Float),
    ("device.length_nm", Num::Float),
    ("device.effective_mass", Num::Float),
    ("device.band_edge_ev", Num::Float),
    ("device.width_sites", Num::Int),
    ("device.cells", Num::Int),
    ("device.region.#.from_nm", Num::Float),
    ("device.region.#.to_nm", Num::Float),
    ("device.region.#.offset_ev", Num::Float),
    ("device.region.#.start_ev", Num::Float),
    ("device.region.#.end_ev", Num::Float),
    ("leads.left.fermi_level_ev", Num::Float),
    ("leads.left.temperature_k", Num::Float),
    ("leads.left.band_edge_ev", Num::Float),
    ("leads.left.effective_mass", Num::Float),
    ("leads.left.wide_band_ev", Num::Float),
    ("leads.right.fermi_level_ev", Num::Float),
    ("leads.right.temperature_k", Num::Float),
    ("leads.right.band_edge_ev", Num::Float),
    ("leads.right.effective_mass", Num::Float),
    ("leads.right.wide_band_ev", Num::Float),
    ("bias.voltage_v", Num::Float),
    ("bias.drop.linear.from_nm", Num::Float),
    ("bias.drop.linear.to_nm", Num::Float),
    ("phonon.#.energy_ev", Num::Float),
    ("phonon.#.coupling_ev2", Num::Float),
    ("phonon.#.from_nm", Num::Float),
    ("phonon.#.to_nm", Num::Float),
    ("phonon.#.bath_temperature_k", Num::Float),
    ("dephasing.strength_ev2", Num::Float),
    ("dephasing.from_nm", Num::Float),
    ("dephasing.to_nm", Num::Float),
    ("grid.step_ev", Num::Float),
    ("grid.min_ev", Num::Float),
    ("grid.max_ev", Num::Float),
    ("solver.tolerance", Num::Float),
    ("solver.max_iterations", Num::Int),
    ("solver.mixing_factor", Num::Float),
    ("solver.anderson_depth", Num::Int),
    ("solver.anderson_damping", Num::Float),
    ("solver.current_floor_a", Num::Float),
    ("solver.decimation_eta_ev", Num::Float),
    ("solver.decimation_tolerance_ev", Num::Float),
    ("thermal.phonon_conductance_w_per_k", Num::Float),
];

fn array_len(doc: &toml::Table, path: &[&str]) -> usize {
    let mut cur = doc;
    for (i, p) in path.iter().enumerate() {
        match cur.get(*p) {
            Some(toml::Value::Table(t)) if i + 1 < path.len() => cur = t,
            Some(toml::Value::Array(a)) if i + 1 == path.len() => return a.len(),
            _ => return 0,
        }
    }
    0
}

impl Case {
    /// Read, parse and validate a case file. Relative block file names
    /// resolve against the file's folder.
    pub fn load(path: &Path) -> Result<Case, CaseError> {
        let origin = path.display().to_string();
        let text = std::fs::read_to_string(path).map_err(|e| CaseError {
            origin: origin.clone(),
            location: None,
            key: None,
            message: format!("expected a readable case file, found: {e}"),
            suggestion: None,
            kind: CaseErrorKind::Io,
        })?;
        let base = path
            .parent()
            .filter(|p| !p.as_os_str().is_empty())
            .unwrap_or(Path::new("."));
        Case::parse(&text, &origin, base)
    }

    /// Parse and validate case text; `origin` names it in errors and
    /// `base_dir` resolves relative block file names.
    pub fn parse(text: &str, origin: &str, base_dir: &Path) -> Result<Case, CaseError> {
        let ctx = ErrorContext {
            origin,
            text: Some(text),
        };
        Case::build(text, ctx, base_dir, Vec::new())
    }

    fn build(
        text: &str,
        ctx: ErrorContext<'_>,
        base_dir: &Path,
        edits: Vec<(String, f64)>,
    ) -> Result<Case, CaseError> {
        let raw = raw::parse_raw(text, &ctx)?;
        let document: toml::Table = toml::from_str(text).map_err(|e| {
            ctx.error(
                CaseErrorKind::Syntax,
                e.span(),
                None,
                format!("invalid TOML: {}", e.message().trim()),
            )
        })?;
        let spec = spec::validate(raw, ctx, base_dir)?;
        let resolved = resolve::resolve(&spec, &ctx)?;
        Ok(Case {
            name: spec.name.clone(),
            origin: ctx.origin.to_string(),
            base_dir: base_dir.to_path_buf(),
            document,
            text: text.to_string(),
            edits,
            resolved,
        })
    }

    /// Every numeric key path valid for this case, with array indices
    /// filled in for the entries that exist.
    pub fn numeric_keys(&self) -> Vec<String> {
        let mut out = Vec::new();
        for (pattern, _) in NUMERIC_KEYS {
            match pattern.split_once(".#.") {
                None => out.push(pattern.to_string()),
                Some((array, leaf)) => {
                    let path: Vec<&str> = array.split('.').collect();
                    for i in 0..array_len(&self.document, &path) {
                        out.push(format!("{array}.{i}.{leaf}"));
                    }
                }
            }
        }
        out
    }

    /// Set a numeric key given as a dotted path (`"bias.voltage_v"`,
    /// `"leads.left.temperature_k"`, `"device.region.0.offset_ev"`,
    /// `"phonon.1.coupling_ev2"`, …) and validate again. Missing tables
    /// (`[bias]`, `[grid]`, …) are created; array entries must exist.
    /// Integer keys (`spin_degeneracy`, `device.width_sites`, …) take whole
    /// values only. Unknown key paths are an error that lists close matches.
    pub fn with_value(&self, key: &str, value: f64) -> Result<Case, CaseError> {
        let err = |message: String, suggestion: Option<String>| CaseError {
            origin: self.origin.clone(),
            location: None,
            key: Some(key.to_string()),
            message,
            suggestion,
            kind: CaseErrorKind::UnknownKey,
        };
        let parts: Vec<&str> = key.split('.').collect();
        let pattern: Vec<String> = parts
            .iter()
            .map(|p| {
                if !p.is_empty() && p.chars().all(|c| c.is_ascii_digit()) {
                    "#".to_string()
                } else {
                    p.to_string()
                }
            })
            .collect();
        let pattern = pattern.join(".");
        let Some(&(_, kind)) = NUMERIC_KEYS.iter().find(|(p, _)| *p == pattern) else {
            let valid = self.numeric_keys();
            let close = close_matches(key, valid.iter().map(String::as_str));
            let message = if close.is_empty() {
                "expected a numeric case key, found an unknown key path".to_string()
            } else {
                format!(
                    "expected a numeric case key, found an unknown key path (close matches: {})",
                    close
                        .iter()
                        .map(|c| format!("`{c}`"))
                        .collect::<Vec<_>>()
                        .join(", ")
                )
            };
            return Err(err(message, close.into_iter().next()));
        };
        let new_value = match kind {
            Num::Float => toml::Value::Float(value),
            Num::Int => {
                if !(value.is_finite() && value.fract() == 0.0 && value.abs() < 9.0e15) {
                    let mut e = err(format!("expected a whole number, found {value}"), None);
                    e.kind = CaseErrorKind::Invalid;
                    return Err(e);
                }
                toml::Value::Integer(value as i64)
            }
        };
        let mut document = self.document.clone();
        set_path(&mut document, &parts, String::new(), new_value).map_err(|m| err(m, None))?;
        let generated = toml::to_string(&document).map_err(|e| {
            let mut e = err(
                format!("expected a document that can be written as TOML, found: {e}"),
                None,
            );
            e.kind = CaseErrorKind::Invalid;
            e
        })?;
        let mut edits = self.edits.clone();
        edits.push((key.to_string(), value));
        // The generated text has no relation to the file's lines, so errors
        // carry no position; they say which edit led to them instead.
        let ctx = ErrorContext {
            origin: &self.origin,
            text: None,
        };
        Case::build(&generated, ctx, &self.base_dir, edits).map_err(|mut e| {
            e.message = format!("{} (after setting `{key}` = {value})", e.message);
            e
        })
    }

    /// The resolved problem (built once when the case was validated).
    pub fn resolve(&self) -> Result<Resolved, CaseError> {
        Ok(self.resolved.clone())
    }

    /// Keys changed by [`Case::with_value`] since the file was read.
    pub fn edits(&self) -> &[(String, f64)] {
        &self.edits
    }

    /// The case as a TOML document: the original text while unedited
    /// (comments kept), otherwise the edited document, headed by a comment
    /// that lists the edits.
    pub fn to_toml_string(&self) -> String {
        if self.edits.is_empty() {
            return self.text.clone();
        }
        let mut out = format!("# {} with", self.origin);
        for (k, v) in &self.edits {
            out.push_str(&format!(" {k} = {v};"));
        }
        out.pop();
        out.push('\n');
        out.push_str(&self.text);
        out
    }
}

/// Set `value` at the dotted `parts` below `table`, creating tables on the
/// way; array entries (`parts[i + 1]` numeric) must exist.
fn set_path(
    table: &mut toml::Table,
    parts: &[&str],
    walked: String,
    value: toml::Value,
) -> Result<(), String> {
    let Some((first, rest)) = parts.split_first() else {
        return Err("expected a key path, found an empty one".into());
    };
    let here = if walked.is_empty() {
        first.to_string()
    } else {
        format!("{walked}.{first}")
    };
    if rest.is_empty() {
        table.insert(first.to_string(), value);
        return Ok(());
    }
    if rest[0].chars().all(|c| c.is_ascii_digit()) {
        let idx: usize = rest[0].parse().unwrap_or(usize::MAX);
        let arr = match table.get_mut(*first) {
            Some(toml::Value::Array(a)) => a,
            _ => return Err(format!("expected an existing [[{here}]] entry, found none")),
        };
        let len = arr.len();
        return match arr.get_mut(idx) {
            Some(toml::Value::Table(t)) => set_path(t, &rest[1..], format!("{here}.{idx}"), value),
            _ => Err(format!(
                "expected an index below {len} ([[{here}]] has {len} entries), found {}",
                rest[0]
            )),
        };
    }
    let entry = table
        .entry(first.to_string())
        .or_insert_with(|| toml::Value::Table(toml::Table::new()));
    match entry {
        toml::Value::Table(t) => set_path(t, rest, here, value),
        other => Err(format!(
            "expected `{here}` to be a table, found {} {other}",
            other.type_str()
        )),
    }
}
