//! The device as a thermoelectric generator: power and efficiency against
//! load voltage between a hot and a cold lead.
//!
//! Conventions (the crate manual's): V = V1 − V2 = −(µ1 − µ2)/e, applied as
//! µ1 = µ − eV/2, µ2 = µ + eV/2 around the case's mean zero-bias Fermi
//! level µ; I = I_1 is the conventional current into the device from lead 1.
//! The hot lead is lead 1 (left) at T_hot, the cold lead is lead 2 (right)
//! at T_cold; the phonon bath stays at the case's setting (by default the
//! mean of the two lead temperatures). The device delivers the power
//! P = −I·V to the load (positive between V = 0 and the open-circuit
//! voltage V_oc, where I(V_oc) = 0), and its efficiency is
//! η = P/Q_hot with Q_hot the heat drawn from the hot side: the
//! electrons' heat current out of the hot lead plus the heat the lattice
//! carries from the hot lead to the cold one. The lattice's heat is
//! J_ph(T_h, T_c) from the phonon spectrum of the case's `[lattice]`, or
//! κ_ph (T_h − T_c) with a given κ_ph (which wins), and 0 with neither; it
//! does not depend on the voltage, so it lowers every efficiency.
//!
//! Bounds printed beside the result:
//! - Carnot η_C = 1 − T_c/T_h;
//! - Curzon-Ahlborn η_CA = 1 − √(T_c/T_h) (F. L. Curzon, B. Ahlborn,
//!   Am. J. Phys. 43, 22 (1975));
//! - Ioffe's maximum efficiency η_C (M − 1)/(M + T_c/T_h), M = √(1 + ZT)
//!   (A. F. Ioffe, Semiconductor Thermoelements and Thermoelectric Cooling
//!   (1957)), with the device's own linear-response ZT at (µ, (T_h + T_c)/2);
//! - in linear response the efficiency at maximum power is
//!   (η_C/2) ZT/(ZT + 2), which tends to η_C/2 for tight coupling
//!   (C. Van den Broeck, Phys. Rev. Lett. 95, 190602 (2005)).

use super::Coefficients;
use super::common_grid::CommonGrid;
use super::of_case::{CoefficientError, case_coefficients};
use super::point::{PointStart, solve_point};
use crate::case::{Case, CaseError, CaseKey};
use crate::electrostatics::Electrostatics;
use crate::leads::Side;
use crate::observables::{Observables, observe};
use crate::progress::{CurvePointRecord, Observer, Silent};
use crate::scattering::ScatteringSelfEnergy;
use crate::scba::SolveError;

/// Carnot efficiency 1 − T_c/T_h.
pub fn carnot_efficiency(hot_k: f64, cold_k: f64) -> f64 {
    1.0 - cold_k / hot_k
}

/// Curzon-Ahlborn efficiency 1 − √(T_c/T_h) (Curzon, Ahlborn 1975).
pub fn curzon_ahlborn_efficiency(hot_k: f64, cold_k: f64) -> f64 {
    1.0 - (cold_k / hot_k).sqrt()
}

/// Ioffe's maximum efficiency η_C (M − 1)/(M + T_c/T_h), M = √(1 + ZT).
pub fn ioffe_max_efficiency(zt: f64, hot_k: f64, cold_k: f64) -> f64 {
    let m = (1.0 + zt).sqrt();
    carnot_efficiency(hot_k, cold_k) * (m - 1.0) / (m + cold_k / hot_k)
}

/// Linear-response efficiency at maximum power (η_C/2) ZT/(ZT + 2)
/// (Van den Broeck 2005).
pub fn efficiency_at_max_power_linear(zt: f64, hot_k: f64, cold_k: f64) -> f64 {
    0.5 * carnot_efficiency(hot_k, cold_k) * zt / (zt + 2.0)
}

/// Carnot coefficient of performance of a cooler, T_c/(T_h − T_c).
pub fn carnot_cop(hot_k: f64, cold_k: f64) -> f64 {
    cold_k / (hot_k - cold_k)
}

/// Ioffe's maximum coefficient of performance
/// (T_c/(T_h − T_c)) (M − T_h/T_c)/(M + 1), M = √(1 + ZT).
pub fn ioffe_max_cop(zt: f64, hot_k: f64, cold_k: f64) -> f64 {
    let m = (1.0 + zt).sqrt();
    carnot_cop(hot_k, cold_k) * (m - hot_k / cold_k) / (m + 1.0)
}

/// Why a generator or cooler curve could not be made.
#[derive(Debug, thiserror::Error)]
pub enum CurveError {
    /// Bad temperatures or point count.
    #[error("{0}")]
    Settings(String),
    /// The case could not be set to an operating point.
    #[error(transparent)]
    Case(#[from] CaseError),
    /// The lattice's phonon spectrum (for the heat it leaks) failed.
    #[error("heat through the case's [lattice]: {0}")]
    Lattice(#[from] crate::lattice::LatticeError),
    /// A solve failed outright.
    #[error("at V = {voltage_v:e} V: {source}")]
    Solve {
        /// Load voltage (V).
        voltage_v: f64,
        /// The error.
        source: SolveError,
    },
    /// The linear-response figure of merit could not be computed.
    #[error("linear-response coefficients: {0}")]
    Coefficients(#[from] CoefficientError),
    /// No thermoelectric current flows at V = 0.
    #[error(
        "no thermoelectric current at V = 0 (I = {current_a:e} A with T_hot = {hot_k} K, T_cold = {cold_k} K): the device delivers no power"
    )]
    NoCurrent {
        /// I(0) (A).
        current_a: f64,
        /// Hot temperature (K).
        hot_k: f64,
        /// Cold temperature (K).
        cold_k: f64,
    },
    /// The open-circuit voltage could not be bracketed.
    #[error(
        "no open-circuit voltage found: I keeps the sign of I(0) = {current_at_zero_a:e} A up to V = {tried_v:e} V (I there {current_a:e} A)"
    )]
    NoOpenCircuit {
        /// I(0) (A).
        current_at_zero_a: f64,
        /// Largest |V| tried (V).
        tried_v: f64,
        /// Current there (A).
        current_a: f64,
    },
}

/// Which lead is which, and the reference Fermi level.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
pub struct LeadTemperatures {
    /// Lead 1 (left) temperature (K).
    pub left_k: f64,
    /// Lead 2 (right) temperature (K).
    pub right_k: f64,
}

/// One solved load point.
#[derive(Clone, Debug)]
pub(crate) struct Solved {
    pub voltage_v: f64,
    pub obs: Observables,
    pub converged: bool,
    /// Which grid of the curve it was solved on (see [`BiasedCase`]).
    pub generation: usize,
    /// Heat the lattice carries from the hotter lead to the colder (W).
    pub heat_leak_w: f64,
    /// With electrostatics: the computed drop (V) and the outer
    /// iterations of the point.
    pub electrostatics: Option<(f64, usize)>,
    /// Highest band edge of the device at the point, potential included
    /// (eV): the top of its barrier.
    pub highest_band_edge_ev: f64,
}

/// The electrostatics of a generator or cooler curve: the potential of the
/// device's charge was solved at every point of it.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
pub struct CurveElectrostatics {
    /// True: the potential was solved at every point, none was imposed.
    pub potential_solved_at_every_point: bool,
    /// Outer iterations of all solves of the curve.
    pub outer_iterations: usize,
    /// True when the potential converged at every point.
    pub converged: bool,
}

/// Solves a case at voltages around µ with fixed lead temperatures,
/// warm-starting each Born loop from the previous one.
///
/// Every solve runs on one common energy grid: the envelope of the grids
/// the case would give at V = −W, 0 and +W, with W the largest |V| asked for
/// so far. The grid's step depends on the temperatures alone, and over an
/// interval of voltages the lowest band edge is a concave and the higher
/// Fermi level a convex function of V, so the ends of the interval bound
/// the window. With electrostatics the band of a charge-neutral end at
/// the lower Fermi level lies eV/2 below where it is at V = 0; a case's
/// own window at ±W starts below it (it is set at the lower Fermi level),
/// so the envelope holds it. When a voltage beyond W is asked for, W grows to at least
/// twice its value (so a search that marches outwards rebuilds the grid a
/// logarithmic number of times) and the generation counter steps; a
/// result kept from an earlier generation must be solved again before it
/// is compared with newer ones.
pub(crate) struct BiasedCase {
    base: Case,
    fixed: Case,
    grid: CommonGrid,
    covered_v: f64,
    pub generation: usize,
    warm: Option<ScatteringSelfEnergy>,
    /// With electrostatics: its settings, and the potential of every
    /// converged point (with its voltage) to start a nearby point from.
    es: Option<Electrostatics>,
    potentials: Vec<(f64, Vec<f64>)>,
    /// With electrostatics: what the curve's solves did.
    pub electrostatics: Option<CurveElectrostatics>,
    pub all_converged: bool,
    pub solves: usize,
    /// Heat the lattice carries from the hotter lead to the colder (W):
    /// J_ph(T_h, T_c) from the phonon spectrum, κ_ph (T_h − T_c) with a
    /// given κ_ph, 0 without either. It does not depend on the voltage.
    pub heat_leak_w: f64,
}

impl BiasedCase {
    /// The case with both zero-bias Fermi levels at µ and the lead
    /// temperatures set (the bath keeps the case's own setting).
    pub fn new(case: &Case, mu_ev: f64, t: LeadTemperatures) -> Result<Self, CurveError> {
        let base = case
            .with(CaseKey::LeadFermiLevel(crate::leads::Side::Left), mu_ev)?
            .with(CaseKey::LeadFermiLevel(crate::leads::Side::Right), mu_ev)?
            .with(CaseKey::LeadTemperature(crate::leads::Side::Left), t.left_k)?
            .with(
                CaseKey::LeadTemperature(crate::leads::Side::Right),
                t.right_k,
            )?;
        let zero = base.with(CaseKey::BiasVoltage, 0.0)?;
        let grid = CommonGrid::choose(std::slice::from_ref(&zero))?;
        let (hot, cold) = (t.left_k.max(t.right_k), t.left_k.min(t.right_k));
        let resolved = base.resolve()?;
        let heat_leak_w = resolved.phonon_heat_leak(hot, cold)?;
        let es = resolved.electrostatics;
        Ok(Self {
            electrostatics: es.as_ref().map(|_| CurveElectrostatics {
                potential_solved_at_every_point: true,
                outer_iterations: 0,
                converged: true,
            }),
            es,
            potentials: Vec::new(),
            heat_leak_w,
            fixed: grid.apply(&base)?,
            base,
            grid,
            covered_v: 0.0,
            generation: 0,
            warm: None,
            all_converged: true,
            solves: 0,
        })
    }

    /// The case at zero bias.
    pub fn case(&self) -> &Case {
        &self.base
    }

    /// The grid the solves run on now.
    pub fn grid(&self) -> &CommonGrid {
        &self.grid
    }

    /// Make the grid cover |V| ≤ `v_abs`.
    pub fn cover(&mut self, v_abs: f64) -> Result<(), CaseError> {
        if v_abs <= self.covered_v {
            return Ok(());
        }
        let w = v_abs.max(2.0 * self.covered_v);
        let ends = [-w, 0.0, w]
            .iter()
            .map(|&v| self.base.with(CaseKey::BiasVoltage, v))
            .collect::<Result<Vec<_>, _>>()?;
        let grid = CommonGrid::choose(&ends)?;
        if grid.grid != self.grid.grid || grid.phonon_energies_ev != self.grid.phonon_energies_ev {
            self.fixed = grid.apply(&self.base)?;
            self.generation += 1;
            self.warm = None;
        }
        self.grid = grid;
        self.covered_v = w;
        Ok(())
    }

    /// Solve at voltage `v`.
    pub fn at(
        &mut self,
        v: f64,
        stage: &'static str,
        observer: &mut dyn Observer,
    ) -> Result<Solved, CurveError> {
        self.cover(v.abs())?;
        let c = self.fixed.with(CaseKey::BiasVoltage, v)?;
        let r = c.resolve()?;
        if !self.grid.matches(&r.problem) {
            return Err(CurveError::Settings(format!(
                "internal: the solve at V = {v:e} V left the common grid ({}); please report this with the case file",
                self.grid.describe()
            )));
        }
        let start = PointStart {
            sigma: self.warm.as_ref(),
            potential_ev: self.nearest_potential(v),
        };
        let clock = std::time::Instant::now();
        let point = solve_point(&r.problem, self.es.as_ref(), &r.scba, start, &mut Silent)
            .map_err(|source| CurveError::Solve {
                voltage_v: v,
                source,
            })?;
        let converged = point.converged();
        self.all_converged &= converged;
        self.solves += 1;
        let electrostatics = point.electrostatics.map(|e| {
            if let Some(c) = &mut self.electrostatics {
                c.outer_iterations += e.report.outer_iterations;
                c.converged &= e.report.converged;
            }
            let drop = (e.potential_drop_v(), e.report.outer_iterations);
            if e.report.converged {
                self.potentials.push((v, e.potential_ev));
            }
            drop
        });
        let sol = point.solution;
        let obs = observe(&sol);
        let highest_band_edge_ev =
            (sol.problem.device.band_edge_ev.iter()).fold(f64::NEG_INFINITY, |m, &e| m.max(e));
        if !sol.problem.scattering.is_coherent() {
            self.warm = Some(sol.sigma);
        }
        observer.curve_solved(stage, v);
        observer.curve_point(&CurvePointRecord {
            stage,
            voltage_v: v,
            current_a: obs.current_a,
            converged,
            outer_iterations: electrostatics.map(|e| e.1),
            potential_drop_v: electrostatics.map(|e| e.0),
            seconds: clock.elapsed().as_secs_f64(),
        });
        Ok(Solved {
            voltage_v: v,
            obs,
            converged,
            generation: self.generation,
            heat_leak_w: self.heat_leak_w,
            electrostatics,
            highest_band_edge_ev,
        })
    }

    /// The converged potential of the solved voltage nearest to `v` (the
    /// latest of equally near ones). A curve visits its voltages out of
    /// order (the cooler tries both polarities before it marches out, a
    /// bracket search jumps between its ends), and the last point solved
    /// may lie far from the next: a start that far off costs outer
    /// iterations and, on a barrier whose charge moves with the bias,
    /// can leave the outer loop where it does not converge.
    fn nearest_potential(&self, v: f64) -> Option<&[f64]> {
        let mut best: Option<&(f64, Vec<f64>)> = None;
        for p in &self.potentials {
            if best.is_none_or(|b| (p.0 - v).abs() <= (b.0 - v).abs()) {
                best = Some(p);
            }
        }
        best.map(|p| p.1.as_slice())
    }

    /// `s` itself when it was solved on the present grid, else solved again.
    pub fn current(
        &mut self,
        s: Solved,
        stage: &'static str,
        observer: &mut dyn Observer,
    ) -> Result<Solved, CurveError> {
        if s.generation == self.generation {
            Ok(s)
        } else {
            self.at(s.voltage_v, stage, observer)
        }
    }
}

/// Golden-section search for a maximum bracketed by a < m < b with
/// f(m) ≥ f(a), f(b) (`fm` and `tm` are f's value and payload at m). Each
/// step probes the larger of [a, m] and [m, b] at the golden ratio and keeps
/// a bracket around the best point seen, so the bracket always holds the
/// best point and, for a function with one maximum in [a, b], the maximum
/// itself. It stops when b − a ≤ `x_tolerance` (or after 200 steps);
/// returns the best point, its value and payload. Values that are not
/// numbers count as −∞.
pub(crate) fn golden_max<T>(
    mut a: f64,
    mut m: f64,
    mut b: f64,
    fm: f64,
    tm: T,
    x_tolerance: f64,
    f: &mut dyn FnMut(f64) -> Result<(f64, T), CurveError>,
) -> Result<(f64, f64, T), CurveError> {
    let c = 0.5 * (3.0 - 5f64.sqrt());
    let key = |v: f64| if v.is_nan() { f64::NEG_INFINITY } else { v };
    let (mut fm, mut tm) = (key(fm), tm);
    for _ in 0..200 {
        if b - a <= x_tolerance {
            break;
        }
        let x = if b - m > m - a {
            m + c * (b - m)
        } else {
            m - c * (m - a)
        };
        let (fx, tx) = f(x)?;
        let fx = key(fx);
        if fx > fm {
            if x > m {
                a = m;
            } else {
                b = m;
            }
            m = x;
            fm = fx;
            tm = tx;
        } else if x > m {
            b = x;
        } else {
            a = x;
        }
    }
    Ok((m, fm, tm))
}

/// Refine the maximum of `key` over the sampled `points` (sorted by
/// voltage): the best sample and its neighbours bracket a golden-section
/// search down to `x_tolerance` (V). A best sample at either end of the
/// samples is returned as it is (the maximum is then at the end of the
/// range). Samples whose key is not a number are never best.
pub(crate) fn refine_max<P: Copy>(
    points: &[P],
    voltage: &dyn Fn(&P) -> f64,
    key: &dyn Fn(&P) -> f64,
    x_tolerance: f64,
    solve_at: &mut dyn FnMut(f64) -> Result<P, CurveError>,
) -> Result<Option<P>, CurveError> {
    let Some(i) = (0..points.len())
        .filter(|&i| key(&points[i]).is_finite())
        .max_by(|&i, &j| key(&points[i]).total_cmp(&key(&points[j])))
    else {
        return Ok(None);
    };
    if i == 0 || i + 1 == points.len() {
        return Ok(Some(points[i]));
    }
    let (_, _, best) = golden_max(
        voltage(&points[i - 1]),
        voltage(&points[i]),
        voltage(&points[i + 1]),
        key(&points[i]),
        points[i],
        x_tolerance,
        &mut |v| {
            let p = solve_at(v)?;
            Ok((key(&p), p))
        },
    )?;
    Ok(Some(best))
}

/// Relative width, against the voltage range of a curve, to which its
/// maxima are located: 1e-9, so the voltages at the maxima agree to about
/// 1e-8 of their value whatever the number of curve points (the values
/// themselves, being flat there, to far better).
pub(crate) const REFINE_RELATIVE_WIDTH: f64 = 1e-9;

/// Settings of a generator curve.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
#[non_exhaustive]
pub struct GeneratorSettings {
    /// Hot lead (lead 1, left) temperature (K).
    pub hot_k: f64,
    /// Cold lead (lead 2, right) temperature (K).
    pub cold_k: f64,
    /// Load voltages from 0 to V_oc (≥ 3).
    pub points: usize,
}

impl GeneratorSettings {
    /// A curve of `points` load voltages between a hot lead 1 at `hot_k`
    /// and a cold lead 2 at `cold_k` (K).
    pub fn new(hot_k: f64, cold_k: f64, points: usize) -> Self {
        Self {
            hot_k,
            cold_k,
            points,
        }
    }
}

/// One load point.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
#[non_exhaustive]
pub struct LoadPoint {
    /// Load voltage V (V).
    pub voltage_v: f64,
    /// Current I = I_1 (A).
    pub current_a: f64,
    /// Delivered power P = −I·V (W).
    pub power_w: f64,
    /// Heat drawn from the hot side (W): the electrons' heat current out
    /// of the hot lead plus the heat the lattice leaks to the cold side.
    pub heat_current_hot_w: f64,
    /// η = P/(heat drawn from the hot side).
    pub efficiency: f64,
    /// Born loop (and with electrostatics the potential) converged.
    pub converged: bool,
    /// With electrostatics: the computed drop φ(first cell) − φ(last
    /// cell) (V) of the point.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub potential_drop_v: Option<f64>,
    /// With electrostatics: outer iterations of the point's potential.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub outer_iterations: Option<usize>,
}

impl LoadPoint {
    fn from(s: &Solved) -> Self {
        let p = -s.obs.current_a * s.voltage_v;
        let q = s.obs.heat_current_left_w + s.heat_leak_w;
        Self {
            voltage_v: s.voltage_v,
            current_a: s.obs.current_a,
            power_w: p,
            heat_current_hot_w: q,
            efficiency: if q > 0.0 { p / q } else { f64::NAN },
            converged: s.converged,
            potential_drop_v: s.electrostatics.map(|e| e.0),
            outer_iterations: s.electrostatics.map(|e| e.1),
        }
    }
}

/// The generator's performance.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
#[non_exhaustive]
pub struct GeneratorReport {
    /// Settings used.
    pub settings: GeneratorSettings,
    /// Which lead is hot.
    pub hot_lead: Side,
    /// Reference Fermi level µ (eV).
    pub fermi_level_ev: f64,
    /// Linear-response coefficients at (µ, (T_h + T_c)/2).
    pub coefficients: Coefficients,
    /// Linear estimate of the open-circuit voltage −S ΔT (V).
    pub open_circuit_voltage_estimate_v: f64,
    /// Open-circuit voltage V_oc, I(V_oc) = 0 (V).
    pub open_circuit_voltage_v: f64,
    /// Short-circuit current I(0) (A).
    pub short_circuit_current_a: f64,
    /// Maximum delivered power (W).
    pub max_power_w: f64,
    /// Load voltage at maximum power (V).
    pub voltage_at_max_power_v: f64,
    /// Current at maximum power (A).
    pub current_at_max_power_a: f64,
    /// Efficiency at maximum power.
    pub efficiency_at_max_power: f64,
    /// Maximum efficiency.
    pub max_efficiency: f64,
    /// Load voltage at maximum efficiency (V).
    pub voltage_at_max_efficiency_v: f64,
    /// Carnot efficiency.
    pub carnot_efficiency: f64,
    /// Curzon-Ahlborn efficiency.
    pub curzon_ahlborn_efficiency: f64,
    /// Ioffe maximum efficiency with the device's ZT.
    pub ioffe_max_efficiency: f64,
    /// Linear-response efficiency at maximum power (η_C/2) ZT/(ZT + 2).
    pub efficiency_at_max_power_linear: f64,
    /// Heat the lattice leaks from the hot to the cold lead (W), added to
    /// the heat drawn from the hot side at every load point.
    pub lattice_heat_leak_w: f64,
    /// Where the lattice's heat (and the κ_ph of ZT) comes from.
    pub phonon_conductance_source: crate::case::PhononConductanceSource,
    /// The load curve, V from 0 to V_oc.
    pub curve: Vec<LoadPoint>,
    /// The energy grid every solve of the curve (root search, curve,
    /// refinements) ran on; the search for V_oc may have grown it, and the
    /// points it kept were solved again on the final one.
    pub energy_grid: CommonGrid,
    /// The energy grid of the four linear-response runs.
    pub coefficient_grid: CommonGrid,
    /// Every Born loop converged.
    pub converged: bool,
    /// Solves done (root search, curve, refinements).
    pub solves: usize,
    /// With electrostatics: the potential solved at every point.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub electrostatics: Option<CurveElectrostatics>,
}

/// The open-circuit voltage V_oc, I(V_oc) = 0: the bracket [0, b] grows
/// from `first_v` (doubling) until I changes sign from I(0) = `i0`, then
/// Illinois regula falsi narrows it to 1e-13 of V_oc (or |I| to 1e-13 of
/// |I(0)|).
fn open_circuit_voltage(
    dev: &mut BiasedCase,
    i0: f64,
    first_v: f64,
    observer: &mut dyn Observer,
) -> Result<f64, CurveError> {
    let mut b = first_v;
    let (mut a, mut fa) = (0.0, i0);
    let mut fb = dev.at(b, "open circuit", observer)?.obs.current_a;
    let mut expansions = 0;
    while fb.signum() == i0.signum() && fb != 0.0 {
        expansions += 1;
        if expansions > 40 {
            return Err(CurveError::NoOpenCircuit {
                current_at_zero_a: i0,
                tried_v: b,
                current_a: fb,
            });
        }
        a = b;
        fa = fb;
        b *= 2.0;
        fb = dev.at(b, "open circuit", observer)?.obs.current_a;
    }
    // Illinois regula falsi on [a, b].
    let mut side = 0i32;
    let mut voc = b;
    for _ in 0..200 {
        let width = (b - a).abs();
        if fb == 0.0 || width <= 1e-13 * b.abs().max(a.abs()) {
            break;
        }
        let c = (a * fb - b * fa) / (fb - fa);
        let fc = dev.at(c, "open circuit", observer)?.obs.current_a;
        voc = c;
        if fc == 0.0 || fc.abs() <= 1e-13 * i0.abs() {
            break;
        }
        if fc.signum() == fb.signum() {
            b = c;
            fb = fc;
            if side == -1 {
                fa *= 0.5;
            }
            side = -1;
        } else {
            a = c;
            fa = fc;
            if side == 1 {
                fb *= 0.5;
            }
            side = 1;
        }
        voc = if fa.abs() < fb.abs() { a } else { b };
    }
    Ok(voc)
}

/// The load curve of `n` voltages from 0 (the solved `zero`) to `voc`, and
/// its points of maximum power and of maximum efficiency, each refined
/// between curve points.
fn load_curve(
    dev: &mut BiasedCase,
    zero: Solved,
    voc: f64,
    n: usize,
    observer: &mut dyn Observer,
) -> Result<(Vec<LoadPoint>, LoadPoint, LoadPoint), CurveError> {
    let mut curve = Vec::with_capacity(n);
    for k in 0..n {
        let v = voc * k as f64 / (n - 1) as f64;
        let s = if k == 0 {
            zero.clone()
        } else {
            dev.at(v, "load curve", observer)?
        };
        curve.push(LoadPoint::from(&s));
    }
    let tol = REFINE_RELATIVE_WIDTH * voc.abs();
    // The curve runs from 0 towards V_oc, whose sign may be negative: sort
    // by voltage for the brackets.
    let mut sorted = curve.clone();
    sorted.sort_by(|p, q| p.voltage_v.total_cmp(&q.voltage_v));
    let best_p = refine_max(
        &sorted,
        &|p: &LoadPoint| p.voltage_v,
        &|p: &LoadPoint| p.power_w,
        tol,
        &mut |v| Ok(LoadPoint::from(&dev.at(v, "maximum power", observer)?)),
    )?
    .unwrap_or(curve[0]);
    let best_e = refine_max(
        &sorted,
        &|p: &LoadPoint| p.voltage_v,
        &|p: &LoadPoint| p.efficiency,
        tol,
        &mut |v| {
            Ok(LoadPoint::from(&dev.at(
                v,
                "maximum efficiency",
                observer,
            )?))
        },
    )?
    .unwrap_or(curve[0]);
    Ok((curve, best_p, best_e))
}

/// Refuse temperatures and point counts no generator curve can use.
fn check_settings(settings: &GeneratorSettings) -> Result<(), CurveError> {
    let (th, tc) = (settings.hot_k, settings.cold_k);
    if !(th.is_finite() && tc.is_finite() && tc > 0.0 && th > tc) {
        return Err(CurveError::Settings(format!(
            "expected T_hot > T_cold > 0, found T_hot = {th} K, T_cold = {tc} K"
        )));
    }
    if settings.points < 3 {
        return Err(CurveError::Settings(format!(
            "expected at least 3 load points, found {}",
            settings.points
        )));
    }
    Ok(())
}

/// The linear-response coefficients of `case` with both leads at the mean
/// temperature `tm` and the Fermi level `mu`, and the grid they were
/// computed on.
pub(super) fn mean_temperature_coefficients(
    case: &Case,
    mu: f64,
    tm: f64,
) -> Result<(Coefficients, CommonGrid), CurveError> {
    let mean = BiasedCase::new(
        case,
        mu,
        LeadTemperatures {
            left_k: tm,
            right_k: tm,
        },
    )?;
    let set = case_coefficients(mean.case(), &mut Silent)?;
    Ok((set.coefficients, set.grid))
}

/// Power and efficiency of the device as a generator between a hot lead 1
/// and a cold lead 2; see the module notes for conventions.
pub fn generator(
    case: &Case,
    settings: &GeneratorSettings,
    observer: &mut dyn Observer,
) -> Result<GeneratorReport, CurveError> {
    check_settings(settings)?;
    let (th, tc) = (settings.hot_k, settings.cold_k);
    let (mu, _) = super::of_case::reference_point(case)?;
    let tm = 0.5 * (th + tc);
    let (coefficients, coefficient_grid) = mean_temperature_coefficients(case, mu, tm)?;
    let mut dev = BiasedCase::new(
        case,
        mu,
        LeadTemperatures {
            left_k: th,
            right_k: tc,
        },
    )?;
    let zero = dev.at(0.0, "short circuit", observer)?;
    let i0 = zero.obs.current_a;
    if i0 == 0.0 || !i0.is_finite() {
        return Err(CurveError::NoCurrent {
            current_a: i0,
            hot_k: th,
            cold_k: tc,
        });
    }
    // Linear response: I = G V + G S ΔT = 0 at V = −S ΔT, ΔT = T1 − T2.
    let estimate = -coefficients.seebeck_v_per_k * (th - tc);
    // Power −I·V > 0 needs V of the sign opposite to I(0).
    let direction = -i0.signum();
    let kt = crate::units::thermal_energy_ev(tm);
    let voc = open_circuit_voltage(
        &mut dev,
        i0,
        direction * estimate.abs().max(1e-3 * kt),
        observer,
    )?;

    // Everything from here on runs on the grid that covers the bracket of V_oc:
    // the short-circuit point is solved again if the grid grew since.
    let zero = dev.current(zero, "short circuit", observer)?;
    let i0 = zero.obs.current_a;
    let (curve, best_p, best_e) = load_curve(&mut dev, zero, voc, settings.points, observer)?;
    Ok(GeneratorReport {
        settings: *settings,
        hot_lead: Side::Left,
        fermi_level_ev: mu,
        open_circuit_voltage_estimate_v: estimate,
        open_circuit_voltage_v: voc,
        short_circuit_current_a: i0,
        max_power_w: best_p.power_w,
        voltage_at_max_power_v: best_p.voltage_v,
        current_at_max_power_a: best_p.current_a,
        efficiency_at_max_power: best_p.efficiency,
        max_efficiency: best_e.efficiency,
        voltage_at_max_efficiency_v: best_e.voltage_v,
        carnot_efficiency: carnot_efficiency(th, tc),
        curzon_ahlborn_efficiency: curzon_ahlborn_efficiency(th, tc),
        ioffe_max_efficiency: ioffe_max_efficiency(coefficients.zt, th, tc),
        efficiency_at_max_power_linear: efficiency_at_max_power_linear(coefficients.zt, th, tc),
        lattice_heat_leak_w: dev.heat_leak_w,
        phonon_conductance_source: coefficients.phonon_conductance_source,
        coefficients,
        curve,
        energy_grid: dev.grid().clone(),
        coefficient_grid,
        converged: dev.all_converged,
        solves: dev.solves,
        electrostatics: dev.electrostatics,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn golden_section_finds_a_parabola_top() {
        let f = |x: f64| -(x - 1.3) * (x - 1.3);
        let (x, fx, _) =
            golden_max(0.0, 1.5, 3.0, f(1.5), (), 1e-10, &mut |x| Ok((f(x), ()))).unwrap();
        assert!((x - 1.3).abs() < 1e-8, "{x}");
        assert!(fx <= 0.0);
    }

    /// A maximum in a narrow window of finite values (NaN elsewhere, as a
    /// COP outside the cooling range): the search keeps the best point and
    /// so cannot lose the window.
    #[test]
    fn golden_section_keeps_a_narrow_finite_window() {
        let f = |x: f64| {
            if (0.45..0.6).contains(&x) {
                1.0 - (x - 0.52) * (x - 0.52)
            } else {
                f64::NAN
            }
        };
        let (x, _, _) =
            golden_max(0.0, 0.5, 1.0, f(0.5), (), 1e-10, &mut |x| Ok((f(x), ()))).unwrap();
        assert!((x - 0.52).abs() < 1e-8, "{x}");
    }

    #[test]
    fn refinement_leaves_a_maximum_at_the_end_alone() {
        let pts = [(0.0, 0.0), (0.5, 1.0), (1.0, 2.0)];
        let mut calls = 0;
        let best = refine_max(&pts, &|p| p.0, &|p| p.1, 1e-9, &mut |v| {
            calls += 1;
            Ok((v, v))
        })
        .unwrap();
        assert_eq!(best, Some((1.0, 2.0)));
        assert_eq!(calls, 0);
    }
}
