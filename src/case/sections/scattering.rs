//! `[[phonon]]` (Einstein modes) and `[dephasing]` (elastic dephasing).

use super::super::check::{Checker, MAX_ENERGY_EV, show, span_of};
use super::super::error::CaseError;
use super::super::raw::{RawCase, RawPhonon};
use std::ops::Range;
use toml::Spanned;

/// Largest phonon energy accepted (eV): the stiffest lattice vibrations
/// (light atoms, strong bonds) stay well below this, so a larger value is a
/// unit slip (meV for eV) or a typo.
pub(crate) const MAX_PHONON_EV: f64 = 0.5;

/// One validated phonon mode.
#[derive(Clone, Debug)]
pub(crate) struct PhononSpec {
    pub energy_ev: f64,
    pub energy_span: Option<Range<usize>>,
    pub coupling_ev2: f64,
    pub from_nm: f64,
    pub to_nm: f64,
    pub bath_temperature_k: f64,
}

impl PhononSpec {
    /// Validate every `[[phonon]]` entry; the bath defaults to
    /// `mean_lead_t`.
    pub fn all_from_raw(
        raw: &RawCase,
        ck: &Checker<'_>,
        length_nm: f64,
        mean_lead_t: f64,
    ) -> Result<Vec<Self>, CaseError> {
        raw.phonon
            .iter()
            .flatten()
            .enumerate()
            .map(|(i, p)| Self::one(p, &format!("phonon.{i}"), ck, length_nm, mean_lead_t))
            .collect()
    }

    fn one(
        p: &Spanned<RawPhonon>,
        prefix: &str,
        ck: &Checker<'_>,
        length_nm: f64,
        mean_lead_t: f64,
    ) -> Result<Self, CaseError> {
        let span = p.span();
        let p = p.get_ref();
        let e = ck.required(
            ck.num(&p.energy_ev, &format!("{prefix}.energy_ev"))?,
            Some(span.clone()),
            &format!("{prefix}.energy_ev"),
            "the phonon energy ħω in eV (> 0)",
        )?;
        if e.value <= 0.0 || e.value > MAX_PHONON_EV {
            return Err(ck.ctx.invalid(
                e.span,
                &format!("{prefix}.energy_ev"),
                &format!(
                    "a phonon energy ħω in eV > 0 and ≤ {MAX_PHONON_EV} \
                     (lattice vibrations stay well below that; is the value in eV, not meV?)"
                ),
                format!("{} eV", show(e.value)),
            ));
        }
        let coupling = ck.required(
            ck.ranged(
                &p.coupling_ev2,
                &format!("{prefix}.coupling_ev2"),
                "a coupling in eV² ≥ 0",
                |x| (0.0..=MAX_ENERGY_EV).contains(&x),
            )?,
            Some(span),
            &format!("{prefix}.coupling_ev2"),
            "the coupling in eV² (≥ 0)",
        )?;
        let (from, to) = ck.region(&p.from_nm, &p.to_nm, prefix, length_nm, None)?;
        let bath = ck
            .temperature(
                &p.bath_temperature_k,
                &format!("{prefix}.bath_temperature_k"),
            )?
            .unwrap_or(mean_lead_t);
        Ok(Self {
            energy_ev: e.value,
            energy_span: e.span,
            coupling_ev2: coupling,
            from_nm: from,
            to_nm: to,
            bath_temperature_k: bath,
        })
    }
}

/// A validated `[dephasing]` table.
#[derive(Clone, Debug)]
pub(crate) struct DephasingSpec {
    pub strength_ev2: f64,
    pub from_nm: f64,
    pub to_nm: f64,
}

impl DephasingSpec {
    pub fn from_raw(
        raw: &RawCase,
        ck: &Checker<'_>,
        length_nm: f64,
    ) -> Result<Option<Self>, CaseError> {
        let Some(d) = &raw.dephasing else {
            return Ok(None);
        };
        let span = d.span();
        let d = d.get_ref();
        let strength = ck.required(
            ck.non_negative(
                &d.strength_ev2,
                "dephasing.strength_ev2",
                "a dephasing strength in eV²",
            )?,
            Some(span),
            "dephasing.strength_ev2",
            "the dephasing strength in eV² (≥ 0)",
        )?;
        if strength > MAX_ENERGY_EV {
            return Err(ck.ctx.invalid(
                span_of(&d.strength_ev2),
                "dephasing.strength_ev2",
                "a dephasing strength in eV² ≤ 1e6",
                show(strength),
            ));
        }
        let (from, to) = ck.region(&d.from_nm, &d.to_nm, "dephasing", length_nm, None)?;
        Ok(Some(Self {
            strength_ev2: strength,
            from_nm: from,
            to_nm: to,
        }))
    }
}
