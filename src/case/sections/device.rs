//! `[device]`: the kind, the cell spacing and the kind's own settings
//! (lattice parameters, or block files); the cell count follows.

use super::super::blocks_file::{BlockFile, BlockFiles, pad_to};
use super::super::check::{Checker, Choice, MAX_ENERGY_EV, span_of};
use super::super::error::{CaseError, CaseErrorKind};
use super::super::raw::{RawCase, RawDevice};
use crate::C64;
use faer::Mat;
use std::ops::Range;
use std::path::PathBuf;
use toml::Spanned;

/// Lengths and spacings beyond this (1 m) are refused.
const MAX_LENGTH_NM: f64 = 1e9;
/// Largest device: cells, and complex elements N·b² of the on-site blocks.
const MAX_CELLS: usize = 1_000_000;
const MAX_BLOCK_ELEMENTS: usize = 50_000_000;

/// The words of `device.kind`.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(crate) enum KindName {
    Chain,
    Strip,
    Blocks,
}

impl Choice for KindName {
    const CHOICES: &'static [(&'static str, Self)] = &[
        ("chain", KindName::Chain),
        ("strip", KindName::Strip),
        ("blocks", KindName::Blocks),
    ];
}

/// The words of `device.spin`.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(crate) enum SpinMode {
    /// Spin is a degeneracy factor g_s on spinless orbitals.
    Degenerate,
    /// Every cell is doubled into up and down orbitals, g_s = 1.
    Explicit,
}

impl Choice for SpinMode {
    const CHOICES: &'static [(&'static str, Self)] = &[
        ("degenerate", SpinMode::Degenerate),
        ("explicit", SpinMode::Explicit),
    ];
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

/// A validated `[device]` table.
#[derive(Clone, Debug)]
pub(crate) struct DeviceSpec {
    pub kind: DeviceKind,
    pub spacing_nm: f64,
    pub cells: usize,
    /// `device.spin = "explicit"`: every cell doubled into up and down.
    pub spin_explicit: bool,
    /// Span of the [device] table, for errors about the device as a whole.
    pub span: Option<Range<usize>>,
}

impl DeviceSpec {
    /// Device length N·a in nm.
    pub fn length_nm(&self) -> f64 {
        self.cells as f64 * self.spacing_nm
    }

    /// Orbitals per cell of the built device (spin doubling included).
    pub fn orbitals(&self) -> usize {
        let b = match &self.kind {
            DeviceKind::Chain { .. } => 1,
            DeviceKind::Strip { width, .. } => *width,
            DeviceKind::Blocks { onsite, .. } => onsite.first().map_or(0, |m| m.nrows()),
        };
        if self.spin_explicit { 2 * b } else { b }
    }

    /// The cells whose position x = c·a lies in [from_nm, to_nm).
    pub fn cells_in(&self, from_nm: f64, to_nm: f64) -> impl Iterator<Item = usize> + '_ {
        (0..self.cells).filter(move |&c| {
            let x = c as f64 * self.spacing_nm;
            x >= from_nm && x < to_nm
        })
    }

    /// Warn when the region `prefix` over [from_nm, to_nm) holds no cell
    /// (cells sit at multiples of the spacing), so it would have no effect.
    pub fn warn_if_no_cell(
        &self,
        prefix: &str,
        from_nm: f64,
        to_nm: f64,
        warnings: &mut Vec<String>,
    ) {
        if self.cells_in(from_nm, to_nm).next().is_none() {
            warnings.push(format!(
                "{prefix} [{from_nm}, {to_nm}) nm covers no cell (cells sit at multiples of {} nm): it has no effect",
                self.spacing_nm
            ));
        }
    }

    /// Validate `[device]`; block files come from (or go into) `files`.
    pub fn from_raw(
        raw: &RawCase,
        ck: &Checker<'_>,
        files: &mut BlockFiles,
    ) -> Result<Self, CaseError> {
        let span = span_of(&raw.device);
        let Some(dev) = raw.device.as_ref().map(Spanned::get_ref) else {
            return Err(ck.ctx.missing(Some(0..0), "device", "a [device] table"));
        };
        refuse_old_builder_key(dev, ck)?;
        let kind = ck.required(
            ck.choice::<KindName>(&dev.kind, "device.kind")?,
            span.clone(),
            "device.kind",
            "\"chain\", \"strip\" or \"blocks\"",
        )?;
        let spacing_nm = ck.required(
            ck.ranged(
                &dev.spacing_nm,
                "device.spacing_nm",
                "a spacing in nm > 0 (and ≤ 1e9)",
                |x| x > 0.0 && x <= MAX_LENGTH_NM,
            )?,
            span.clone(),
            "device.spacing_nm",
            "the cell spacing in nm",
        )?;
        let (kind, cells) = match kind {
            KindName::Blocks => blocks(dev, ck, &span, files)?,
            KindName::Chain | KindName::Strip => lattice(dev, ck, &span, kind, spacing_nm)?,
        };
        let spin_explicit =
            ck.choice::<SpinMode>(&dev.spin, "device.spin")? == Some(SpinMode::Explicit);
        Ok(Self {
            kind,
            spacing_nm,
            cells,
            spin_explicit,
            span,
        })
    }
}

/// `builder` was the name of `kind` in earlier versions.
fn refuse_old_builder_key(dev: &RawDevice, ck: &Checker<'_>) -> Result<(), CaseError> {
    let Some(old) = &dev.builder else {
        return Ok(());
    };
    Err(ck
        .ctx
        .error(
            CaseErrorKind::UnknownKey,
            Some(old.span()),
            Some("device.builder"),
            "expected `kind` (the key `builder` was renamed: write \
             `kind = \"chain\"`, `\"strip\"` or `\"blocks\"`), found `builder`"
                .to_string(),
        )
        .with_suggestion(Some("kind".to_string())))
}

/// A block file named by `key`, read through `files`.
pub(crate) fn read_named(
    name: &Spanned<String>,
    key: &str,
    ck: &Checker<'_>,
    files: &mut BlockFiles,
) -> Result<(PathBuf, BlockFile), CaseError> {
    let path = files.path(name.get_ref());
    let file = files.get(&path).map_err(|m| {
        ck.ctx.error(
            CaseErrorKind::File,
            Some(name.span()),
            Some(key),
            format!("expected a readable blocks file, found: {m}"),
        )
    })?;
    Ok((path, (*file).clone()))
}

/// `kind = "blocks"`: the on-site and coupling files, and the cell count.
fn blocks(
    dev: &RawDevice,
    ck: &Checker<'_>,
    span: &Option<Range<usize>>,
    files: &mut BlockFiles,
) -> Result<(DeviceKind, usize), CaseError> {
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
        span.clone(),
        "device.onsite_file",
        "a path to the on-site blocks (.npy or .csv)",
    )?;
    let co_name = ck.required(
        dev.coupling_file.as_ref(),
        span.clone(),
        "device.coupling_file",
        "a path to the coupling blocks (.npy or .csv)",
    )?;
    let (on_path, mut on) = read_named(on_name, "device.onsite_file", ck, files)?;
    let (co_path, mut co) = read_named(co_name, "device.coupling_file", ck, files)?;
    // csv files only know their largest index: pad both to a common b.
    let b_on = on.blocks.first().map_or(0, |m| m.nrows());
    let b_co = co.blocks.first().map_or(0, |m| m.nrows());
    if on.from_csv && b_co > b_on {
        pad_to(&mut on.blocks, b_co);
    }
    if co.from_csv && b_on > b_co {
        pad_to(&mut co.blocks, b_on);
    }
    let (onsite, cells) = block_cells(dev, ck, span, on, cells_key, &on_path)?;
    let kind = DeviceKind::Blocks {
        onsite,
        coupling: co.blocks,
        onsite_path: on_path,
        coupling_path: co_path,
    };
    Ok((kind, cells))
}

/// The on-site blocks per cell and the cell count: a single block repeated
/// `device.cells` times, or the file's stack (a csv stack padded with zero
/// blocks up to `device.cells`).
fn block_cells(
    dev: &RawDevice,
    ck: &Checker<'_>,
    span: &Option<Range<usize>>,
    on: BlockFile,
    cells_key: Option<usize>,
    on_path: &std::path::Path,
) -> Result<(Vec<Mat<C64>>, usize), CaseError> {
    let b = on.blocks.first().map_or(0, |m| m.nrows());
    let mut onsite = on.blocks;
    if on.single {
        let n = ck.required(
            cells_key,
            span.clone(),
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
        return Ok((vec![onsite[0].clone(); n], n));
    }
    let cells = match cells_key {
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
    };
    Ok((onsite, cells))
}

/// `kind = "chain"` or `"strip"`: length (a whole number of spacings),
/// effective mass, band edge and, for a strip, the width.
fn lattice(
    dev: &RawDevice,
    ck: &Checker<'_>,
    span: &Option<Range<usize>>,
    kind: KindName,
    spacing_nm: f64,
) -> Result<(DeviceKind, usize), CaseError> {
    let why = "with kind = \"chain\" or \"strip\" (only for \"blocks\")";
    ck.unused(&dev.onsite_file, "device.onsite_file", why)?;
    ck.unused(&dev.coupling_file, "device.coupling_file", why)?;
    ck.unused(
        &dev.cells,
        "device.cells",
        "here (the cell count is length_nm / spacing_nm)",
    )?;
    let cells = lattice_cells(dev, ck, span, spacing_nm)?;
    let mass = ck.required(
        ck.positive(
            &dev.effective_mass,
            "device.effective_mass",
            "an effective mass (units of m0)",
        )?,
        span.clone(),
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
    if kind == KindName::Chain {
        ck.unused(
            &dev.width_sites,
            "device.width_sites",
            "with kind = \"chain\" (only for \"strip\")",
        )?;
        let kind = DeviceKind::Chain {
            effective_mass: mass,
            band_edge_ev,
        };
        return Ok((kind, cells));
    }
    let width = strip_width(dev, ck, span, cells)?;
    let kind = DeviceKind::Strip {
        effective_mass: mass,
        band_edge_ev,
        width,
    };
    Ok((kind, cells))
}

/// N = length_nm / spacing_nm, which must be whole.
fn lattice_cells(
    dev: &RawDevice,
    ck: &Checker<'_>,
    span: &Option<Range<usize>>,
    spacing_nm: f64,
) -> Result<usize, CaseError> {
    let length = ck.required(
        ck.ranged(
            &dev.length_nm,
            "device.length_nm",
            "a length in nm > 0 (and ≤ 1e9)",
            |x| x > 0.0 && x <= MAX_LENGTH_NM,
        )?,
        span.clone(),
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
    Ok(n as usize)
}

/// The strip width W in sites.
fn strip_width(
    dev: &RawDevice,
    ck: &Checker<'_>,
    span: &Option<Range<usize>>,
    cells: usize,
) -> Result<usize, CaseError> {
    let w = ck.required(
        ck.int(
            &dev.width_sites,
            "device.width_sites",
            "a width from 1 to 1000 sites",
            |w| (1..=1000).contains(&w),
        )?,
        span.clone(),
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
    Ok(w)
}
