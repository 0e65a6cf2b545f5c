//! `[electrostatics]`: the potential of the device's own charge, solved
//! with the transport (Poisson's equation along x for a wire or slab of
//! the given cross-section).
//!
//! Values per cell: every cell takes `permittivity`, `donors_cm3` and
//! `acceptors_cm3`; each `[[electrostatics.region]]` selects the cells with
//! from_nm ≤ x < to_nm (as the potential regions do) and replaces the
//! values it names there, later entries winning. An end with
//! `left_potential_v` / `right_potential_v` holds that electrostatic
//! potential; without it the end is charge-neutral (zero field). A gate
//! needs both `gate_potential_v` and `gate_length_nm`. `coupling` picks
//! how the potential and the Born loop are iterated together ("joint",
//! the default, or "nested").

use super::super::check::{Checker, Choice};
use super::super::error::CaseError;
use super::super::raw::{Opt, RawCase, RawElectrostatics, RawElectrostaticsRegion};
use super::device::{DeviceKind, DeviceSpec};
use crate::electrostatics::{Boundary, Coupling, Electrostatics, Ends, Gate};
use std::ops::Range;
use toml::Spanned;

impl Choice for Coupling {
    const CHOICES: &'static [(&'static str, Self)] =
        &[("joint", Coupling::Joint), ("nested", Coupling::Nested)];
}

impl Choice for Ends {
    const CHOICES: &'static [(&'static str, Self)] =
        &[("zero-field", Ends::ZeroField), ("ohmic", Ends::Ohmic)];
}

/// Largest doping accepted (cm⁻³): above the atomic density of any solid.
const MAX_DOPING_CM3: f64 = 1e24;
/// Largest relative permittivity accepted.
const MAX_PERMITTIVITY: f64 = 1e4;

/// One `[[electrostatics.region]]`.
#[derive(Clone, Debug, PartialEq)]
pub(crate) struct EsRegion {
    pub from_nm: f64,
    pub to_nm: f64,
    pub permittivity: Option<f64>,
    pub donors_cm3: Option<f64>,
    pub acceptors_cm3: Option<f64>,
}

/// A validated `[electrostatics]` table.
#[derive(Clone, Debug, PartialEq)]
pub(crate) struct ElectrostaticsSpec {
    pub permittivity: f64,
    pub area_nm2: f64,
    pub donors_cm3: f64,
    pub acceptors_cm3: f64,
    pub left_potential_v: Option<f64>,
    pub right_potential_v: Option<f64>,
    pub gate: Option<Gate>,
    pub tolerance_ev: f64,
    pub max_iterations: usize,
    pub coupling: Coupling,
    pub ends: Ends,
    pub regions: Vec<EsRegion>,
    /// Span of the table.
    pub span: Option<Range<usize>>,
}

impl ElectrostaticsSpec {
    /// Validate `[electrostatics]`; `None` when the file has none.
    pub fn from_raw(
        raw: &RawCase,
        ck: &Checker<'_>,
        device: &DeviceSpec,
        warnings: &mut Vec<String>,
    ) -> Result<Option<Self>, CaseError> {
        let Some(es) = raw.electrostatics.as_ref() else {
            return Ok(None);
        };
        let span = Some(es.span());
        let e = es.get_ref();
        if let DeviceKind::Blocks { .. } = device.kind {
            return Err(ck.ctx.invalid(
                span,
                "electrostatics",
                "no [electrostatics] section with device.kind = \"blocks\" (the check that the \
                 energy grid holds the occupied states needs a band model; hint: describe the \
                 device as a chain or strip)",
                "an [electrostatics] table",
            ));
        }
        let permittivity = ck.required(
            permittivity(ck, &e.permittivity, "electrostatics.permittivity")?,
            span.clone(),
            "electrostatics.permittivity",
            "the relative permittivity ε_r of the device (hint: 11.7 for silicon, 12.9 for GaAs)",
        )?;
        let area_nm2 = ck.required(
            ck.ranged(
                &e.area_nm2,
                "electrostatics.area_nm2",
                "a cross-section in nm², > 0 and ≤ 1e8",
                |x| x > 0.0 && x <= 1e8,
            )?,
            span.clone(),
            "electrostatics.area_nm2",
            "the cross-section A of the wire or slab in nm² (it turns doping per cm³ into donors per cell)",
        )?;
        let gate = gate(ck, e, span.clone())?;
        let potential = |v: &Opt<f64>, k: &str| {
            ck.ranged(v, k, "a potential in V of magnitude ≤ 100", |x| {
                x.abs() <= 100.0
            })
        };
        let spec = Self {
            permittivity,
            area_nm2,
            donors_cm3: doping(ck, &e.donors_cm3, "electrostatics.donors_cm3")?.unwrap_or(0.0),
            acceptors_cm3: doping(ck, &e.acceptors_cm3, "electrostatics.acceptors_cm3")?
                .unwrap_or(0.0),
            left_potential_v: potential(&e.left_potential_v, "electrostatics.left_potential_v")?,
            right_potential_v: potential(&e.right_potential_v, "electrostatics.right_potential_v")?,
            gate,
            tolerance_ev: ck
                .ranged(
                    &e.tolerance_ev,
                    "electrostatics.tolerance_ev",
                    "a potential tolerance in eV, > 0 and ≤ 0.01 (hint: 1e-5 is 0.04 % of kT at 300 K)",
                    |x| x > 0.0 && x <= 0.01,
                )?
                .unwrap_or(Electrostatics::DEFAULT_TOLERANCE_EV),
            max_iterations: ck
                .int(
                    &e.max_iterations,
                    "electrostatics.max_iterations",
                    "an iteration limit from 1 to 10000",
                    |n| (1..=10_000).contains(&n),
                )?
                .unwrap_or(Electrostatics::DEFAULT_MAX_ITERATIONS),
            coupling: ck
                .choice(&e.coupling, "electrostatics.coupling")?
                .unwrap_or_default(),
            ends: ck.choice(&e.ends, "electrostatics.ends")?.unwrap_or_default(),
            regions: regions(e, ck, device, warnings)?,
            span,
        };
        spec.check_ohmic_ends(ck, device)?;
        Ok(Some(spec))
    }

    /// An ohmic end needs net donors in its end cell: its potential is
    /// where the band holds them at the lead's Fermi level, and a cell
    /// without them has no such place (the model has no holes).
    fn check_ohmic_ends(&self, ck: &Checker<'_>, device: &DeviceSpec) -> Result<(), CaseError> {
        if self.ends != Ends::Ohmic {
            return Ok(());
        }
        let es = self.build(device);
        let doping = es.net_doping_per_cell(device.spacing_nm);
        let ends = [
            ("left", 0, self.left_potential_v),
            ("right", device.cells - 1, self.right_potential_v),
        ];
        for (side, cell, given) in ends {
            if given.is_none() && doping[cell] <= 0.0 {
                return Err(ck.ctx.invalid(
                    self.span.clone(),
                    "electrostatics.ends",
                    &format!(
                        "net donors in the {side} end cell for ends = \"ohmic\" (hint: dope the \
                         contact region, give electrostatics.{side}_potential_v, or use \
                         ends = \"zero-field\")"
                    ),
                    format!(
                        "{:e} net donors per cm³ there",
                        es.donors_cm3[cell] - es.acceptors_cm3[cell]
                    ),
                ));
            }
        }
        Ok(())
    }

    /// The electrostatics of the device's cells.
    pub fn build(&self, device: &DeviceSpec) -> Electrostatics {
        let n = device.cells;
        let mut eps = vec![self.permittivity; n];
        let mut donors = vec![self.donors_cm3; n];
        let mut acceptors = vec![self.acceptors_cm3; n];
        for r in &self.regions {
            for c in (0..n).filter(|&c| {
                let x = c as f64 * device.spacing_nm;
                x >= r.from_nm && x < r.to_nm
            }) {
                if let Some(v) = r.permittivity {
                    eps[c] = v;
                }
                if let Some(v) = r.donors_cm3 {
                    donors[c] = v;
                }
                if let Some(v) = r.acceptors_cm3 {
                    acceptors[c] = v;
                }
            }
        }
        let end = |v: Option<f64>| match v {
            Some(potential_v) => Boundary::Fixed { potential_v },
            None => self.ends.boundary(),
        };
        Electrostatics {
            permittivity: eps,
            donors_cm3: donors,
            acceptors_cm3: acceptors,
            area_nm2: self.area_nm2,
            gate: self.gate,
            left: end(self.left_potential_v),
            right: end(self.right_potential_v),
            tolerance_ev: self.tolerance_ev,
            max_iterations: self.max_iterations,
            mixing_depth: Electrostatics::DEFAULT_MIXING_DEPTH,
            mixing_factor: Electrostatics::DEFAULT_MIXING_FACTOR,
            coupling: self.coupling,
        }
    }
}

impl ElectrostaticsSpec {
    /// The lowest band bottom (eV) that a charge-neutral doped region
    /// reaches: for every distinct net donor count per cell, the band edge
    /// at which an infinite uniform chain or strip holds that many
    /// electrons at Fermi level `mu` and thermal energy `kt`, plus the
    /// lowest transverse mode. `None` without donors in excess (nothing
    /// pulls the band down) or for a device without a band model.
    pub fn lowest_neutral_band_bottom(
        &self,
        device: &DeviceSpec,
        mu: f64,
        kt: f64,
        gs: f64,
    ) -> Option<f64> {
        let (mass, modes) = match device.kind {
            DeviceKind::Chain { effective_mass, .. } => (effective_mass, 1),
            DeviceKind::Strip {
                effective_mass,
                width,
                ..
            } => (effective_mass, width),
            DeviceKind::Blocks { .. } => return None,
        };
        let t = crate::units::hopping_ev(mass, device.spacing_nm);
        let modes: Vec<f64> = if let DeviceKind::Strip { width, .. } = device.kind {
            (1..=modes)
                .map(|n| crate::device::strip_mode_energy(width, t, n))
                .collect()
        } else {
            vec![0.0]
        };
        let es = self.build(device);
        let mut counts = es.net_doping_per_cell(device.spacing_nm);
        counts.retain(|&d| d > 0.0);
        counts.sort_by(f64::total_cmp);
        counts.dedup();
        counts
            .iter()
            .filter_map(|&d| crate::electrostatics::neutral_band_edge(d, t, &modes, mu, kt, gs))
            .map(|ec| ec + modes[0])
            .reduce(f64::min)
    }
}

fn permittivity(ck: &Checker<'_>, v: &Opt<f64>, key: &str) -> Result<Option<f64>, CaseError> {
    ck.ranged(
        v,
        key,
        &format!("a relative permittivity ≥ 1 and ≤ {MAX_PERMITTIVITY:e} (hint: 1 is vacuum)"),
        |x| (1.0..=MAX_PERMITTIVITY).contains(&x),
    )
}

fn doping(ck: &Checker<'_>, v: &Opt<f64>, key: &str) -> Result<Option<f64>, CaseError> {
    ck.ranged(
        v,
        key,
        &format!("a density in cm⁻³, ≥ 0 and ≤ {MAX_DOPING_CM3:e} (hint: 1e18 is 1e18 per cm³, not per nm³)"),
        |x| (0.0..=MAX_DOPING_CM3).contains(&x),
    )
}

/// The gate: both keys or neither.
fn gate(
    ck: &Checker<'_>,
    e: &RawElectrostatics,
    span: Option<Range<usize>>,
) -> Result<Option<Gate>, CaseError> {
    let potential = ck.ranged(
        &e.gate_potential_v,
        "electrostatics.gate_potential_v",
        "a gate potential in V of magnitude ≤ 100",
        |x| x.abs() <= 100.0,
    )?;
    let length = ck.ranged(
        &e.gate_length_nm,
        "electrostatics.gate_length_nm",
        "a screening length in nm, > 0 and ≤ 1e6",
        |x| x > 0.0 && x <= 1e6,
    )?;
    match (potential, length) {
        (None, None) => Ok(None),
        (Some(potential_v), Some(length_nm)) => Ok(Some(Gate {
            potential_v,
            length_nm,
        })),
        (Some(_), None) => Err(ck.ctx.missing(
            span,
            "electrostatics.gate_length_nm",
            "the gate's screening length λ in nm (a gate needs both gate_potential_v and gate_length_nm)",
        )),
        (None, Some(_)) => Err(ck.ctx.missing(
            span,
            "electrostatics.gate_potential_v",
            "the gate potential in V (a gate needs both gate_potential_v and gate_length_nm)",
        )),
    }
}

fn regions(
    e: &RawElectrostatics,
    ck: &Checker<'_>,
    device: &DeviceSpec,
    warnings: &mut Vec<String>,
) -> Result<Vec<EsRegion>, CaseError> {
    let mut out = Vec::new();
    for (i, r) in e.region.iter().flatten().enumerate() {
        let prefix = format!("electrostatics.region.{i}");
        let region = one_region(r, &prefix, ck, device.length_nm())?;
        device.warn_if_no_cell(&prefix, region.from_nm, region.to_nm, warnings);
        out.push(region);
    }
    Ok(out)
}

fn one_region(
    r: &Spanned<RawElectrostaticsRegion>,
    prefix: &str,
    ck: &Checker<'_>,
    length_nm: f64,
) -> Result<EsRegion, CaseError> {
    let span = r.span();
    let r = r.get_ref();
    let (from_nm, to_nm) = ck.region(
        &r.from_nm,
        &r.to_nm,
        prefix,
        length_nm,
        Some(Some(span.clone())),
    )?;
    let region = EsRegion {
        from_nm,
        to_nm,
        permittivity: permittivity(ck, &r.permittivity, &format!("{prefix}.permittivity"))?,
        donors_cm3: doping(ck, &r.donors_cm3, &format!("{prefix}.donors_cm3"))?,
        acceptors_cm3: doping(ck, &r.acceptors_cm3, &format!("{prefix}.acceptors_cm3"))?,
    };
    if region.permittivity.is_none()
        && region.donors_cm3.is_none()
        && region.acceptors_cm3.is_none()
    {
        return Err(ck.ctx.missing(
            Some(span),
            &format!("{prefix}.donors_cm3"),
            "donors_cm3, acceptors_cm3 and/or permittivity (the values the region puts in place of the uniform ones)",
        ));
    }
    Ok(region)
}
