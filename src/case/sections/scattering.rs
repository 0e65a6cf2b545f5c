//! `[[phonon]]` (Einstein modes) and `[dephasing]` (elastic dephasing).

use super::super::check::{Checker, MAX_ENERGY_EV, show};
use super::super::error::CaseError;
use super::super::raw::{Opt, RawCase, RawPhonon};
use std::ops::Range;
use toml::Spanned;

/// Largest phonon energy accepted (eV): the stiffest lattice vibrations
/// (light atoms, strong bonds) stay well below this, so a larger value is a
/// unit slip (meV for eV) or a typo.
pub(crate) const MAX_PHONON_EV: f64 = 0.5;

/// How strongly a mechanism couples on the orbitals of a cell.
#[derive(Clone, Debug)]
pub(crate) enum CouplingSpec {
    /// The same strength (eV²) on every orbital.
    Uniform(f64),
    /// One strength (eV²) per orbital of a cell; the length is checked
    /// against the device once its orbital count is known.
    PerOrbital {
        values: Vec<f64>,
        key: String,
        span: Option<Range<usize>>,
    },
}

impl CouplingSpec {
    /// True when the mechanism couples nowhere (every strength zero).
    pub fn is_zero(&self) -> bool {
        match self {
            CouplingSpec::Uniform(d) => *d == 0.0,
            CouplingSpec::PerOrbital { values, .. } => values.iter().all(|&d| d == 0.0),
        }
    }
}

/// One validated phonon mode.
#[derive(Clone, Debug)]
pub(crate) struct PhononSpec {
    pub energy_ev: f64,
    pub energy_span: Option<Range<usize>>,
    pub coupling: CouplingSpec,
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
        let coupling = coupling(
            ck,
            (&p.coupling_ev2, &p.coupling_per_orbital_ev2),
            (
                &format!("{prefix}.coupling_ev2"),
                &format!("{prefix}.coupling_per_orbital_ev2"),
            ),
            span,
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
            coupling,
            from_nm: from,
            to_nm: to,
            bath_temperature_k: bath,
        })
    }
}

/// A validated `[dephasing]` table.
#[derive(Clone, Debug)]
pub(crate) struct DephasingSpec {
    pub strength: CouplingSpec,
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
        let strength = coupling(
            ck,
            (&d.strength_ev2, &d.strength_per_orbital_ev2),
            (
                "dephasing.strength_ev2",
                "dephasing.strength_per_orbital_ev2",
            ),
            span,
            "the dephasing strength in eV² (≥ 0)",
        )?;
        let (from, to) = ck.region(&d.from_nm, &d.to_nm, "dephasing", length_nm, None)?;
        Ok(Some(Self {
            strength,
            from_nm: from,
            to_nm: to,
        }))
    }
}

/// The strength of a mechanism from its scalar key or its per-orbital
/// list (exactly one of the two); `keys` names them in that order.
fn coupling(
    ck: &Checker<'_>,
    (scalar, list): (&Opt<f64>, &Opt<toml::Value>),
    (scalar_key, list_key): (&str, &str),
    table: Range<usize>,
    what: &str,
) -> Result<CouplingSpec, CaseError> {
    let in_range = |x: f64| (0.0..=MAX_ENERGY_EV).contains(&x);
    let expected = format!("a strength in eV² ≥ 0 and ≤ {}", show(MAX_ENERGY_EV));
    match (scalar, list) {
        (Some(_), Some(l)) => Err(ck.ctx.invalid(
            Some(l.span()),
            list_key,
            &format!("either {scalar_key} or {list_key}, not both"),
            "both set (hint: keep one of the two)",
        )),
        (_, Some(l)) => {
            let span = Some(l.span());
            let values = numbers(l.get_ref()).ok_or_else(|| {
                ck.ctx
                    .invalid(span.clone(), list_key, "an array of numbers", l.get_ref())
            })?;
            if values.is_empty() {
                return Err(ck.ctx.invalid(
                    span,
                    list_key,
                    "one value per orbital of a cell",
                    "an empty array",
                ));
            }
            if let Some(i) = values.iter().position(|&x| !in_range(x)) {
                return Err(ck.ctx.invalid(
                    span,
                    list_key,
                    &format!("{expected} for every orbital"),
                    format!("{} at orbital {i}", show(values[i])),
                ));
            }
            Ok(CouplingSpec::PerOrbital {
                values,
                key: list_key.to_string(),
                span,
            })
        }
        (_, None) => {
            let d = ck.ranged(scalar, scalar_key, &expected, in_range)?;
            let d = ck.required(d, Some(table), scalar_key, what)?;
            Ok(CouplingSpec::Uniform(d))
        }
    }
}

/// The numbers of a TOML array (integers accepted), or `None` when it is
/// not an array of finite numbers.
fn numbers(v: &toml::Value) -> Option<Vec<f64>> {
    let items = v.as_array()?;
    items
        .iter()
        .map(|x| match x {
            toml::Value::Float(f) if f.is_finite() => Some(*f),
            toml::Value::Integer(i) => Some(*i as f64),
            _ => None,
        })
        .collect()
}
