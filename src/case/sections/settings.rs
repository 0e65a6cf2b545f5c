//! `[grid]`, `[solver]`, `[response]`, `[thermal]` and `[profile]`: the
//! settings that do not describe the device.

use super::super::check::{At, Checker, Choice, MAX_ENERGY_EV};
use super::super::error::CaseError;
use super::super::raw::{RawCase, RawSolver};
use crate::leads::DecimationParams;
use crate::scba::{CoarseStart, EnergyOrder, MixerHistory, Mixing, ScbaParams};
use toml::Spanned;

/// A validated `[grid]` table: what the file gives; the rest is derived
/// when the case is resolved.
#[derive(Clone, Debug, Default)]
pub(crate) struct GridSpec {
    pub step_ev: Option<At<f64>>,
    pub min_ev: Option<At<f64>>,
    pub max_ev: Option<At<f64>>,
    /// `grid.allow_coarse_phonon_snap`: accept phonon energies moved by
    /// more than the snap limit when snapped to the grid.
    pub allow_coarse_snap: bool,
}

impl GridSpec {
    pub fn from_raw(raw: &RawCase, ck: &Checker<'_>) -> Result<Self, CaseError> {
        let Some(g) = raw.grid.as_ref().map(Spanned::get_ref) else {
            return Ok(Self::default());
        };
        let step = ck.num(&g.step_ev, "grid.step_ev")?;
        if let Some(s) = &step
            && s.value <= 0.0
        {
            return Err(ck.ctx.invalid(
                s.span.clone(),
                "grid.step_ev",
                "an energy step in eV > 0",
                super::super::check::show(s.value),
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
                    super::super::check::show(a.value),
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
        Ok(Self {
            step_ev: step,
            min_ev: min,
            max_ev: max,
            allow_coarse_snap: g
                .allow_coarse_phonon_snap
                .as_ref()
                .is_some_and(|b| *b.get_ref()),
        })
    }
}

/// The words of `solver.mixing`.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(crate) enum MixingKind {
    Anderson,
    Linear,
}

impl MixingKind {
    /// The scheme when the file does not name one.
    pub const DEFAULT: Self = MixingKind::Anderson;
}

impl Choice for MixingKind {
    const CHOICES: &'static [(&'static str, Self)] = &[
        ("anderson", MixingKind::Anderson),
        ("linear", MixingKind::Linear),
    ];
}

/// The words of `solver.hermitian_part`.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(crate) enum HermitianPart {
    Neglect,
    Include,
}

impl HermitianPart {
    /// The setting when the file does not give one.
    pub const DEFAULT: Self = HermitianPart::Neglect;
}

impl Choice for HermitianPart {
    const CHOICES: &'static [(&'static str, Self)] = &[
        ("neglect", HermitianPart::Neglect),
        ("include", HermitianPart::Include),
    ];
}

impl Choice for MixerHistory {
    const CHOICES: &'static [(&'static str, Self)] = &[
        ("full", MixerHistory::Full),
        ("compact", MixerHistory::Compact),
    ];
}

impl Choice for EnergyOrder {
    const CHOICES: &'static [(&'static str, Self)] = &[
        ("auto", EnergyOrder::Auto),
        ("simultaneous", EnergyOrder::Simultaneous),
        ("red-black", EnergyOrder::RedBlack),
    ];
}

impl Choice for CoarseStart {
    const CHOICES: &'static [(&'static str, Self)] = &[
        ("auto", CoarseStart::Auto),
        ("off", CoarseStart::Off),
        ("on", CoarseStart::On),
    ];
}

/// A validated `[solver]` table.
#[derive(Clone, Debug)]
pub(crate) struct SolverSpec {
    pub scba: ScbaParams,
    pub hermitian_part: HermitianPart,
    pub decimation: DecimationParams,
}

impl SolverSpec {
    /// Validate `[solver]`; ignored settings add warnings.
    pub fn from_raw(
        raw: &RawCase,
        ck: &Checker<'_>,
        warnings: &mut Vec<String>,
    ) -> Result<Self, CaseError> {
        let mut out = Self {
            scba: ScbaParams::default(),
            hermitian_part: HermitianPart::DEFAULT,
            decimation: DecimationParams::default(),
        };
        let Some(s) = raw.solver.as_ref().map(Spanned::get_ref) else {
            return Ok(out);
        };
        if let Some(t) = ck.ranged(
            &s.tolerance,
            "solver.tolerance",
            "a relative tolerance in (0, 1)",
            |x| x > 0.0 && x < 1.0,
        )? {
            out.scba.tolerance = t;
        }
        if let Some(n) = ck.int(
            &s.max_iterations,
            "solver.max_iterations",
            "an iteration limit ≥ 1",
            |n| (1..=1_000_000).contains(&n),
        )? {
            out.scba.max_iterations = n;
        }
        out.scba.mixing = mixing(s, ck, warnings)?;
        if let Some(h) = ck.choice(&s.hermitian_part, "solver.hermitian_part")? {
            out.hermitian_part = h;
        }
        if let Some(o) = ck.choice(&s.energy_order, "solver.energy_order")? {
            out.scba.energy_order = o;
        }
        if let Some(c) = ck.choice(&s.coarse_start, "solver.coarse_start")? {
            out.scba.coarse_start = c;
        }
        if let Some(h) = ck.choice(&s.anderson_history, "solver.anderson_history")? {
            out.scba.history = h;
            if matches!(out.scba.mixing, Mixing::Linear { .. }) {
                warnings.push("solver.anderson_history is ignored with mixing = \"linear\"".into());
            }
        }
        if let Some(f) = ck.non_negative(
            &s.current_floor_a,
            "solver.current_floor_a",
            "a current in A",
        )? {
            out.scba.current_floor_a = f;
        }
        decimation(s, ck, &mut out.decimation)?;
        Ok(out)
    }
}

/// `solver.mixing` with its factor or Anderson depth and damping.
fn mixing(
    s: &RawSolver,
    ck: &Checker<'_>,
    warnings: &mut Vec<String>,
) -> Result<Mixing, CaseError> {
    let kind = ck
        .choice(&s.mixing, "solver.mixing")?
        .unwrap_or(MixingKind::DEFAULT);
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
    Ok(match kind {
        MixingKind::Linear => {
            if depth.is_some() || damping.is_some() {
                warnings.push(
                    "solver.anderson_depth / anderson_damping are ignored with mixing = \"linear\""
                        .into(),
                );
            }
            Mixing::Linear {
                factor: factor.unwrap_or(Mixing::DEFAULT_LINEAR_FACTOR),
            }
        }
        MixingKind::Anderson => {
            if factor.is_some() {
                warnings.push("solver.mixing_factor is ignored with mixing = \"anderson\"".into());
            }
            Mixing::Anderson {
                depth: depth.unwrap_or(Mixing::DEFAULT_ANDERSON_DEPTH),
                damping: damping.unwrap_or(Mixing::DEFAULT_ANDERSON_DAMPING),
            }
        }
    })
}

/// The lead decimation settings.
fn decimation(
    s: &RawSolver,
    ck: &Checker<'_>,
    out: &mut DecimationParams,
) -> Result<(), CaseError> {
    if let Some(e) = ck.ranged(
        &s.decimation_eta_ev,
        "solver.decimation_eta_ev",
        "an energy in eV in (0, 0.1]",
        |x| x > 0.0 && x <= 0.1,
    )? {
        out.eta_ev = e;
    }
    if let Some(e) = ck.ranged(
        &s.decimation_tolerance_ev,
        "solver.decimation_tolerance_ev",
        "an energy in eV in (0, 1e-3]",
        |x| x > 0.0 && x <= 1e-3,
    )? {
        out.tolerance_ev = e;
    }
    Ok(())
}

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

impl Choice for ResponseSplit {
    const CHOICES: &'static [(&'static str, Self)] = &[
        ("symmetric", ResponseSplit::Symmetric),
        ("left-only", ResponseSplit::LeftOnly),
    ];
}

/// The words of `profile.electron_temperature`.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(crate) enum ProfileMode {
    Off,
    Fit,
}

impl ProfileMode {
    /// The mode when the file does not give one.
    pub const DEFAULT: Self = ProfileMode::Off;
}

impl Choice for ProfileMode {
    const CHOICES: &'static [(&'static str, Self)] =
        &[("off", ProfileMode::Off), ("fit", ProfileMode::Fit)];
}

/// A validated `[response]` table.
#[derive(Clone, Debug, Default)]
pub(crate) struct ResponseSpec {
    pub split: ResponseSplit,
}

impl ResponseSpec {
    pub fn from_raw(raw: &RawCase, ck: &Checker<'_>) -> Result<Self, CaseError> {
        let split = match &raw.response {
            None => None,
            Some(r) => ck.choice(&r.get_ref().split, "response.split")?,
        };
        Ok(Self {
            split: split.unwrap_or_default(),
        })
    }
}

/// A validated `[thermal]` table.
#[derive(Clone, Debug, Default)]
pub(crate) struct ThermalSpec {
    /// κ_ph for ZT (W/K); `None` when not given.
    pub phonon_conductance_w_per_k: Option<f64>,
}

impl ThermalSpec {
    pub fn from_raw(raw: &RawCase, ck: &Checker<'_>) -> Result<Self, CaseError> {
        let phonon_conductance_w_per_k = match &raw.thermal {
            None => None,
            Some(t) => ck.non_negative(
                &t.get_ref().phonon_conductance_w_per_k,
                "thermal.phonon_conductance_w_per_k",
                "a thermal conductance in W/K",
            )?,
        };
        Ok(Self {
            phonon_conductance_w_per_k,
        })
    }
}

/// A validated `[profile]` table.
#[derive(Clone, Debug)]
pub(crate) struct ProfileSpec {
    pub electron_temperature: ProfileMode,
}

impl ProfileSpec {
    pub fn from_raw(raw: &RawCase, ck: &Checker<'_>) -> Result<Self, CaseError> {
        let mode = match &raw.profile {
            None => None,
            Some(p) => ck.choice(
                &p.get_ref().electron_temperature,
                "profile.electron_temperature",
            )?,
        };
        Ok(Self {
            electron_temperature: mode.unwrap_or(ProfileMode::DEFAULT),
        })
    }
}
