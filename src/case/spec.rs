//! Validation: raw file values -> a checked case specification. Every check
//! that does not need the built device happens here, section by section
//! (see [`super::sections`]); the rest (energy window, phonon snapping) in
//! [`super::resolve`].

use super::blocks_file::BlockFiles;
use super::check::Checker;
use super::error::{CaseError, ErrorContext};
use super::raw::RawCase;
use super::sections::bias::BiasSpec;
use super::sections::channels::ChannelsSpec;
use super::sections::contacts::ContactsSpec;
use super::sections::device::DeviceSpec;
use super::sections::electrostatics::ElectrostaticsSpec;
use super::sections::lattice::LatticeSpec;
use super::sections::leads::LeadsSpec;
use super::sections::regions::RegionsSpec;
use super::sections::scattering::{DephasingSpec, PhononSpec};
use super::sections::settings::{GridSpec, ProfileSpec, ResponseSpec, SolverSpec, ThermalSpec};

/// The spin degeneracy when the file does not give one.
pub(crate) const DEFAULT_SPIN_DEGENERACY: i64 = 2;

/// A validated case.
#[derive(Clone, Debug)]
pub(crate) struct CaseSpec {
    pub name: String,
    pub spin_degeneracy: u8,
    pub device: DeviceSpec,
    pub regions: RegionsSpec,
    pub channels: ChannelsSpec,
    pub leads: LeadsSpec,
    pub bias: BiasSpec,
    pub phonons: Vec<PhononSpec>,
    pub dephasing: Option<DephasingSpec>,
    pub grid: GridSpec,
    pub solver: SolverSpec,
    pub response: ResponseSpec,
    pub thermal: ThermalSpec,
    pub profile: ProfileSpec,
    pub lattice: Option<LatticeSpec>,
    pub electrostatics: Option<ElectrostaticsSpec>,
    /// Contacts attached along the channel.
    pub contacts: ContactsSpec,
    pub warnings: Vec<String>,
    /// Notes gathered while validating (defaults that matter).
    pub notes: Vec<String>,
}

/// Validate a raw case, section by section; block files come from (or go
/// into) `files`.
pub(crate) fn validate(
    raw: &RawCase,
    ctx: ErrorContext<'_>,
    files: &mut BlockFiles,
) -> Result<CaseSpec, CaseError> {
    let ck = Checker { ctx };
    let mut warnings = Vec::new();
    let name = name(raw, &ck)?;
    let mut notes = Vec::new();
    let device = DeviceSpec::from_raw(raw, &ck, files)?;
    let spin_degeneracy = spin_degeneracy(raw, &ck, &device)?;
    let length_nm = device.length_nm();
    let channels = ChannelsSpec::from_raw(raw, &ck, &device, &mut notes)?;
    let regions =
        RegionsSpec::from_raw(raw, &ck, &device, channels.channels.as_ref(), &mut warnings)?;
    let leads = LeadsSpec::from_raw(raw, &ck, &device, files)?;
    let bias = BiasSpec::from_raw(raw, &ck, length_nm)?;
    let phonons = PhononSpec::all_from_raw(raw, &ck, length_nm, leads.mean_temperature_k(), files)?;
    let dephasing = DephasingSpec::from_raw(raw, &ck, length_nm, files)?;
    let grid = GridSpec::from_raw(raw, &ck)?;
    let solver = SolverSpec::from_raw(raw, &ck, &mut warnings)?;
    let lattice = LatticeSpec::from_raw(raw, &ck, &device, files, &mut warnings)?;
    let electrostatics = ElectrostaticsSpec::from_raw(raw, &ck, &device, &mut warnings)?;
    let contacts = ContactsSpec::from_raw(raw, &ck, &device, leads.mean_temperature_k())?;
    Ok(CaseSpec {
        name,
        spin_degeneracy,
        device,
        regions,
        channels,
        leads,
        bias,
        phonons,
        dephasing,
        grid,
        solver,
        response: ResponseSpec::from_raw(raw, &ck)?,
        thermal: ThermalSpec::from_raw(raw, &ck)?,
        profile: ProfileSpec::from_raw(raw, &ck)?,
        lattice,
        electrostatics,
        contacts,
        warnings,
        notes,
    })
}

/// `spin_degeneracy`: 1 or 2, default 2; with explicit spin 1 (a given 2
/// is refused: the spin is then in the orbitals).
fn spin_degeneracy(raw: &RawCase, ck: &Checker<'_>, device: &DeviceSpec) -> Result<u8, CaseError> {
    let given = ck.int(&raw.spin_degeneracy, "spin_degeneracy", "1 or 2", |g| {
        g == 1 || g == 2
    })?;
    if !device.spin_explicit {
        return Ok(given.unwrap_or(DEFAULT_SPIN_DEGENERACY as usize) as u8);
    }
    match given {
        Some(2) => Err(ck.ctx.invalid(
            raw.spin_degeneracy.as_ref().map(|s| s.span()),
            "spin_degeneracy",
            "1 (or no value) with device.spin = \"explicit\": each orbital then holds one spin",
            "2 (hint: remove spin_degeneracy, or device.spin)",
        )),
        _ => Ok(1),
    }
}

/// `name`: required and not blank.
fn name(raw: &RawCase, ck: &Checker<'_>) -> Result<String, CaseError> {
    match &raw.name {
        Some(s) if !s.get_ref().trim().is_empty() => Ok(s.get_ref().clone()),
        Some(s) => Err(ck
            .ctx
            .invalid(Some(s.span()), "name", "a non-empty name", "\"\"")),
        None => Err(ck
            .ctx
            .missing(Some(0..0), "name", "the case name (a string)")),
    }
}
