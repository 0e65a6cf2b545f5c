//! `[lattice]`: the device's own lattice (one mass and one spring per site,
//! replaced region by region) and its two phonon leads, from which the
//! lattice thermal conductance κ_ph for ZT is computed.
//!
//! Values per site: every site takes `mass_u` and `spring_n_per_m`; each
//! `[[lattice.region]]` selects the cells with from_nm ≤ x < to_nm (as the
//! potential regions do) and replaces the mass and/or the spring there,
//! entries later in the file winning. The spring stored at site i is the
//! bond (i, i+1), so the last site's spring is the bond to the right lead.
//! A strip has the same values on every site of a cell, and one transverse
//! spring between neighbouring sites across (default: `spring_n_per_m`).
//! `damping_per_ps` (γ, 1/ps, default 0) is set the same way, uniform and
//! then region by region; a site with γ > 0 exchanges heat with a
//! floating phonon reservoir of its own (a probe), which is what lets the
//! lattice warm up where the electrons deposit power.
//! Each phonon lead continues its end site unless `[lattice.left]` or
//! `[lattice.right]` names its own mass and/or spring; the bond joining a
//! lead to the device has the lead's spring.
//! A device of blocks takes force-constant blocks instead of springs
//! (see [`super::lattice_blocks`]); damping and regions work the same way.

use super::super::blocks_file::BlockFiles;
use super::super::check::Checker;
use super::super::error::CaseError;
use super::super::raw::{Opt, RawCase, RawLattice, RawLatticeLead, RawLatticeRegion};
use super::device::{DeviceKind, DeviceSpec};
pub(crate) use super::lattice_blocks::ForceBlocks;
use crate::lattice::{Lattice, LatticeError, PhononLead};
use crate::selfheat::SelfHeatParams;
use faer::Mat;
use std::ops::Range;
use toml::Spanned;

/// Largest mass (u) and spring (N/m) accepted: far beyond any solid, and
/// it keeps ω²-scale numbers of the solve finite and well scaled.
pub(super) const MAX_MASS_U: f64 = 1e6;
const MAX_SPRING_N_PER_M: f64 = 1e6;
/// Largest damping accepted (1/ps): far above any phonon frequency, so
/// far beyond an overdamped lattice.
const MAX_DAMPING_PER_PS: f64 = 1e4;

/// One `[[lattice.region]]`: replaces the mass and/or spring of the sites
/// of the cells it selects.
#[derive(Clone, Debug, PartialEq)]
pub(crate) struct LatticeRegion {
    pub from_nm: f64,
    pub to_nm: f64,
    pub mass_u: Option<f64>,
    pub spring_n_per_m: Option<f64>,
    pub damping_per_ps: Option<f64>,
}

/// A lead of its own (`None` values continue the end site).
#[derive(Clone, Debug, Default, PartialEq)]
pub(crate) struct LatticeLeadSpec {
    pub mass_u: Option<f64>,
    pub spring_n_per_m: Option<f64>,
}

/// The masses and springs of a chain or strip lattice.
#[derive(Clone, Debug, PartialEq)]
pub(crate) struct SpringForces {
    pub mass_u: f64,
    pub spring_n_per_m: f64,
    pub transverse_spring_n_per_m: f64,
    pub left: LatticeLeadSpec,
    pub right: LatticeLeadSpec,
}

/// Where the lattice's masses and force constants come from.
#[derive(Clone, Debug, PartialEq)]
pub(crate) enum LatticeForces {
    /// Uniform masses and springs of a chain or strip, region by region.
    Springs(SpringForces),
    /// The user's force-constant blocks of a blocks device.
    Blocks(ForceBlocks),
}

/// A validated `[lattice]` table.
#[derive(Clone, Debug, PartialEq)]
pub(crate) struct LatticeSpec {
    pub forces: LatticeForces,
    /// Uniform damping γ (1/ps).
    pub damping_per_ps: f64,
    pub regions: Vec<LatticeRegion>,
    /// Settings of the joint electron–lattice loop.
    pub self_heating: SelfHeatParams,
    /// Span of the `[lattice]` table.
    pub span: Option<Range<usize>>,
}

impl LatticeSpec {
    /// Validate `[lattice]` against the device; `None` when the file has
    /// no lattice. Regions that cover no cell add a warning; force blocks
    /// come from (or go into) `files`.
    pub fn from_raw(
        raw: &RawCase,
        ck: &Checker<'_>,
        device: &DeviceSpec,
        files: &mut BlockFiles,
        warnings: &mut Vec<String>,
    ) -> Result<Option<Self>, CaseError> {
        let Some(lat) = raw.lattice.as_ref() else {
            return Ok(None);
        };
        let span = Some(lat.span());
        let l = lat.get_ref();
        let forces = if let DeviceKind::Blocks { .. } = device.kind {
            let blocks = ForceBlocks::from_raw(l, ck, device, &span, files, warnings)?;
            LatticeForces::Blocks(blocks)
        } else {
            LatticeForces::Springs(springs(l, ck, device, &span)?)
        };
        let damping_per_ps = damping(ck, &l.damping_per_ps, "lattice.damping_per_ps")?;
        let regions = regions(l, ck, device, warnings)?;
        Ok(Some(Self {
            forces,
            damping_per_ps: damping_per_ps.unwrap_or(0.0),
            regions,
            self_heating: self_heating(l, ck)?,
            span,
        }))
    }

    /// Mass and spring of every cell of a chain or strip (one value per
    /// cell; a strip has the same values across).
    fn per_cell(&self, f: &SpringForces, device: &DeviceSpec) -> (Vec<f64>, Vec<f64>) {
        let n = device.cells;
        let mut masses = vec![f.mass_u; n];
        let mut springs = vec![f.spring_n_per_m; n];
        for r in &self.regions {
            for c in device.cells_in(r.from_nm, r.to_nm) {
                if let Some(m) = r.mass_u {
                    masses[c] = m;
                }
                if let Some(k) = r.spring_n_per_m {
                    springs[c] = k;
                }
            }
        }
        (masses, springs)
    }

    /// Damping γ of every cell (1/ps; a strip has the same value across).
    pub fn damping_per_cell(&self, device: &DeviceSpec) -> Vec<f64> {
        let mut gamma = vec![self.damping_per_ps; device.cells];
        for r in &self.regions {
            if let Some(g) = r.damping_per_ps {
                for c in device.cells_in(r.from_nm, r.to_nm) {
                    gamma[c] = g;
                }
            }
        }
        gamma
    }

    /// The lattice of the device and its two phonon leads, with the
    /// damping of every site.
    pub fn build(&self, device: &DeviceSpec) -> Result<Lattice, LatticeError> {
        let lattice = match &self.forces {
            LatticeForces::Springs(f) => self.build_springs(f, device)?,
            LatticeForces::Blocks(f) => f.build(&self.cell_masses(device))?,
        };
        let per_site = lattice.sites_per_cell();
        let gamma = self
            .damping_per_cell(device)
            .iter()
            .flat_map(|&g| std::iter::repeat_n(g, per_site))
            .collect();
        lattice.with_damping(gamma)
    }

    /// The mass that `[[lattice.region]]` entries put on every site of a
    /// cell (`None` where no region sets one).
    fn cell_masses(&self, device: &DeviceSpec) -> Vec<Option<f64>> {
        let mut masses = vec![None; device.cells];
        for r in &self.regions {
            if let Some(m) = r.mass_u {
                for c in device.cells_in(r.from_nm, r.to_nm) {
                    masses[c] = Some(m);
                }
            }
        }
        masses
    }

    fn build_springs(
        &self,
        f: &SpringForces,
        device: &DeviceSpec,
    ) -> Result<Lattice, LatticeError> {
        let (masses, springs) = self.per_cell(f, device);
        let n = masses.len();
        let (ml, kl) = (
            f.left.mass_u.unwrap_or(masses[0]),
            f.left.spring_n_per_m.unwrap_or(springs[0]),
        );
        let (mr, kr) = (
            f.right.mass_u.unwrap_or(masses[n - 1]),
            f.right.spring_n_per_m.unwrap_or(springs[n - 1]),
        );
        match device.kind {
            DeviceKind::Strip { width, .. } => {
                let kt = f.transverse_spring_n_per_m;
                let lead = |m, k| PhononLead::strip(width, m, k, kt, k);
                let (onsite, coupling) = strip_blocks(width, &springs[..n - 1], kt, n);
                let masses = masses
                    .iter()
                    .flat_map(|&m| std::iter::repeat_n(m, width))
                    .collect();
                Lattice::new(masses, onsite, coupling, lead(ml, kl), lead(mr, kr))
            }
            _ => Lattice::chain_with_leads(
                &masses,
                &springs[..n - 1],
                PhononLead::chain(ml, kl, kl),
                PhononLead::chain(mr, kr, kr),
            ),
        }
    }
}

/// Largest tolerance (K), outer iteration limit and Anderson depth of the
/// joint loop accepted from a case.
const MAX_SELFHEAT_TOLERANCE_K: f64 = 100.0;
const MAX_SELFHEAT_ITERATIONS: i64 = 10_000;
const MAX_SELFHEAT_HISTORY: i64 = 20;

/// `self_heating_*`: the settings of the joint electron–lattice loop, each
/// defaulting to [`SelfHeatParams::default`].
fn self_heating(l: &RawLattice, ck: &Checker<'_>) -> Result<SelfHeatParams, CaseError> {
    let mut p = SelfHeatParams::default();
    if let Some(t) = ck.ranged(
        &l.self_heating_tolerance_k,
        "lattice.self_heating_tolerance_k",
        &format!(
            "a tolerance in K, > 0 and ≤ {MAX_SELFHEAT_TOLERANCE_K} (hint: the default is {:e} K)",
            SelfHeatParams::DEFAULT_TOLERANCE_K
        ),
        |x| x > 0.0 && x <= MAX_SELFHEAT_TOLERANCE_K,
    )? {
        p = p.with_tolerance_k(t);
    }
    if let Some(n) = ck.int(
        &l.self_heating_max_iterations,
        "lattice.self_heating_max_iterations",
        &format!("an outer iteration limit from 1 to {MAX_SELFHEAT_ITERATIONS}"),
        |n| (1..=MAX_SELFHEAT_ITERATIONS).contains(&n),
    )? {
        p = p.with_max_iterations(n);
    }
    if let Some(b) = ck.ranged(
        &l.self_heating_mixing,
        "lattice.self_heating_mixing",
        "a mixing factor in (0, 1] (1 takes the whole update; smaller damps a strong feedback)",
        |x| x > 0.0 && x <= 1.0,
    )? {
        p = p.with_mixing_factor(b);
    }
    if let Some(d) = ck.int(
        &l.self_heating_history,
        "lattice.self_heating_history",
        &format!("an Anderson history depth from 0 to {MAX_SELFHEAT_HISTORY} (0: linear mixing)"),
        |n| (0..=MAX_SELFHEAT_HISTORY).contains(&n),
    )? {
        p = p.with_anderson_depth(d);
    }
    Ok(p)
}

/// The masses and springs of a chain or strip: `mass_u` and
/// `spring_n_per_m` are required; the keys of a blocks lattice are
/// refused.
fn springs(
    l: &RawLattice,
    ck: &Checker<'_>,
    device: &DeviceSpec,
    span: &Option<Range<usize>>,
) -> Result<SpringForces, CaseError> {
    let why = "with device.kind = \"chain\" or \"strip\" (only for \"blocks\"; hint: use \
               mass_u and spring_n_per_m)";
    ck.unused(&l.masses_u, "lattice.masses_u", why)?;
    ck.unused(&l.masses_file, "lattice.masses_file", why)?;
    ck.unused(&l.force_onsite_file, "lattice.force_onsite_file", why)?;
    ck.unused(&l.force_coupling_file, "lattice.force_coupling_file", why)?;
    let mass_u = ck.required(
        mass(ck, &l.mass_u, "lattice.mass_u")?,
        span.clone(),
        "lattice.mass_u",
        "the mass of every lattice site in u (atomic mass units; there is no material \
         default, hint: 28.09 for silicon)",
    )?;
    let spring_n_per_m = ck.required(
        spring(ck, &l.spring_n_per_m, "lattice.spring_n_per_m")?,
        span.clone(),
        "lattice.spring_n_per_m",
        "the nearest-neighbour spring in N/m (there is no material default, hint: typical \
         solids have 5 to 100 N/m)",
    )?;
    let transverse = transverse(l, ck, device)?.unwrap_or(spring_n_per_m);
    Ok(SpringForces {
        mass_u,
        spring_n_per_m,
        transverse_spring_n_per_m: transverse,
        left: lead(ck, &l.left, "lattice.left")?,
        right: lead(ck, &l.right, "lattice.right")?,
    })
}

/// K_ii (without the lead bonds, which [`Lattice::new`] adds) and K_i,i+1
/// of a strip W wide with free edges: `longitudinal` holds the N − 1
/// internal bonds along x, `kt` the spring across.
fn strip_blocks(
    width: usize,
    longitudinal: &[f64],
    kt: f64,
    cells: usize,
) -> (Vec<Mat<f64>>, Vec<Mat<f64>>) {
    let onsite = (0..cells)
        .map(|i| {
            let along = if i > 0 { longitudinal[i - 1] } else { 0.0 }
                + if i + 1 < cells { longitudinal[i] } else { 0.0 };
            Mat::from_fn(width, width, |r, c| {
                if r == c {
                    let across = f64::from(u8::from(r > 0)) + f64::from(u8::from(r + 1 < width));
                    along + across * kt
                } else if r.abs_diff(c) == 1 {
                    -kt
                } else {
                    0.0
                }
            })
        })
        .collect();
    let coupling = longitudinal
        .iter()
        .map(|&k| Mat::from_fn(width, width, |r, c| if r == c { -k } else { 0.0 }))
        .collect();
    (onsite, coupling)
}

pub(super) fn damping(ck: &Checker<'_>, v: &Opt<f64>, key: &str) -> Result<Option<f64>, CaseError> {
    ck.ranged(
        v,
        key,
        &format!("a damping rate in 1/ps, ≥ 0 and ≤ {MAX_DAMPING_PER_PS:e} (hint: 0 means no damping; a few per ps is a strongly damped lattice)"),
        |x| (0.0..=MAX_DAMPING_PER_PS).contains(&x),
    )
}

pub(super) fn mass(ck: &Checker<'_>, v: &Opt<f64>, key: &str) -> Result<Option<f64>, CaseError> {
    ck.ranged(
        v,
        key,
        &format!("a mass in u (atomic mass units), > 0 and ≤ {MAX_MASS_U:e}"),
        |x| x > 0.0 && x <= MAX_MASS_U,
    )
}

pub(super) fn spring(ck: &Checker<'_>, v: &Opt<f64>, key: &str) -> Result<Option<f64>, CaseError> {
    ck.ranged(
        v,
        key,
        &format!("a spring constant in N/m, > 0 and ≤ {MAX_SPRING_N_PER_M:e} (hint: a spring cannot be negative or zero; a missing bond cuts the lattice in two)"),
        |x| x > 0.0 && x <= MAX_SPRING_N_PER_M,
    )
}

/// `transverse_spring_n_per_m`: a strip's spring across; refused for a
/// chain, which has no transverse bonds.
fn transverse(
    l: &RawLattice,
    ck: &Checker<'_>,
    device: &DeviceSpec,
) -> Result<Option<f64>, CaseError> {
    let key = "lattice.transverse_spring_n_per_m";
    if let DeviceKind::Chain { .. } = device.kind {
        ck.unused(
            &l.transverse_spring_n_per_m,
            key,
            "with device.kind = \"chain\" (a chain has no transverse bonds; only strips do)",
        )?;
    }
    spring(ck, &l.transverse_spring_n_per_m, key)
}

fn lead(ck: &Checker<'_>, l: &Opt<RawLatticeLead>, p: &str) -> Result<LatticeLeadSpec, CaseError> {
    let Some(l) = l else {
        return Ok(LatticeLeadSpec::default());
    };
    let l = l.get_ref();
    Ok(LatticeLeadSpec {
        mass_u: mass(ck, &l.mass_u, &format!("{p}.mass_u"))?,
        spring_n_per_m: spring(ck, &l.spring_n_per_m, &format!("{p}.spring_n_per_m"))?,
    })
}

fn regions(
    l: &RawLattice,
    ck: &Checker<'_>,
    device: &DeviceSpec,
    warnings: &mut Vec<String>,
) -> Result<Vec<LatticeRegion>, CaseError> {
    let mut out = Vec::new();
    for (i, r) in l.region.iter().flatten().enumerate() {
        let prefix = format!("lattice.region.{i}");
        let region = one_region(r, &prefix, ck, device.length_nm())?;
        device.warn_if_no_cell(&prefix, region.from_nm, region.to_nm, warnings);
        out.push(region);
    }
    Ok(out)
}

fn one_region(
    r: &Spanned<RawLatticeRegion>,
    prefix: &str,
    ck: &Checker<'_>,
    length_nm: f64,
) -> Result<LatticeRegion, CaseError> {
    let span = r.span();
    let r = r.get_ref();
    let (from_nm, to_nm) = ck.region(
        &r.from_nm,
        &r.to_nm,
        prefix,
        length_nm,
        Some(Some(span.clone())),
    )?;
    let mass_u = mass(ck, &r.mass_u, &format!("{prefix}.mass_u"))?;
    let spring_n_per_m = spring(ck, &r.spring_n_per_m, &format!("{prefix}.spring_n_per_m"))?;
    let damping_per_ps = damping(ck, &r.damping_per_ps, &format!("{prefix}.damping_per_ps"))?;
    if mass_u.is_none() && spring_n_per_m.is_none() && damping_per_ps.is_none() {
        return Err(ck.ctx.missing(
            Some(span),
            &format!("{prefix}.mass_u"),
            "mass_u, spring_n_per_m and/or damping_per_ps (the values the region puts in place of the uniform ones)",
        ));
    }
    Ok(LatticeRegion {
        from_nm,
        to_nm,
        mass_u,
        spring_n_per_m,
        damping_per_ps,
    })
}
