//! The device as a Peltier cooler: cooling power and coefficient of
//! performance against the driving current.
//!
//! Conventions (physics.md §6): V = V1 − V2 = −(µ1 − µ2)/e applied as
//! µ1 = µ − eV/2, µ2 = µ + eV/2 around the case's mean zero-bias Fermi level
//! µ; I = I_1 (conventional current into the device from lead 1). The cold
//! lead is lead 2 (right) unless [`ColdLead::Left`] is chosen; the other lead
//! is hot. The phonon bath keeps the case's setting (by default the mean of
//! the lead temperatures).
//!
//! - cooling power J_Q,cold: the heat current out of the cold lead into the
//!   device, ∫(E − µ_cold) j_cold dE (positive = the cold lead is cooled);
//! - input power I·V (the electrical power the source delivers);
//! - COP = J_Q,cold/(I·V), reported only where both are positive (NaN
//!   elsewhere: the device is not then a driven cooler);
//! - beside it the Carnot COP T_c/(T_h − T_c) and Ioffe's maximum COP
//!   (A. F. Ioffe, Semiconductor Thermoelements and Thermoelectric Cooling
//!   (1957)) with the device's linear-response ZT.
//!
//! The bias polarity that cools is found by trying both; the range runs from
//! V = 0 past the maximum of the cooling power until it has fallen back by
//! half of its rise, in steps of kT/e, and the curve is then resolved on
//! `points` voltages over that range with a golden-section refinement of
//! the maximum.

use super::Coefficients;
use super::generator::{
    BiasedCase, CurveError, CurveObserver, LeadTemperatures, Solved, carnot_cop, golden_max,
    ioffe_max_cop,
};
use super::of_case::{case_coefficients, reference_point};
use crate::case::Case;
use crate::scba::Silent;

/// Which lead is cooled.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum ColdLead {
    /// Lead 1.
    Left,
    /// Lead 2 (the default).
    #[default]
    Right,
}

/// Settings of a cooler curve.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
pub struct CoolerSettings {
    /// Hot lead temperature (K).
    pub hot_k: f64,
    /// Cold lead temperature (K), ≤ T_hot.
    pub cold_k: f64,
    /// Voltages on the curve (≥ 3).
    pub points: usize,
    /// Which lead is cold.
    pub cold_lead: ColdLead,
    /// Also compute the linear-response ZT and Ioffe's maximum COP (four
    /// more solves with scattering, one without).
    pub figure_of_merit: bool,
}

/// One point of the cooler curve.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
pub struct CoolerPoint {
    /// Bias V (V).
    pub voltage_v: f64,
    /// Current I = I_1 (A).
    pub current_a: f64,
    /// Cooling power J_Q,cold (W).
    pub cooling_power_w: f64,
    /// Input power I·V (W).
    pub input_power_w: f64,
    /// Heat current out of the hot lead into the device (W).
    pub heat_current_hot_w: f64,
    /// J_Q,cold/(I·V) where both are positive, NaN elsewhere.
    pub cop: f64,
    /// Born loop converged.
    pub converged: bool,
}

impl CoolerPoint {
    fn from(s: &Solved, cold: ColdLead) -> Self {
        let (qc, qh) = match cold {
            ColdLead::Right => (s.obs.heat_current_right_w, s.obs.heat_current_left_w),
            ColdLead::Left => (s.obs.heat_current_left_w, s.obs.heat_current_right_w),
        };
        let pin = s.obs.current_a * s.voltage_v;
        Self {
            voltage_v: s.voltage_v,
            current_a: s.obs.current_a,
            cooling_power_w: qc,
            input_power_w: pin,
            heat_current_hot_w: qh,
            cop: if qc > 0.0 && pin > 0.0 {
                qc / pin
            } else {
                f64::NAN
            },
            converged: s.converged,
        }
    }
}

/// The cooler's performance.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct CoolerReport {
    /// Settings used.
    pub settings: CoolerSettings,
    /// Reference Fermi level µ (eV).
    pub fermi_level_ev: f64,
    /// Cooling power at V = 0 (W); negative when heat leaks into the cold
    /// lead.
    pub cooling_power_at_zero_bias_w: f64,
    /// Maximum cooling power (W).
    pub max_cooling_power_w: f64,
    /// Bias at maximum cooling power (V).
    pub voltage_at_max_v: f64,
    /// Current at maximum cooling power (A).
    pub current_at_max_a: f64,
    /// COP at maximum cooling power (NaN when not cooling there).
    pub cop_at_max: f64,
    /// Largest COP on the curve (NaN when no point cools).
    pub max_cop: f64,
    /// Carnot COP T_c/(T_h − T_c) (infinite at equal temperatures).
    pub carnot_cop: f64,
    /// Linear-response coefficients at (µ, (T_h + T_c)/2), if asked for.
    pub coefficients: Option<Coefficients>,
    /// Ioffe's maximum COP with that ZT, if asked for.
    pub ioffe_max_cop: Option<f64>,
    /// The curve, V from 0 to the end of the range.
    pub curve: Vec<CoolerPoint>,
    /// Every Born loop converged.
    pub converged: bool,
    /// Solves done.
    pub solves: usize,
}

/// Cooling power and COP of the device between a hot and a cold lead; see
/// the module notes for conventions.
pub fn cooler(
    case: &Case,
    settings: &CoolerSettings,
    observer: &mut dyn CurveObserver,
) -> Result<CoolerReport, CurveError> {
    let (th, tc) = (settings.hot_k, settings.cold_k);
    if !(th.is_finite() && tc.is_finite() && tc > 0.0 && th >= tc) {
        return Err(CurveError::Settings(format!(
            "expected T_hot ≥ T_cold > 0, found T_hot = {th} K, T_cold = {tc} K"
        )));
    }
    if settings.points < 3 {
        return Err(CurveError::Settings(format!(
            "expected at least 3 bias points, found {}",
            settings.points
        )));
    }
    let cold = settings.cold_lead;
    let (mu, _) = reference_point(case)?;
    let temps = match cold {
        ColdLead::Right => LeadTemperatures {
            left_k: th,
            right_k: tc,
        },
        ColdLead::Left => LeadTemperatures {
            left_k: tc,
            right_k: th,
        },
    };
    let tm = 0.5 * (th + tc);
    let coefficients = if settings.figure_of_merit {
        let mean = BiasedCase::new(
            case,
            mu,
            LeadTemperatures {
                left_k: tm,
                right_k: tm,
            },
        )?;
        Some(case_coefficients(mean.case(), &mut Silent)?.0)
    } else {
        None
    };
    let mut dev = BiasedCase::new(case, mu, temps)?;
    let q = |dev: &mut BiasedCase,
             v: f64,
             stage: &'static str,
             observer: &mut dyn CurveObserver|
     -> Result<CoolerPoint, CurveError> {
        Ok(CoolerPoint::from(&dev.at(v, stage, observer)?, cold))
    };
    let zero = q(&mut dev, 0.0, "zero bias", observer)?;
    let h = crate::units::thermal_energy_ev(tm);
    let up = q(&mut dev, h, "polarity", observer)?;
    let down = q(&mut dev, -h, "polarity", observer)?;
    let direction = if up.cooling_power_w >= down.cooling_power_w {
        1.0
    } else {
        -1.0
    };
    // March out past the maximum.
    let q0 = zero.cooling_power_w;
    let mut best = q0;
    let mut best_k = 0usize;
    let mut k = 1usize;
    let end = loop {
        let p = if k == 1 {
            if direction > 0.0 { up } else { down }
        } else {
            q(&mut dev, direction * h * k as f64, "range", observer)?
        };
        if p.cooling_power_w > best {
            best = p.cooling_power_w;
            best_k = k;
        }
        let fallen = p.cooling_power_w < best - 0.5 * (best - q0);
        if (k >= 4 && k > best_k && fallen) || k >= 400 {
            break direction * h * k as f64;
        }
        k += 1;
    };
    let n = settings.points;
    let mut curve = Vec::with_capacity(n);
    for i in 0..n {
        let v = end * i as f64 / (n - 1) as f64;
        curve.push(if i == 0 {
            zero
        } else {
            q(&mut dev, v, "curve", observer)?
        });
    }
    let im = (0..n)
        .max_by(|&i, &j| {
            curve[i]
                .cooling_power_w
                .total_cmp(&curve[j].cooling_power_w)
        })
        .unwrap_or(0);
    let lo = curve[im.saturating_sub(1)].voltage_v;
    let hi = curve[(im + 1).min(n - 1)].voltage_v;
    let (_, _, refined) = golden_max(lo, hi, 30, &mut |v| {
        let p = q(&mut dev, v, "maximum cooling", observer)?;
        Ok((p.cooling_power_w, p))
    })?;
    let at_max = if refined.cooling_power_w >= curve[im].cooling_power_w {
        refined
    } else {
        curve[im]
    };
    let max_cop = curve
        .iter()
        .map(|p| p.cop)
        .filter(|c| c.is_finite())
        .fold(f64::NAN, f64::max);
    let ioffe = coefficients.as_ref().map(|c| ioffe_max_cop(c.zt, th, tc));
    Ok(CoolerReport {
        settings: *settings,
        fermi_level_ev: mu,
        cooling_power_at_zero_bias_w: q0,
        max_cooling_power_w: at_max.cooling_power_w,
        voltage_at_max_v: at_max.voltage_v,
        current_at_max_a: at_max.current_a,
        cop_at_max: at_max.cop,
        max_cop,
        carnot_cop: carnot_cop(th, tc),
        coefficients,
        ioffe_max_cop: ioffe,
        curve,
        converged: dev.all_converged,
        solves: dev.solves,
    })
}
