//! A validated case -> the problem the solver runs: device, contacts,
//! scattering and the energy grid (with phonon energies snapped to it).

use super::check::MAX_ENERGY_EV;
use super::error::{CaseError, CaseErrorKind, ErrorContext};
use super::sections::device::DeviceKind;
use super::sections::lead_blocks::OwnBlocks;
use super::sections::leads::LeadModel;
use super::sections::scattering::{CouplingSpec, PhononSpec};
use super::sections::settings::{HermitianPart, ProfileMode, ResponseSplit};
use super::spec::CaseSpec;
use crate::C64;
use crate::device::{self, BiasDrop, Device, DeviceError};
use crate::grid::EnergyGrid;
use crate::leads::{Lead, Side};
use crate::model::{Contact, Problem};
use crate::scattering::{CouplingMatrices, PhononMode, Scattering};
use crate::scba::{EnergyOrder, MixerHistory, Mixing, ScbaParams};
use crate::units::thermal_energy_ev;
use faer::Mat;

/// Largest energy grid accepted (points): a guard against a step that is
/// tiny next to the window.
const MAX_ENERGIES: usize = 2_000_000;

/// Largest relative change of a phonon energy by snapping it to the grid
/// that is accepted without `grid.allow_coarse_phonon_snap = true`.
pub(crate) const MAX_SNAP: f64 = 0.05;

/// A case resolved into the numbers the solver needs.
#[derive(Clone, Debug)]
pub struct Resolved {
    /// The problem: device, contacts, scattering, grid. The bias is already
    /// applied to the Fermi levels and to the potential.
    pub problem: Problem,
    /// Settings of the self-consistent Born loop.
    pub scba: ScbaParams,
    /// Applied voltage V = V_left − V_right (V).
    pub voltage_v: f64,
    /// Zero-bias Fermi levels (µL0, µR0) from the file (eV).
    pub zero_bias_fermi_levels_ev: (f64, f64),
    /// Phonon (lattice) thermal conductance κ_ph given in the file (W/K);
    /// 0 when the file does not give one. With a `[lattice]` and no given
    /// value, ZT uses [`Resolved::phonon_conductance_at`] instead.
    pub phonon_conductance_w_per_k: f64,
    /// True when the file gives `thermal.phonon_conductance_w_per_k` (it
    /// then wins over a lattice).
    pub phonon_conductance_given: bool,
    /// The device's lattice (`[lattice]`), when the case describes one.
    pub lattice: Option<crate::lattice::Lattice>,
    /// Settings of the joint electron–lattice loop (`lattice.self_heating_*`;
    /// the defaults without a `[lattice]`).
    pub self_heating: crate::selfheat::SelfHeatParams,
    /// Its phonon spectrum, computed on first use
    /// ([`Resolved::phonon_spectrum`]).
    pub phonon_spectrum_cache: super::phonons::SpectrumCache,
    /// How linear response splits the perturbation between the contacts.
    pub response_split: ResponseSplit,
    /// Where the bias drops (with `electrostatics` the drop inside the
    /// device is computed instead, and this says what the file asked for).
    pub bias_drop: BiasDrop,
    /// The self-consistent electrostatics of `[electrostatics]`, when the
    /// case has one: `problem` then carries the band offsets without any
    /// imposed bias drop, and the solve computes the potential.
    pub electrostatics: Option<crate::electrostatics::Electrostatics>,
    /// Things that are allowed but probably not meant, or that limit accuracy.
    pub warnings: Vec<String>,
    /// Defaults that matter for the results (e.g. κ_ph = 0).
    pub notes: Vec<String>,
    /// Device kind: "chain", "strip" or "blocks".
    pub device_kind: &'static str,
    /// Hopping t = ħ²/(2 m* a²) of a chain or strip (eV); `None` for blocks.
    pub hopping_ev: Option<f64>,
    /// Fit a local electron temperature per cell as well as the local Fermi
    /// level (`profile.electron_temperature = "fit"`).
    pub fit_electron_temperature: bool,
    /// `grid.allow_coarse_phonon_snap`: phonon energies may move by more
    /// than 5 % when snapped to the grid.
    pub allow_coarse_phonon_snap: bool,
    /// The channels of a cell (`[[channel]]` or explicit spin), `None`
    /// when the case names none: results are then not split by channel.
    pub channels: Option<crate::device::Channels>,
}

/// Largest relative change of a phonon energy that the default step
/// allows when it snaps ħω to whole grid steps.
const DEFAULT_SNAP_FRACTION: f64 = 0.01;

/// The default energy step: the largest step ≤ `largest` that divides
/// the largest phonon energy exactly and puts every other phonon energy
/// within [`DEFAULT_SNAP_FRACTION`] of a whole number of steps. Without
/// phonons it is `largest`. The thermal step alone (kB·T_min/10) would
/// snap ħω by up to half a step, 9 % for a 10 meV phonon at 250 K, and a
/// grid that follows the temperature would move ħω between operating
/// points. Steps ħω_max/n are tried for growing n; n = 50 ħω_max/ħω_min
/// always succeeds (half a step is then 1 % of the smallest energy).
fn default_step(largest: f64, phonon_energies_ev: &[f64]) -> f64 {
    let usable: Vec<f64> = phonon_energies_ev
        .iter()
        .copied()
        .filter(|e| e.is_finite() && *e > 0.0)
        .collect();
    let (Some(max), Some(min)) = (
        usable.iter().copied().reduce(f64::max),
        usable.iter().copied().reduce(f64::min),
    ) else {
        return largest;
    };
    let first = (max / largest).ceil().max(1.0) as u64;
    let last = first.max((50.0 * max / min).ceil() as u64);
    for n in first..=last.min(first + 100_000) {
        let step = max / n as f64;
        let fits = usable.iter().all(|&e| {
            let snapped = (e / step).round().max(1.0) * step;
            (snapped - e).abs() <= DEFAULT_SNAP_FRACTION * e
        });
        if fits {
            return step;
        }
    }
    largest
}

/// Periodic lead blocks (on-site, coupling along +x) for a chain or strip
/// with band edge `edge` and hopping `t`.
fn lattice_lead(kind: &DeviceKind, edge: f64, t: f64) -> Lead {
    match kind {
        DeviceKind::Strip { width, .. } => Lead::Periodic {
            onsite: device::strip_onsite(*width, t, edge),
            hopping: device::strip_coupling(*width, t),
        },
        _ => Lead::Periodic {
            onsite: Mat::from_fn(1, 1, |_, _| C64::new(edge + 2.0 * t, 0.0)),
            hopping: Mat::from_fn(1, 1, |_, _| C64::new(-t, 0.0)),
        },
    }
}

fn identity_times(b: usize, g: f64) -> Mat<C64> {
    Mat::from_fn(b, b, |r, c| C64::new(if r == c { g } else { 0.0 }, 0.0))
}

/// Per-site vector (N·b): `value` on the orbitals of cells with from ≤ x < to.
fn site_vector(dev: &Device, from_nm: f64, to_nm: f64, per_orbital: &[f64]) -> Vec<f64> {
    let b = dev.orbitals;
    let mut v = vec![0.0; dev.cells() * b];
    for (i, &x) in dev.x_nm.iter().enumerate() {
        if x >= from_nm && x < to_nm {
            v[i * b..(i + 1) * b].copy_from_slice(per_orbital);
        }
    }
    v
}

/// The coupling matrices of a mechanism on every cell in [from_nm, to_nm)
/// (none elsewhere); empty without matrices. A .csv file's blocks, whose
/// size is only the largest index it lists, are padded with zeros to b.
fn coupling_cells(
    ctx: &ErrorContext<'_>,
    dev: &Device,
    (from_nm, to_nm): (f64, f64),
    coupling: &CouplingSpec,
) -> Result<CouplingMatrices, CaseError> {
    let CouplingSpec::Matrices {
        matrices,
        from_csv,
        key,
        span,
    } = coupling
    else {
        return Ok(CouplingMatrices::default());
    };
    let b = dev.orbitals;
    let size = matrices.first().map_or(b, |m| m.nrows());
    if size > b || (size < b && !from_csv) {
        return Err(ctx.invalid(
            span.clone(),
            key,
            &format!("{b}×{b} coupling matrices (the device's orbitals per cell)"),
            format!("{size}×{size} matrices (hint: one row and column per orbital of a cell)"),
        ));
    }
    let padded: Vec<faer::Mat<crate::C64>> = matrices
        .iter()
        .map(|m| {
            faer::Mat::from_fn(b, b, |r, c| {
                if r < size && c < size {
                    m[(r, c)]
                } else {
                    crate::C64::new(0.0, 0.0)
                }
            })
        })
        .collect();
    let per_cell = dev
        .x_nm
        .iter()
        .map(|&x| {
            if x >= from_nm && x < to_nm {
                padded.clone()
            } else {
                Vec::new()
            }
        })
        .collect();
    Ok(CouplingMatrices { per_cell })
}

/// The strength of a scattering mechanism on every orbital site of the
/// cells in [from_nm, to_nm): a uniform value on each orbital, or a list
/// that must hold one value per orbital of a cell.
fn coupling_sites(
    ctx: &ErrorContext<'_>,
    dev: &Device,
    (from_nm, to_nm): (f64, f64),
    coupling: &CouplingSpec,
) -> Result<Vec<f64>, CaseError> {
    let b = dev.orbitals;
    match coupling {
        CouplingSpec::Uniform(d) => Ok(site_vector(dev, from_nm, to_nm, &vec![*d; b])),
        CouplingSpec::Matrices { .. } => Ok(vec![0.0; dev.cells() * b]),
        CouplingSpec::PerOrbital { values, key, span } if values.len() != b => Err(ctx.invalid(
            span.clone(),
            key,
            &format!("one value per orbital of a cell: {b} (the device's orbitals per cell)"),
            format!(
                "{} values (hint: list a strength for each of the {b} orbitals, 0 where \
                 the orbital does not couple)",
                values.len()
            ),
        )),
        CouplingSpec::PerOrbital { values, .. } => Ok(site_vector(dev, from_nm, to_nm, values)),
    }
}

fn device_error(ctx: &ErrorContext<'_>, spec: &CaseSpec, e: DeviceError) -> CaseError {
    let (key, path) = match (&spec.device.kind, &e) {
        (
            DeviceKind::Blocks { coupling_path, .. },
            DeviceError::BlockShape {
                what: "coupling", ..
            },
        ) => ("device.coupling_file", coupling_path.display().to_string()),
        (DeviceKind::Blocks { coupling_path, .. }, DeviceError::Invalid(m))
            if m.contains("coupling") =>
        {
            ("device.coupling_file", coupling_path.display().to_string())
        }
        (DeviceKind::Blocks { onsite_path, .. }, _) => {
            ("device.onsite_file", onsite_path.display().to_string())
        }
        _ => ("device", String::new()),
    };
    let expected = match &e {
        DeviceError::NotHermitian { .. } => "Hermitian on-site blocks",
        DeviceError::BlockShape { .. } => "blocks of one common size",
        DeviceError::Invalid(_) => "consistent block counts",
    };
    ctx.error(
        CaseErrorKind::File,
        spec.device.span.clone(),
        Some(key),
        format!("expected {expected}, found in file `{path}`: {e}"),
    )
}

/// The first and last coupling blocks of a blocks device (either may be
/// missing when the coupling file is empty).
type EndCouplings = (Option<Mat<C64>>, Option<Mat<C64>>);

/// The device as built, with what the leads need from it.
struct Built {
    dev: Device,
    /// Hopping t of a chain or strip.
    hopping: Option<f64>,
    /// The first and last coupling blocks of a blocks device.
    lead_couplings: Option<EndCouplings>,
    /// The potential of the bias alone (no regions), per cell.
    bias_only: Vec<f64>,
}

/// Warnings (allowed but probably not meant) and notes (defaults that
/// matter) gathered while resolving.
#[derive(Default)]
struct Remarks {
    warnings: Vec<String>,
    notes: Vec<String>,
}

/// The biased Fermi levels: µL = µL0 − eV/2, µR = µR0 + eV/2 (eV and V are
/// numerically equal per e).
fn biased_levels(spec: &CaseSpec) -> (f64, f64) {
    let v = spec.bias.voltage_v;
    (
        spec.leads.left.fermi_level_ev - 0.5 * v,
        spec.leads.right.fermi_level_ev + 0.5 * v,
    )
}

/// The device Hamiltonian with the potential of the regions and the bias.
fn build_device(
    spec: &CaseSpec,
    ctx: &ErrorContext<'_>,
    (mu_l, mu_r): (f64, f64),
) -> Result<Built, CaseError> {
    let d = &spec.device;
    let x = device::cell_positions(d.cells, d.spacing_nm);
    // With [electrostatics] the drop inside the device is computed from
    // the charge: the imposed one is left out.
    let drop = if spec.electrostatics.is_some() {
        &BiasDrop::Leads
    } else {
        &spec.bias.drop
    };
    let potential = device::potential_profile(&x, &spec.regions.regions, drop, mu_l, mu_r);
    let bias_only = device::potential_profile(&x, &[], drop, mu_l, mu_r);
    let (mut dev, hopping, lead_couplings) = match &d.kind {
        DeviceKind::Chain {
            effective_mass,
            band_edge_ev,
        } => {
            let t = crate::units::hopping_ev(*effective_mass, d.spacing_nm);
            let dev = device::chain(d.spacing_nm, t, *band_edge_ev, potential);
            (dev, Some(t), None)
        }
        DeviceKind::Strip {
            effective_mass,
            band_edge_ev,
            width,
        } => {
            let t = crate::units::hopping_ev(*effective_mass, d.spacing_nm);
            let dev = device::strip(*width, d.spacing_nm, t, *band_edge_ev, potential);
            (dev, Some(t), None)
        }
        DeviceKind::Blocks {
            onsite, coupling, ..
        } => {
            let ends = (coupling.first().cloned(), coupling.last().cloned());
            let dev = device::blocks(d.spacing_nm, onsite.clone(), coupling.clone(), potential)
                .map_err(|e| device_error(ctx, spec, e))?;
            (dev, None, Some(ends))
        }
    };
    let lead_couplings = if d.spin_explicit {
        dev = device::channels::spin_doubled(&dev);
        let double = |m: Option<Mat<C64>>| m.map(|m| device::channels::spin_doubled_block(&m));
        lead_couplings.map(|(a, b)| (double(a), double(b)))
    } else {
        lead_couplings
    };
    if !spec.regions.selective.is_empty() {
        let offsets = orbital_offsets(&dev, &spec.regions.selective);
        device::channels::add_orbital_offsets(&mut dev, &offsets);
    }
    Ok(Built {
        dev,
        hopping,
        lead_couplings,
        bias_only,
    })
}

/// The shift of each orbital of each cell by the regions that act on some
/// orbitals only (eV): cells × orbitals.
fn orbital_offsets(
    dev: &Device,
    selective: &[(device::PotentialRegion, Vec<usize>)],
) -> Vec<Vec<f64>> {
    dev.x_nm
        .iter()
        .map(|&x| {
            let mut off = vec![0.0; dev.orbitals];
            for (region, orbitals) in selective {
                let v = region.value_at(x);
                for &o in orbitals {
                    off[o] += v;
                }
            }
            off
        })
        .collect()
}

/// The lead of one side, from its model.
fn make_lead(
    spec: &CaseSpec,
    ctx: &ErrorContext<'_>,
    built: &Built,
    side: Side,
) -> Result<Lead, CaseError> {
    let (ls, name) = match side {
        Side::Left => (&spec.leads.left, "left"),
        Side::Right => (&spec.leads.right, "right"),
    };
    let n = spec.device.cells;
    let end = if side == Side::Left { 0 } else { n - 1 };
    match &ls.model {
        LeadModel::WideBand { gamma_ev } => Ok(Lead::WideBand {
            gamma: identity_times(built.dev.orbitals, *gamma_ev),
        }),
        LeadModel::WideBandMatrix { gamma, .. } => Ok(Lead::WideBand {
            gamma: spin_doubled_if(spec, gamma, built.dev.orbitals),
        }),
        LeadModel::OwnBlocks(own) => Ok(own_lead(spec, own, built.bias_only[end])),
        LeadModel::Continuation => Ok(Lead::Periodic {
            onsite: built.dev.onsite[end].clone(),
            hopping: continuation_hopping(spec, ctx, built, side, name)?,
        }),
        LeadModel::Selective {
            band_edge_ev,
            effective_mass,
        } => {
            let (device_edge, device_mass) = match &spec.device.kind {
                DeviceKind::Chain {
                    effective_mass,
                    band_edge_ev,
                }
                | DeviceKind::Strip {
                    effective_mass,
                    band_edge_ev,
                    ..
                } => (*band_edge_ev, *effective_mass),
                DeviceKind::Blocks { .. } => {
                    return Err(ctx.invalid(
                        spec.device.span.clone(),
                        &format!("leads.{name}.band_edge_ev"),
                        "an energy-selective lead only with kind = \"chain\" or \"strip\"",
                        "kind = \"blocks\"",
                    ));
                }
            };
            // Without its own band edge the lead continues the end cell's
            // band (potential and bias included); with one, only the bias
            // part of the end potential (a linear drop) moves it.
            let edge = match band_edge_ev {
                Some(e) => e + built.bias_only[end],
                None => device_edge + built.dev.potential_ev[end],
            };
            let mass = effective_mass.unwrap_or(device_mass);
            let t = crate::units::hopping_ev(mass, spec.device.spacing_nm);
            let lead = lattice_lead(&spec.device.kind, edge, t);
            match lead {
                // Both spins see the lead's own band (regions that act on
                // some channels do not reach into a lead with its own band).
                Lead::Periodic { onsite, hopping } if spec.device.spin_explicit => {
                    Ok(Lead::Periodic {
                        onsite: device::channels::spin_doubled_block(&onsite),
                        hopping: device::channels::spin_doubled_block(&hopping),
                    })
                }
                lead => Ok(lead),
            }
        }
    }
}

/// A block of a lead beside the built device: doubled into diag(M, M)
/// when the device doubles its cells by spin and `m` is given per
/// spatial orbital (`orbitals` is the built device's count).
fn spin_doubled_if(spec: &CaseSpec, m: &Mat<C64>, orbitals: usize) -> Mat<C64> {
    if spec.device.spin_explicit && m.nrows() != orbitals {
        device::channels::spin_doubled_block(m)
    } else {
        m.clone()
    }
}

/// A periodic lead with blocks of its own. Its band is its own: of the
/// end cell's potential only the bias part (a linear drop) moves it, as
/// for a chain lead with its own band edge. A joining block equal to the
/// lead's coupling (or none) gives the plain periodic lead.
fn own_lead(spec: &CaseSpec, own: &OwnBlocks, bias_ev: f64) -> Lead {
    let double = |m: &Mat<C64>| {
        if spec.device.spin_explicit {
            device::channels::spin_doubled_block(m)
        } else {
            m.clone()
        }
    };
    let mut onsite = double(&own.onsite);
    for o in 0..onsite.nrows() {
        onsite[(o, o)] += C64::new(bias_ev, 0.0);
    }
    let hopping = double(&own.coupling);
    match &own.join {
        Some(join) if join != &own.coupling => Lead::Joined {
            onsite,
            hopping,
            join: double(join),
        },
        _ => Lead::Periodic { onsite, hopping },
    }
}

/// The coupling of a lead that continues the end cell: the end coupling
/// block of the device.
fn continuation_hopping(
    spec: &CaseSpec,
    ctx: &ErrorContext<'_>,
    built: &Built,
    side: Side,
    name: &str,
) -> Result<Mat<C64>, CaseError> {
    let n = spec.device.cells;
    let left = side == Side::Left;
    match &built.lead_couplings {
        None if n > 1 => Ok(built.dev.coupling[if left { 0 } else { n - 2 }].clone()),
        // A one-cell chain or strip: the lattice coupling.
        None => Ok(identity_times(
            built.dev.orbitals,
            -built.hopping.unwrap_or(0.0),
        )),
        Some((first, last)) => match if left { first } else { last } {
            Some(m) => Ok(m.clone()),
            None => Err(ctx.error(
                CaseErrorKind::Invalid,
                spec.device.span.clone(),
                Some(&format!("leads.{name}")),
                "expected a coupling block to continue the end cell into a lead (or wide_band_ev), found none (a one-cell device with an empty coupling file)",
            )),
        },
    }
}

/// The energy step: the file's (no coarser than kB·T_min) or the default.
fn energy_step(
    spec: &CaseSpec,
    ctx: &ErrorContext<'_>,
    kt_min: f64,
    remarks: &mut Remarks,
) -> Result<f64, CaseError> {
    if let Some(s) = &spec.grid.step_ev {
        if s.value > kt_min {
            return Err(ctx.invalid(
                s.span.clone(),
                "grid.step_ev",
                &format!(
                    "a step ≤ kB·T_min = {:.4} meV that resolves the Fermi window",
                    kt_min * 1e3
                ),
                format!("{} meV", s.value * 1e3),
            ));
        }
        if s.value > kt_min / 4.0 {
            remarks.warnings.push(format!(
                "grid.step_ev = {:.4} meV is coarser than kB·T_min/4 = {:.4} meV: Fermi-window integrals lose accuracy",
                s.value * 1e3,
                kt_min * 250.0
            ));
        }
        return Ok(s.value);
    }
    let energies: Vec<f64> = spec.phonons.iter().map(|p| p.energy_ev).collect();
    let step = default_step(kt_min / 10.0, &energies);
    if step < kt_min / 10.0 {
        remarks.notes.push(format!(
            "grid.step_ev not given: {:.4} meV, the largest step ≤ kB·T_min/10 = {:.4} meV \
             on which every phonon energy is a whole number of steps to within {:.0} %",
            step * 1e3,
            kt_min * 100.0,
            DEFAULT_SNAP_FRACTION * 100.0
        ));
    } else {
        remarks.notes.push(format!(
            "grid.step_ev not given: kB·T_min/10 = {:.4} meV",
            kt_min * 100.0
        ));
    }
    Ok(step)
}

/// What the energy window depends on.
struct WindowInput {
    step: f64,
    mu: (f64, f64),
    kt_max: f64,
    /// The largest snapped phonon energy.
    max_phonon: f64,
    /// Lowest band edge in the device.
    lowest_device: f64,
    /// Lowest band edges of the periodic leads.
    lead_lows: Vec<f64>,
    /// Largest wide-band Γ.
    gamma_max: f64,
    /// Lowest band bottom of a charge-neutral doped region at the lower
    /// of the two Fermi levels, with `[electrostatics]`.
    neutral_low: Option<f64>,
}

/// The lower end of the window: the file's, or half a step above the
/// lowest band edge, or (wide-band leads on both sides) far enough below
/// the lowest level to take in its Lorentzian.
fn window_min(spec: &CaseSpec, w: &WindowInput, remarks: &mut Remarks) -> f64 {
    let lowest_edge = w.lead_lows.iter().copied().fold(w.lowest_device, f64::min);
    match &spec.grid.min_ev {
        Some(m) => {
            if m.value > lowest_edge + w.step {
                remarks.warnings.push(format!(
                    "grid.min_ev = {} eV is {:.4} eV above the lowest band edge {:.4} eV: the states between are left out of the electron density and of scattering",
                    m.value,
                    m.value - lowest_edge,
                    lowest_edge
                ));
            }
            m.value
        }
        None if w.lead_lows.is_empty() => {
            // Both leads wide-band: no lead band edge to avoid, but each
            // level is a Lorentzian of width ~Γ whose tail reaches far below
            // it. Start 20 kT_max below the lower of the lowest level and
            // the lower Fermi level, and at least 10 Γ below the level
            // (dropping a tail fraction of about Γ/(2π·10Γ) ≈ 1.6 %).
            let mu_min = w.mu.0.min(w.mu.1);
            let lo = w.lowest_device.min(mu_min) - (20.0 * w.kt_max).max(10.0 * w.gamma_max);
            remarks.notes.push(format!(
                "grid.min_ev not given: wide-band leads on both sides, so the window starts at {lo:.4} eV, max(20 kT_max, 10 Γ) below the lowest level or Fermi level; the Lorentzian tails of the levels below it (a fraction ≈ Γ/(2π·distance)) are not counted"
            ));
            lo
        }
        None => match w.neutral_low {
            // Doping can pull the band below the imposed edge: start the
            // window 5 kT below where a neutral doped region puts it.
            Some(low) if low - 5.0 * w.kt_max < lowest_edge => {
                let lo = low - 5.0 * w.kt_max;
                remarks.notes.push(format!(
                    "grid.min_ev not given: the window starts at {lo:.4} eV, 5 kT_max below the band bottom {low:.4} eV of a charge-neutral doped region ([electrostatics])"
                ));
                lo
            }
            _ => lowest_edge + 0.5 * w.step,
        },
    }
}

/// With `[electrostatics]`: the grid must hold the occupied states of the
/// doped regions; refused when a neutral doped region's band bottom lies
/// more than 3 kT below the grid's first energy.
fn check_neutral_coverage(
    spec: &CaseSpec,
    ctx: &ErrorContext<'_>,
    w: &WindowInput,
    grid: &EnergyGrid,
) -> Result<(), CaseError> {
    let Some(low) = w.neutral_low else {
        return Ok(());
    };
    let first = grid.energy(0);
    if first <= low + 3.0 * w.kt_max {
        return Ok(());
    }
    Err(ctx.invalid(
        spec.grid.min_ev.as_ref().and_then(|m| m.span.clone()),
        "grid.min_ev",
        &format!(
            "a window that starts at or below {:.4} eV, 3 kT above the band bottom {low:.4} eV of a charge-neutral doped region (hint: lower grid.min_ev or leave it out)",
            low + 3.0 * w.kt_max
        ),
        format!("{first:.4} eV"),
    ))
}

/// The upper end of the window: the file's, or 20 kT_max above the higher
/// Fermi level plus the largest phonon energy.
fn window_max(spec: &CaseSpec, w: &WindowInput, remarks: &mut Remarks) -> f64 {
    // fixed attached contacts count like leads (probes lie between)
    let mu_max = (spec.contacts.contacts.iter())
        .filter(|c| !c.mode.is_floating())
        .fold(w.mu.0.max(w.mu.1), |m, c| m.max(c.fermi_level_ev));
    match &spec.grid.max_ev {
        Some(m) => {
            if m.value < mu_max + 10.0 * w.kt_max {
                remarks.warnings.push(format!(
                    "grid.max_ev = {} eV is below max µ + 10 kT_max = {:.4} eV: the occupied window is clipped",
                    m.value,
                    mu_max + 10.0 * w.kt_max
                ));
            }
            m.value
        }
        None => mu_max + 20.0 * w.kt_max + w.max_phonon,
    }
}

/// The energy grid over the window, within the size limits.
fn energy_grid(
    spec: &CaseSpec,
    ctx: &ErrorContext<'_>,
    w: &WindowInput,
    remarks: &mut Remarks,
) -> Result<EnergyGrid, CaseError> {
    let min_ev = window_min(spec, w, remarks);
    let max_ev = window_max(spec, w, remarks);
    let step = w.step;
    let span_of_window = spec
        .grid
        .max_ev
        .as_ref()
        .and_then(|m| m.span.clone())
        .or(spec.grid.min_ev.as_ref().and_then(|m| m.span.clone()));
    if max_ev <= min_ev || !max_ev.is_finite() || !min_ev.is_finite() {
        return Err(ctx.invalid(
            span_of_window,
            "grid.max_ev",
            &format!("an energy window with max above min = {min_ev:.6} eV"),
            format!("max = {max_ev:.6} eV (an empty or inverted window)"),
        ));
    }
    let intervals = (max_ev - min_ev) / step;
    if !(intervals.is_finite() && intervals < MAX_ENERGIES as f64) {
        return Err(ctx.invalid(
            spec.grid
                .step_ev
                .as_ref()
                .and_then(|s| s.span.clone())
                .or(span_of_window),
            "grid.step_ev",
            &format!("at most {MAX_ENERGIES} energies"),
            format!(
                "{:.3e} energies over [{min_ev:.4}, {max_ev:.4}] eV with step {step:e} eV",
                intervals + 1.0
            ),
        ));
    }
    let grid = EnergyGrid::covering(min_ev, max_ev, step);
    if grid.count < 2 {
        return Err(ctx.invalid(
            span_of_window,
            "grid.max_ev",
            "an energy window of at least 2 points",
            format!("{} point(s)", grid.count),
        ));
    }
    Ok(grid)
}

/// Lattice dispersion against the effective-mass parabola: a warning when
/// the window reaches where they part.
fn dispersion_warning(spec: &CaseSpec, built: &Built, grid: &EnergyGrid, remarks: &mut Remarks) {
    let (Some(t), DeviceKind::Chain { band_edge_ev, .. } | DeviceKind::Strip { band_edge_ev, .. }) =
        (built.hopping, &spec.device.kind)
    else {
        return;
    };
    let lowest_u = built
        .dev
        .potential_ev
        .iter()
        .copied()
        .fold(f64::INFINITY, f64::min);
    let e_top = grid.max_ev() - (band_edge_ev + lowest_u);
    if e_top <= t {
        return;
    }
    let detail = if e_top < 4.0 * t {
        let ka = (1.0 - e_top / (2.0 * t)).acos();
        let parabola = t * ka * ka;
        format!(
            "there the lattice band 2t(1 − cos ka) lies {:.0} % below the parabola ħ²k²/2m* at the same k",
            100.0 * (parabola - e_top) / parabola
        )
    } else {
        "that is above the top of the lattice band (4t)".to_string()
    };
    remarks.warnings.push(format!(
        "the energy window reaches {e_top:.4} eV above the lowest band edge, {:.2}·t (t = {t:.4} eV): {detail}; a smaller spacing_nm makes the continuum model accurate there",
        e_top / t
    ));
}

/// One phonon mode on the grid: ħω snapped to `steps` whole steps
/// (`energy`), checked against the window and the snap limit.
fn phonon_mode(
    spec: &CaseSpec,
    ctx: &ErrorContext<'_>,
    (i, p): (usize, &PhononSpec),
    (steps, energy): (usize, f64),
    dev: &Device,
    grid: &EnergyGrid,
    remarks: &mut Remarks,
) -> Result<PhononMode, CaseError> {
    let width = grid.max_ev() - grid.min_ev;
    let key = format!("phonon.{i}.energy_ev");
    if p.energy_ev >= width || energy >= width {
        let hint = if spec.grid.min_ev.is_some() || spec.grid.max_ev.is_some() {
            "; hint: widen grid.min_ev … grid.max_ev, or leave them out so the window follows the phonons"
        } else {
            ""
        };
        return Err(ctx.invalid(
            p.energy_span.clone(),
            &key,
            &format!(
                "a phonon energy 0 < ħω < {width:.4} eV, the width of the energy window \
                 [{:.4}, {:.4}] eV (otherwise no E ± ħω lands on the grid)",
                grid.min_ev,
                grid.max_ev()
            ),
            format!("{} eV{hint}", p.energy_ev),
        ));
    }
    check_snap(spec, ctx, (i, p), (steps, energy), grid.step_ev, remarks)?;
    let coupling = coupling_sites(ctx, dev, (p.from_nm, p.to_nm), &p.coupling)?;
    let matrices = coupling_cells(ctx, dev, (p.from_nm, p.to_nm), &p.coupling)?;
    if coupling.iter().all(|&d| d == 0.0) && matrices.is_empty() && !p.coupling.is_zero() {
        remarks.warnings.push(format!(
            "phonon.{i} region [{}, {}) nm covers no cell",
            p.from_nm, p.to_nm
        ));
    }
    Ok(PhononMode {
        requested_energy_ev: p.energy_ev,
        energy_ev: energy,
        steps,
        coupling_ev2: coupling,
        coupling_matrices: matrices,
        bath_temperature_k: p.bath_temperature_k,
    })
}

/// A snapped ħω moved by more than [`MAX_SNAP`] is an error unless the
/// file allows it; by more than 1 % a warning.
fn check_snap(
    spec: &CaseSpec,
    ctx: &ErrorContext<'_>,
    (i, p): (usize, &PhononSpec),
    (steps, energy): (usize, f64),
    step: f64,
    remarks: &mut Remarks,
) -> Result<(), CaseError> {
    let change = (energy - p.energy_ev) / p.energy_ev;
    if change.abs() > MAX_SNAP && !spec.grid.allow_coarse_snap {
        // The step that represents ħω exactly with no more than the
        // current step size.
        let k = (p.energy_ev / step).ceil().max(1.0);
        return Err(ctx.invalid(
            p.energy_span.clone(),
            &format!("phonon.{i}.energy_ev"),
            &format!(
                "a phonon energy that the grid step {:.4} meV represents within {:.0} % \
                 (ħω is snapped to a whole number of steps)",
                step * 1e3,
                MAX_SNAP * 100.0
            ),
            format!(
                "{:.4} meV, which snaps to {:.4} meV ({steps} step(s)), a change of {:+.1} %; \
                 hint: a finer grid.step_ev (ħω/{k} = {:.6e} eV makes it exact), or \
                 `allow_coarse_phonon_snap = true` under [grid] to accept the snapped energy",
                p.energy_ev * 1e3,
                energy * 1e3,
                100.0 * change,
                p.energy_ev / k
            ),
        ));
    }
    if change.abs() > 0.01 {
        let allowed = if change.abs() > MAX_SNAP {
            " (accepted because grid.allow_coarse_phonon_snap = true)"
        } else {
            ""
        };
        remarks.warnings.push(format!(
            "phonon.{i}.energy_ev = {:.3} meV was snapped to {:.3} meV ({steps} grid steps), a change of {:.1} %{allowed}: use a finer grid.step_ev",
            p.energy_ev * 1e3,
            energy * 1e3,
            100.0 * change
        ));
    }
    Ok(())
}

/// Phonons and dephasing on the device and grid.
fn scattering(
    spec: &CaseSpec,
    ctx: &ErrorContext<'_>,
    dev: &Device,
    grid: &EnergyGrid,
    snapped: &[(usize, f64)],
    remarks: &mut Remarks,
) -> Result<Scattering, CaseError> {
    let phonons = spec
        .phonons
        .iter()
        .enumerate()
        .zip(snapped)
        .map(|(ip, &s)| phonon_mode(spec, ctx, ip, s, dev, grid, remarks))
        .collect::<Result<Vec<_>, _>>()?;
    let dephasing_ev2 = match &spec.dephasing {
        Some(d) if !d.strength.is_zero() => {
            coupling_sites(ctx, dev, (d.from_nm, d.to_nm), &d.strength)?
        }
        _ => Vec::new(),
    };
    let dephasing_matrices = match &spec.dephasing {
        Some(d) => coupling_cells(ctx, dev, (d.from_nm, d.to_nm), &d.strength)?,
        None => CouplingMatrices::default(),
    };
    let hermitian_part = spec.solver.hermitian_part == HermitianPart::Include;
    if hermitian_part && phonons.is_empty() {
        remarks
            .warnings
            .push("solver.hermitian_part = \"include\" has no effect without phonons".into());
    }
    if spec.solver.scba.energy_order == EnergyOrder::RedBlack && phonons.is_empty() {
        remarks.warnings.push(
            "solver.energy_order = \"red-black\" has no effect without phonons: \
             the energies are solved simultaneously"
                .into(),
        );
    }
    Ok(Scattering {
        dephasing_ev2,
        dephasing_matrices,
        phonons,
        hermitian_part,
    })
}

/// The largest broadening (eV) of a wide-band lead, 0 without one: for a
/// matrix Γ its largest eigenvalue.
fn widest_wide_band(spec: &CaseSpec) -> f64 {
    [&spec.leads.left.model, &spec.leads.right.model]
        .iter()
        .filter_map(|m| match m {
            LeadModel::WideBand { gamma_ev } => Some(*gamma_ev),
            LeadModel::WideBandMatrix { gamma, .. } => Some(-device::lowest_eigenvalue(
                &Mat::from_fn(gamma.nrows(), gamma.ncols(), |r, c| -gamma[(r, c)]),
            )),
            _ => None,
        })
        .fold(0.0, f64::max)
}

/// A zero coupling block cuts the device in two: nothing can pass.
fn warn_uncoupled(dev: &Device, remarks: &mut Remarks) {
    if let Some(i) = dev.coupling.iter().position(|c| device::max_abs(c) == 0.0) {
        remarks.warnings.push(format!(
            "cells {i} and {} are not coupled (an all-zero coupling block): no current can pass, and a level isolated between zero couplings makes the Green's function singular at its energy",
            i + 1
        ));
    }
}

/// Build the device, contacts, scattering and grid.
pub(crate) fn resolve(spec: &CaseSpec, ctx: &ErrorContext<'_>) -> Result<Resolved, CaseError> {
    let mut remarks = Remarks {
        warnings: spec.warnings.clone(),
        notes: spec.notes.clone(),
    };
    let (mu_l, mu_r) = biased_levels(spec);
    let built = build_device(spec, ctx, (mu_l, mu_r))?;
    let left_lead = make_lead(spec, ctx, &built, Side::Left)?;
    let right_lead = make_lead(spec, ctx, &built, Side::Right)?;
    let (t_left, t_right) = (
        spec.leads.left.temperature_k,
        spec.leads.right.temperature_k,
    );
    let kt_min = thermal_energy_ev(t_left.min(t_right));
    let kt_max = thermal_energy_ev(t_left.max(t_right));
    let step = energy_step(spec, ctx, kt_min, &mut remarks)?;
    let probe = EnergyGrid::new(0.0, step, 1);
    let snapped: Vec<(usize, f64)> = spec
        .phonons
        .iter()
        .map(|p| {
            let s = probe.steps_for(p.energy_ev);
            (s, s as f64 * step)
        })
        .collect();
    let window = WindowInput {
        step,
        mu: (mu_l, mu_r),
        kt_max,
        max_phonon: snapped.iter().map(|s| s.1).fold(0.0, f64::max),
        lowest_device: built.dev.lowest_band_edge(),
        lead_lows: [left_lead.band_range(), right_lead.band_range()]
            .iter()
            .flatten()
            .map(|r| r.0)
            .collect(),
        gamma_max: widest_wide_band(spec),
        // Each charge-neutral end keeps its band where its own lead's
        // Fermi level holds the doping, so under bias the band of the end
        // at the lower Fermi level lies lowest: the window starts below
        // that one (a bias V moves it eV/2 below where it is at V = 0, as
        // the window of a curve allows for).
        neutral_low: spec.electrostatics.as_ref().and_then(|e| {
            let gs = f64::from(spec.spin_degeneracy);
            e.lowest_neutral_band_bottom(&spec.device, mu_l.min(mu_r), kt_max, gs)
        }),
    };
    let grid = energy_grid(spec, ctx, &window, &mut remarks)?;
    check_neutral_coverage(spec, ctx, &window, &grid)?;
    dispersion_warning(spec, &built, &grid, &mut remarks);
    let dev = &built.dev;
    warn_uncoupled(dev, &mut remarks);
    let scattering = scattering(spec, ctx, dev, &grid, &snapped, &mut remarks)?;
    let contacts = (
        Contact {
            lead: left_lead,
            fermi_level_ev: mu_l,
            temperature_k: t_left,
        },
        Contact {
            lead: right_lead,
            fermi_level_ev: mu_r,
            temperature_k: t_right,
        },
    );
    assemble(spec, ctx, built, contacts, scattering, grid, remarks)
}

/// The lattice of `[lattice]`, built on the device's cells.
fn build_lattice(
    spec: &CaseSpec,
    ctx: &ErrorContext<'_>,
) -> Result<Option<crate::lattice::Lattice>, CaseError> {
    let Some(l) = &spec.lattice else {
        return Ok(None);
    };
    if spec.device.spin_explicit {
        return Err(ctx.invalid(
            l.span.clone(),
            "lattice",
            "no [lattice] with device.spin = \"explicit\" (the lattice has one site per \
             spinless orbital; hint: drop device.spin and use spin_degeneracy = 2, or drop \
             [lattice] and give thermal.phonon_conductance_w_per_k)",
            "a [lattice] table",
        ));
    }
    l.build(&spec.device).map(Some).map_err(|e| {
        ctx.invalid(
            l.span.clone(),
            "lattice",
            "masses and springs that form a lattice",
            format!("{e}"),
        )
    })
}

/// With any damping, every orbital site a phonon mode couples to must be
/// damped: the power the electrons deposit there needs a reservoir to go
/// to, and an undamped site has none (no temperature of its own).
fn check_damping_covers_modes(
    lattice: &crate::lattice::Lattice,
    scattering: &Scattering,
    (span, spacing_nm): (Option<std::ops::Range<usize>>, f64),
    ctx: &ErrorContext<'_>,
) -> Result<(), CaseError> {
    let gamma = lattice.damping_per_ps();
    if !gamma.iter().any(|&g| g > 0.0) {
        return Ok(());
    }
    let per_cell = lattice.sites_per_cell();
    for (m, mode) in scattering.phonons.iter().enumerate() {
        let bare = mode
            .coupling_ev2
            .iter()
            .zip(gamma)
            .position(|(&d, &g)| d > 0.0 && g <= 0.0);
        if let Some(site) = bare {
            return Err(ctx.invalid(
                span,
                "lattice.damping_per_ps",
                "damping > 0 on every site a phonon mode couples to once any site is damped                  (hint: give lattice.damping_per_ps a value > 0, or a [[lattice.region]]                  damping_per_ps over that cell, or limit the phonon's region)",
                format!(
                    "phonon.{m} coupling on site {site} (cell {}, x = {} nm) where the damping is 0",
                    site / per_cell,
                    (site / per_cell) as f64 * spacing_nm,
                ),
            ));
        }
    }
    Ok(())
}

/// With `[electrostatics]`: the note that the drop is computed, and a
/// warning when the file also asks for a linear drop.
fn electrostatics_remarks(spec: &CaseSpec, remarks: &mut Remarks) {
    let Some(es) = &spec.electrostatics else {
        return;
    };
    {
        let ends = match es.ends {
            crate::electrostatics::Ends::ZeroField => {
                "ends without a given potential float with zero field"
            }
            crate::electrostatics::Ends::Ohmic => {
                "ends without a given potential are ohmic, held at their leads' neutral-bulk levels"
            }
        };
        remarks.notes.push(format!(
            "[electrostatics]: the potential inside the device is solved with the transport; the bias drop is computed from the charge, not imposed; {ends}"
        ));
        if let BiasDrop::Linear { .. } = spec.bias.drop {
            remarks.warnings.push(
                "bias.drop = { linear = … } is not used with [electrostatics]: the computed drop replaces it".into(),
            );
        }
    }
}

/// The phonon thermal conductance ZT uses (W/K): the given value, else 0
/// when a [lattice] section will give κ_ph, else 0 as an upper bound of
/// ZT, with the warning or note that says which.
fn phonon_conductance(spec: &CaseSpec, has_lattice: bool, remarks: &mut Remarks) -> f64 {
    match (spec.thermal.phonon_conductance_w_per_k, has_lattice) {
        (Some(k), true) => {
            remarks.warnings.push(format!(
                "thermal.phonon_conductance_w_per_k = {k:e} W/K overrides the κ_ph the [lattice] \
                 section would give: ZT uses the given value (leave it out to use the lattice)"
            ));
            k
        }
        (Some(k), false) => k,
        (None, true) => 0.0,
        (None, false) => {
            remarks.notes.push(
                "neither [lattice] nor thermal.phonon_conductance_w_per_k given: ZT uses κ_ph = 0 (an upper bound)"
                    .into(),
            );
            0.0
        }
    }
}

/// The resolved case from its parts, with the last checks and notes.
fn assemble(
    spec: &CaseSpec,
    ctx: &ErrorContext<'_>,
    built: Built,
    (left, right): (Contact, Contact),
    scattering: Scattering,
    grid: EnergyGrid,
    mut remarks: Remarks,
) -> Result<Resolved, CaseError> {
    let lattice = build_lattice(spec, ctx)?;
    electrostatics_remarks(spec, &mut remarks);
    if let (Some(l), Some(ls)) = (&lattice, &spec.lattice) {
        let at = (ls.span.clone(), spec.device.spacing_nm);
        check_damping_covers_modes(l, &scattering, at, ctx)?;
    }
    let phonon_conductance = phonon_conductance(spec, lattice.is_some(), &mut remarks);
    if built
        .dev
        .potential_ev
        .iter()
        .any(|u| u.abs() > MAX_ENERGY_EV)
    {
        return Err(ctx.invalid(
            spec.device.span.clone(),
            "device.region",
            "a potential profile of magnitude ≤ 1e6 eV",
            "a larger sum of regions and bias",
        ));
    }
    let problem = Problem {
        device: built.dev,
        left,
        right,
        scattering,
        grid,
        spin_degeneracy: f64::from(spec.spin_degeneracy),
        decimation: spec.solver.decimation,
        contacts: Vec::new(),
    };
    let problem = Problem {
        contacts: attached_contacts(spec, &problem),
        ..problem
    };
    Ok(Resolved {
        problem,
        scba: spec.solver.scba,
        voltage_v: spec.bias.voltage_v,
        zero_bias_fermi_levels_ev: (
            spec.leads.left.fermi_level_ev,
            spec.leads.right.fermi_level_ev,
        ),
        phonon_conductance_w_per_k: phonon_conductance,
        phonon_conductance_given: spec.thermal.phonon_conductance_w_per_k.is_some(),
        lattice,
        self_heating: spec
            .lattice
            .as_ref()
            .map_or_else(Default::default, |l| l.self_heating),
        phonon_spectrum_cache: Default::default(),
        fit_electron_temperature: spec.profile.electron_temperature == ProfileMode::Fit,
        allow_coarse_phonon_snap: spec.grid.allow_coarse_snap,
        response_split: spec.response.split,
        bias_drop: spec.bias.drop.clone(),
        electrostatics: spec.electrostatics.as_ref().map(|e| e.build(&spec.device)),
        warnings: remarks.warnings,
        notes: remarks.notes,
        device_kind: spec.device.kind.name(),
        hopping_ev: built.hopping,
        channels: spec.channels.channels.clone(),
    })
}

impl Resolved {
    /// Memory the solver needs for this problem, in bytes (an estimate).
    ///
    /// The formula documented in [`crate::scba`] (section "Memory"): with
    /// E energies, N cells, b orbitals per cell, S = N·b, Anderson depth m
    /// and T threads,
    ///
    /// bytes = E·S·(72 + 16·h) + E_m·S·P·A·q + 8·E·(N − 1)
    ///         + 2·E·(16·b² + 64) + T·w
    ///
    /// with A = 2m + 2 history vectors for Anderson mixing (0 for linear)
    /// of q = 4 bytes per number (compact history) or 8 (full), E_m the
    /// energies mixed (the red half when only those need it, see
    /// [`crate::scba::mixed_energy_rows`], else E), P = 3 numbers mixed
    /// per site with dephasing or the Hermitian part and 2 otherwise,
    /// h = 1 when the Hermitian part of the phonon self-energy is on, and
    /// w the RGF workspace of one thread (48·N·b² + 128·b² for b > 1, 24·N
    /// for b = 1). A coherent device needs one pass only: E·S·24 +
    /// 8·E·(N − 1) plus the leads and workspaces.
    pub fn memory_estimate_bytes(&self) -> u64 {
        let p = &self.problem;
        let e = p.grid.count as u64;
        let n = p.device.cells() as u64;
        let b = p.device.orbitals as u64;
        let s = n * b;
        let threads = rayon::current_num_threads() as u64;
        let workspace = if b == 1 {
            24 * n
        } else {
            48 * n * b * b + 128 * b * b
        };
        let fixed = 8 * e * n.saturating_sub(1) + 2 * e * (16 * b * b + 64) + threads * workspace;
        if p.scattering.is_coherent() {
            return e * s * 24 + fixed;
        }
        let h = u64::from(p.scattering.hermitian_part && !p.scattering.phonons.is_empty());
        let history = self.mixer_history_bytes();
        if p.scattering.uses_blocks() {
            // Σ0 and F(Σ0) on N·b² numbers (24 bytes each), the diagonal
            // blocks of G^r and G^n (32 bytes each), the diagonals of the
            // pass (24 per site), the Hilbert buffers.
            let sb = n * b * b;
            return e * (sb * (48 + 32 + 16 * h) + 24 * s) + history + fixed;
        }
        e * s * (72 + 16 * h) + history + fixed
    }

    /// The part of [`Self::memory_estimate_bytes`] that is the Anderson
    /// history: E_m·S·P·A·q bytes (N·b² values per energy in place of S
    /// with coupling matrices, P = 3 there); 0 for linear mixing or a
    /// coherent device.
    pub fn mixer_history_bytes(&self) -> u64 {
        let p = &self.problem;
        if p.scattering.is_coherent() {
            return 0;
        }
        let q = match self.scba.history {
            crate::scba::MixerHistory::Compact => 4,
            crate::scba::MixerHistory::Full => 8,
        };
        let a = match self.scba.mixing {
            Mixing::Anderson { depth, .. } => 2 * depth as u64 + 2,
            Mixing::Linear { .. } => 0,
        };
        let mixed = crate::scba::mixed_energy_rows(p, self.scba.energy_order) as u64;
        let (n, b) = (p.device.cells() as u64, p.device.orbitals as u64);
        let h = p.scattering.hermitian_part && !p.scattering.phonons.is_empty();
        let (values, parts) = if p.scattering.uses_blocks() {
            (n * b * b, 3)
        } else if h || p.scattering.has_dephasing() {
            (n * b, 3)
        } else {
            (n * b, 2)
        };
        mixed * values * parts * a * q
    }

    /// How many Born iterations the time estimate assumes on the full
    /// grid: 1 without scattering; otherwise a guess from the mixing
    /// (Anderson mixing typically converges in 10–30 iterations on the
    /// cases measured, linear mixing can need hundreds), two thirds of that
    /// after a coarse start ([`Self::coarse_iteration_guess`]), never more
    /// than the limit.
    pub fn iteration_guess(&self) -> usize {
        let plain = self.plain_iteration_guess();
        if self.coarse_iteration_guess().is_empty() {
            return plain;
        }
        // After the coarse levels the full grid needed 14, 22 and 23
        // iterations on the three cases measured (docs/performance.md,
        // "Coarse start"), against 22, 52 and 93 from zero.
        (2 * plain).div_ceil(3).max(1)
    }

    /// The guess from the mixing alone (see [`Self::iteration_guess`]).
    fn plain_iteration_guess(&self) -> usize {
        if self.problem.scattering.is_coherent() {
            return 1;
        }
        let guess = match self.scba.mixing {
            Mixing::Anderson { .. } => 30,
            Mixing::Linear { .. } => 100,
        };
        guess.min(self.scba.max_iterations.max(1))
    }

    /// The coarse levels a solve from Σ0 = 0 runs before the full grid
    /// (`solver.coarse_start`), coarsest first, each as (k, iterations
    /// guessed) for the grid of every k-th energy: the plain guess of
    /// [`Self::iteration_guess`] per level (a level is the same Born
    /// problem on fewer energies; 10–41 were measured). Empty when no
    /// coarse level runs.
    pub fn coarse_iteration_guess(&self) -> Vec<(usize, usize)> {
        let guess = self.plain_iteration_guess();
        crate::scba::coarse::levels(&self.problem, &self.scba)
            .into_iter()
            .map(|k| (k, guess))
            .collect()
    }

    /// The iterations the time estimate assumes, in full-grid iterations:
    /// [`Self::iteration_guess`] plus, for each coarse level of every k-th
    /// energy, its iterations over k (it solves 1/k of the energies).
    pub fn iteration_equivalents_guess(&self) -> f64 {
        let coarse: f64 = (self.coarse_iteration_guess().iter())
            .map(|&(k, it)| it as f64 / k as f64)
            .sum();
        self.iteration_guess() as f64 + coarse
    }

    /// Estimated wall time of one Born iteration on `threads` threads (s):
    /// E·N·(10 + 6·b³ + 70·b) ns on one thread, divided by 0.9·threads.
    ///
    /// Calibration (2-core Xeon, release build): the recursion of one
    /// energy costs about 16 ns per cell for b = 1 and 5.9 ns per cell and
    /// orbital³ for b = 16 (benches/rgf.rs), hence 10 + 6·b³ ns; a whole
    /// Born iteration of a b = 1 chain costs 86 ns per cell and energy
    /// (benches/scba.rs, N = 400, 1000 energies), the other 70 ns per
    /// orbital site going to mixing and rebuilding Σ0. Two threads gave
    /// 1.8× (hence 0.9 per thread).
    pub fn iteration_time_estimate_seconds(&self, threads: usize) -> f64 {
        let p = &self.problem;
        let (e, n, b) = (
            p.grid.count as f64,
            p.device.cells() as f64,
            p.device.orbitals as f64,
        );
        let ns = e * n * (10.0 + 6.0 * b.powi(3) + 70.0 * b);
        ns * 1e-9 / (0.9 * threads.max(1) as f64)
    }

    /// Estimated wall time of the solve (s):
    /// [`Self::iteration_equivalents_guess`] full-grid iterations of
    /// [`Self::iteration_time_estimate_seconds`]. A guess: the iteration
    /// count is not known before the run, and the cost per iteration varies
    /// with the machine by a factor of about two.
    pub fn time_estimate_seconds(&self, threads: usize) -> f64 {
        self.iteration_equivalents_guess() * self.iteration_time_estimate_seconds(threads)
    }

    /// Settings that need less memory than these, each as the case keys to
    /// set and its memory estimate (bytes), smallest change first: a
    /// compact (f32) Anderson history, a shallower one (depth halved, then
    /// depth 1), linear mixing, and half the energies (twice the grid step).
    pub fn memory_alternatives(&self) -> Vec<(String, u64)> {
        let with_mixing = |m: Mixing| {
            let mut r = self.clone();
            r.scba = r.scba.with_mixing(m);
            r.memory_estimate_bytes()
        };
        let mut out = Vec::new();
        if let Mixing::Anderson { depth, .. } = self.scba.mixing {
            if self.scba.history == MixerHistory::Full {
                let mut r = self.clone();
                r.scba = r.scba.with_history(MixerHistory::Compact);
                out.push((
                    "solver.anderson_history = \"compact\"".into(),
                    r.memory_estimate_bytes(),
                ));
            }
            for d in [depth / 2, 1] {
                if d >= 1 && d < depth && !out.iter().any(|(k, _)| k == &depth_key(d)) {
                    let m = Mixing::Anderson {
                        depth: d,
                        damping: Mixing::DEFAULT_ANDERSON_DAMPING,
                    };
                    out.push((depth_key(d), with_mixing(m)));
                }
            }
            let linear = Mixing::Linear {
                factor: Mixing::DEFAULT_LINEAR_FACTOR,
            };
            out.push(("solver.mixing = \"linear\"".into(), with_mixing(linear)));
        }
        let mut half = self.clone();
        half.problem.grid.count = self.problem.grid.count.div_ceil(2);
        out.push((
            format!(
                "grid.step_ev = {} (a coarser grid.step_ev: half the energies)",
                2.0 * self.problem.grid.step_ev
            ),
            half.memory_estimate_bytes(),
        ));
        out
    }
}

fn depth_key(d: usize) -> String {
    format!("solver.anderson_depth = {d}")
}

/// The attached contacts of the case; a probe's level starts at the mean
/// of the two leads' levels (the solve starts there too and writes the
/// solved level into its solution).
fn attached_contacts(spec: &CaseSpec, problem: &Problem) -> Vec<crate::model::AttachedContact> {
    let mu = 0.5 * (problem.left.fermi_level_ev + problem.right.fermi_level_ev);
    let t = 0.5 * (problem.left.temperature_k + problem.right.temperature_k);
    let mut out = spec.contacts.contacts.clone();
    for c in &mut out {
        if c.mode.is_floating() {
            c.fermi_level_ev = mu;
        }
        if c.mode == crate::model::ContactMode::Temperature {
            c.temperature_k = t;
        }
    }
    out
}
