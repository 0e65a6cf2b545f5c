//! The device as a thermoelectric generator: power and efficiency against
//! load voltage between a hot and a cold lead.
//!
//! Conventions (physics.md §6): V = V1 − V2 = −(µ1 − µ2)/e, applied as
//! µ1 = µ − eV/2, µ2 = µ + eV/2 around the case's mean zero-bias Fermi
//! level µ; I = I_1 is the conventional current into the device from lead 1.
//! The hot lead is lead 1 (left) at T_hot, the cold lead is lead 2 (right)
//! at T_cold; the phonon bath stays at the case's setting (by default the
//! mean of the two lead temperatures). The device delivers the power
//! P = −I·V to the load (positive between V = 0 and the open-circuit
//! voltage V_oc, where I(V_oc) = 0), and its efficiency is
//! η = P/J_Q,hot with J_Q,hot the heat current out of the hot lead.
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
use super::of_case::{CoefficientError, case_coefficients};
use crate::case::{Case, CaseError};
use crate::observables::{Observables, observe};
use crate::scattering::ScatteringSelfEnergy;
use crate::scba::{Silent, SolveError, solve};

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

/// Sees each solve of a curve (for progress).
pub trait CurveObserver {
    /// A solve at `voltage_v` finished; `stage` says what for.
    fn solved(&mut self, _stage: &'static str, _voltage_v: f64) {}
}

/// A curve observer that does nothing.
pub struct NoProgress;
impl CurveObserver for NoProgress {}

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
}

/// Solves a case at voltages around µ with fixed lead temperatures,
/// warm-starting each Born loop from the previous one.
pub(crate) struct BiasedCase {
    base: Case,
    warm: Option<ScatteringSelfEnergy>,
    pub all_converged: bool,
    pub solves: usize,
}

impl BiasedCase {
    /// The case with both zero-bias Fermi levels at µ and the lead
    /// temperatures set (the bath keeps the case's own setting).
    pub fn new(case: &Case, mu_ev: f64, t: LeadTemperatures) -> Result<Self, CaseError> {
        let base = case
            .with_value("leads.left.fermi_level_ev", mu_ev)?
            .with_value("leads.right.fermi_level_ev", mu_ev)?
            .with_value("leads.left.temperature_k", t.left_k)?
            .with_value("leads.right.temperature_k", t.right_k)?;
        Ok(Self {
            base,
            warm: None,
            all_converged: true,
            solves: 0,
        })
    }

    /// The case at zero bias.
    pub fn case(&self) -> &Case {
        &self.base
    }

    /// Solve at voltage `v`.
    pub fn at(
        &mut self,
        v: f64,
        stage: &'static str,
        observer: &mut dyn CurveObserver,
    ) -> Result<Solved, CurveError> {
        let c = self.base.with_value("bias.voltage_v", v)?;
        let r = c.resolve()?;
        let warm = self
            .warm
            .as_ref()
            .filter(|w| w.sites == r.problem.sites() && w.energies() == r.problem.grid.count);
        let sol =
            solve(&r.problem, &r.scba, warm, &mut Silent).map_err(|source| CurveError::Solve {
                voltage_v: v,
                source,
            })?;
        let converged = sol.report.converged;
        self.all_converged &= converged;
        self.solves += 1;
        let obs = observe(&sol);
        if !sol.problem.scattering.is_coherent() {
            self.warm = Some(sol.sigma);
        }
        observer.solved(stage, v);
        Ok(Solved {
            voltage_v: v,
            obs,
            converged,
        })
    }
}

/// Golden-section search for the maximum of `f` on [a, b]; returns the best
/// point seen. `iterations` steps shrink the bracket by 0.618^iterations.
pub(crate) fn golden_max<T>(
    mut a: f64,
    mut b: f64,
    iterations: usize,
    f: &mut dyn FnMut(f64) -> Result<(f64, T), CurveError>,
) -> Result<(f64, f64, T), CurveError> {
    let r = 0.5 * (5f64.sqrt() - 1.0);
    let mut x1 = b - r * (b - a);
    let mut x2 = a + r * (b - a);
    let (mut f1, mut t1) = f(x1)?;
    let (mut f2, mut t2) = f(x2)?;
    for _ in 0..iterations {
        if f1 >= f2 {
            b = x2;
            x2 = x1;
            f2 = f1;
            t2 = t1;
            x1 = b - r * (b - a);
            (f1, t1) = f(x1)?;
        } else {
            a = x1;
            x1 = x2;
            f1 = f2;
            t1 = t2;
            x2 = a + r * (b - a);
            (f2, t2) = f(x2)?;
        }
    }
    Ok(if f1 >= f2 { (x1, f1, t1) } else { (x2, f2, t2) })
}

/// Settings of a generator curve.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
pub struct GeneratorSettings {
    /// Hot lead (lead 1, left) temperature (K).
    pub hot_k: f64,
    /// Cold lead (lead 2, right) temperature (K).
    pub cold_k: f64,
    /// Load voltages from 0 to V_oc (≥ 3).
    pub points: usize,
}

/// One load point.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
pub struct LoadPoint {
    /// Load voltage V (V).
    pub voltage_v: f64,
    /// Current I = I_1 (A).
    pub current_a: f64,
    /// Delivered power P = −I·V (W).
    pub power_w: f64,
    /// Heat current out of the hot lead J_Q,hot (W).
    pub heat_current_hot_w: f64,
    /// η = P/J_Q,hot.
    pub efficiency: f64,
    /// Born loop converged.
    pub converged: bool,
}

impl LoadPoint {
    fn from(s: &Solved) -> Self {
        let p = -s.obs.current_a * s.voltage_v;
        let q = s.obs.heat_current_left_w;
        Self {
            voltage_v: s.voltage_v,
            current_a: s.obs.current_a,
            power_w: p,
            heat_current_hot_w: q,
            efficiency: if q > 0.0 { p / q } else { f64::NAN },
            converged: s.converged,
        }
    }
}

/// The generator's performance.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct GeneratorReport {
    /// Settings used.
    pub settings: GeneratorSettings,
    /// Which lead is hot.
    pub hot_lead: &'static str,
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
    /// The load curve, V from 0 to V_oc.
    pub curve: Vec<LoadPoint>,
    /// Every Born loop converged.
    pub converged: bool,
    /// Solves done (curve, root search, refinement).
    pub solves: usize,
}

/// Power and efficiency of the device as a generator between a hot lead 1
/// and a cold lead 2; see the module notes for conventions.
pub fn generator(
    case: &Case,
    settings: &GeneratorSettings,
    observer: &mut dyn CurveObserver,
) -> Result<GeneratorReport, CurveError> {
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
    let (mu, _) = super::of_case::reference_point(case)?;
    let tm = 0.5 * (th + tc);
    let mean = BiasedCase::new(
        case,
        mu,
        LeadTemperatures {
            left_k: tm,
            right_k: tm,
        },
    )?;
    let (coefficients, _) = case_coefficients(mean.case(), &mut Silent)?;
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
    let mut b = direction * estimate.abs().max(1e-3 * kt);
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
        if fb == 0.0 || (b - a).abs() <= 1e-13 * b.abs().max(a.abs()) {
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

    let n = settings.points;
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
    let argmax = |key: &dyn Fn(&LoadPoint) -> f64| {
        (0..n)
            .filter(|&i| key(&curve[i]).is_finite())
            .max_by(|&i, &j| key(&curve[i]).total_cmp(&key(&curve[j])))
            .unwrap_or(0)
    };
    let bracket = |i: usize| {
        (
            curve[i.saturating_sub(1)].voltage_v,
            curve[(i + 1).min(n - 1)].voltage_v,
        )
    };
    // Each refinement shrinks a bracket of two curve steps by 0.618^30 ≈ 5e-7 (the
    // maximum's value is then exact to ~1e-13, being quadratic there).
    let ip = argmax(&|p| p.power_w);
    let (lo, hi) = bracket(ip);
    let (_, _, best_p) = golden_max(lo, hi, 30, &mut |v| {
        let p = LoadPoint::from(&dev.at(v, "maximum power", observer)?);
        Ok((p.power_w, p))
    })?;
    let best_p = if best_p.power_w >= curve[ip].power_w {
        best_p
    } else {
        curve[ip]
    };
    let ie = argmax(&|p| p.efficiency);
    let (lo, hi) = bracket(ie);
    let (_, _, best_e) = golden_max(lo, hi, 30, &mut |v| {
        let p = LoadPoint::from(&dev.at(v, "maximum efficiency", observer)?);
        let e = if p.efficiency.is_finite() {
            p.efficiency
        } else {
            f64::NEG_INFINITY
        };
        Ok((e, p))
    })?;
    let best_e = if best_e.efficiency >= curve[ie].efficiency || !curve[ie].efficiency.is_finite() {
        best_e
    } else {
        curve[ie]
    };
    let zt = coefficients.zt;
    Ok(GeneratorReport {
        settings: *settings,
        hot_lead: "left",
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
        ioffe_max_efficiency: ioffe_max_efficiency(zt, th, tc),
        efficiency_at_max_power_linear: efficiency_at_max_power_linear(zt, th, tc),
        coefficients,
        curve,
        converged: dev.all_converged,
        solves: dev.solves,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn golden_section_finds_a_parabola_top() {
        let (x, fx, _) =
            golden_max(0.0, 3.0, 60, &mut |x| Ok((-(x - 1.3) * (x - 1.3), ()))).unwrap();
        assert!((x - 1.3).abs() < 1e-8, "{x}");
        assert!(fx <= 0.0);
    }
}
