//! `[[phonon]]` (Einstein modes) and `[dephasing]` (elastic dephasing).

use super::super::blocks_file::BlockFiles;
use super::super::check::{Checker, MAX_ENERGY_EV, show};
use super::super::error::CaseError;
use super::super::raw::{Opt, RawCase, RawPhonon};
use super::device::read_named;
use crate::C64;
use faer::Mat;
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
    /// Hermitian coupling matrices (eV) from a blocks file, each an
    /// independent source in every cell of the region; their size is
    /// checked against the device later (a .csv file's is a lower bound).
    Matrices {
        matrices: Vec<Mat<C64>>,
        from_csv: bool,
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
            CouplingSpec::Matrices { matrices, .. } => matrices.iter().all(|m| {
                (0..m.nrows()).all(|r| (0..m.ncols()).all(|c| m[(r, c)] == C64::new(0.0, 0.0)))
            }),
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
        files: &mut BlockFiles,
    ) -> Result<Vec<Self>, CaseError> {
        let mut out = Vec::new();
        for (i, p) in raw.phonon.iter().flatten().enumerate() {
            let prefix = format!("phonon.{i}");
            let mut mode = Self::one(p, &prefix, ck, length_nm, mean_lead_t)?;
            let raw = p.get_ref();
            let keys = (
                format!("{prefix}.coupling_matrices_file"),
                format!("{prefix}.coupling_matrices_ev"),
            );
            let given = raw.coupling_ev2.is_some() || raw.coupling_per_orbital_ev2.is_some();
            let sources = (&raw.coupling_matrices_file, &raw.coupling_matrices_ev);
            if let Some(m) = matrices(sources, (&keys.0, &keys.1), given, ck, files)? {
                mode.coupling = m;
            }
            out.push(mode);
        }
        Ok(out)
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
        // With coupling matrices the caller sets the coupling from them.
        let coupling = if p.coupling_matrices_file.is_some() || p.coupling_matrices_ev.is_some() {
            CouplingSpec::Uniform(0.0)
        } else {
            coupling(
                ck,
                (&p.coupling_ev2, &p.coupling_per_orbital_ev2),
                (
                    &format!("{prefix}.coupling_ev2"),
                    &format!("{prefix}.coupling_per_orbital_ev2"),
                ),
                span,
                "the coupling in eV² (≥ 0)",
            )?
        };
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
        files: &mut BlockFiles,
    ) -> Result<Option<Self>, CaseError> {
        let Some(d) = &raw.dephasing else {
            return Ok(None);
        };
        let span = d.span();
        let d = d.get_ref();
        let keys = (
            "dephasing.coupling_matrices_file",
            "dephasing.coupling_matrices_ev",
        );
        let given = d.strength_ev2.is_some() || d.strength_per_orbital_ev2.is_some();
        let sources = (&d.coupling_matrices_file, &d.coupling_matrices_ev);
        if let Some(m) = matrices(sources, keys, given, ck, files)? {
            let (from, to) = ck.region(&d.from_nm, &d.to_nm, "dephasing", length_nm, None)?;
            return Ok(Some(Self {
                strength: m,
                from_nm: from,
                to_nm: to,
            }));
        }
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

/// The coupling matrices of a mechanism when a file (`keys.0`) or the
/// inline list (`keys.1`) gives them (one of the two, and refused next to
/// a scalar or per-orbital strength, `other_given`): Hermitian b × b
/// matrices, one source each.
fn matrices(
    (file, inline): (&Opt<String>, &Opt<toml::Value>),
    (file_key, inline_key): (&str, &str),
    other_given: bool,
    ck: &Checker<'_>,
    files: &mut BlockFiles,
) -> Result<Option<CouplingSpec>, CaseError> {
    let (key, span) = match (file, inline) {
        (None, None) => return Ok(None),
        (Some(_), Some(v)) => {
            return Err(ck.ctx.invalid(
                Some(v.span()),
                inline_key,
                &format!("either {file_key} or {inline_key}, not both"),
                "both set (hint: keep one of the two)",
            ));
        }
        (Some(f), None) => (file_key, Some(f.span())),
        (None, Some(v)) => (inline_key, Some(v.span())),
    };
    if other_given {
        return Err(ck.ctx.invalid(
            span,
            key,
            "coupling matrices or a strength (scalar or per orbital), not both",
            "both set (hint: keep one of the two)",
        ));
    }
    let (blocks, from_csv) = match (file, inline) {
        (Some(name), _) => {
            let (_, file) = read_named(name, key, ck, files)?;
            (file.blocks, file.from_csv)
        }
        (None, Some(v)) => {
            let blocks = inline_matrices(v.get_ref()).map_err(|found| {
                ck.ctx.invalid(
                    span.clone(),
                    key,
                    "a list of square matrices of one size, each a list of rows whose \
                     entries are numbers or [re, im] pairs (eV)",
                    format!(
                        "{found} (hint: one matrix is written [[a, b], [c, d]] for two \
                         orbitals, a complex entry as [re, im])"
                    ),
                )
            })?;
            (blocks, false)
        }
        (None, None) => return Ok(None),
    };
    check_hermitian(&blocks, key, span.clone(), ck)?;
    Ok(Some(CouplingSpec::Matrices {
        matrices: blocks,
        from_csv,
        key: key.to_string(),
        span,
    }))
}

/// Refuses a matrix that is not Hermitian or has an entry above 1e3 eV.
fn check_hermitian(
    blocks: &[Mat<C64>],
    key: &str,
    span: Option<Range<usize>>,
    ck: &Checker<'_>,
) -> Result<(), CaseError> {
    for (k, m) in blocks.iter().enumerate() {
        let scale = (0..m.nrows())
            .flat_map(|r| (0..m.ncols()).map(move |c| (r, c)))
            .fold(0.0f64, |s, (r, c)| s.max(m[(r, c)].norm()));
        let worst = (0..m.nrows())
            .flat_map(|r| (0..m.ncols()).map(move |c| (r, c)))
            .fold(0.0f64, |s, (r, c)| {
                s.max((m[(r, c)] - m[(c, r)].conj()).norm())
            });
        if worst > 1e-12 * scale.max(1e-300) || scale > 1e3 {
            return Err(ck.ctx.invalid(
                span,
                key,
                "Hermitian coupling matrices (M = M†) with entries of at most 1e3 eV",
                format!(
                    "matrix {k} with largest entry {} eV and |M − M†| up to {} eV \
                     (hint: a complex entry's mirror must be its conjugate)",
                    show(scale),
                    show(worst)
                ),
            ));
        }
    }
    Ok(())
}

/// One entry of an inline matrix: a number or a `[re, im]` pair.
fn entry(v: &toml::Value) -> Option<C64> {
    match v {
        toml::Value::Array(pair) if pair.len() == 2 => {
            let n = numbers(v)?;
            Some(C64::new(n[0], n[1]))
        }
        toml::Value::Float(f) if f.is_finite() => Some(C64::new(*f, 0.0)),
        toml::Value::Integer(i) => Some(C64::new(*i as f64, 0.0)),
        _ => None,
    }
}

/// The matrices of an inline list, or what is wrong with it (in words).
fn inline_matrices(v: &toml::Value) -> Result<Vec<Mat<C64>>, String> {
    let list = v
        .as_array()
        .filter(|l| !l.is_empty())
        .ok_or_else(|| "not a non-empty list of matrices".to_string())?;
    let mut out = Vec::with_capacity(list.len());
    for (k, m) in list.iter().enumerate() {
        let rows = m
            .as_array()
            .filter(|r| !r.is_empty())
            .ok_or_else(|| format!("matrix {k} is not a non-empty list of rows"))?;
        let b = rows.len();
        if let Some(first) = out
            .first()
            .map(|x: &Mat<C64>| x.nrows())
            .filter(|&f| f != b)
        {
            return Err(format!("matrix {k} has {b} rows, matrix 0 {first}"));
        }
        let mut mat = Mat::<C64>::zeros(b, b);
        for (r, row) in rows.iter().enumerate() {
            let cols = row
                .as_array()
                .filter(|c| c.len() == b)
                .ok_or_else(|| format!("row {r} of matrix {k} is not a list of {b} entries"))?;
            for (c, x) in cols.iter().enumerate() {
                mat[(r, c)] = entry(x).ok_or_else(|| {
                    format!("entry ({r}, {c}) of matrix {k} is {x}, not a number or [re, im]")
                })?;
            }
        }
        out.push(mat);
    }
    Ok(out)
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
