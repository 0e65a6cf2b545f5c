//! Validation: raw file values -> a checked case specification. Every check
//! that does not need the built device happens here; the rest (energy
//! window, phonon snapping) in [`super::resolve`].

use super::blocks_file::{BlockFile, pad_to, read_blocks};
use super::error::{CaseError, CaseErrorKind, ErrorContext, closest};
use super::raw::{Opt, RawCase, RawLead};
use crate::C64;
use crate::device::{BiasDrop, PotentialRegion};
use crate::scba::{EnergyOrder, Mixing, ScbaParams};
use faer::Mat;
use std::ops::Range;
use std::path::{Path, PathBuf};
use toml::Spanned;

/// Energies in eV (given or derived) beyond this size are refused: no band
/// structure this engine models comes near, and it keeps every sum finite.
pub(crate) const MAX_ENERGY_EV: f64 = 1e6;
/// Largest phonon energy accepted (eV): the stiffest lattice vibrations
/// (light atoms, strong bonds) stay well below this, so a larger value is a
/// unit slip (meV for eV) or a typo.
pub(crate) const MAX_PHONON_EV: f64 = 0.5;
/// Lengths and spacings beyond this (1 m) are refused for the same reason.
const MAX_LENGTH_NM: f64 = 1e9;
/// Largest device: cells, and complex elements N·b² of the on-site blocks.
const MAX_CELLS: usize = 1_000_000;
const MAX_BLOCK_ELEMENTS: usize = 50_000_000;

/// How the response coefficients split the perturbation between contacts.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum ResponseSplit {
    /// µ1 = µ − eV/2, µ2 = µ + eV/2, T1 = T + ΔT/2, T2 = T − ΔT/2, bath held
    /// at T; J_Q = (J_Q,1 − J_Q,2)/2.
    #[default]
    Symmetric,
    /// Only contact 1 is perturbed; contact 2 and the bath stay at (µ, T);
    /// J_Q = J_Q,1.
    LeftOnly,
}

/// The device kind with its own settings.
#[derive(Clone, Debug)]
pub(crate) enum DeviceKind {
    Chain {
        effective_mass: f64,
        band_edge_ev: f64,
    },
    Strip {
        effective_mass: f64,
        band_edge_ev: f64,
        width: usize,
    },
    Blocks {
        onsite: Vec<Mat<C64>>,
        coupling: Vec<Mat<C64>>,
        onsite_path: PathBuf,
        coupling_path: PathBuf,
    },
}

impl DeviceKind {
    pub fn name(&self) -> &'static str {
        match self {
            DeviceKind::Chain { .. } => "chain",
            DeviceKind::Strip { .. } => "strip",
            DeviceKind::Blocks { .. } => "blocks",
        }
    }
}

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
}

#[derive(Clone, Debug)]
pub(crate) struct LeadSpec {
    pub fermi_level_ev: f64,
    pub temperature_k: f64,
    pub model: LeadModel,
}

#[derive(Clone, Debug)]
pub(crate) struct PhononSpec {
    pub energy_ev: f64,
    pub energy_span: Option<Range<usize>>,
    pub coupling_ev2: f64,
    pub from_nm: f64,
    pub to_nm: f64,
    pub bath_temperature_k: f64,
}

#[derive(Clone, Debug)]
pub(crate) struct DephasingSpec {
    pub strength_ev2: f64,
    pub from_nm: f64,
    pub to_nm: f64,
}

/// A value with where it came from (for errors found after validation).
#[derive(Clone, Debug)]
pub(crate) struct At<T> {
    pub value: T,
    pub span: Option<Range<usize>>,
}

#[derive(Clone, Debug)]
pub(crate) struct GridSpec {
    pub step_ev: Option<At<f64>>,
    pub min_ev: Option<At<f64>>,
    pub max_ev: Option<At<f64>>,
    /// `grid.allow_coarse_phonon_snap`: accept phonon energies moved by
    /// more than [`super::resolve::MAX_SNAP`] when snapped to the grid.
    pub allow_coarse_snap: bool,
}

/// A validated case.
#[derive(Clone, Debug)]
pub(crate) struct CaseSpec {
    pub name: String,
    pub spin_degeneracy: u8,
    pub kind: DeviceKind,
    pub spacing_nm: f64,
    pub cells: usize,
    pub regions: Vec<PotentialRegion>,
    pub left: LeadSpec,
    pub right: LeadSpec,
    pub voltage_v: f64,
    pub drop: BiasDrop,
    pub phonons: Vec<PhononSpec>,
    pub dephasing: Option<DephasingSpec>,
    pub grid: GridSpec,
    pub scba: ScbaParams,
    pub hermitian_part: bool,
    pub decimation_eta_ev: f64,
    pub decimation_tolerance_ev: f64,
    pub response_split: ResponseSplit,
    pub phonon_conductance_w_per_k: Option<f64>,
    /// Fit a local electron temperature per cell ([profile]).
    pub fit_electron_temperature: bool,
    pub warnings: Vec<String>,
    /// Span of the [device] table, for errors about the device as a whole.
    pub device_span: Option<Range<usize>>,
}

/// Value checks with positions.
pub(crate) struct Checker<'a> {
    pub ctx: ErrorContext<'a>,
}

/// A number as people write it: plain for ordinary sizes, exponent form
/// for very small or very large ones.
pub(crate) fn show(x: f64) -> String {
    let a = x.abs();
    if a != 0.0 && a.is_finite() && !(1e-4..1e6).contains(&a) {
        format!("{x:e}")
    } else {
        format!("{x}")
    }
}

impl Checker<'_> {
    /// A finite number (TOML allows nan and inf; they are refused here).
    fn num(&self, v: &Opt<f64>, key: &str) -> Result<Option<At<f64>>, CaseError> {
        match v {
            None => Ok(None),
            Some(s) => {
                let x = *s.get_ref();
                if !x.is_finite() {
                    return Err(self
                        .ctx
                        .invalid(Some(s.span()), key, "a finite number", show(x)));
                }
                Ok(Some(At {
                    value: x,
                    span: Some(s.span()),
                }))
            }
        }
    }

    fn required<T>(
        &self,
        v: Option<T>,
        table: Option<Range<usize>>,
        key: &str,
        expected: &str,
    ) -> Result<T, CaseError> {
        v.ok_or_else(|| self.ctx.missing(table, key, expected))
    }

    /// A finite number in a range described by `expected`.
    fn ranged(
        &self,
        v: &Opt<f64>,
        key: &str,
        expected: &str,
        ok: impl Fn(f64) -> bool,
    ) -> Result<Option<f64>, CaseError> {
        match self.num(v, key)? {
            None => Ok(None),
            Some(a) if ok(a.value) => Ok(Some(a.value)),
            Some(a) => Err(self.ctx.invalid(a.span, key, expected, show(a.value))),
        }
    }

    fn positive(&self, v: &Opt<f64>, key: &str, what: &str) -> Result<Option<f64>, CaseError> {
        self.ranged(v, key, &format!("{what} > 0"), |x| x > 0.0)
    }

    fn non_negative(&self, v: &Opt<f64>, key: &str, what: &str) -> Result<Option<f64>, CaseError> {
        self.ranged(v, key, &format!("{what} ≥ 0"), |x| x >= 0.0)
    }

    fn energy(&self, v: &Opt<f64>, key: &str) -> Result<Option<f64>, CaseError> {
        self.ranged(
            v,
            key,
            &format!("an energy in eV of magnitude ≤ {MAX_ENERGY_EV:e}"),
            |x| x.abs() <= MAX_ENERGY_EV,
        )
    }

    fn temperature(&self, v: &Opt<f64>, key: &str) -> Result<Option<f64>, CaseError> {
        self.positive(v, key, "a temperature in K")
    }

    fn int(
        &self,
        v: &Opt<i64>,
        key: &str,
        expected: &str,
        ok: impl Fn(i64) -> bool,
    ) -> Result<Option<usize>, CaseError> {
        match v {
            None => Ok(None),
            Some(s) if ok(*s.get_ref()) => Ok(Some(*s.get_ref() as usize)),
            Some(s) => Err(self.ctx.invalid(Some(s.span()), key, expected, s.get_ref())),
        }
    }

    fn choice<'c>(
        &self,
        v: &'c Opt<String>,
        key: &str,
        choices: &[&str],
    ) -> Result<Option<&'c str>, CaseError> {
        match v {
            None => Ok(None),
            Some(s) if choices.contains(&s.get_ref().as_str()) => Ok(Some(s.get_ref().as_str())),
            Some(s) => {
                let list = choices
                    .iter()
                    .map(|c| format!("\"{c}\""))
                    .collect::<Vec<_>>()
                    .join(" or ");
                Err(self
                    .ctx
                    .invalid(Some(s.span()), key, &list, format!("\"{}\"", s.get_ref()))
                    .with_suggestion(closest(s.get_ref(), choices.iter().copied())))
            }
        }
    }

    /// A key that the chosen device kind or model does not use.
    fn unused<T>(&self, v: &Opt<T>, key: &str, why: &str) -> Result<(), CaseError> {
        match v {
            None => Ok(()),
            Some(s) => Err(self.ctx.error(
                CaseErrorKind::Invalid,
                Some(s.span()),
                Some(key),
                format!("expected no such key {why}, found it set"),
            )),
        }
    }

    /// An optional [from_nm, to_nm) region inside [0, length]; defaults to
    /// the whole device.
    fn region(
        &self,
        from: &Opt<f64>,
        to: &Opt<f64>,
        prefix: &str,
        length_nm: f64,
        required: Option<Option<Range<usize>>>,
    ) -> Result<(f64, f64), CaseError> {
        let kf = format!("{prefix}.from_nm");
        let kt = format!("{prefix}.to_nm");
        let f = self.num(from, &kf)?;
        let t = self.num(to, &kt)?;
        let (f, t) = match required {
            Some(table) => (
                self.required(f, table.clone(), &kf, "the region start in nm")?,
                self.required(t, table, &kt, "the region end in nm")?,
            ),
            None => (
                f.unwrap_or(At {
                    value: 0.0,
                    span: None,
                }),
                t.unwrap_or(At {
                    value: length_nm,
                    span: None,
                }),
            ),
        };
        let tol = 1e-9 * length_nm.max(1.0);
        if f.value < -tol || f.value > length_nm + tol {
            return Err(self.ctx.invalid(
                f.span,
                &kf,
                &format!("a position inside the device, 0 to {length_nm} nm"),
                format!("{} nm", f.value),
            ));
        }
        if t.value > length_nm + tol || t.value < -tol {
            return Err(self.ctx.invalid(
                t.span,
                &kt,
                &format!("a position inside the device, 0 to {length_nm} nm"),
                format!("{} nm", t.value),
            ));
        }
        if t.value <= f.value {
            return Err(self.ctx.invalid(
                t.span.or(f.span),
                &kt,
                &format!("an end above from_nm = {} nm", f.value),
                format!("{} nm", t.value),
            ));
        }
        Ok((f.value, t.value))
    }
}

fn span_of<T>(v: &Option<Spanned<T>>) -> Option<Range<usize>> {
    v.as_ref().map(|s| s.span())
}

/// Validate a raw case. `base_dir` resolves relative block file paths.
pub(crate) fn validate(
    raw: RawCase,
    ctx: ErrorContext<'_>,
    base_dir: &Path,
) -> Result<CaseSpec, CaseError> {
    let ck = Checker { ctx };
    let mut warnings = Vec::new();

    let name = match &raw.name {
        Some(s) if !s.get_ref().trim().is_empty() => s.get_ref().clone(),
        Some(s) => {
            return Err(ck
                .ctx
                .invalid(Some(s.span()), "name", "a non-empty name", "\"\""));
        }
        None => {
            return Err(ck
                .ctx
                .missing(Some(0..0), "name", "the case name (a string)"));
        }
    };
    let spin_degeneracy = ck
        .int(&raw.spin_degeneracy, "spin_degeneracy", "1 or 2", |g| {
            g == 1 || g == 2
        })?
        .unwrap_or(2) as u8;

    // ---- device ----
    let device_span = span_of(&raw.device);
    let dev = match raw.device {
        Some(d) => d.into_inner(),
        None => {
            return Err(ck.ctx.missing(Some(0..0), "device", "a [device] table"));
        }
    };
    if let Some(old) = &dev.builder {
        return Err(ck
            .ctx
            .error(
                CaseErrorKind::UnknownKey,
                Some(old.span()),
                Some("device.builder"),
                "expected `kind` (the key `builder` was renamed: write \
                 `kind = \"chain\"`, `\"strip\"` or `\"blocks\"`), found `builder`"
                    .to_string(),
            )
            .with_suggestion(Some("kind".to_string())));
    }
    let kind = ck
        .required(
            ck.choice(&dev.kind, "device.kind", &["chain", "strip", "blocks"])?,
            device_span.clone(),
            "device.kind",
            "\"chain\", \"strip\" or \"blocks\"",
        )?
        .to_string();
    let spacing_nm = ck.required(
        ck.ranged(
            &dev.spacing_nm,
            "device.spacing_nm",
            "a spacing in nm > 0 (and ≤ 1e9)",
            |x| x > 0.0 && x <= MAX_LENGTH_NM,
        )?,
        device_span.clone(),
        "device.spacing_nm",
        "the cell spacing in nm",
    )?;

    let (kind_spec, cells) = if kind == "blocks" {
        let why = "with kind = \"blocks\"";
        ck.unused(&dev.length_nm, "device.length_nm", why)?;
        ck.unused(&dev.effective_mass, "device.effective_mass", why)?;
        ck.unused(&dev.band_edge_ev, "device.band_edge_ev", why)?;
        ck.unused(&dev.width_sites, "device.width_sites", why)?;
        let cells_key = ck.int(&dev.cells, "device.cells", "a cell count ≥ 1", |n| {
            n >= 1 && n as usize <= MAX_CELLS
        })?;
        let on_name = ck.required(
            dev.onsite_file.as_ref(),
            device_span.clone(),
            "device.onsite_file",
            "a path to the on-site blocks (.npy or .csv)",
        )?;
        let co_name = ck.required(
            dev.coupling_file.as_ref(),
            device_span.clone(),
            "device.coupling_file",
            "a path to the coupling blocks (.npy or .csv)",
        )?;
        let file_err = |s: &Spanned<String>, key: &str, msg: String| {
            ck.ctx
                .error(CaseErrorKind::File, Some(s.span()), Some(key), msg)
        };
        let on_path = base_dir.join(on_name.get_ref());
        let co_path = base_dir.join(co_name.get_ref());
        let mut on: BlockFile = read_blocks(&on_path).map_err(|m| {
            file_err(
                on_name,
                "device.onsite_file",
                format!("expected a readable blocks file, found: {m}"),
            )
        })?;
        let mut co: BlockFile = read_blocks(&co_path).map_err(|m| {
            file_err(
                co_name,
                "device.coupling_file",
                format!("expected a readable blocks file, found: {m}"),
            )
        })?;
        // csv files only know their largest index: pad both to a common b.
        let b_on = on.blocks.first().map_or(0, |m| m.nrows());
        let b_co = co.blocks.first().map_or(0, |m| m.nrows());
        if on.from_csv && b_co > b_on {
            pad_to(&mut on.blocks, b_co);
        }
        if co.from_csv && b_on > b_co {
            pad_to(&mut co.blocks, b_on);
        }
        let b = on.blocks.first().map_or(0, |m| m.nrows());
        let mut onsite = on.blocks;
        let cells = if on.single {
            let n = ck.required(
                cells_key,
                device_span.clone(),
                "device.cells",
                "the cell count (the on-site file holds a single block)",
            )?;
            if n.saturating_mul(b * b) > MAX_BLOCK_ELEMENTS {
                return Err(ck.ctx.invalid(
                    span_of(&dev.cells),
                    "device.cells",
                    "a device of at most 5e7 block elements",
                    format!("{n} cells of {b}×{b}"),
                ));
            }
            onsite = vec![onsite[0].clone(); n];
            n
        } else {
            match cells_key {
                Some(n) if on.from_csv && n >= onsite.len() => {
                    onsite.resize(n, Mat::zeros(b, b));
                    n
                }
                Some(n) if n != onsite.len() => {
                    return Err(ck.ctx.invalid(
                        span_of(&dev.cells),
                        "device.cells",
                        &format!(
                            "the block count of `{}` ({})",
                            on_path.display(),
                            onsite.len()
                        ),
                        n,
                    ));
                }
                _ => onsite.len(),
            }
        };
        (
            DeviceKind::Blocks {
                onsite,
                coupling: co.blocks,
                onsite_path: on_path,
                coupling_path: co_path,
            },
            cells,
        )
    } else {
        let why = "with kind = \"chain\" or \"strip\" (only for \"blocks\")";
        ck.unused(&dev.onsite_file, "device.onsite_file", why)?;
        ck.unused(&dev.coupling_file, "device.coupling_file", why)?;
        ck.unused(
            &dev.cells,
            "device.cells",
            "here (the cell count is length_nm / spacing_nm)",
        )?;
        let length = ck.required(
            ck.ranged(
                &dev.length_nm,
                "device.length_nm",
                "a length in nm > 0 (and ≤ 1e9)",
                |x| x > 0.0 && x <= MAX_LENGTH_NM,
            )?,
            device_span.clone(),
            "device.length_nm",
            "the device length in nm",
        )?;
        let ratio = length / spacing_nm;
        let n = ratio.round();
        if (ratio - n).abs() > 1e-6 || n < 1.0 {
            return Err(ck.ctx.invalid(
                span_of(&dev.length_nm),
                "device.length_nm",
                &format!("a whole multiple (≥ 1) of spacing_nm = {spacing_nm} nm"),
                format!(
                    "{length} nm = {ratio:.6} spacings (use {} nm or {} nm)",
                    n.floor().max(1.0) * spacing_nm,
                    (n.floor() + 1.0) * spacing_nm
                ),
            ));
        }
        if n > MAX_CELLS as f64 {
            return Err(ck.ctx.invalid(
                span_of(&dev.length_nm),
                "device.length_nm",
                &format!("at most {MAX_CELLS} cells"),
                format!("{n} cells"),
            ));
        }
        let mass = ck.required(
            ck.positive(
                &dev.effective_mass,
                "device.effective_mass",
                "an effective mass (units of m0)",
            )?,
            device_span.clone(),
            "device.effective_mass",
            "the effective mass in units of m0",
        )?;
        let t = crate::units::hopping_ev(mass, spacing_nm);
        if !(t.is_finite() && t <= MAX_ENERGY_EV) {
            return Err(ck.ctx.invalid(
                span_of(&dev.effective_mass),
                "device.effective_mass",
                &format!("a mass and spacing giving a hopping t ≤ {MAX_ENERGY_EV:e} eV"),
                format!("t = {t:e} eV"),
            ));
        }
        let band_edge_ev = ck
            .energy(&dev.band_edge_ev, "device.band_edge_ev")?
            .unwrap_or(0.0);
        let cells = n as usize;
        if kind == "strip" {
            let w = ck.required(
                ck.int(
                    &dev.width_sites,
                    "device.width_sites",
                    "a width from 1 to 1000 sites",
                    |w| (1..=1000).contains(&w),
                )?,
                device_span.clone(),
                "device.width_sites",
                "the strip width in sites",
            )?;
            if cells.saturating_mul(w * w) > MAX_BLOCK_ELEMENTS {
                return Err(ck.ctx.invalid(
                    span_of(&dev.width_sites),
                    "device.width_sites",
                    "a device of at most 5e7 block elements",
                    format!("{cells} cells of {w}×{w}"),
                ));
            }
            (
                DeviceKind::Strip {
                    effective_mass: mass,
                    band_edge_ev,
                    width: w,
                },
                cells,
            )
        } else {
            ck.unused(
                &dev.width_sites,
                "device.width_sites",
                "with kind = \"chain\" (only for \"strip\")",
            )?;
            (
                DeviceKind::Chain {
                    effective_mass: mass,
                    band_edge_ev,
                },
                cells,
            )
        }
    };
    let length_nm = cells as f64 * spacing_nm;

    // ---- potential regions ----
    let mut regions = Vec::new();
    for (i, r) in dev.region.iter().flatten().enumerate() {
        let prefix = format!("device.region.{i}");
        let span = r.span();
        let r = r.get_ref();
        let (from, to) = ck.region(
            &r.from_nm,
            &r.to_nm,
            &prefix,
            length_nm,
            Some(Some(span.clone())),
        )?;
        let off = ck.energy(&r.offset_ev, &format!("{prefix}.offset_ev"))?;
        let start = ck.energy(&r.start_ev, &format!("{prefix}.start_ev"))?;
        let end = ck.energy(&r.end_ev, &format!("{prefix}.end_ev"))?;
        let region = match (off, start, end) {
            (Some(o), None, None) => PotentialRegion::offset(from, to, o),
            (None, Some(s), Some(e)) => PotentialRegion {
                from_nm: from,
                to_nm: to,
                start_ev: s,
                end_ev: e,
            },
            (Some(_), _, _) => {
                return Err(ck.ctx.invalid(
                    span_of(&r.start_ev).or(span_of(&r.end_ev)),
                    &format!("{prefix}.offset_ev"),
                    "either offset_ev (flat) or start_ev + end_ev (ramp)",
                    "both",
                ));
            }
            (None, None, Some(_)) | (None, None, None) => {
                return Err(ck.ctx.missing(
                    Some(span),
                    &format!("{prefix}.start_ev"),
                    "offset_ev (flat) or start_ev + end_ev (ramp)",
                ));
            }
            (None, Some(_), None) => {
                return Err(ck.ctx.missing(
                    Some(span),
                    &format!("{prefix}.end_ev"),
                    "the ramp end value in eV",
                ));
            }
        };
        let covered = (0..cells)
            .filter(|&c| {
                let x = c as f64 * spacing_nm;
                x >= from && x < to
            })
            .count();
        if covered == 0 {
            warnings.push(format!(
                "{prefix} [{from}, {to}) nm covers no cell (cells sit at multiples of {spacing_nm} nm): it has no effect"
            ));
        }
        regions.push(region);
    }

    // ---- leads ----
    let leads_span = span_of(&raw.leads);
    let leads = match raw.leads {
        Some(l) => l.into_inner(),
        None => {
            return Err(ck.ctx.missing(
                Some(0..0),
                "leads",
                "[leads.left] and [leads.right] tables",
            ));
        }
    };
    let is_blocks = matches!(kind_spec, DeviceKind::Blocks { .. });
    let lead = |l: &Opt<RawLead>, side: &str| -> Result<LeadSpec, CaseError> {
        let p = format!("leads.{side}");
        let span = span_of(l);
        let l = match l {
            Some(l) => l.get_ref(),
            None => {
                return Err(ck
                    .ctx
                    .missing(leads_span.clone(), &p, &format!("a [{p}] table")));
            }
        };
        let fermi_level_ev = ck.required(
            ck.energy(&l.fermi_level_ev, &format!("{p}.fermi_level_ev"))?,
            span.clone(),
            &format!("{p}.fermi_level_ev"),
            "the zero-bias Fermi level in eV",
        )?;
        let temperature_k = ck.required(
            ck.temperature(&l.temperature_k, &format!("{p}.temperature_k"))?,
            span.clone(),
            &format!("{p}.temperature_k"),
            "the temperature in K (> 0)",
        )?;
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
        let model = match (gamma, edge.is_some() || mass.is_some()) {
            (Some(_), true) => {
                return Err(ck.ctx.invalid(
                    span_of(&l.wide_band_ev),
                    &format!("{p}.wide_band_ev"),
                    "either wide_band_ev or band_edge_ev/effective_mass, not both",
                    "both",
                ));
            }
            (Some(g), false) => LeadModel::WideBand { gamma_ev: g },
            (None, true) if is_blocks => {
                let s = span_of(&l.band_edge_ev).or(span_of(&l.effective_mass));
                let k = if edge.is_some() {
                    "band_edge_ev"
                } else {
                    "effective_mass"
                };
                return Err(ck.ctx.invalid(
                    s,
                    &format!("{p}.{k}"),
                    "no such key with kind = \"blocks\" (only for chain/strip leads)",
                    "it set",
                ));
            }
            (None, true) => LeadModel::Selective {
                band_edge_ev: edge,
                effective_mass: mass,
            },
            (None, false) => LeadModel::Continuation,
        };
        Ok(LeadSpec {
            fermi_level_ev,
            temperature_k,
            model,
        })
    };
    let left = lead(&leads.left, "left")?;
    let right = lead(&leads.right, "right")?;

    // ---- bias ----
    let (voltage_v, drop) = match &raw.bias {
        None => (0.0, BiasDrop::Leads),
        Some(b) => {
            let b = b.get_ref();
            let v = ck
                .ranged(
                    &b.voltage_v,
                    "bias.voltage_v",
                    "a voltage in V of magnitude ≤ 1e6",
                    |x| x.abs() <= MAX_ENERGY_EV,
                )?
                .unwrap_or(0.0);
            let drop = match &b.drop {
                None => BiasDrop::Leads,
                Some(d) => parse_drop(&ck, d, length_nm)?,
            };
            (v, drop)
        }
    };

    // ---- phonons ----
    let mean_t = 0.5 * (left.temperature_k + right.temperature_k);
    let mut phonons = Vec::new();
    for (i, p) in raw.phonon.iter().flatten().enumerate() {
        let prefix = format!("phonon.{i}");
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
            Some(span.clone()),
            &format!("{prefix}.coupling_ev2"),
            "the coupling in eV² (≥ 0)",
        )?;
        let (from, to) = ck.region(&p.from_nm, &p.to_nm, &prefix, length_nm, None)?;
        let bath = ck
            .temperature(
                &p.bath_temperature_k,
                &format!("{prefix}.bath_temperature_k"),
            )?
            .unwrap_or(mean_t);
        phonons.push(PhononSpec {
            energy_ev: e.value,
            energy_span: e.span,
            coupling_ev2: coupling,
            from_nm: from,
            to_nm: to,
            bath_temperature_k: bath,
        });
    }

    // ---- dephasing ----
    let dephasing = match &raw.dephasing {
        None => None,
        Some(d) => {
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
            Some(DephasingSpec {
                strength_ev2: strength,
                from_nm: from,
                to_nm: to,
            })
        }
    };

    // ---- grid ----
    let grid = match &raw.grid {
        None => GridSpec {
            step_ev: None,
            min_ev: None,
            max_ev: None,
            allow_coarse_snap: false,
        },
        Some(g) => {
            let g = g.get_ref();
            let step = ck.num(&g.step_ev, "grid.step_ev")?;
            if let Some(s) = &step
                && s.value <= 0.0
            {
                return Err(ck.ctx.invalid(
                    s.span.clone(),
                    "grid.step_ev",
                    "an energy step in eV > 0",
                    show(s.value),
                ));
            }
            let min = ck.num(&g.min_ev, "grid.min_ev")?;
            let max = ck.num(&g.max_ev, "grid.max_ev")?;
            for (a, k) in [(&min, "grid.min_ev"), (&max, "grid.max_ev")] {
                if let Some(a) = a
                    && a.value.abs() > MAX_ENERGY_EV
                {
                    return Err(ck.ctx.invalid(
                        a.span.clone(),
                        k,
                        &format!("an energy in eV of magnitude ≤ {MAX_ENERGY_EV:e}"),
                        show(a.value),
                    ));
                }
            }
            if let (Some(lo), Some(hi)) = (&min, &max)
                && hi.value <= lo.value
            {
                return Err(ck.ctx.invalid(
                    hi.span.clone(),
                    "grid.max_ev",
                    &format!("an energy above grid.min_ev = {} eV", lo.value),
                    format!("{} eV (an empty or inverted window)", hi.value),
                ));
            }
            GridSpec {
                step_ev: step,
                min_ev: min,
                max_ev: max,
                allow_coarse_snap: g
                    .allow_coarse_phonon_snap
                    .as_ref()
                    .is_some_and(|b| *b.get_ref()),
            }
        }
    };

    // ---- solver ----
    let mut scba = ScbaParams::default();
    let mut hermitian_part = false;
    let mut eta = crate::leads::DecimationParams::default().eta_ev;
    let mut dec_tol = crate::leads::DecimationParams::default().tolerance_ev;
    if let Some(s) = &raw.solver {
        let s = s.get_ref();
        if let Some(t) = ck.ranged(
            &s.tolerance,
            "solver.tolerance",
            "a relative tolerance in (0, 1)",
            |x| x > 0.0 && x < 1.0,
        )? {
            scba.tolerance = t;
        }
        if let Some(n) = ck.int(
            &s.max_iterations,
            "solver.max_iterations",
            "an iteration limit ≥ 1",
            |n| (1..=1_000_000).contains(&n),
        )? {
            scba.max_iterations = n;
        }
        let mixing = ck
            .choice(&s.mixing, "solver.mixing", &["anderson", "linear"])?
            .unwrap_or("anderson");
        let factor = ck.ranged(
            &s.mixing_factor,
            "solver.mixing_factor",
            "a mixing factor in (0, 1]",
            |x| x > 0.0 && x <= 1.0,
        )?;
        let depth = ck.int(
            &s.anderson_depth,
            "solver.anderson_depth",
            "a history depth from 1 to 50",
            |n| (1..=50).contains(&n),
        )?;
        let damping = ck.ranged(
            &s.anderson_damping,
            "solver.anderson_damping",
            "a damping in (0, 1]",
            |x| x > 0.0 && x <= 1.0,
        )?;
        scba.mixing = if mixing == "linear" {
            if depth.is_some() || damping.is_some() {
                warnings.push(
                    "solver.anderson_depth / anderson_damping are ignored with mixing = \"linear\""
                        .into(),
                );
            }
            Mixing::Linear {
                factor: factor.unwrap_or(0.5),
            }
        } else {
            if factor.is_some() {
                warnings.push("solver.mixing_factor is ignored with mixing = \"anderson\"".into());
            }
            Mixing::Anderson {
                depth: depth.unwrap_or(6),
                damping: damping.unwrap_or(1.0),
            }
        };
        hermitian_part = ck.choice(
            &s.hermitian_part,
            "solver.hermitian_part",
            &["neglect", "include"],
        )? == Some("include");
        scba.energy_order = match ck.choice(
            &s.energy_order,
            "solver.energy_order",
            &["auto", "simultaneous", "red-black"],
        )? {
            Some("simultaneous") => EnergyOrder::Simultaneous,
            Some("red-black") => EnergyOrder::RedBlack,
            _ => EnergyOrder::Auto,
        };
        if let Some(f) = ck.non_negative(
            &s.current_floor_a,
            "solver.current_floor_a",
            "a current in A",
        )? {
            scba.current_floor_a = f;
        }
        if let Some(e) = ck.ranged(
            &s.decimation_eta_ev,
            "solver.decimation_eta_ev",
            "an energy in eV in (0, 0.1]",
            |x| x > 0.0 && x <= 0.1,
        )? {
            eta = e;
        }
        if let Some(e) = ck.ranged(
            &s.decimation_tolerance_ev,
            "solver.decimation_tolerance_ev",
            "an energy in eV in (0, 1e-3]",
            |x| x > 0.0 && x <= 1e-3,
        )? {
            dec_tol = e;
        }
    }

    let response_split = match &raw.response {
        None => ResponseSplit::Symmetric,
        Some(r) => match ck.choice(
            &r.get_ref().split,
            "response.split",
            &["symmetric", "left-only"],
        )? {
            Some("left-only") => ResponseSplit::LeftOnly,
            _ => ResponseSplit::Symmetric,
        },
    };
    let phonon_conductance_w_per_k = match &raw.thermal {
        None => None,
        Some(t) => ck.non_negative(
            &t.get_ref().phonon_conductance_w_per_k,
            "thermal.phonon_conductance_w_per_k",
            "a thermal conductance in W/K",
        )?,
    };
    let fit_electron_temperature = match &raw.profile {
        None => false,
        Some(p) => {
            ck.choice(
                &p.get_ref().electron_temperature,
                "profile.electron_temperature",
                &["off", "fit"],
            )? == Some("fit")
        }
    };

    Ok(CaseSpec {
        name,
        spin_degeneracy,
        kind: kind_spec,
        spacing_nm,
        cells,
        regions,
        left,
        right,
        voltage_v,
        drop,
        phonons,
        dephasing,
        grid,
        scba,
        hermitian_part,
        decimation_eta_ev: eta,
        decimation_tolerance_ev: dec_tol,
        response_split,
        phonon_conductance_w_per_k,
        fit_electron_temperature,
        warnings,
        device_span,
    })
}

/// `drop = "leads"` or `drop = { linear = { from_nm = …, to_nm = … } }`.
fn parse_drop(
    ck: &Checker<'_>,
    d: &Spanned<toml::Value>,
    length_nm: f64,
) -> Result<BiasDrop, CaseError> {
    let span = Some(d.span());
    let expected = "\"leads\" or { linear = { from_nm = …, to_nm = … } }";
    match d.get_ref() {
        toml::Value::String(s) if s == "leads" => Ok(BiasDrop::Leads),
        toml::Value::String(s) => Err(ck
            .ctx
            .invalid(span, "bias.drop", expected, format!("\"{s}\""))
            .with_suggestion(closest(s, ["leads", "linear"]).map(|c| {
                if c == "linear" {
                    "{ linear = { from_nm = …, to_nm = … } }".to_string()
                } else {
                    "leads".to_string()
                }
            }))),
        toml::Value::Table(t) => {
            if let Some(k) = t.keys().find(|k| k.as_str() != "linear") {
                return Err(ck
                    .ctx
                    .error(
                        CaseErrorKind::UnknownKey,
                        span,
                        Some(&format!("bias.drop.{k}")),
                        format!("expected `linear`, found unknown key `{k}`"),
                    )
                    .with_suggestion(closest(k, ["linear"]).map(|_| "bias.drop.linear".into())));
            }
            let lin = match t.get("linear") {
                Some(toml::Value::Table(l)) => l,
                Some(other) => {
                    return Err(ck.ctx.invalid(
                        span,
                        "bias.drop.linear",
                        "a table { from_nm = …, to_nm = … }",
                        other.type_str(),
                    ));
                }
                None => {
                    return Err(ck.ctx.missing(
                        span,
                        "bias.drop.linear",
                        "{ from_nm = …, to_nm = … }",
                    ));
                }
            };
            if let Some(k) = lin
                .keys()
                .find(|k| k.as_str() != "from_nm" && k.as_str() != "to_nm")
            {
                return Err(ck
                    .ctx
                    .error(
                        CaseErrorKind::UnknownKey,
                        span,
                        Some(&format!("bias.drop.linear.{k}")),
                        format!("expected `from_nm` or `to_nm`, found unknown key `{k}`"),
                    )
                    .with_suggestion(
                        closest(k, ["from_nm", "to_nm"]).map(|c| format!("bias.drop.linear.{c}")),
                    ));
            }
            let get = |k: &str| -> Result<Opt<f64>, CaseError> {
                match lin.get(k) {
                    None => Ok(None),
                    Some(toml::Value::Float(x)) => Ok(Some(Spanned::new(d.span(), *x))),
                    Some(toml::Value::Integer(x)) => Ok(Some(Spanned::new(d.span(), *x as f64))),
                    Some(other) => Err(ck.ctx.error(
                        CaseErrorKind::WrongType,
                        span.clone(),
                        Some(&format!("bias.drop.linear.{k}")),
                        format!("expected a number, found {}", other.type_str()),
                    )),
                }
            };
            let (f, t) = ck.region(
                &get("from_nm")?,
                &get("to_nm")?,
                "bias.drop.linear",
                length_nm,
                Some(span),
            )?;
            Ok(BiasDrop::Linear {
                from_nm: f,
                to_nm: t,
            })
        }
        other => Err(ck.ctx.error(
            CaseErrorKind::WrongType,
            span,
            Some("bias.drop"),
            format!("expected {expected}, found {}", other.type_str()),
        )),
    }
}
