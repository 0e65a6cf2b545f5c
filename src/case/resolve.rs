//! A validated case -> the problem the solver runs: device, contacts,
//! scattering and the energy grid (with phonon energies snapped to it).

use super::error::{CaseError, CaseErrorKind, ErrorContext};
use super::spec::{CaseSpec, DeviceKind, LeadModel, LeadSpec, MAX_ENERGY_EV, ResponseSplit};
use crate::C64;
use crate::device::{self, BiasDrop, Device, DeviceError};
use crate::grid::EnergyGrid;
use crate::leads::{DecimationParams, Lead};
use crate::model::{Contact, Problem};
use crate::scattering::{PhononMode, Scattering};
use crate::scba::{Mixing, ScbaParams};
use crate::units::thermal_energy_ev;
use faer::Mat;
use std::fmt::Write as _;

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
    /// Phonon (lattice) thermal conductance κ_ph for ZT (W/K); 0 when the
    /// file does not give one (a note says so).
    pub phonon_conductance_w_per_k: f64,
    /// How linear response splits the perturbation between the contacts.
    pub response_split: ResponseSplit,
    /// Where the bias drops.
    pub bias_drop: BiasDrop,
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
}

/// Periodic lead blocks (on-site, coupling along +x) for a chain or strip
/// with band edge `edge` and hopping `t`.
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
fn site_vector(dev: &Device, from_nm: f64, to_nm: f64, value: f64) -> Vec<f64> {
    let b = dev.orbitals;
    let mut v = vec![0.0; dev.cells() * b];
    for (i, &x) in dev.x_nm.iter().enumerate() {
        if x >= from_nm && x < to_nm {
            v[i * b..(i + 1) * b].fill(value);
        }
    }
    v
}

fn device_error(ctx: &ErrorContext<'_>, spec: &CaseSpec, e: DeviceError) -> CaseError {
    let (key, path) = match (&spec.kind, &e) {
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
        spec.device_span.clone(),
        Some(key),
        format!("expected {expected}, found in file `{path}`: {e}"),
    )
}

/// Build the device, contacts, scattering and grid.
pub(crate) fn resolve(spec: &CaseSpec, ctx: &ErrorContext<'_>) -> Result<Resolved, CaseError> {
    let mut warnings = spec.warnings.clone();
    let mut notes = Vec::new();
    let (mu_l0, mu_r0) = (spec.left.fermi_level_ev, spec.right.fermi_level_ev);
    let v = spec.voltage_v;
    // µL = µL0 − eV/2, µR = µR0 + eV/2 (eV and V are numerically equal per e).
    let mu_l = mu_l0 - 0.5 * v;
    let mu_r = mu_r0 + 0.5 * v;

    let x = device::cell_positions(spec.cells, spec.spacing_nm);
    let potential = device::potential_profile(&x, &spec.regions, &spec.drop, mu_l, mu_r);
    let bias_only = device::potential_profile(&x, &[], &spec.drop, mu_l, mu_r);
    let n = spec.cells;

    let (dev, hopping, lead_couplings) = match &spec.kind {
        DeviceKind::Chain {
            effective_mass,
            band_edge_ev,
        } => {
            let t = crate::units::hopping_ev(*effective_mass, spec.spacing_nm);
            (
                device::chain(spec.spacing_nm, t, *band_edge_ev, potential),
                Some(t),
                None,
            )
        }
        DeviceKind::Strip {
            effective_mass,
            band_edge_ev,
            width,
        } => {
            let t = crate::units::hopping_ev(*effective_mass, spec.spacing_nm);
            (
                device::strip(*width, spec.spacing_nm, t, *band_edge_ev, potential),
                Some(t),
                None,
            )
        }
        DeviceKind::Blocks {
            onsite, coupling, ..
        } => {
            let ends = (coupling.first().cloned(), coupling.last().cloned());
            let d = device::blocks(spec.spacing_nm, onsite.clone(), coupling.clone(), potential)
                .map_err(|e| device_error(ctx, spec, e))?;
            (d, None, Some(ends))
        }
    };
    let b = dev.orbitals;

    // ---- contacts ----
    let make_lead = |ls: &LeadSpec, left: bool| -> Result<Lead, CaseError> {
        let end = if left { 0 } else { n - 1 };
        let side = if left { "left" } else { "right" };
        match &ls.model {
            LeadModel::WideBand { gamma_ev } => Ok(Lead::WideBand {
                gamma: identity_times(b, *gamma_ev),
            }),
            LeadModel::Continuation => {
                let hop = match &lead_couplings {
                    None => {
                        if n > 1 {
                            dev.coupling[if left { 0 } else { n - 2 }].clone()
                        } else {
                            // A one-cell chain or strip: the lattice coupling.
                            let t = hopping.unwrap_or(0.0);
                            identity_times(b, -t)
                        }
                    }
                    Some((first, last)) => match if left { first } else { last } {
                        Some(m) => m.clone(),
                        None => {
                            return Err(ctx.error(
                                CaseErrorKind::Invalid,
                                spec.device_span.clone(),
                                Some(&format!("leads.{side}")),
                                "expected a coupling block to continue the end cell into a lead (or wide_band_ev), found none (a one-cell device with an empty coupling file)",
                            ));
                        }
                    },
                };
                Ok(Lead::Periodic {
                    onsite: dev.onsite[end].clone(),
                    hopping: hop,
                })
            }
            LeadModel::Selective {
                band_edge_ev,
                effective_mass,
            } => {
                let (device_edge, device_mass) = match &spec.kind {
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
                            spec.device_span.clone(),
                            &format!("leads.{side}.band_edge_ev"),
                            "an energy-selective lead only with kind = \"chain\" or \"strip\"",
                            "kind = \"blocks\"",
                        ));
                    }
                };
                // Without its own band edge the lead continues the end cell's
                // band (potential and bias included); with one, only the bias
                // part of the end potential (a linear drop) moves it.
                let edge = match band_edge_ev {
                    Some(e) => e + bias_only[end],
                    None => device_edge + dev.potential_ev[end],
                };
                let t = crate::units::hopping_ev(
                    effective_mass.unwrap_or(device_mass),
                    spec.spacing_nm,
                );
                Ok(lattice_lead(&spec.kind, edge, t))
            }
        }
    };
    let left_lead = make_lead(&spec.left, true)?;
    let right_lead = make_lead(&spec.right, false)?;
    let left_range = left_lead.band_range();
    let right_range = right_lead.band_range();

    // ---- energy grid ----
    let t_min = spec.left.temperature_k.min(spec.right.temperature_k);
    let t_max = spec.left.temperature_k.max(spec.right.temperature_k);
    let (kt_min, kt_max) = (thermal_energy_ev(t_min), thermal_energy_ev(t_max));
    let step = match &spec.grid.step_ev {
        Some(s) => {
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
                warnings.push(format!(
                    "grid.step_ev = {:.4} meV is coarser than kB·T_min/4 = {:.4} meV: Fermi-window integrals lose accuracy",
                    s.value * 1e3,
                    kt_min * 250.0
                ));
            }
            s.value
        }
        None => {
            let energies: Vec<f64> = spec.phonons.iter().map(|p| p.energy_ev).collect();
            let step = default_step(kt_min / 10.0, &energies);
            if step < kt_min / 10.0 {
                notes.push(format!(
                    "grid.step_ev not given: {:.4} meV, the largest step ≤ kB·T_min/10 = {:.4} meV \
                     on which every phonon energy is a whole number of steps to within {:.0} %",
                    step * 1e3,
                    kt_min * 100.0,
                    DEFAULT_SNAP_FRACTION * 100.0
                ));
            } else {
                notes.push(format!(
                    "grid.step_ev not given: kB·T_min/10 = {:.4} meV",
                    kt_min * 100.0
                ));
            }
            step
        }
    };
    let probe = EnergyGrid::new(0.0, step, 1);
    let snapped: Vec<(usize, f64)> = spec
        .phonons
        .iter()
        .map(|p| {
            let s = probe.steps_for(p.energy_ev);
            (s, s as f64 * step)
        })
        .collect();
    let max_phonon = snapped.iter().map(|s| s.1).fold(0.0, f64::max);
    let mu_max = mu_l.max(mu_r);
    let mu_min = mu_l.min(mu_r);
    let lowest_device = dev.lowest_band_edge();
    let lead_lows: Vec<f64> = [left_range, right_range]
        .iter()
        .flatten()
        .map(|r| r.0)
        .collect();
    let lowest_edge = lead_lows.iter().copied().fold(lowest_device, f64::min);
    let gamma_max = [&spec.left.model, &spec.right.model]
        .iter()
        .filter_map(|m| match m {
            LeadModel::WideBand { gamma_ev } => Some(*gamma_ev),
            _ => None,
        })
        .fold(0.0, f64::max);
    let min_ev = match &spec.grid.min_ev {
        Some(m) => {
            if m.value > lowest_edge + step {
                warnings.push(format!(
                    "grid.min_ev = {} eV is {:.4} eV above the lowest band edge {:.4} eV: the states between are left out of the electron density and of scattering",
                    m.value,
                    m.value - lowest_edge,
                    lowest_edge
                ));
            }
            m.value
        }
        None if lead_lows.is_empty() => {
            // Both leads wide-band: no lead band edge to avoid, but each
            // level is a Lorentzian of width ~Γ whose tail reaches far below
            // it. Start 20 kT_max below the lower of the lowest level and
            // the lower Fermi level, and at least 10 Γ below the level
            // (dropping a tail fraction of about Γ/(2π·10Γ) ≈ 1.6 %).
            let lo = lowest_device.min(mu_min) - (20.0 * kt_max).max(10.0 * gamma_max);
            notes.push(format!(
                "grid.min_ev not given: wide-band leads on both sides, so the window starts at {lo:.4} eV, max(20 kT_max, 10 Γ) below the lowest level or Fermi level; the Lorentzian tails of the levels below it (a fraction ≈ Γ/(2π·distance)) are not counted"
            ));
            lo
        }
        None => lowest_edge + 0.5 * step,
    };
    let max_ev = match &spec.grid.max_ev {
        Some(m) => {
            if m.value < mu_max + 10.0 * kt_max {
                warnings.push(format!(
                    "grid.max_ev = {} eV is below max µ + 10 kT_max = {:.4} eV: the occupied window is clipped",
                    m.value,
                    mu_max + 10.0 * kt_max
                ));
            }
            m.value
        }
        None => mu_max + 20.0 * kt_max + max_phonon,
    };
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
    let width = grid.max_ev() - grid.min_ev;

    // Lattice dispersion against the effective-mass parabola.
    if let (
        Some(t),
        DeviceKind::Chain { band_edge_ev, .. } | DeviceKind::Strip { band_edge_ev, .. },
    ) = (hopping, &spec.kind)
    {
        let ec_min = band_edge_ev
            + dev
                .potential_ev
                .iter()
                .copied()
                .fold(f64::INFINITY, f64::min);
        let e_top = grid.max_ev() - ec_min;
        if e_top > t {
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
            warnings.push(format!(
                "the energy window reaches {e_top:.4} eV above the lowest band edge, {:.2}·t (t = {t:.4} eV): {detail}; a smaller spacing_nm makes the continuum model accurate there",
                e_top / t
            ));
        }
    }

    // A zero coupling block cuts the device in two: nothing can pass.
    if let Some(i) = dev.coupling.iter().position(|c| device::max_abs(c) == 0.0) {
        warnings.push(format!(
            "cells {i} and {} are not coupled (an all-zero coupling block): no current can pass, and a level isolated between zero couplings makes the Green's function singular at its energy",
            i + 1
        ));
    }

    // ---- scattering ----
    let mut phonons = Vec::new();
    for (i, (p, &(steps, energy))) in spec.phonons.iter().zip(&snapped).enumerate() {
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
        let change = (energy - p.energy_ev) / p.energy_ev;
        if change.abs() > MAX_SNAP && !spec.grid.allow_coarse_snap {
            // The step that represents ħω exactly with no more than the
            // current step size.
            let k = (p.energy_ev / step).ceil().max(1.0);
            return Err(ctx.invalid(
                p.energy_span.clone(),
                &key,
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
            warnings.push(format!(
                "phonon.{i}.energy_ev = {:.3} meV was snapped to {:.3} meV ({steps} grid steps), a change of {:.1} %{allowed}: use a finer grid.step_ev",
                p.energy_ev * 1e3,
                energy * 1e3,
                100.0 * change
            ));
        }
        let coupling = site_vector(&dev, p.from_nm, p.to_nm, p.coupling_ev2);
        if coupling.iter().all(|&d| d == 0.0) && p.coupling_ev2 > 0.0 {
            warnings.push(format!(
                "phonon.{i} region [{}, {}) nm covers no cell",
                p.from_nm, p.to_nm
            ));
        }
        phonons.push(PhononMode {
            requested_energy_ev: p.energy_ev,
            energy_ev: energy,
            steps,
            coupling_ev2: coupling,
            bath_temperature_k: p.bath_temperature_k,
        });
    }
    let dephasing_ev2 = match &spec.dephasing {
        Some(d) if d.strength_ev2 > 0.0 => site_vector(&dev, d.from_nm, d.to_nm, d.strength_ev2),
        _ => Vec::new(),
    };
    let scattering = Scattering {
        dephasing_ev2,
        phonons,
        hermitian_part: spec.hermitian_part,
    };
    if spec.hermitian_part && scattering.phonons.is_empty() {
        warnings.push("solver.hermitian_part = \"include\" has no effect without phonons".into());
    }
    if spec.scba.energy_order == crate::scba::EnergyOrder::RedBlack && scattering.phonons.is_empty()
    {
        warnings.push(
            "solver.energy_order = \"red-black\" has no effect without phonons: \
             the energies are solved simultaneously"
                .into(),
        );
    }

    let phonon_conductance = match spec.phonon_conductance_w_per_k {
        Some(k) => k,
        None => {
            notes.push(
                "thermal.phonon_conductance_w_per_k not given: ZT uses κ_ph = 0 (an upper bound)"
                    .into(),
            );
            0.0
        }
    };
    if dev.potential_ev.iter().any(|u| u.abs() > MAX_ENERGY_EV) {
        return Err(ctx.invalid(
            spec.device_span.clone(),
            "device.region",
            "a potential profile of magnitude ≤ 1e6 eV",
            "a larger sum of regions and bias",
        ));
    }

    let problem = Problem {
        device: dev,
        left: Contact {
            lead: left_lead,
            fermi_level_ev: mu_l,
            temperature_k: spec.left.temperature_k,
        },
        right: Contact {
            lead: right_lead,
            fermi_level_ev: mu_r,
            temperature_k: spec.right.temperature_k,
        },
        scattering,
        grid,
        spin_degeneracy: f64::from(spec.spin_degeneracy),
        decimation: DecimationParams {
            eta_ev: spec.decimation_eta_ev,
            tolerance_ev: spec.decimation_tolerance_ev,
            ..DecimationParams::default()
        },
    };
    Ok(Resolved {
        problem,
        scba: spec.scba,
        voltage_v: v,
        zero_bias_fermi_levels_ev: (mu_l0, mu_r0),
        phonon_conductance_w_per_k: phonon_conductance,
        fit_electron_temperature: spec.fit_electron_temperature,
        allow_coarse_phonon_snap: spec.grid.allow_coarse_snap,
        response_split: spec.response_split,
        bias_drop: spec.drop.clone(),
        warnings,
        notes,
        device_kind: spec.kind.name(),
        hopping_ev: hopping,
    })
}

fn lead_text(lead: &Lead) -> String {
    match lead {
        Lead::Periodic { .. } => {
            let (lo, hi) = lead.band_range().unwrap_or((f64::NAN, f64::NAN));
            format!("periodic, band {lo:.4} to {hi:.4} eV")
        }
        Lead::WideBand { gamma } => {
            format!("wide band, Γ = {:.4} eV per orbital", gamma[(0, 0)].re)
        }
    }
}

impl Resolved {
    /// Memory the solver needs for this problem, in bytes (an estimate).
    ///
    /// The formula documented in [`crate::scba`] (section "Memory"): with
    /// E energies, N cells, b orbitals per cell, S = N·b, Anderson depth m
    /// and T threads,
    ///
    /// bytes = E·S·(72 + 8·P·A + 16·h) + 8·E·(N − 1) + 2·E·(16·b² + 64) + T·w
    ///
    /// with A = 2m + 3 for Anderson mixing (0 for linear), P = 3 numbers
    /// mixed per site with dephasing or the Hermitian part and 2 otherwise,
    /// h = 1 when the Hermitian part of the phonon self-energy is on, and
    /// w the RGF
    /// workspace of one thread (48·N·b² + 128·b² for b > 1, 24·N for b = 1).
    /// A coherent device needs one pass only: E·S·24 + 8·E·(N − 1) plus the
    /// leads and workspaces.
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
        let a = match self.scba.mixing {
            Mixing::Anderson { depth, .. } => 2 * depth as u64 + 3,
            Mixing::Linear { .. } => 0,
        };
        let h = u64::from(p.scattering.hermitian_part && !p.scattering.phonons.is_empty());
        let real_part = h == 1 || p.scattering.dephasing_ev2.iter().any(|&d| d != 0.0);
        let parts = if real_part { 3 } else { 2 };
        e * s * (72 + 8 * parts * a + 16 * h) + fixed
    }

    /// The resolved case as text for people (what `qheat check` prints).
    pub fn describe(&self) -> String {
        let p = &self.problem;
        let d = &p.device;
        let g = &p.grid;
        let mut s = String::new();
        let _ = writeln!(
            s,
            "device      {}, {} cells × {} orbital(s) per cell, spacing {} nm, length {:.4} nm",
            self.device_kind,
            d.cells(),
            d.orbitals,
            d.spacing_nm,
            d.length_nm()
        );
        if let Some(t) = self.hopping_ev {
            let _ = writeln!(
                s,
                "hopping     t = {t:.6} eV (band width 4t = {:.4} eV)",
                4.0 * t
            );
        }
        let umin = d.potential_ev.iter().copied().fold(f64::INFINITY, f64::min);
        let umax = d
            .potential_ev
            .iter()
            .copied()
            .fold(f64::NEG_INFINITY, f64::max);
        let _ = writeln!(
            s,
            "potential   {umin:.4} to {umax:.4} eV (bias included); lowest band edge in the device {:.4} eV",
            d.lowest_band_edge()
        );
        let _ = writeln!(
            s,
            "left lead   {}; µ = {:.4} eV (µ0 = {:.4} eV), T = {} K",
            lead_text(&p.left.lead),
            p.left.fermi_level_ev,
            self.zero_bias_fermi_levels_ev.0,
            p.left.temperature_k
        );
        let _ = writeln!(
            s,
            "right lead  {}; µ = {:.4} eV (µ0 = {:.4} eV), T = {} K",
            lead_text(&p.right.lead),
            p.right.fermi_level_ev,
            self.zero_bias_fermi_levels_ev.1,
            p.right.temperature_k
        );
        let drop = match &self.bias_drop {
            BiasDrop::Leads => "at the leads".to_string(),
            BiasDrop::Linear { from_nm, to_nm } => format!("linearly over [{from_nm}, {to_nm}] nm"),
        };
        let _ = writeln!(s, "bias        V = {} V, dropped {drop}", self.voltage_v);
        let _ = writeln!(
            s,
            "energies    {:.4} to {:.4} eV, step {:.4} meV, {} points",
            g.min_ev,
            g.max_ev(),
            g.step_ev * 1e3,
            g.count
        );
        if p.scattering.phonons.is_empty() {
            let _ = writeln!(s, "phonons     none");
        }
        for (i, m) in p.scattering.phonons.iter().enumerate() {
            let sites = m.coupling_ev2.iter().filter(|&&x| x > 0.0).count();
            let dmax = m.coupling_ev2.iter().copied().fold(0.0, f64::max);
            let _ = writeln!(
                s,
                "phonon {i}    ħω {:.3} meV -> {:.3} meV ({} grid steps), coupling {dmax:e} eV² on {sites} orbital sites, bath {} K, occupation {:.4}",
                m.requested_energy_ev * 1e3,
                m.energy_ev * 1e3,
                m.steps,
                m.bath_temperature_k,
                m.occupation()
            );
        }
        if !p.scattering.phonons.is_empty() {
            let worst = p
                .scattering
                .phonons
                .iter()
                .map(|m| (m.energy_ev / m.requested_energy_ev - 1.0).abs())
                .fold(0.0, f64::max);
            let rule = if self.allow_coarse_phonon_snap {
                "any change accepted (grid.allow_coarse_phonon_snap = true)".to_string()
            } else {
                format!(
                    "at most {:.0} % allowed (grid.allow_coarse_phonon_snap = true accepts more)",
                    MAX_SNAP * 100.0
                )
            };
            let _ = writeln!(
                s,
                "snapping    ħω moved by at most {:.2} %; {rule}",
                100.0 * worst
            );
        }
        let deph = &p.scattering.dephasing_ev2;
        if deph.iter().any(|&x| x > 0.0) {
            let sites = deph.iter().filter(|&&x| x > 0.0).count();
            let dmax = deph.iter().copied().fold(0.0, f64::max);
            let _ = writeln!(s, "dephasing   {dmax:e} eV² on {sites} orbital sites");
        } else {
            let _ = writeln!(s, "dephasing   none");
        }
        let _ = writeln!(
            s,
            "scattering  {}; Hermitian part of Σ_phonon {}",
            if p.scattering.is_coherent() {
                "none (coherent)"
            } else {
                "self-consistent Born"
            },
            if p.scattering.hermitian_part {
                "included"
            } else {
                "neglected"
            }
        );
        let mix = match self.scba.mixing {
            Mixing::Anderson { depth, damping } => {
                format!("Anderson (depth {depth}, damping {damping})")
            }
            Mixing::Linear { factor } => format!("linear (factor {factor})"),
        };
        let _ = writeln!(
            s,
            "solver      tolerance {:e}, at most {} iterations, {mix}, current floor {:e} A",
            self.scba.tolerance, self.scba.max_iterations, self.scba.current_floor_a
        );
        if !p.scattering.is_coherent() {
            let order = match crate::scba::red_black_colouring(p, self.scba.energy_order) {
                Some((w, true)) => {
                    format!("red-black in bands of {w} grid steps (phonons link opposite colours)")
                }
                Some((w, false)) => format!(
                    "red-black in bands of {w} grid steps (requested; some phonons link \
                     equal colours, so it gains less)"
                ),
                None => "simultaneous (all energies from the same Σ0)".to_string(),
            };
            let _ = writeln!(s, "order       {order}");
        }
        let _ = writeln!(s, "spin        g_s = {}", p.spin_degeneracy);
        let split = match self.response_split {
            ResponseSplit::Symmetric => "symmetric",
            ResponseSplit::LeftOnly => "left-only",
        };
        let _ = writeln!(
            s,
            "response    split {split}; κ_ph = {} W/K",
            self.phonon_conductance_w_per_k
        );
        let mem = self.memory_estimate_bytes() as f64;
        let _ = writeln!(s, "memory      about {:.1} MiB", mem / (1024.0 * 1024.0));
        for n in &self.notes {
            let _ = writeln!(s, "note: {n}");
        }
        for w in &self.warnings {
            let _ = writeln!(s, "warning: {w}");
        }
        s
    }
}
