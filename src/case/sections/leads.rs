//! `[leads.left]`, `[leads.right]`: Fermi level, temperature and the lead
//! model (continuation of the end cell, energy-selective, wide band, or a
//! lead of its own: see [`super::lead_blocks`]).

use super::super::blocks_file::BlockFiles;
use super::super::check::{Checker, MAX_ENERGY_EV, span_of};
use super::super::error::CaseError;
use super::super::raw::{Opt, RawCase, RawLead};
use super::device::{DeviceKind, DeviceSpec};
use super::lead_blocks::{OwnBlocks, own_model};
use crate::C64;
use faer::Mat;
use std::ops::Range;

/// The lead model of one contact.
#[derive(Clone, Debug, PartialEq)]
pub(crate) enum LeadModel {
    /// Periodic continuation of the device's end cell.
    Continuation,
    /// Chain/strip lead with its own band edge and/or mass.
    Selective {
        band_edge_ev: Option<f64>,
        effective_mass: Option<f64>,
    },
    /// Constant broadening Γ·I on the end cell.
    WideBand { gamma_ev: f64 },
    /// Constant broadening with a Γ of its own per orbital or as a full
    /// matrix (blocks devices): b×b, or 2b×2b with explicit spin.
    WideBandMatrix {
        gamma: Mat<C64>,
        /// Where Γ came from (the key or the file), for descriptions.
        source: String,
    },
    /// A periodic lead with blocks of its own (blocks devices).
    OwnBlocks(OwnBlocks),
}

/// One validated lead.
#[derive(Clone, Debug)]
pub(crate) struct LeadSpec {
    pub fermi_level_ev: f64,
    pub temperature_k: f64,
    pub model: LeadModel,
}

/// Both leads.
#[derive(Clone, Debug)]
pub(crate) struct LeadsSpec {
    pub left: LeadSpec,
    pub right: LeadSpec,
}

impl LeadsSpec {
    /// Validate `[leads]` beside `device` (a blocks device refuses
    /// energy-selective leads; a chain or strip refuses leads of their
    /// own; the spacing bounds a lead's hopping); a lead's block files
    /// come from (or go into) `files`.
    pub fn from_raw(
        raw: &RawCase,
        ck: &Checker<'_>,
        device: &DeviceSpec,
        files: &mut BlockFiles,
    ) -> Result<Self, CaseError> {
        let span = span_of(&raw.leads);
        let Some(leads) = raw.leads.as_ref().map(|l| l.get_ref()) else {
            return Err(ck.ctx.missing(
                Some(0..0),
                "leads",
                "[leads.left] and [leads.right] tables",
            ));
        };
        let mut read = |l: &Opt<RawLead>, side: &str| {
            let p = format!("leads.{side}");
            match l {
                Some(l) => lead(l.get_ref(), Some(l.span()), &p, ck, device, files),
                None => Err(ck.ctx.missing(span.clone(), &p, &format!("a [{p}] table"))),
            }
        };
        Ok(Self {
            left: read(&leads.left, "left")?,
            right: read(&leads.right, "right")?,
        })
    }

    /// The mean lead temperature (the default bath temperature).
    pub fn mean_temperature_k(&self) -> f64 {
        0.5 * (self.left.temperature_k + self.right.temperature_k)
    }
}

fn lead(
    l: &RawLead,
    span: Option<Range<usize>>,
    p: &str,
    ck: &Checker<'_>,
    device: &DeviceSpec,
    files: &mut BlockFiles,
) -> Result<LeadSpec, CaseError> {
    let fermi_level_ev = ck.required(
        ck.energy(&l.fermi_level_ev, &format!("{p}.fermi_level_ev"))?,
        span.clone(),
        &format!("{p}.fermi_level_ev"),
        "the zero-bias Fermi level in eV",
    )?;
    let temperature_k = ck.required(
        ck.temperature(&l.temperature_k, &format!("{p}.temperature_k"))?,
        span,
        &format!("{p}.temperature_k"),
        "the temperature in K (> 0)",
    )?;
    Ok(LeadSpec {
        fermi_level_ev,
        temperature_k,
        model: match own_model(l, p, ck, device, files)? {
            Some(own) => alone(own, l, p, ck)?,
            None => {
                let is_blocks = matches!(device.kind, DeviceKind::Blocks { .. });
                model(l, p, ck, is_blocks, device.spacing_nm)?
            }
        },
    })
}

/// A lead of its own refuses the keys of the other lead models.
fn alone(own: LeadModel, l: &RawLead, p: &str, ck: &Checker<'_>) -> Result<LeadModel, CaseError> {
    let others = [
        ("wide_band_ev", span_of(&l.wide_band_ev)),
        ("band_edge_ev", span_of(&l.band_edge_ev)),
        ("effective_mass", span_of(&l.effective_mass)),
    ];
    match others.into_iter().find(|(_, s)| s.is_some()) {
        None => Ok(own),
        Some((key, s)) => {
            let what = match &own {
                LeadModel::OwnBlocks(_) => "onsite_file/coupling_file",
                _ => "a wide-band Γ per orbital or as a matrix",
            };
            Err(ck.ctx.invalid(
                s,
                &format!("{p}.{key}"),
                &format!("one kind of lead (this lead already has {what})"),
                format!("`{key}` set too"),
            ))
        }
    }
}

/// Wide band, energy-selective or the continuation of the end cell.
fn model(
    l: &RawLead,
    p: &str,
    ck: &Checker<'_>,
    is_blocks: bool,
    spacing_nm: f64,
) -> Result<LeadModel, CaseError> {
    let gamma = ck.ranged(
        &l.wide_band_ev,
        &format!("{p}.wide_band_ev"),
        "a broadening Γ in eV > 0",
        |x| x > 0.0 && x <= MAX_ENERGY_EV,
    )?;
    let edge = ck.energy(&l.band_edge_ev, &format!("{p}.band_edge_ev"))?;
    let mass = ck.positive(
        &l.effective_mass,
        &format!("{p}.effective_mass"),
        "an effective mass (units of m0)",
    )?;
    if let Some(m) = mass {
        let t = crate::units::hopping_ev(m, spacing_nm);
        if !(t.is_finite() && t <= MAX_ENERGY_EV) {
            return Err(ck.ctx.invalid(
                span_of(&l.effective_mass),
                &format!("{p}.effective_mass"),
                &format!("a mass giving a hopping t ≤ {MAX_ENERGY_EV:e} eV"),
                format!("t = {t:e} eV"),
            ));
        }
    }
    match (gamma, edge.is_some() || mass.is_some()) {
        (Some(_), true) => Err(ck.ctx.invalid(
            span_of(&l.wide_band_ev),
            &format!("{p}.wide_band_ev"),
            "either wide_band_ev or band_edge_ev/effective_mass, not both",
            "both",
        )),
        (Some(g), false) => Ok(LeadModel::WideBand { gamma_ev: g }),
        (None, true) if is_blocks => {
            let s = span_of(&l.band_edge_ev).or(span_of(&l.effective_mass));
            let k = if edge.is_some() {
                "band_edge_ev"
            } else {
                "effective_mass"
            };
            Err(ck.ctx.invalid(
                s,
                &format!("{p}.{k}"),
                "no such key with kind = \"blocks\" (only for chain/strip leads)",
                "it set",
            ))
        }
        (None, true) => Ok(LeadModel::Selective {
            band_edge_ev: edge,
            effective_mass: mass,
        }),
        (None, false) => Ok(LeadModel::Continuation),
    }
}
