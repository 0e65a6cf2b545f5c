//! Case files: one TOML file describes one device and operating point.
//!
//! Two steps: the file is read into raw serde structs
//! that mirror it (every value with its byte span, unknown keys refused),
//! then one fallible conversion checks every value and builds the
//! [`Resolved`] problem. [`Case::load`] does both, so a case that loads also
//! resolves; errors name the file, line, column, dotted key, what was
//! expected and what was found.
//!
//! # Keys
//!
//! Every key, with its type, unit, default and meaning, is listed in
//! `docs/case-keys.md`, generated from the key table ([`KEYS`]). The
//! numeric keys can be changed on a loaded case with [`Case::with`]
//! ([`CaseKey`]), which is how operating points and sweeps set them.
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
mod check;
mod describe;
mod error;
mod key;
mod keys;
mod phonons;
mod raw;
mod resolve;
mod sections;
mod spec;

pub use error::{CaseError, CaseErrorKind, close_matches, edit_distance, line_column};
pub use key::{CaseKey, ParseCaseKeyError};
pub use keys::{DefaultValue, KEYS, KeyInfo, ValueType, keys_markdown};
pub use phonons::{PhononConductanceSource, SpectrumCache, phonon_energy_mev};
pub use resolve::Resolved;
pub use sections::settings::ResponseSplit;

use blocks_file::BlockFiles;
use error::ErrorContext;
use raw::RawCase;
use std::path::{Path, PathBuf};
use std::sync::Arc;

/// A validated case.
///
/// Cloning is cheap: the loaded block files and the resolved problem are
/// shared.
#[derive(Clone, Debug)]
pub struct Case {
    /// The case name.
    pub name: String,
    /// Where the case came from (the file path, or the origin given to
    /// [`Case::parse`]).
    pub origin: String,
    /// Folder against which relative file names resolve.
    pub base_dir: PathBuf,
    /// The values as written in the file, typed but unchecked, with the
    /// changes of [`Case::with`]: every validation starts from here.
    input: RawCase,
    /// Block files, read from disk once.
    files: BlockFiles,
    /// The original text, for [`Case::to_toml_string`].
    text: String,
    /// Keys changed by [`Case::with`], in order.
    edits: Vec<(CaseKey, f64)>,
    resolved: Arc<Resolved>,
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
        let input = raw::parse_raw(text, &ctx)?;
        let mut files = BlockFiles::new(base_dir);
        let spec = spec::validate(&input, ctx, &mut files)?;
        let resolved = resolve::resolve(&spec, &ctx)?;
        Ok(Case {
            name: spec.name,
            origin: origin.to_string(),
            base_dir: base_dir.to_path_buf(),
            input,
            files,
            text: text.to_string(),
            edits: Vec::new(),
            resolved: Arc::new(resolved),
        })
    }

    /// Every numeric key path valid for this case, with array indices
    /// filled in for the entries that exist, in the order of the key table.
    pub fn numeric_keys(&self) -> Vec<String> {
        self.case_keys().iter().map(CaseKey::to_string).collect()
    }

    /// Every numeric key of this case (array keys once per existing entry).
    pub fn case_keys(&self) -> Vec<CaseKey> {
        let regions = self
            .input
            .device
            .as_ref()
            .and_then(|d| d.get_ref().region.as_ref())
            .map_or(0, Vec::len);
        let phonons = self.input.phonon.as_ref().map_or(0, Vec::len);
        let lattice_regions = self
            .input
            .lattice
            .as_ref()
            .and_then(|l| l.get_ref().region.as_ref())
            .map_or(0, Vec::len);
        let mut out = Vec::new();
        for t in CaseKey::templates() {
            let count = match t {
                CaseKey::RegionFrom(_)
                | CaseKey::RegionTo(_)
                | CaseKey::RegionOffset(_)
                | CaseKey::RegionStart(_)
                | CaseKey::RegionEnd(_) => regions,
                CaseKey::LatticeRegionFrom(_)
                | CaseKey::LatticeRegionTo(_)
                | CaseKey::LatticeRegionMass(_)
                | CaseKey::LatticeRegionSpring(_)
                | CaseKey::LatticeRegionDamping(_) => lattice_regions,
                _ if t.index().is_some() => phonons,
                _ => {
                    out.push(*t);
                    continue;
                }
            };
            out.extend((0..count).map(|i| t.at_index(i)));
        }
        out
    }

    /// The error for a name that is no numeric key, with the close matches
    /// among this case's keys (as `--vary` reports it).
    pub fn unknown_key_error(&self, e: &ParseCaseKeyError) -> CaseError {
        let valid = self.numeric_keys();
        let close = close_matches(&e.key, valid.iter().map(String::as_str));
        CaseError {
            origin: self.origin.clone(),
            location: None,
            key: Some(e.key.clone()),
            message: key::unknown_key_message(&close),
            suggestion: close.into_iter().next(),
            kind: CaseErrorKind::UnknownKey,
        }
    }

    /// The case with `key` set to `value`, validated and resolved again
    /// from the typed values (no TOML is written or read, no block file
    /// read again). Missing tables (`[bias]`, `[grid]`, …) are created;
    /// array entries must exist. Integer keys take whole values only.
    /// Errors name the key and end with `(after setting `KEY` = VALUE)`.
    pub fn with(&self, key: CaseKey, value: f64) -> Result<Case, CaseError> {
        let err = |kind: CaseErrorKind, message: String| CaseError {
            origin: self.origin.clone(),
            location: None,
            key: Some(key.to_string()),
            message,
            suggestion: None,
            kind,
        };
        if key.is_integer() && !(value.is_finite() && value.fract() == 0.0 && value.abs() < 9.0e15)
        {
            return Err(err(
                CaseErrorKind::Invalid,
                format!("expected a whole number, found {value}"),
            ));
        }
        let mut input = self.input.clone();
        key.set(&mut input, value)
            .map_err(|m| err(CaseErrorKind::UnknownKey, m))?;
        // The changed values have no place in the file's text, so errors
        // carry no position; they say which edit led to them instead.
        let ctx = ErrorContext {
            origin: &self.origin,
            text: None,
        };
        let mut files = self.files.clone();
        let resolved = spec::validate(&input, ctx, &mut files)
            .and_then(|spec| resolve::resolve(&spec, &ctx))
            .map_err(|mut e| {
                e.message = format!("{} (after setting `{key}` = {value})", e.message);
                e
            })?;
        let mut resolved = resolved;
        if let (Some(old), Some(new)) = (&self.resolved.lattice, &resolved.lattice)
            && phonons::same_lattice(old, new)
        {
            // The spectrum does not depend on the operating point: share it.
            resolved.phonon_spectrum_cache = self.resolved.phonon_spectrum_cache.clone();
        }
        let mut edits = self.edits.clone();
        edits.push((key, value));
        Ok(Case {
            input,
            files,
            edits,
            resolved: Arc::new(resolved),
            ..self.clone()
        })
    }

    /// The resolved problem (built once when the case was validated).
    pub fn resolve(&self) -> Result<Resolved, CaseError> {
        Ok((*self.resolved).clone())
    }

    /// Keys changed by [`Case::with`] since the file was read.
    pub fn edits(&self) -> &[(CaseKey, f64)] {
        &self.edits
    }

    /// The case as a TOML document: the original text while unchanged
    /// (comments kept); after [`Case::with`], the document with the changed
    /// values (written here, once, not at every change), headed by a comment
    /// that lists the changes.
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
        out.push_str(&self.edited_document());
        out
    }

    /// The file's document with every change applied. The changes were
    /// accepted by [`Case::with`], so they fit the document; should one not,
    /// the original text is given (the heading comment still lists it).
    fn edited_document(&self) -> String {
        let Ok(mut doc) = toml::from_str::<toml::Table>(&self.text) else {
            return self.text.clone();
        };
        for (k, v) in &self.edits {
            let value = if k.is_integer() {
                toml::Value::Integer(*v as i64)
            } else {
                toml::Value::Float(*v)
            };
            let path = k.to_string();
            let parts: Vec<&str> = path.split('.').collect();
            if set_path(&mut doc, &parts, value).is_none() {
                return self.text.clone();
            }
        }
        toml::to_string(&doc).unwrap_or_else(|_| self.text.clone())
    }
}

/// Set `value` at the dotted `parts` below `table`, creating tables on the
/// way; array entries (`parts[i + 1]` numeric) must exist.
fn set_path(table: &mut toml::Table, parts: &[&str], value: toml::Value) -> Option<()> {
    let (first, rest) = parts.split_first()?;
    if rest.is_empty() {
        table.insert(first.to_string(), value);
        return Some(());
    }
    if let Ok(idx) = rest[0].parse::<usize>() {
        let Some(toml::Value::Array(arr)) = table.get_mut(*first) else {
            return None;
        };
        let Some(toml::Value::Table(t)) = arr.get_mut(idx) else {
            return None;
        };
        return set_path(t, &rest[1..], value);
    }
    let entry = table
        .entry(first.to_string())
        .or_insert_with(|| toml::Value::Table(toml::Table::new()));
    match entry {
        toml::Value::Table(t) => set_path(t, rest, value),
        _ => None,
    }
}
