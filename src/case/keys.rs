//! The one table of case keys: every key a case file may hold, with its
//! value type, unit, default and meaning. From it come the numeric keys
//! that `--vary` and [`super::Case::with`] accept, the shape of the file
//! that the reader checks before anything else, and `docs/case-keys.md`
//! ([`keys_markdown`]).

use super::check::{choice_name, choice_names, show};
use super::sections::device::{KindName, SpinMode};
use super::sections::settings::{HermitianPart, MixingKind, ProfileMode, ResponseSplit};
use super::spec::DEFAULT_SPIN_DEGENERACY;
use crate::electrostatics::{Coupling, Ends};
use crate::leads::DecimationParams;
use crate::scba::{CoarseStart, EnergyOrder, MixerHistory, Mixing, ScbaParams};

/// What a key holds.
#[derive(Clone, Copy)]
pub enum ValueType {
    /// A number (integers are accepted).
    Float,
    /// A whole number.
    Int,
    /// `true` or `false`.
    Bool,
    /// Free text (a name, a file path).
    Text,
    /// One word of a closed set.
    Choice(fn() -> Vec<&'static str>),
    /// `"leads"` or a `{ linear = { … } }` table.
    Drop,
    /// An array of numbers (integers are accepted).
    FloatList,
    /// A key of earlier versions, refused with a message naming its
    /// replacement.
    Renamed,
    /// A list of names (`["up", "down"]`).
    Names,
    /// A list of whole numbers (`[0, 2]`).
    Indices,
    /// A list of square matrices, each a list of rows whose entries are
    /// numbers or `[re, im]` pairs.
    Matrices,
    /// A matrix of numbers as an array of rows (`[[1, 0], [0, 1]]`).
    FloatRows,
}

impl ValueType {
    /// True for the keys whose values are numbers (the keys `--vary` and
    /// [`super::Case::with`] change).
    pub fn is_numeric(self) -> bool {
        matches!(self, ValueType::Float | ValueType::Int)
    }

    /// The type as people read it.
    pub fn describe(self) -> String {
        match self {
            ValueType::Float => "number".into(),
            ValueType::Int => "integer".into(),
            ValueType::Bool => "boolean".into(),
            ValueType::Text => "string".into(),
            ValueType::Choice(names) => names()
                .iter()
                .map(|n| format!("`\"{n}\"`"))
                .collect::<Vec<_>>()
                .join(" or "),
            ValueType::Drop => "`\"leads\"` or `{ linear = { from_nm, to_nm } }`".into(),
            ValueType::FloatList => "array of numbers".into(),
            ValueType::Renamed => "—".into(),
            ValueType::Names => "list of strings".into(),
            ValueType::Indices => "list of integers".into(),
            ValueType::Matrices => "list of matrices (rows of numbers or `[re, im]` pairs)".into(),
            ValueType::FloatRows => "array of rows of numbers".into(),
        }
    }
}

/// The value a key takes when the file leaves it out.
#[derive(Clone, Copy)]
pub enum DefaultValue {
    /// The file must give it.
    Required,
    /// A number the code uses as its default.
    Number(fn() -> f64),
    /// A word of a closed set that the code uses as its default.
    Word(fn() -> &'static str),
    /// Derived or absent; the text says how.
    Text(&'static str),
}

impl DefaultValue {
    /// The default as people read it.
    pub fn describe(self) -> String {
        match self {
            DefaultValue::Required => "required".into(),
            DefaultValue::Number(f) => format!("`{}`", show(f())),
            DefaultValue::Word(f) => format!("`\"{}\"`", f()),
            DefaultValue::Text(t) => t.into(),
        }
    }
}

/// One key of the case file.
#[derive(Clone, Copy)]
pub struct KeyInfo {
    /// Dotted name; `#` stands for an array index (`phonon.#.energy_ev`).
    pub name: &'static str,
    /// What it holds.
    pub ty: ValueType,
    /// Unit, or "" for none.
    pub unit: &'static str,
    /// Value when left out.
    pub default: DefaultValue,
    /// What it means.
    pub meaning: &'static str,
}

const fn key(
    name: &'static str,
    ty: ValueType,
    unit: &'static str,
    default: DefaultValue,
    meaning: &'static str,
) -> KeyInfo {
    KeyInfo {
        name,
        ty,
        unit,
        default,
        meaning,
    }
}

use DefaultValue::{Number, Required, Text, Word};
use ValueType::{Bool, Drop, Float, FloatList, Int, Renamed};

fn spin_default() -> f64 {
    DEFAULT_SPIN_DEGENERACY as f64
}
fn zero() -> f64 {
    0.0
}
fn es_tolerance() -> f64 {
    crate::electrostatics::Electrostatics::DEFAULT_TOLERANCE_EV
}
fn es_max_iterations() -> f64 {
    crate::electrostatics::Electrostatics::DEFAULT_MAX_ITERATIONS as f64
}
fn tolerance_default() -> f64 {
    ScbaParams::DEFAULT_TOLERANCE
}
fn selfheat_tolerance_default() -> f64 {
    crate::selfheat::SelfHeatParams::DEFAULT_TOLERANCE_K
}
fn selfheat_iterations_default() -> f64 {
    crate::selfheat::SelfHeatParams::DEFAULT_MAX_ITERATIONS as f64
}
fn selfheat_mixing_default() -> f64 {
    crate::selfheat::SelfHeatParams::DEFAULT_MIXING_FACTOR
}
fn selfheat_history_default() -> f64 {
    crate::selfheat::SelfHeatParams::DEFAULT_ANDERSON_DEPTH as f64
}
fn iterations_default() -> f64 {
    ScbaParams::DEFAULT_MAX_ITERATIONS as f64
}
fn factor_default() -> f64 {
    Mixing::DEFAULT_LINEAR_FACTOR
}
fn depth_default() -> f64 {
    Mixing::DEFAULT_ANDERSON_DEPTH as f64
}
fn damping_default() -> f64 {
    Mixing::DEFAULT_ANDERSON_DAMPING
}
fn floor_default() -> f64 {
    ScbaParams::DEFAULT_CURRENT_FLOOR_A
}
fn eta_default() -> f64 {
    DecimationParams::default().eta_ev
}
fn decimation_tolerance_default() -> f64 {
    DecimationParams::default().tolerance_ev
}
fn mixing_default() -> &'static str {
    choice_name(MixingKind::DEFAULT)
}
fn hermitian_default() -> &'static str {
    choice_name(HermitianPart::DEFAULT)
}
fn history_default() -> &'static str {
    choice_name(ScbaParams::default().history)
}
fn es_coupling_default() -> &'static str {
    choice_name(Coupling::default())
}
fn es_ends_default() -> &'static str {
    choice_name(Ends::default())
}
fn coarse_default() -> &'static str {
    choice_name(ScbaParams::default().coarse_start)
}
fn order_default() -> &'static str {
    choice_name(ScbaParams::default().energy_order)
}
fn split_default() -> &'static str {
    choice_name(ResponseSplit::default())
}
fn profile_default() -> &'static str {
    choice_name(ProfileMode::DEFAULT)
}
fn spin_mode_default() -> &'static str {
    choice_name(SpinMode::Degenerate)
}

/// Every key, in the order of the file's sections.
pub static KEYS: &[KeyInfo] = &[
    key("name", ValueType::Text, "", Required, "case name"),
    key(
        "spin_degeneracy",
        Int,
        "",
        Number(spin_default),
        "spin degeneracy g_s, 1 or 2",
    ),
    key(
        "device.kind",
        ValueType::Choice(choice_names::<KindName>),
        "",
        Required,
        "device kind: a chain, a strip of width W, or Hamiltonian blocks from files",
    ),
    key(
        "device.builder",
        Renamed,
        "",
        Text("—"),
        "the name of `device.kind` in earlier versions; refused with a message naming `kind`",
    ),
    key("device.spacing_nm", Float, "nm", Required, "cell spacing a"),
    key(
        "device.length_nm",
        Float,
        "nm",
        Required,
        "chain/strip: device length N·a (N = length/spacing must be whole)",
    ),
    key(
        "device.effective_mass",
        Float,
        "m0",
        Required,
        "chain/strip: effective mass m*; hopping t = ħ²/(2 m* a²)",
    ),
    key(
        "device.band_edge_ev",
        Float,
        "eV",
        Number(zero),
        "chain/strip: band edge Ec",
    ),
    key(
        "device.width_sites",
        Int,
        "sites",
        Required,
        "strip: width W (required for a strip, refused otherwise)",
    ),
    key(
        "device.onsite_file",
        ValueType::Text,
        "",
        Required,
        "blocks: on-site blocks, .npy or .csv, relative to the case file",
    ),
    key(
        "device.coupling_file",
        ValueType::Text,
        "",
        Required,
        "blocks: coupling blocks, .npy or .csv, relative to the case file",
    ),
    key(
        "device.cells",
        Int,
        "",
        Text("the block count of the on-site file"),
        "blocks: cell count N (required when the on-site file holds one (b, b) block)",
    ),
    key(
        "device.region.#.from_nm",
        Float,
        "nm",
        Required,
        "start of a potential region (regions are summed)",
    ),
    key(
        "device.region.#.to_nm",
        Float,
        "nm",
        Required,
        "end of a potential region",
    ),
    key(
        "device.region.#.offset_ev",
        Float,
        "eV",
        Text("none"),
        "flat potential of the region (or start_ev + end_ev)",
    ),
    key(
        "device.region.#.start_ev",
        Float,
        "eV",
        Text("none"),
        "ramp: potential at from_nm",
    ),
    key(
        "device.region.#.end_ev",
        Float,
        "eV",
        Text("none"),
        "ramp: potential at to_nm",
    ),
    key(
        "device.region.#.channels",
        ValueType::Names,
        "",
        Text("all orbitals"),
        "names of the channels ([[channel]], or \"up\"/\"down\" with explicit spin) whose orbitals the region shifts; the others keep their energy",
    ),
    key(
        "device.spin",
        ValueType::Choice(choice_names::<SpinMode>),
        "",
        Word(spin_mode_default),
        "\"explicit\" doubles every cell into up and down orbitals (H → diag(H, H)), sets g_s = 1 and defines the channels \"up\" and \"down\"",
    ),
    key(
        "leads.left.fermi_level_ev",
        Float,
        "eV",
        Required,
        "zero-bias Fermi level µ0 of the left lead",
    ),
    key(
        "leads.left.temperature_k",
        Float,
        "K",
        Required,
        "temperature of the left lead",
    ),
    key(
        "leads.left.band_edge_ev",
        Float,
        "eV",
        Text("the end cell's"),
        "chain/strip: band edge of an energy-selective left lead",
    ),
    key(
        "leads.left.effective_mass",
        Float,
        "m0",
        Text("the device's"),
        "chain/strip: effective mass of an energy-selective left lead",
    ),
    key(
        "leads.left.wide_band_ev",
        Float,
        "eV",
        Text("none (periodic lead)"),
        "Γ of a wide-band left lead (Σ = −iΓ/2 on each orbital of the end cell)",
    ),
    key(
        "leads.left.wide_band_orbitals_ev",
        FloatList,
        "eV",
        Text("none"),
        "blocks: wide-band left lead with one Γ per orbital of the end cell (Σ = −iΓ_o/2 on orbital o); with device.spin = \"explicit\" one value per spatial orbital (both spins) or per spin-orbital (up orbitals first)",
    ),
    key(
        "leads.left.wide_band_matrix_ev",
        ValueType::FloatRows,
        "eV",
        Text("none"),
        "blocks: wide-band left lead with a full real symmetric, positive semi-definite Γ matrix (rows of the end cell's orbitals; Σ = −iΓ/2)",
    ),
    key(
        "leads.left.wide_band_file",
        ValueType::Text,
        "eV",
        Text("none"),
        "blocks: wide-band left lead with a Hermitian, positive semi-definite Γ matrix from a file (one block; same formats as `device.onsite_file`)",
    ),
    key(
        "leads.left.onsite_file",
        ValueType::Text,
        "eV",
        Text("none (the end cell continued)"),
        "blocks: the left lead's own Hermitian cell block (one block, as many orbitals as a device cell; same formats as `device.onsite_file`); needs `coupling_file`",
    ),
    key(
        "leads.left.coupling_file",
        ValueType::Text,
        "eV",
        Text("none (the end cell continued)"),
        "blocks: the left lead's own coupling H_n,n+1 between its cells along +x (one block)",
    ),
    key(
        "leads.left.join_file",
        ValueType::Text,
        "eV",
        Text("the lead's `coupling_file`"),
        "blocks: the block joining the left lead and the device along +x (H from the lead's last cell to the device's first)",
    ),
    key(
        "leads.right.fermi_level_ev",
        Float,
        "eV",
        Required,
        "zero-bias Fermi level µ0 of the right lead",
    ),
    key(
        "leads.right.temperature_k",
        Float,
        "K",
        Required,
        "temperature of the right lead",
    ),
    key(
        "leads.right.band_edge_ev",
        Float,
        "eV",
        Text("the end cell's"),
        "chain/strip: band edge of an energy-selective right lead",
    ),
    key(
        "leads.right.effective_mass",
        Float,
        "m0",
        Text("the device's"),
        "chain/strip: effective mass of an energy-selective right lead",
    ),
    key(
        "leads.right.wide_band_ev",
        Float,
        "eV",
        Text("none (periodic lead)"),
        "Γ of a wide-band right lead",
    ),
    key(
        "leads.right.wide_band_orbitals_ev",
        FloatList,
        "eV",
        Text("none"),
        "blocks: wide-band right lead with one Γ per orbital of the end cell (Σ = −iΓ_o/2 on orbital o); with device.spin = \"explicit\" one value per spatial orbital (both spins) or per spin-orbital (up orbitals first)",
    ),
    key(
        "leads.right.wide_band_matrix_ev",
        ValueType::FloatRows,
        "eV",
        Text("none"),
        "blocks: wide-band right lead with a full real symmetric, positive semi-definite Γ matrix (rows of the end cell's orbitals; Σ = −iΓ/2)",
    ),
    key(
        "leads.right.wide_band_file",
        ValueType::Text,
        "eV",
        Text("none"),
        "blocks: wide-band right lead with a Hermitian, positive semi-definite Γ matrix from a file (one block; same formats as `device.onsite_file`)",
    ),
    key(
        "leads.right.onsite_file",
        ValueType::Text,
        "eV",
        Text("none (the end cell continued)"),
        "blocks: the right lead's own Hermitian cell block (one block, as many orbitals as a device cell; same formats as `device.onsite_file`); needs `coupling_file`",
    ),
    key(
        "leads.right.coupling_file",
        ValueType::Text,
        "eV",
        Text("none (the end cell continued)"),
        "blocks: the right lead's own coupling H_n,n+1 between its cells along +x (one block)",
    ),
    key(
        "leads.right.join_file",
        ValueType::Text,
        "eV",
        Text("the lead's `coupling_file`"),
        "blocks: the block joining the right lead and the device along +x (H from the device's last cell to the lead's first)",
    ),
    key(
        "bias.voltage_v",
        Float,
        "V",
        Number(zero),
        "applied voltage V: µL = µL0 − V/2, µR = µR0 + V/2",
    ),
    key(
        "bias.drop",
        Drop,
        "",
        Text("`\"leads\"`"),
        "where the bias drops: at the leads, or linearly over a region",
    ),
    key(
        "bias.drop.linear.from_nm",
        Float,
        "nm",
        Required,
        "start of a linear drop",
    ),
    key(
        "bias.drop.linear.to_nm",
        Float,
        "nm",
        Required,
        "end of a linear drop",
    ),
    key(
        "phonon.#.energy_ev",
        Float,
        "eV",
        Required,
        "Einstein mode energy ħω (0 < ħω ≤ 0.5 eV), snapped to the grid",
    ),
    key(
        "phonon.#.coupling_ev2",
        Float,
        "eV²",
        Text("required unless coupling_per_orbital_ev2 is given"),
        "electron-phonon coupling D, the same on every orbital",
    ),
    key(
        "phonon.#.coupling_per_orbital_ev2",
        FloatList,
        "eV²",
        Text("none"),
        "one coupling D per orbital of a cell (b values ≥ 0), in place of coupling_ev2",
    ),
    key(
        "phonon.#.coupling_matrices_file",
        ValueType::Text,
        "eV",
        Text("none"),
        "blocks file (.npy or .csv, shape (K, b, b)) of K Hermitian coupling matrices M, \
         each an independent source adding M G M in every cell of the region (interband, \
         intervalley, spin-flip); in place of coupling_ev2",
    ),
    key(
        "phonon.#.coupling_matrices_ev",
        ValueType::Matrices,
        "eV",
        Text("none"),
        "the coupling matrices written in the case: a list of K Hermitian b × b matrices, \
         each a list of rows, an entry a number or `[re, im]`; the same as \
         coupling_matrices_file, in place of it or of coupling_ev2",
    ),
    key(
        "phonon.#.from_nm",
        Float,
        "nm",
        Text("0"),
        "start of the coupled region",
    ),
    key(
        "phonon.#.to_nm",
        Float,
        "nm",
        Text("the device length"),
        "end of the coupled region",
    ),
    key(
        "phonon.#.bath_temperature_k",
        Float,
        "K",
        Text("the mean lead temperature"),
        "temperature of the phonon bath",
    ),
    key(
        "dephasing.strength_ev2",
        Float,
        "eV²",
        Text("required unless strength_per_orbital_ev2 is given"),
        "elastic dephasing strength, the same on every orbital",
    ),
    key(
        "dephasing.strength_per_orbital_ev2",
        FloatList,
        "eV²",
        Text("none"),
        "one dephasing strength per orbital of a cell (b values ≥ 0), in place of strength_ev2",
    ),
    key(
        "dephasing.coupling_matrices_file",
        ValueType::Text,
        "eV",
        Text("none"),
        "blocks file (.npy or .csv, shape (K, b, b)) of K Hermitian coupling matrices M, \
         each adding M G M in every cell of the region; in place of strength_ev2",
    ),
    key(
        "dephasing.coupling_matrices_ev",
        ValueType::Matrices,
        "eV",
        Text("none"),
        "the coupling matrices written in the case: a list of K Hermitian b × b matrices, \
         each a list of rows, an entry a number or `[re, im]`; the same as \
         coupling_matrices_file, in place of it or of strength_ev2",
    ),
    key(
        "dephasing.from_nm",
        Float,
        "nm",
        Text("0"),
        "start of the dephasing region",
    ),
    key(
        "dephasing.to_nm",
        Float,
        "nm",
        Text("the device length"),
        "end of the dephasing region",
    ),
    key(
        "grid.step_ev",
        Float,
        "eV",
        Text("kB·T_min/10, made to fit the phonon energies"),
        "energy step; above kB·T_min an error, above kB·T_min/4 a warning",
    ),
    key(
        "grid.min_ev",
        Float,
        "eV",
        Text("half a step above the lowest band edge"),
        "lower end of the energy window",
    ),
    key(
        "grid.max_ev",
        Float,
        "eV",
        Text("max(µL, µR) + 20 kB·T_max + the largest ħω"),
        "upper end of the energy window",
    ),
    key(
        "grid.allow_coarse_phonon_snap",
        Bool,
        "",
        Text("`false`"),
        "`true` accepts a phonon energy moved by more than 5 % when snapped to the grid",
    ),
    key(
        "solver.tolerance",
        Float,
        "",
        Number(tolerance_default),
        "relative tolerance of the Born loop, in (0, 1)",
    ),
    key(
        "solver.max_iterations",
        Int,
        "",
        Number(iterations_default),
        "iteration limit of the Born loop",
    ),
    key(
        "solver.mixing",
        ValueType::Choice(choice_names::<MixingKind>),
        "",
        Word(mixing_default),
        "mixing scheme",
    ),
    key(
        "solver.mixing_factor",
        Float,
        "",
        Number(factor_default),
        "linear mixing factor, in (0, 1]",
    ),
    key(
        "solver.anderson_depth",
        Int,
        "",
        Number(depth_default),
        "Anderson history depth, 1 to 50",
    ),
    key(
        "solver.anderson_damping",
        Float,
        "",
        Number(damping_default),
        "Anderson damping, in (0, 1]",
    ),
    key(
        "solver.anderson_history",
        ValueType::Choice(choice_names::<MixerHistory>),
        "",
        Word(history_default),
        "storage of the Anderson history: \"full\" (f64) or \"compact\" (f32, half the memory; the fixed point is the same)",
    ),
    key(
        "solver.hermitian_part",
        ValueType::Choice(choice_names::<HermitianPart>),
        "",
        Word(hermitian_default),
        "whether the Hermitian part of the phonon self-energy is kept",
    ),
    key(
        "solver.energy_order",
        ValueType::Choice(choice_names::<EnergyOrder>),
        "",
        Word(order_default),
        "order of the energies within a Born iteration",
    ),
    key(
        "solver.coarse_start",
        ValueType::Choice(choice_names::<CoarseStart>),
        "",
        Word(coarse_default),
        "solve coarser energy grids (every k-th energy) first and start the full grid from their Σ0: \"auto\" (on from 4·10⁶ orbital-site energies with phonons), \"on\" or \"off\"; the fixed point is the same",
    ),
    key(
        "solver.current_floor_a",
        Float,
        "A",
        Number(floor_default),
        "absolute current floor of the convergence test",
    ),
    key(
        "solver.decimation_eta_ev",
        Float,
        "eV",
        Number(eta_default),
        "imaginary part added to the energy in the lead decimation, in (0, 0.1]",
    ),
    key(
        "solver.decimation_tolerance_ev",
        Float,
        "eV",
        Number(decimation_tolerance_default),
        "stopping tolerance of the lead decimation, in (0, 1e-3]",
    ),
    key(
        "response.split",
        ValueType::Choice(choice_names::<ResponseSplit>),
        "",
        Word(split_default),
        "how linear response splits the perturbation between the contacts",
    ),
    key(
        "thermal.phonon_conductance_w_per_k",
        Float,
        "W/K",
        Text("computed from `[lattice]` when given, else 0 (noted)"),
        "lattice thermal conductance κ_ph for ZT; a given value overrides the one computed from `[lattice]`",
    ),
    key(
        "profile.electron_temperature",
        ValueType::Choice(choice_names::<ProfileMode>),
        "",
        Word(profile_default),
        "`\"fit\"` also fits a local electron temperature per cell from the energy density",
    ),
    key(
        "lattice.mass_u",
        Float,
        "u",
        Text(
            "required for a chain or strip; for blocks, one of `mass_u`, `masses_u`, `masses_file`",
        ),
        "mass of every lattice site (atomic mass units)",
    ),
    key(
        "lattice.spring_n_per_m",
        Float,
        "N/m",
        Text("required for a chain or strip (blocks: refused, the force files hold the springs)"),
        "spring of every bond along x",
    ),
    key(
        "lattice.transverse_spring_n_per_m",
        Float,
        "N/m",
        Text("`lattice.spring_n_per_m`"),
        "spring between neighbouring sites across a strip (strip only)",
    ),
    key(
        "lattice.damping_per_ps",
        Float,
        "1/ps",
        Text("0 (no damping)"),
        "damping γ of every lattice site; γ > 0 makes the site a floating phonon probe, so `solve` heats the lattice and κ_ph includes the probes; every site a phonon mode couples to must then be damped",
    ),
    key(
        "lattice.self_heating_tolerance_k",
        Float,
        "K",
        Number(selfheat_tolerance_default),
        "the joint electron–lattice loop of a damped lattice stops when no site's lattice temperature moves by more than this; > 0 and ≤ 100",
    ),
    key(
        "lattice.self_heating_max_iterations",
        Int,
        "",
        Number(selfheat_iterations_default),
        "outer iteration limit of the joint loop (each one a Born solve), 1 to 10000; reaching it writes results flagged as not converged (exit 2)",
    ),
    key(
        "lattice.self_heating_mixing",
        Float,
        "",
        Number(selfheat_mixing_default),
        "mixing factor β of the lattice temperatures in the joint loop, in (0, 1]; smaller damps a strong feedback",
    ),
    key(
        "lattice.self_heating_history",
        Int,
        "",
        Number(selfheat_history_default),
        "Anderson history depth of the joint loop, 0 to 20 (0: linear mixing)",
    ),
    key(
        "lattice.masses_u",
        FloatList,
        "u",
        Text("blocks only; one of `mass_u`, `masses_u`, `masses_file`"),
        "one mass per orbital site of a cell, the same in every cell (device.kind = \"blocks\")",
    ),
    key(
        "lattice.masses_file",
        ValueType::Text,
        "",
        Text("blocks only; one of `mass_u`, `masses_u`, `masses_file`"),
        "`.npy` of float64 masses (u), shape (b) for one cell or (N, b) for every cell (device.kind = \"blocks\")",
    ),
    key(
        "lattice.force_onsite_file",
        ValueType::Text,
        "N/m",
        Text("required for blocks"),
        "real symmetric on-site force-constant blocks K_ii, the springs of every bond of a site (lead bonds too) on the diagonal; same formats as `device.onsite_file` (csv values in N/m, im = 0), one block per cell or a single block",
    ),
    key(
        "lattice.force_coupling_file",
        ValueType::Text,
        "N/m",
        Text("required for blocks"),
        "force-constant blocks K_i,i+1 from a cell to the next; N − 1 blocks or a single one; the phonon leads continue the end blocks",
    ),
    key(
        "lattice.region.#.from_nm",
        Float,
        "nm",
        Required,
        "lattice region start; selects cells with from ≤ x < to, like [[device.region]]",
    ),
    key(
        "lattice.region.#.to_nm",
        Float,
        "nm",
        Required,
        "lattice region end (exclusive)",
    ),
    key(
        "lattice.region.#.mass_u",
        Float,
        "u",
        Text("uniform value"),
        "mass of the region's sites; replaces the uniform value (a later region wins)",
    ),
    key(
        "lattice.region.#.spring_n_per_m",
        Float,
        "N/m",
        Text("uniform value"),
        "spring of the bonds (i, i+1) of the region's sites i; replaces the uniform value (a later region wins)",
    ),
    key(
        "lattice.region.#.damping_per_ps",
        Float,
        "1/ps",
        Text("uniform value"),
        "damping γ of the region's sites; replaces the uniform value (a later region wins)",
    ),
    key(
        "lattice.left.mass_u",
        Float,
        "u",
        Text("mass of the first site"),
        "mass of the left phonon lead's sites",
    ),
    key(
        "lattice.left.spring_n_per_m",
        Float,
        "N/m",
        Text("spring of the first site"),
        "spring of the left phonon lead, and of the bond joining it to the device",
    ),
    key(
        "lattice.right.mass_u",
        Float,
        "u",
        Text("mass of the last site"),
        "mass of the right phonon lead's sites",
    ),
    key(
        "lattice.right.spring_n_per_m",
        Float,
        "N/m",
        Text("spring of the last site"),
        "spring of the right phonon lead, and of the bond joining it to the device",
    ),
    key(
        "electrostatics.permittivity",
        Float,
        "",
        Required,
        "relative permittivity ε_r of every cell; required when [electrostatics] is given",
    ),
    key(
        "electrostatics.area_nm2",
        Float,
        "nm²",
        Required,
        "cross-section A of the wire or slab; turns doping per cm³ into donors per cell",
    ),
    key(
        "electrostatics.donors_cm3",
        Float,
        "cm⁻³",
        Number(zero),
        "donor density N_D of every cell",
    ),
    key(
        "electrostatics.acceptors_cm3",
        Float,
        "cm⁻³",
        Number(zero),
        "acceptor density N_A of every cell (a fixed negative charge: the model has no holes)",
    ),
    key(
        "electrostatics.left_potential_v",
        Float,
        "V",
        Text("none: a charge-neutral end (zero field)"),
        "electrostatic potential φ held at the first cell",
    ),
    key(
        "electrostatics.right_potential_v",
        Float,
        "V",
        Text("none: a charge-neutral end (zero field)"),
        "electrostatic potential φ held at the last cell",
    ),
    key(
        "electrostatics.gate_potential_v",
        Float,
        "V",
        Text("no gate"),
        "gate potential φ_gate; the gate adds the screening term ε(φ − φ_gate)/λ²; needs gate_length_nm",
    ),
    key(
        "electrostatics.gate_length_nm",
        Float,
        "nm",
        Text("no gate"),
        "gate screening length λ; needs gate_potential_v",
    ),
    key(
        "electrostatics.tolerance_ev",
        Float,
        "eV",
        Number(es_tolerance),
        "outer tolerance: largest change of the electrostatic potential energy accepted as converged",
    ),
    key(
        "electrostatics.max_iterations",
        Int,
        "",
        Number(es_max_iterations),
        "limit of outer iterations (transport solve, then Newton on the Poisson equation); reaching it is a flagged, non-converged result",
    ),
    key(
        "electrostatics.coupling",
        ValueType::Choice(choice_names::<Coupling>),
        "",
        Word(es_coupling_default),
        "how the potential and the Born loop iterate together: joint (one Born pass and one Newton solve per step, Σ0 and the potential in one Anderson vector) or nested (the Born loop at each potential, then Newton); both reach the same answer",
    ),
    key(
        "electrostatics.ends",
        ValueType::Choice(choice_names::<Ends>),
        "",
        Word(es_ends_default),
        "how an end without a given potential is held: zero-field (zero field at the end; its potential floats with the charge) or ohmic (the end cell held where it, continued as its lead, is a charge-neutral bulk at the lead's Fermi level and temperature; needs net donors there)",
    ),
    key(
        "electrostatics.region.#.from_nm",
        Float,
        "nm",
        Required,
        "electrostatics region start; selects cells with from ≤ x < to, like [[device.region]]",
    ),
    key(
        "electrostatics.region.#.to_nm",
        Float,
        "nm",
        Required,
        "electrostatics region end (exclusive)",
    ),
    key(
        "electrostatics.region.#.permittivity",
        Float,
        "",
        Text("uniform value"),
        "relative permittivity of the region's cells; replaces the uniform value (a later region wins)",
    ),
    key(
        "electrostatics.region.#.donors_cm3",
        Float,
        "cm⁻³",
        Text("uniform value"),
        "donor density of the region's cells; replaces the uniform value (a later region wins)",
    ),
    key(
        "electrostatics.region.#.acceptors_cm3",
        Float,
        "cm⁻³",
        Text("uniform value"),
        "acceptor density of the region's cells; replaces the uniform value (a later region wins)",
    ),
    key(
        "channel.#.name",
        ValueType::Text,
        "",
        Required,
        "name of a channel: a group of orbitals of a cell whose results are reported apart",
    ),
    key(
        "channel.#.orbitals",
        ValueType::Indices,
        "",
        Required,
        "orbitals of a cell the channel holds (indices from 0); channels must not overlap, orbitals left out form the channel \"other\"",
    ),
    key(
        "contact.#.name",
        ValueType::Text,
        "",
        Required,
        "name of a contact attached along the channel (a wide-band reservoir on the orbital sites of some cells), unique",
    ),
    key(
        "contact.#.cells",
        ValueType::Indices,
        "",
        Text("or first_cell + cell_count"),
        "cells the contact touches (indices from 0, ascending)",
    ),
    key(
        "contact.#.first_cell",
        Int,
        "",
        Text("or cells"),
        "first cell the contact touches (sweep it to move a probe along the channel)",
    ),
    key(
        "contact.#.cell_count",
        Int,
        "",
        Number(|| 1.0),
        "number of consecutive cells from first_cell",
    ),
    key(
        "contact.#.gamma_ev",
        Float,
        "eV",
        Required,
        "coupling γ: broadening Γ = γ on every orbital site of its cells (Σ^r = −iΓ/2, Σ^in = Γ f)",
    ),
    key(
        "contact.#.mode",
        ValueType::Choice(choice_names::<crate::model::ContactMode>),
        "",
        Word(|| "fixed"),
        "\"fixed\": µ and T given; \"voltage\": a voltage probe (T given, µ solved for zero current); \"temperature\": a temperature probe (µ and T solved for zero particle and heat current)",
    ),
    key(
        "contact.#.fermi_level_ev",
        Float,
        "eV",
        Text("required for a fixed contact; refused for probes"),
        "Fermi level of a fixed contact",
    ),
    key(
        "contact.#.temperature_k",
        Float,
        "K",
        Text("mean of the leads' temperatures; refused for a temperature probe"),
        "temperature of a fixed contact or voltage probe",
    ),
    key(
        "contact.#.polarisation",
        Float,
        "",
        Text("unpolarised"),
        "spin polarisation strength P, 0 to 1, with device.spin = \"explicit\" only: Γ = γ (1 + P σ·n̂) on each (up, down) pair",
    ),
    key(
        "contact.#.polarisation_direction",
        ValueType::FloatList,
        "",
        Text("[0, 0, 1]"),
        "direction n̂ = [x, y, z] of the majority spin (normalised; z is the spin axis of the orbitals, \"up\" = +z)",
    ),
];

/// Tables of the file and what each holds (for messages about a value of
/// the wrong type where a table belongs).
pub(crate) const SECTIONS: &[(&str, &str)] = &[
    ("", "a case table"),
    ("device", "a table of device settings"),
    (
        "device.region.#",
        "a table with from_nm, to_nm and offset_ev or start_ev + end_ev",
    ),
    ("leads", "a table with [leads.left] and [leads.right]"),
    ("leads.left", "a table of lead settings"),
    ("leads.right", "a table of lead settings"),
    ("bias", "a table of bias settings"),
    ("phonon.#", "a table of phonon settings"),
    ("dephasing", "a table of dephasing settings"),
    ("grid", "a table of energy grid settings"),
    ("solver", "a table of solver settings"),
    ("response", "a table of response settings"),
    ("thermal", "a table of thermal settings"),
    ("profile", "a table of profile settings"),
    ("lattice", "a table of lattice settings"),
    (
        "lattice.region.#",
        "a table with from_nm, to_nm and mass_u and/or spring_n_per_m",
    ),
    ("lattice.left", "a table of phonon lead settings"),
    ("lattice.right", "a table of phonon lead settings"),
    ("electrostatics", "a table of electrostatics settings"),
    (
        "electrostatics.region.#",
        "a table with from_nm, to_nm and donors_cm3, acceptors_cm3 and/or permittivity",
    ),
    ("channel.#", "a table with a name and the orbitals it holds"),
    (
        "contact.#",
        "a table with a name, cells, gamma_ev and a mode",
    ),
];

/// What sits at a place of the file.
#[derive(Clone, Copy, Debug, PartialEq)]
pub(crate) enum Node {
    /// A value of the key with this index in [`KEYS`].
    Leaf(usize),
    /// A table whose keys start with the pattern.
    Table,
    /// A list of tables, each entry's keys under `pattern.#`.
    Array,
}

/// The keys allowed directly under the table at `pattern` (a dotted key
/// pattern, "" for the top level), in table order, with what each holds.
pub(crate) fn children(pattern: &str) -> Vec<(&'static str, Node)> {
    let mut out: Vec<(&'static str, Node)> = Vec::new();
    for info in KEYS {
        let rest = if pattern.is_empty() {
            Some(info.name)
        } else {
            info.name
                .strip_prefix(pattern)
                .and_then(|r| r.strip_prefix('.'))
        };
        let Some(rest) = rest else { continue };
        let (first, tail) = match rest.split_once('.') {
            Some((f, t)) => (f, Some(t)),
            None => (rest, None),
        };
        if out.iter().any(|(k, _)| *k == first) {
            continue;
        }
        let node = match tail {
            None => Node::Leaf(KEYS.iter().position(|k| k.name == info.name).unwrap_or(0)),
            Some(t) if t.starts_with("#.") => Node::Array,
            Some(_) => Node::Table,
        };
        out.push((first, node));
    }
    out
}

/// What a table at `pattern` holds, for messages.
pub(crate) fn section_description(pattern: &str) -> &'static str {
    SECTIONS
        .iter()
        .find(|(p, _)| *p == pattern)
        .map_or("a table", |(_, d)| d)
}

/// The key reference as Markdown: `docs/case-keys.md` is this text.
pub fn keys_markdown() -> String {
    let mut s = String::from(
        "# Case file keys\n\n\
         Generated from the key table in `src/case/keys.rs`; do not edit by hand. \
         Regenerate with `QHEAT_REGEN=1 cargo test --test case_keys_doc`.\n\n\
         `#` stands for the index of an entry of a list of tables \
         (`[[device.region]]`, `[[phonon]]`, `[[lattice.region]]`, `[[channel]]`, `[[contact]]`), counted from 0. Numeric keys \
         (number or integer) are the ones `qheat sweep --vary` and \
         `qheat screen --vary` accept.\n\n\
         | key | type | unit | default | meaning |\n|---|---|---|---|---|\n",
    );
    for k in KEYS {
        s.push_str(&format!(
            "| `{}` | {} | {} | {} | {} |\n",
            k.name,
            k.ty.describe(),
            k.unit,
            k.default.describe(),
            k.meaning.replace('|', "\\|")
        ));
    }
    s
}

#[cfg(test)]
mod tests {
    use super::super::raw::{
        RawBias, RawCase, RawChannel, RawContact, RawDephasing, RawDevice, RawElectrostatics,
        RawElectrostaticsRegion, RawGrid, RawLattice, RawLatticeLead, RawLatticeRegion, RawLead,
        RawLeads, RawPhonon, RawProfile, RawRegion, RawResponse, RawSolver, RawThermal,
    };
    use super::*;
    use serde::Deserialize;

    /// A deserializer that only records the field names a struct asks for.
    struct Fields(std::cell::RefCell<Vec<&'static str>>);

    #[derive(Debug)]
    struct Stop;
    impl std::fmt::Display for Stop {
        fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
            f.write_str("stop")
        }
    }
    impl std::error::Error for Stop {}
    impl serde::de::Error for Stop {
        fn custom<T: std::fmt::Display>(_: T) -> Self {
            Stop
        }
    }

    impl<'de> serde::Deserializer<'de> for &Fields {
        type Error = Stop;
        fn deserialize_any<V: serde::de::Visitor<'de>>(self, _: V) -> Result<V::Value, Stop> {
            Err(Stop)
        }
        fn deserialize_struct<V: serde::de::Visitor<'de>>(
            self,
            _: &'static str,
            fields: &'static [&'static str],
            _: V,
        ) -> Result<V::Value, Stop> {
            self.0.borrow_mut().extend_from_slice(fields);
            Err(Stop)
        }
        serde::forward_to_deserialize_any! {
            bool i8 i16 i32 i64 i128 u8 u16 u32 u64 u128 f32 f64 char str string
            bytes byte_buf option unit unit_struct newtype_struct seq tuple
            tuple_struct map enum identifier ignored_any
        }
    }

    fn fields_of<T: for<'de> Deserialize<'de>>() -> Vec<&'static str> {
        let f = Fields(std::cell::RefCell::new(Vec::new()));
        let _ = T::deserialize(&f);
        f.0.into_inner()
    }

    /// Every field of every raw struct is a key of the table (or a table
    /// of keys), in the same order: the table cannot drift from what the
    /// reader accepts.
    #[test]
    fn every_raw_field_is_in_the_key_table() {
        let structs: Vec<(&str, Vec<&'static str>)> = vec![
            ("", fields_of::<RawCase>()),
            ("device", fields_of::<RawDevice>()),
            ("device.region.#", fields_of::<RawRegion>()),
            ("leads", fields_of::<RawLeads>()),
            ("leads.left", fields_of::<RawLead>()),
            ("leads.right", fields_of::<RawLead>()),
            ("bias", fields_of::<RawBias>()),
            ("phonon.#", fields_of::<RawPhonon>()),
            ("dephasing", fields_of::<RawDephasing>()),
            ("grid", fields_of::<RawGrid>()),
            ("solver", fields_of::<RawSolver>()),
            ("response", fields_of::<RawResponse>()),
            ("thermal", fields_of::<RawThermal>()),
            ("profile", fields_of::<RawProfile>()),
            ("lattice", fields_of::<RawLattice>()),
            ("lattice.region.#", fields_of::<RawLatticeRegion>()),
            ("lattice.left", fields_of::<RawLatticeLead>()),
            ("lattice.right", fields_of::<RawLatticeLead>()),
            ("electrostatics", fields_of::<RawElectrostatics>()),
            (
                "electrostatics.region.#",
                fields_of::<RawElectrostaticsRegion>(),
            ),
            ("channel.#", fields_of::<RawChannel>()),
            ("contact.#", fields_of::<RawContact>()),
        ];
        for (pattern, fields) in &structs {
            assert!(!fields.is_empty(), "no fields recorded for `{pattern}`");
            let table: Vec<&str> = children(pattern).iter().map(|(n, _)| *n).collect();
            assert_eq!(
                &table, fields,
                "keys under `{pattern}`: the key table against the raw struct"
            );
        }
        // and every table of the key table is one of these structs
        for info in KEYS {
            let parent = info.name.rsplit_once('.').map_or("", |(p, _)| p);
            let covered =
                structs.iter().any(|(p, _)| *p == parent) || parent.starts_with("bias.drop");
            assert!(covered, "`{}` sits in no raw struct", info.name);
        }
    }
}
