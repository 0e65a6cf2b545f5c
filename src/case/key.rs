//! Typed operating points: [`CaseKey`] names one numeric key of the case
//! file, and [`super::Case::with`] sets it without writing or reading
//! TOML.

use super::error::close_matches;
use super::keys::{KEYS, KeyInfo, ValueType};
use super::raw::{
    Opt, RawCase, RawContact, RawElectrostaticsRegion, RawLatticeLead, RawLatticeRegion, RawLead,
    RawPhonon, RawRegion,
};
use crate::leads::Side;
use std::fmt;
use std::str::FromStr;
use toml::Spanned;

/// A numeric key of the case file (every number or integer of the key
/// table). `Display` gives the dotted name (`phonon.1.bath_temperature_k`),
/// `FromStr` reads it back.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum CaseKey {
    /// `spin_degeneracy`
    SpinDegeneracy,
    /// `device.spacing_nm`
    DeviceSpacing,
    /// `device.length_nm`
    DeviceLength,
    /// `device.effective_mass`
    DeviceEffectiveMass,
    /// `device.band_edge_ev`
    DeviceBandEdge,
    /// `device.width_sites`
    DeviceWidthSites,
    /// `device.cells`
    DeviceCells,
    /// `device.region.#.from_nm`
    RegionFrom(usize),
    /// `device.region.#.to_nm`
    RegionTo(usize),
    /// `device.region.#.offset_ev`
    RegionOffset(usize),
    /// `device.region.#.start_ev`
    RegionStart(usize),
    /// `device.region.#.end_ev`
    RegionEnd(usize),
    /// `leads.<side>.fermi_level_ev`
    LeadFermiLevel(Side),
    /// `leads.<side>.temperature_k`
    LeadTemperature(Side),
    /// `leads.<side>.band_edge_ev`
    LeadBandEdge(Side),
    /// `leads.<side>.effective_mass`
    LeadEffectiveMass(Side),
    /// `leads.<side>.wide_band_ev`
    LeadWideBand(Side),
    /// `bias.voltage_v`
    BiasVoltage,
    /// `bias.drop.linear.from_nm`
    BiasDropFrom,
    /// `bias.drop.linear.to_nm`
    BiasDropTo,
    /// `phonon.#.energy_ev`
    PhononEnergy(usize),
    /// `phonon.#.coupling_ev2`
    PhononCoupling(usize),
    /// `phonon.#.from_nm`
    PhononFrom(usize),
    /// `phonon.#.to_nm`
    PhononTo(usize),
    /// `phonon.#.bath_temperature_k`
    PhononBathTemperature(usize),
    /// `dephasing.strength_ev2`
    DephasingStrength,
    /// `dephasing.from_nm`
    DephasingFrom,
    /// `dephasing.to_nm`
    DephasingTo,
    /// `grid.step_ev`
    GridStep,
    /// `grid.min_ev`
    GridMin,
    /// `grid.max_ev`
    GridMax,
    /// `solver.tolerance`
    SolverTolerance,
    /// `solver.max_iterations`
    SolverMaxIterations,
    /// `solver.mixing_factor`
    SolverMixingFactor,
    /// `solver.anderson_depth`
    SolverAndersonDepth,
    /// `solver.anderson_damping`
    SolverAndersonDamping,
    /// `solver.current_floor_a`
    SolverCurrentFloor,
    /// `solver.decimation_eta_ev`
    SolverDecimationEta,
    /// `solver.decimation_tolerance_ev`
    SolverDecimationTolerance,
    /// `thermal.phonon_conductance_w_per_k`
    ThermalPhononConductance,
    /// `lattice.mass_u`
    LatticeMass,
    /// `lattice.spring_n_per_m`
    LatticeSpring,
    /// `lattice.transverse_spring_n_per_m`
    LatticeTransverseSpring,
    /// `lattice.damping_per_ps`
    LatticeDamping,
    /// `lattice.self_heating_tolerance_k`
    LatticeSelfHeatingTolerance,
    /// `lattice.self_heating_max_iterations`
    LatticeSelfHeatingMaxIterations,
    /// `lattice.self_heating_mixing`
    LatticeSelfHeatingMixing,
    /// `lattice.self_heating_history`
    LatticeSelfHeatingHistory,
    /// `lattice.region.#.from_nm`
    LatticeRegionFrom(usize),
    /// `lattice.region.#.to_nm`
    LatticeRegionTo(usize),
    /// `lattice.region.#.mass_u`
    LatticeRegionMass(usize),
    /// `lattice.region.#.spring_n_per_m`
    LatticeRegionSpring(usize),
    /// `lattice.region.#.damping_per_ps`
    LatticeRegionDamping(usize),
    /// `lattice.<side>.mass_u`
    LatticeLeadMass(Side),
    /// `lattice.<side>.spring_n_per_m`
    LatticeLeadSpring(Side),
    /// `electrostatics.permittivity`
    EsPermittivity,
    /// `electrostatics.area_nm2`
    EsArea,
    /// `electrostatics.donors_cm3`
    EsDonors,
    /// `electrostatics.acceptors_cm3`
    EsAcceptors,
    /// `electrostatics.<side>_potential_v`
    EsEndPotential(Side),
    /// `electrostatics.gate_potential_v`
    EsGatePotential,
    /// `electrostatics.gate_length_nm`
    EsGateLength,
    /// `electrostatics.tolerance_ev`
    EsTolerance,
    /// `electrostatics.max_iterations`
    EsMaxIterations,
    /// `electrostatics.region.#.from_nm`
    EsRegionFrom(usize),
    /// `electrostatics.region.#.to_nm`
    EsRegionTo(usize),
    /// `electrostatics.region.#.permittivity`
    EsRegionPermittivity(usize),
    /// `electrostatics.region.#.donors_cm3`
    EsRegionDonors(usize),
    /// `electrostatics.region.#.acceptors_cm3`
    EsRegionAcceptors(usize),
    /// `contact.#.first_cell`
    ContactFirstCell(usize),
    /// `contact.#.cell_count`
    ContactCellCount(usize),
    /// `contact.#.gamma_ev`
    ContactGamma(usize),
    /// `contact.#.fermi_level_ev`
    ContactFermiLevel(usize),
    /// `contact.#.temperature_k`
    ContactTemperature(usize),
    /// `contact.#.polarisation`
    ContactPolarisation(usize),
}

use CaseKey as K;

/// One key of each kind (index 0, both sides): with [`CaseKey::pattern`]
/// they cover every numeric row of the key table.
const TEMPLATES: &[CaseKey] = &[
    K::SpinDegeneracy,
    K::DeviceSpacing,
    K::DeviceLength,
    K::DeviceEffectiveMass,
    K::DeviceBandEdge,
    K::DeviceWidthSites,
    K::DeviceCells,
    K::RegionFrom(0),
    K::RegionTo(0),
    K::RegionOffset(0),
    K::RegionStart(0),
    K::RegionEnd(0),
    K::LeadFermiLevel(Side::Left),
    K::LeadTemperature(Side::Left),
    K::LeadBandEdge(Side::Left),
    K::LeadEffectiveMass(Side::Left),
    K::LeadWideBand(Side::Left),
    K::LeadFermiLevel(Side::Right),
    K::LeadTemperature(Side::Right),
    K::LeadBandEdge(Side::Right),
    K::LeadEffectiveMass(Side::Right),
    K::LeadWideBand(Side::Right),
    K::BiasVoltage,
    K::BiasDropFrom,
    K::BiasDropTo,
    K::PhononEnergy(0),
    K::PhononCoupling(0),
    K::PhononFrom(0),
    K::PhononTo(0),
    K::PhononBathTemperature(0),
    K::DephasingStrength,
    K::DephasingFrom,
    K::DephasingTo,
    K::GridStep,
    K::GridMin,
    K::GridMax,
    K::SolverTolerance,
    K::SolverMaxIterations,
    K::SolverMixingFactor,
    K::SolverAndersonDepth,
    K::SolverAndersonDamping,
    K::SolverCurrentFloor,
    K::SolverDecimationEta,
    K::SolverDecimationTolerance,
    K::ThermalPhononConductance,
    K::LatticeMass,
    K::LatticeSpring,
    K::LatticeTransverseSpring,
    K::LatticeDamping,
    K::LatticeSelfHeatingTolerance,
    K::LatticeSelfHeatingMaxIterations,
    K::LatticeSelfHeatingMixing,
    K::LatticeSelfHeatingHistory,
    K::LatticeRegionFrom(0),
    K::LatticeRegionTo(0),
    K::LatticeRegionMass(0),
    K::LatticeRegionSpring(0),
    K::LatticeRegionDamping(0),
    K::LatticeLeadMass(Side::Left),
    K::LatticeLeadSpring(Side::Left),
    K::LatticeLeadMass(Side::Right),
    K::LatticeLeadSpring(Side::Right),
    K::EsPermittivity,
    K::EsArea,
    K::EsDonors,
    K::EsAcceptors,
    K::EsEndPotential(Side::Left),
    K::EsEndPotential(Side::Right),
    K::EsGatePotential,
    K::EsGateLength,
    K::EsTolerance,
    K::EsMaxIterations,
    K::EsRegionFrom(0),
    K::EsRegionTo(0),
    K::EsRegionPermittivity(0),
    K::EsRegionDonors(0),
    K::EsRegionAcceptors(0),
    K::ContactFirstCell(0),
    K::ContactCellCount(0),
    K::ContactGamma(0),
    K::ContactFermiLevel(0),
    K::ContactTemperature(0),
    K::ContactPolarisation(0),
];

fn lead_pattern(side: Side, left: &'static str, right: &'static str) -> &'static str {
    match side {
        Side::Left => left,
        Side::Right => right,
    }
}

impl CaseKey {
    /// Every kind of key once (array keys at index 0, lead keys on both
    /// sides).
    pub fn templates() -> &'static [CaseKey] {
        TEMPLATES
    }

    /// The dotted name with `#` for the array index, as in the key table.
    pub fn pattern(self) -> &'static str {
        if let Some(p) = self.es_pattern().or_else(|| self.contact_pattern()) {
            return p;
        }
        match self {
            K::SpinDegeneracy => "spin_degeneracy",
            K::DeviceSpacing => "device.spacing_nm",
            K::DeviceLength => "device.length_nm",
            K::DeviceEffectiveMass => "device.effective_mass",
            K::DeviceBandEdge => "device.band_edge_ev",
            K::DeviceWidthSites => "device.width_sites",
            K::DeviceCells => "device.cells",
            K::RegionFrom(_) => "device.region.#.from_nm",
            K::RegionTo(_) => "device.region.#.to_nm",
            K::RegionOffset(_) => "device.region.#.offset_ev",
            K::RegionStart(_) => "device.region.#.start_ev",
            K::RegionEnd(_) => "device.region.#.end_ev",
            K::BiasVoltage => "bias.voltage_v",
            K::BiasDropFrom => "bias.drop.linear.from_nm",
            K::BiasDropTo => "bias.drop.linear.to_nm",
            K::PhononEnergy(_) => "phonon.#.energy_ev",
            K::PhononCoupling(_) => "phonon.#.coupling_ev2",
            K::PhononFrom(_) => "phonon.#.from_nm",
            K::PhononTo(_) => "phonon.#.to_nm",
            K::PhononBathTemperature(_) => "phonon.#.bath_temperature_k",
            K::DephasingStrength => "dephasing.strength_ev2",
            K::DephasingFrom => "dephasing.from_nm",
            K::DephasingTo => "dephasing.to_nm",
            K::GridStep => "grid.step_ev",
            K::GridMin => "grid.min_ev",
            K::GridMax => "grid.max_ev",
            K::SolverTolerance => "solver.tolerance",
            K::SolverMaxIterations => "solver.max_iterations",
            K::SolverMixingFactor => "solver.mixing_factor",
            K::SolverAndersonDepth => "solver.anderson_depth",
            K::SolverAndersonDamping => "solver.anderson_damping",
            K::SolverCurrentFloor => "solver.current_floor_a",
            K::SolverDecimationEta => "solver.decimation_eta_ev",
            K::SolverDecimationTolerance => "solver.decimation_tolerance_ev",
            K::ThermalPhononConductance => "thermal.phonon_conductance_w_per_k",
            K::LatticeMass => "lattice.mass_u",
            K::LatticeSpring => "lattice.spring_n_per_m",
            K::LatticeTransverseSpring => "lattice.transverse_spring_n_per_m",
            K::LatticeDamping => "lattice.damping_per_ps",
            K::LatticeSelfHeatingTolerance => "lattice.self_heating_tolerance_k",
            K::LatticeSelfHeatingMaxIterations => "lattice.self_heating_max_iterations",
            K::LatticeSelfHeatingMixing => "lattice.self_heating_mixing",
            K::LatticeSelfHeatingHistory => "lattice.self_heating_history",
            K::LatticeRegionFrom(_) => "lattice.region.#.from_nm",
            K::LatticeRegionTo(_) => "lattice.region.#.to_nm",
            K::LatticeRegionMass(_) => "lattice.region.#.mass_u",
            K::LatticeRegionSpring(_) => "lattice.region.#.spring_n_per_m",
            K::LatticeRegionDamping(_) => "lattice.region.#.damping_per_ps",
            K::LatticeLeadMass(s) => lead_pattern(s, "lattice.left.mass_u", "lattice.right.mass_u"),
            K::LatticeLeadSpring(s) => lead_pattern(
                s,
                "lattice.left.spring_n_per_m",
                "lattice.right.spring_n_per_m",
            ),
            K::LeadFermiLevel(s) => {
                lead_pattern(s, "leads.left.fermi_level_ev", "leads.right.fermi_level_ev")
            }
            K::LeadTemperature(s) => {
                lead_pattern(s, "leads.left.temperature_k", "leads.right.temperature_k")
            }
            K::LeadBandEdge(s) => {
                lead_pattern(s, "leads.left.band_edge_ev", "leads.right.band_edge_ev")
            }
            K::LeadEffectiveMass(s) => {
                lead_pattern(s, "leads.left.effective_mass", "leads.right.effective_mass")
            }
            K::LeadWideBand(s) => {
                lead_pattern(s, "leads.left.wide_band_ev", "leads.right.wide_band_ev")
            }
            _ => unreachable!("the electrostatics keys are named by es_pattern"),
        }
    }

    /// The dotted names of the `[[contact]]` keys.
    fn contact_pattern(self) -> Option<&'static str> {
        Some(match self {
            K::ContactFirstCell(_) => "contact.#.first_cell",
            K::ContactCellCount(_) => "contact.#.cell_count",
            K::ContactGamma(_) => "contact.#.gamma_ev",
            K::ContactFermiLevel(_) => "contact.#.fermi_level_ev",
            K::ContactTemperature(_) => "contact.#.temperature_k",
            K::ContactPolarisation(_) => "contact.#.polarisation",
            _ => return None,
        })
    }

    /// The dotted names of the `[electrostatics]` keys.
    fn es_pattern(self) -> Option<&'static str> {
        let p = match self {
            K::EsPermittivity => "electrostatics.permittivity",
            K::EsArea => "electrostatics.area_nm2",
            K::EsDonors => "electrostatics.donors_cm3",
            K::EsAcceptors => "electrostatics.acceptors_cm3",
            K::EsEndPotential(s) => lead_pattern(
                s,
                "electrostatics.left_potential_v",
                "electrostatics.right_potential_v",
            ),
            K::EsGatePotential => "electrostatics.gate_potential_v",
            K::EsGateLength => "electrostatics.gate_length_nm",
            K::EsTolerance => "electrostatics.tolerance_ev",
            K::EsMaxIterations => "electrostatics.max_iterations",
            K::EsRegionFrom(_) => "electrostatics.region.#.from_nm",
            K::EsRegionTo(_) => "electrostatics.region.#.to_nm",
            K::EsRegionPermittivity(_) => "electrostatics.region.#.permittivity",
            K::EsRegionDonors(_) => "electrostatics.region.#.donors_cm3",
            K::EsRegionAcceptors(_) => "electrostatics.region.#.acceptors_cm3",
            _ => return None,
        };
        Some(p)
    }

    /// The array index of a `[[device.region]]`, `[[phonon]]` or
    /// `[[lattice.region]]` key.
    pub fn index(self) -> Option<usize> {
        match self {
            K::RegionFrom(i)
            | K::RegionTo(i)
            | K::RegionOffset(i)
            | K::RegionStart(i)
            | K::RegionEnd(i)
            | K::PhononEnergy(i)
            | K::PhononCoupling(i)
            | K::PhononFrom(i)
            | K::PhononTo(i)
            | K::PhononBathTemperature(i)
            | K::LatticeRegionFrom(i)
            | K::LatticeRegionTo(i)
            | K::LatticeRegionMass(i)
            | K::LatticeRegionSpring(i)
            | K::LatticeRegionDamping(i)
            | K::EsRegionFrom(i)
            | K::EsRegionTo(i)
            | K::EsRegionPermittivity(i)
            | K::EsRegionDonors(i)
            | K::EsRegionAcceptors(i)
            | K::ContactFirstCell(i)
            | K::ContactCellCount(i)
            | K::ContactGamma(i)
            | K::ContactFermiLevel(i)
            | K::ContactTemperature(i)
            | K::ContactPolarisation(i) => Some(i),
            _ => None,
        }
    }

    /// The same key at array index `i` (keys without an index unchanged).
    pub fn at_index(self, i: usize) -> CaseKey {
        match self {
            K::RegionFrom(_) => K::RegionFrom(i),
            K::RegionTo(_) => K::RegionTo(i),
            K::RegionOffset(_) => K::RegionOffset(i),
            K::RegionStart(_) => K::RegionStart(i),
            K::RegionEnd(_) => K::RegionEnd(i),
            K::PhononEnergy(_) => K::PhononEnergy(i),
            K::PhononCoupling(_) => K::PhononCoupling(i),
            K::PhononFrom(_) => K::PhononFrom(i),
            K::PhononTo(_) => K::PhononTo(i),
            K::PhononBathTemperature(_) => K::PhononBathTemperature(i),
            K::LatticeRegionFrom(_) => K::LatticeRegionFrom(i),
            K::LatticeRegionTo(_) => K::LatticeRegionTo(i),
            K::LatticeRegionMass(_) => K::LatticeRegionMass(i),
            K::LatticeRegionSpring(_) => K::LatticeRegionSpring(i),
            K::LatticeRegionDamping(_) => K::LatticeRegionDamping(i),
            K::EsRegionFrom(_) => K::EsRegionFrom(i),
            K::EsRegionTo(_) => K::EsRegionTo(i),
            K::EsRegionPermittivity(_) => K::EsRegionPermittivity(i),
            K::EsRegionDonors(_) => K::EsRegionDonors(i),
            K::EsRegionAcceptors(_) => K::EsRegionAcceptors(i),
            K::ContactFirstCell(_) => K::ContactFirstCell(i),
            K::ContactCellCount(_) => K::ContactCellCount(i),
            K::ContactGamma(_) => K::ContactGamma(i),
            K::ContactFermiLevel(_) => K::ContactFermiLevel(i),
            K::ContactTemperature(_) => K::ContactTemperature(i),
            K::ContactPolarisation(_) => K::ContactPolarisation(i),
            other => other,
        }
    }

    /// The key's row of the key table.
    pub fn info(self) -> &'static KeyInfo {
        let p = self.pattern();
        KEYS.iter()
            .find(|k| k.name == p)
            .expect("every CaseKey pattern is a row of the key table (checked by a test)")
    }

    /// True for keys that take whole numbers only.
    pub fn is_integer(self) -> bool {
        matches!(self.info().ty, ValueType::Int)
    }
}

impl fmt::Display for CaseKey {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self.index() {
            None => f.write_str(self.pattern()),
            Some(i) => f.write_str(&self.pattern().replace('#', &i.to_string())),
        }
    }
}

impl serde::Serialize for CaseKey {
    fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        s.collect_str(self)
    }
}

/// A name that is no numeric case key.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct ParseCaseKeyError {
    /// The name as given.
    pub key: String,
    /// Numeric keys close to it, best first.
    pub close: Vec<String>,
}

/// "expected a numeric case key, found an unknown key path", with the
/// close matches when there are any.
pub(crate) fn unknown_key_message(close: &[String]) -> String {
    if close.is_empty() {
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
    }
}

impl fmt::Display for ParseCaseKeyError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(
            f,
            "key `{}`: {}",
            self.key,
            unknown_key_message(&self.close)
        )?;
        if let Some(s) = self.close.first() {
            write!(f, "; did you mean `{s}`?")?;
        }
        Ok(())
    }
}

impl std::error::Error for ParseCaseKeyError {}

impl FromStr for CaseKey {
    type Err = ParseCaseKeyError;

    /// Read a dotted name such as `bias.voltage_v` or
    /// `phonon.0.coupling_ev2`; anything else is an error that lists close
    /// matches.
    fn from_str(s: &str) -> Result<Self, Self::Err> {
        let mut index = None;
        let pattern: Vec<String> = s
            .split('.')
            .map(|p| {
                if !p.is_empty() && p.chars().all(|c| c.is_ascii_digit()) {
                    index = Some(p.parse::<usize>().unwrap_or(usize::MAX));
                    "#".to_string()
                } else {
                    p.to_string()
                }
            })
            .collect();
        let pattern = pattern.join(".");
        if let Some(t) = TEMPLATES.iter().find(|t| t.pattern() == pattern) {
            return Ok(t.at_index(index.unwrap_or(0)));
        }
        let candidates: Vec<String> = TEMPLATES
            .iter()
            .map(|t| t.at_index(index.unwrap_or(0)).to_string())
            .collect();
        Err(ParseCaseKeyError {
            key: s.to_string(),
            close: close_matches(s, candidates.iter().map(String::as_str)),
        })
    }
}

/// The table in `slot`, created empty when the file has none.
fn table<T: Default>(slot: &mut Opt<T>) -> &mut T {
    slot.get_or_insert_with(|| Spanned::new(0..0, T::default()))
        .get_mut()
}

/// Entry `i` of the list of tables `name`, which must exist.
fn entry<'a, T>(
    list: &'a mut Option<Vec<Spanned<T>>>,
    name: &str,
    i: usize,
) -> Result<&'a mut T, String> {
    let Some(list) = list else {
        return Err(format!("expected an existing [[{name}]] entry, found none"));
    };
    let len = list.len();
    match list.get_mut(i) {
        Some(e) => Ok(e.get_mut()),
        None => Err(format!(
            "expected an index below {len} ([[{name}]] has {len} entries), found {i}"
        )),
    }
}

/// The table at `name` inside `value`, made a table when absent.
fn subtable<'a>(value: &'a mut toml::Value, name: &str) -> Result<&'a mut toml::Table, String> {
    match value {
        toml::Value::Table(t) => Ok(t),
        other => Err(format!(
            "expected `{name}` to be a table, found {} {other}",
            other.type_str()
        )),
    }
}

/// Set `bias.drop.linear.<leaf>`, creating the tables on the way.
fn set_drop(raw: &mut RawCase, leaf: &str, value: f64) -> Result<(), String> {
    let drop = table(&mut raw.bias)
        .drop
        .get_or_insert_with(|| Spanned::new(0..0, toml::Value::Table(toml::Table::new())))
        .get_mut();
    let linear = subtable(drop, "bias.drop")?
        .entry("linear")
        .or_insert_with(|| toml::Value::Table(toml::Table::new()));
    subtable(linear, "bias.drop.linear")?.insert(leaf.to_string(), toml::Value::Float(value));
    Ok(())
}

fn lead(raw: &mut RawCase, side: Side) -> &mut RawLead {
    let leads = table(&mut raw.leads);
    match side {
        Side::Left => table(&mut leads.left),
        Side::Right => table(&mut leads.right),
    }
}

fn region(raw: &mut RawCase, i: usize) -> Result<&mut RawRegion, String> {
    entry(&mut table(&mut raw.device).region, "device.region", i)
}

fn phonon(raw: &mut RawCase, i: usize) -> Result<&mut RawPhonon, String> {
    entry(&mut raw.phonon, "phonon", i)
}

fn lattice_region(raw: &mut RawCase, i: usize) -> Result<&mut RawLatticeRegion, String> {
    entry(&mut table(&mut raw.lattice).region, "lattice.region", i)
}

/// Entry `i` of `[[contact]]`.
fn contact(raw: &mut RawCase, i: usize) -> Result<&mut RawContact, String> {
    entry(&mut raw.contact, "contact", i)
}

fn es_region(raw: &mut RawCase, i: usize) -> Result<&mut RawElectrostaticsRegion, String> {
    entry(
        &mut table(&mut raw.electrostatics).region,
        "electrostatics.region",
        i,
    )
}

fn lattice_lead(raw: &mut RawCase, side: Side) -> &mut RawLatticeLead {
    let lattice = table(&mut raw.lattice);
    match side {
        Side::Left => table(&mut lattice.left),
        Side::Right => table(&mut lattice.right),
    }
}

impl CaseKey {
    /// Put `value` at this key of the case as written. Integer keys take
    /// the value as a whole number (checked by the caller). Missing tables
    /// are created; list entries must exist.
    pub(crate) fn set(self, raw: &mut RawCase, value: f64) -> Result<(), String> {
        let f = Some(Spanned::new(0..0, value));
        let i = Some(Spanned::new(0..0, value as i64));
        match self {
            K::SpinDegeneracy => raw.spin_degeneracy = i,
            K::DeviceSpacing => table(&mut raw.device).spacing_nm = f,
            K::DeviceLength => table(&mut raw.device).length_nm = f,
            K::DeviceEffectiveMass => table(&mut raw.device).effective_mass = f,
            K::DeviceBandEdge => table(&mut raw.device).band_edge_ev = f,
            K::DeviceWidthSites => table(&mut raw.device).width_sites = i,
            K::DeviceCells => table(&mut raw.device).cells = i,
            K::RegionFrom(n) => region(raw, n)?.from_nm = f,
            K::RegionTo(n) => region(raw, n)?.to_nm = f,
            K::RegionOffset(n) => region(raw, n)?.offset_ev = f,
            K::RegionStart(n) => region(raw, n)?.start_ev = f,
            K::RegionEnd(n) => region(raw, n)?.end_ev = f,
            K::LeadFermiLevel(s) => lead(raw, s).fermi_level_ev = f,
            K::LeadTemperature(s) => lead(raw, s).temperature_k = f,
            K::LeadBandEdge(s) => lead(raw, s).band_edge_ev = f,
            K::LeadEffectiveMass(s) => lead(raw, s).effective_mass = f,
            K::LeadWideBand(s) => lead(raw, s).wide_band_ev = f,
            K::BiasVoltage => table(&mut raw.bias).voltage_v = f,
            K::BiasDropFrom => set_drop(raw, "from_nm", value)?,
            K::BiasDropTo => set_drop(raw, "to_nm", value)?,
            K::PhononEnergy(n) => phonon(raw, n)?.energy_ev = f,
            K::PhononCoupling(n) => phonon(raw, n)?.coupling_ev2 = f,
            K::PhononFrom(n) => phonon(raw, n)?.from_nm = f,
            K::PhononTo(n) => phonon(raw, n)?.to_nm = f,
            K::PhononBathTemperature(n) => phonon(raw, n)?.bath_temperature_k = f,
            K::LatticeRegionFrom(n) => lattice_region(raw, n)?.from_nm = f,
            K::LatticeRegionTo(n) => lattice_region(raw, n)?.to_nm = f,
            K::LatticeRegionMass(n) => lattice_region(raw, n)?.mass_u = f,
            K::LatticeRegionSpring(n) => lattice_region(raw, n)?.spring_n_per_m = f,
            K::LatticeRegionDamping(n) => lattice_region(raw, n)?.damping_per_ps = f,
            K::EsRegionFrom(n) => es_region(raw, n)?.from_nm = f,
            K::EsRegionTo(n) => es_region(raw, n)?.to_nm = f,
            K::EsRegionPermittivity(n) => es_region(raw, n)?.permittivity = f,
            K::EsRegionDonors(n) => es_region(raw, n)?.donors_cm3 = f,
            K::EsRegionAcceptors(n) => es_region(raw, n)?.acceptors_cm3 = f,
            K::ContactFirstCell(n) => contact(raw, n)?.first_cell = i,
            K::ContactCellCount(n) => contact(raw, n)?.cell_count = i,
            K::ContactGamma(n) => contact(raw, n)?.gamma_ev = f,
            K::ContactFermiLevel(n) => contact(raw, n)?.fermi_level_ev = f,
            K::ContactTemperature(n) => contact(raw, n)?.temperature_k = f,
            K::ContactPolarisation(n) => contact(raw, n)?.polarisation = f,
            _ => self.set_setting(raw, f, i),
        }
        Ok(())
    }

    /// The keys of `[dephasing]`, `[grid]`, `[solver]`, `[thermal]` and
    /// `[lattice]` (its regions are set in `set`).
    fn set_setting(self, raw: &mut RawCase, f: Opt<f64>, i: Opt<i64>) {
        match self {
            K::DephasingStrength => table(&mut raw.dephasing).strength_ev2 = f,
            K::DephasingFrom => table(&mut raw.dephasing).from_nm = f,
            K::DephasingTo => table(&mut raw.dephasing).to_nm = f,
            K::GridStep => table(&mut raw.grid).step_ev = f,
            K::GridMin => table(&mut raw.grid).min_ev = f,
            K::GridMax => table(&mut raw.grid).max_ev = f,
            K::SolverTolerance => table(&mut raw.solver).tolerance = f,
            K::SolverMaxIterations => table(&mut raw.solver).max_iterations = i,
            K::SolverMixingFactor => table(&mut raw.solver).mixing_factor = f,
            K::SolverAndersonDepth => table(&mut raw.solver).anderson_depth = i,
            K::SolverAndersonDamping => table(&mut raw.solver).anderson_damping = f,
            K::SolverCurrentFloor => table(&mut raw.solver).current_floor_a = f,
            K::SolverDecimationEta => table(&mut raw.solver).decimation_eta_ev = f,
            K::SolverDecimationTolerance => table(&mut raw.solver).decimation_tolerance_ev = f,
            K::ThermalPhononConductance => table(&mut raw.thermal).phonon_conductance_w_per_k = f,
            K::LatticeMass => table(&mut raw.lattice).mass_u = f,
            K::LatticeSpring => table(&mut raw.lattice).spring_n_per_m = f,
            K::LatticeTransverseSpring => table(&mut raw.lattice).transverse_spring_n_per_m = f,
            K::LatticeDamping => table(&mut raw.lattice).damping_per_ps = f,
            K::LatticeSelfHeatingTolerance => table(&mut raw.lattice).self_heating_tolerance_k = f,
            K::LatticeSelfHeatingMaxIterations => {
                table(&mut raw.lattice).self_heating_max_iterations = i;
            }
            K::LatticeSelfHeatingMixing => table(&mut raw.lattice).self_heating_mixing = f,
            K::LatticeSelfHeatingHistory => table(&mut raw.lattice).self_heating_history = i,
            K::LatticeLeadMass(s) => lattice_lead(raw, s).mass_u = f,
            K::LatticeLeadSpring(s) => lattice_lead(raw, s).spring_n_per_m = f,
            K::EsPermittivity => table(&mut raw.electrostatics).permittivity = f,
            K::EsArea => table(&mut raw.electrostatics).area_nm2 = f,
            K::EsDonors => table(&mut raw.electrostatics).donors_cm3 = f,
            K::EsAcceptors => table(&mut raw.electrostatics).acceptors_cm3 = f,
            K::EsEndPotential(Side::Left) => table(&mut raw.electrostatics).left_potential_v = f,
            K::EsEndPotential(Side::Right) => table(&mut raw.electrostatics).right_potential_v = f,
            K::EsGatePotential => table(&mut raw.electrostatics).gate_potential_v = f,
            K::EsGateLength => table(&mut raw.electrostatics).gate_length_nm = f,
            K::EsTolerance => table(&mut raw.electrostatics).tolerance_ev = f,
            K::EsMaxIterations => table(&mut raw.electrostatics).max_iterations = i,
            // The keys of the device, leads, bias and phonons are set in
            // `set`.
            _ => {}
        }
    }
}
