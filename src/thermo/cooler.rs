//! The device as a Peltier cooler: cooling power and coefficient of
//! performance against the driving current.
//!
//! Conventions (the crate manual's): V = V1 − V2 = −(µ1 − µ2)/e applied as
//! µ1 = µ − eV/2, µ2 = µ + eV/2 around the case's mean zero-bias Fermi level
//! µ; I = I_1 (conventional current into the device from lead 1). The cold
//! lead is lead 2 (right) unless [`Side::Left`] is chosen; the other lead
//! is hot. The phonon bath keeps the case's setting (by default the mean of
//! the lead temperatures).
//!
//! - cooling power J_Q,cold: the heat current out of the cold lead into the
//!   device, ∫(E − µ_cold) j_cold dE (positive = the cold lead is cooled),
//!   less the heat the lattice carries from the hot lead into the cold one
//!   (J_ph(T_h, T_c) from the phonon spectrum of the case's `[lattice]`, or
//!   κ_ph (T_h − T_c) with a given κ_ph; 0 with neither);
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
//! `points` voltages over that range. The maximum cooling power and the
//! best COP are each refined by a golden-section search bracketed by the
//! best curve point and its neighbours, down to 1e-9 of the range, so they
//! do not depend on the number of points; the curve and the refinements
//! share one energy grid.

use super::Coefficients;
use super::common_grid::CommonGrid;
use super::generator::{
    BiasedCase, CurveElectrostatics, CurveError, LeadTemperatures, REFINE_RELATIVE_WIDTH, Solved,
    carnot_cop, ioffe_max_cop, refine_max,
};
use super::of_case::reference_point;
use crate::case::Case;
use crate::leads::Side;
use crate::progress::Observer;

/// Settings of a cooler curve.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
#[non_exhaustive]
pub struct CoolerSettings {
    /// Hot lead temperature (K).
    pub hot_k: f64,
    /// Cold lead temperature (K), ≤ T_hot.
    pub cold_k: f64,
    /// Voltages on the curve (≥ 3).
    pub points: usize,
    /// Which lead is cold (the other is hot); usually [`Side::Right`].
    pub cold_lead: Side,
    /// Also compute the linear-response ZT and Ioffe's maximum COP (four
    /// more solves with scattering, one without).
    pub figure_of_merit: bool,
}

impl CoolerSettings {
    /// A curve of `points` voltages between a hot lead at `hot_k` and a
    /// cold lead at `cold_k` (K); the right lead is the cold one and the
    /// figure of merit is computed unless changed with the `with_…` methods.
    pub fn new(hot_k: f64, cold_k: f64, points: usize) -> Self {
        Self {
            hot_k,
            cold_k,
            points,
            cold_lead: Side::Right,
            figure_of_merit: true,
        }
    }

    /// These settings with `cold_lead` cold (the other lead is hot).
    pub fn with_cold_lead(self, cold_lead: Side) -> Self {
        Self { cold_lead, ..self }
    }

    /// These settings with or without the linear-response figure of merit.
    pub fn with_figure_of_merit(self, figure_of_merit: bool) -> Self {
        Self {
            figure_of_merit,
            ..self
        }
    }
}

/// One point of the cooler curve.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
#[non_exhaustive]
pub struct CoolerPoint {
    /// Bias V (V).
    pub voltage_v: f64,
    /// Current I = I_1 (A).
    pub current_a: f64,
    /// Cooling power (W): the electrons' heat current out of the cold lead
    /// less the heat the lattice leaks into it from the hot side.
    pub cooling_power_w: f64,
    /// Input power I·V (W).
    pub input_power_w: f64,
    /// Heat out of the hot side (W): the electrons' heat current out of
    /// the hot lead plus the heat the lattice leaks to the cold side.
    pub heat_current_hot_w: f64,
    /// J_Q,cold/(I·V) where both are positive, NaN elsewhere.
    pub cop: f64,
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

impl CoolerPoint {
    fn from(s: &Solved, cold: Side) -> Self {
        let (qc, qh) = match cold {
            Side::Right => (s.obs.heat_current_right_w, s.obs.heat_current_left_w),
            Side::Left => (s.obs.heat_current_left_w, s.obs.heat_current_right_w),
        };
        let (qc, qh) = (qc - s.heat_leak_w, qh + s.heat_leak_w);
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
            potential_drop_v: s.electrostatics.map(|e| e.0),
            outer_iterations: s.electrostatics.map(|e| e.1),
        }
    }
}

/// The cooler's performance.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
#[non_exhaustive]
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
    /// The maximum lies at the end of the range, and the march did not
    /// end there because the cooling power fell back or levelled off (a
    /// solve past it did not converge, or a limit of the march): the
    /// cooling power was still rising, so the maximum is a lower bound and
    /// a higher bias may cool more.
    pub max_at_range_end: bool,
    /// COP at maximum cooling power (NaN when not cooling there).
    pub cop_at_max: f64,
    /// Best COP, refined between curve points (NaN when nothing cools;
    /// infinite at equal temperatures, where the COP grows without bound
    /// as V → 0).
    pub max_cop: f64,
    /// Bias at the best COP (V; NaN when nothing cools; 0, the limit, at
    /// equal temperatures).
    pub voltage_at_max_cop_v: f64,
    /// Carnot COP T_c/(T_h − T_c) (infinite at equal temperatures).
    pub carnot_cop: f64,
    /// Linear-response coefficients at (µ, (T_h + T_c)/2), if asked for.
    pub coefficients: Option<Coefficients>,
    /// Ioffe's maximum COP with that ZT, if asked for.
    pub ioffe_max_cop: Option<f64>,
    /// Heat the lattice leaks from the hot to the cold lead (W),
    /// subtracted from the cooling power at every bias.
    pub lattice_heat_leak_w: f64,
    /// Where the lattice's heat comes from (lattice, given κ_ph, none).
    pub phonon_conductance_source: crate::case::PhononConductanceSource,
    /// The curve, V from 0 to the end of the range.
    pub curve: Vec<CoolerPoint>,
    /// The energy grid every solve of the curve and of its refinements ran
    /// on (the march that finds the range may have grown it; the points it
    /// kept were solved again on the final one).
    pub energy_grid: CommonGrid,
    /// The energy grid of the linear-response runs, if asked for.
    pub coefficient_grid: Option<CommonGrid>,
    /// Every Born loop converged.
    pub converged: bool,
    /// Solves done.
    pub solves: usize,
    /// With electrostatics: the potential solved at every point.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub electrostatics: Option<CurveElectrostatics>,
    /// The voltage range of the curve and why the march out in bias
    /// ended there.
    pub range: CoolerRange,
}

/// Refuse temperatures and point counts no cooler curve can use.
fn check_settings(settings: &CoolerSettings) -> Result<(), CurveError> {
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
    Ok(())
}

/// The cooler point at voltage `v` with `cold` the cold lead.
fn cooler_point(
    dev: &mut BiasedCase,
    v: f64,
    stage: &'static str,
    cold: Side,
    observer: &mut dyn Observer,
) -> Result<CoolerPoint, CurveError> {
    Ok(CoolerPoint::from(&dev.at(v, stage, observer)?, cold))
}

/// Why the march out in bias that sets the cooler's range ended.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum RangeEnd {
    /// Past its maximum the cooling power fell back by half of its rise
    /// above the zero-bias value.
    FellBack,
    /// With electrostatics: the cooling power levelled off, changing by
    /// less than [`LEVEL_FRACTION`] of its rise over each of the last two
    /// steps. The charge holds the barrier up under bias, so the current
    /// over it saturates instead of turning; more bias only adds input
    /// power, and the COP falls.
    LevelledOff,
    /// With electrostatics: the bias reached [`CoolerRange::limit_v`],
    /// (2 Φ0 + 10 kT)/e with Φ0 the zero-bias barrier top above µ: by
    /// then a bias split evenly between the two sides of the barrier has
    /// lowered it to the cold lead's Fermi level, and what flows is no
    /// longer emission over a barrier.
    BiasLimit,
    /// A solve of the march (its Born loop or its potential) did not
    /// converge: the range ends at the last step before it, and the
    /// result is flagged.
    NotConverged,
    /// 400 steps of kT/e.
    StepLimit,
}

/// Fraction of its rise by which the cooling power may change over each
/// of two steps of kT/e for the march to count it as levelled off (with
/// electrostatics).
pub const LEVEL_FRACTION: f64 = 0.01;

/// The voltage range of a cooler curve and why it ends there.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
pub struct CoolerRange {
    /// End of the range (V): the curve runs from 0 to here.
    pub end_v: f64,
    /// Steps of kT/e the march took out from V = 0.
    pub steps: usize,
    /// Why the march stopped.
    pub reason: RangeEnd,
    /// With electrostatics: the largest |V| the march may reach (V).
    pub limit_v: Option<f64>,
    /// The voltage of the solve that did not converge, when that ended the
    /// march (V).
    pub not_converged_at_v: Option<f64>,
}

/// The best COP and its bias: NaN without cooling; at equal temperatures
/// (`equal`) infinite at V = 0, since nothing leaks at zero bias, the
/// cooling power rises linearly from 0 (Peltier) while the input power
/// I·V rises quadratically, and the COP grows without bound as V → 0 (as
/// the Carnot COP is infinite): a finite "best" would only be where the
/// refinement stopped.
fn best_cop_of(best: Option<&CoolerPoint>, equal: bool) -> (f64, f64) {
    match best {
        None => (f64::NAN, f64::NAN),
        Some(_) if equal => (f64::INFINITY, 0.0),
        Some(p) => (p.cop, p.voltage_v),
    }
}

/// Whether the maximum found at `v_max` (V) sits at the end of `range`
/// (within 1e-6 of a step `h` of kT/e) of a march that did not end because
/// the cooling power fell back or levelled off, so the curve was still
/// rising there.
fn still_rising_at_end(range: &CoolerRange, v_max: f64, h: f64) -> bool {
    let cut_short = !matches!(range.reason, RangeEnd::FellBack | RangeEnd::LevelledOff);
    cut_short && (v_max - range.end_v).abs() <= 1e-6 * h
}

/// With electrostatics: the largest |V| the march goes to,
/// (2 Φ0 + 10 kT)/e with Φ0 = (top of the barrier at V = 0) − µ (at
/// least 0: a device without a barrier above µ gets 10 kT/e).
fn bias_limit(zero_top_ev: f64, mu_ev: f64, kt_ev: f64) -> f64 {
    2.0 * (zero_top_ev - mu_ev).max(0.0) + 10.0 * kt_ev
}

/// The end of the cooler's voltage range: the polarity that cools (±`h`
/// tried, `h` = kT/e), then steps of `h` out past the maximum of the
/// cooling power until it has fallen back by half of its rise above the
/// zero-bias value `q0` (at least 4 and at most 400 steps). With
/// electrostatics (`limit` given, V) the march also ends where the cooling
/// power levels off, at the limit, or before a solve that did not
/// converge ([`RangeEnd`]).
fn march_end(
    dev: &mut BiasedCase,
    q0: f64,
    h: f64,
    cold: Side,
    limit: Option<f64>,
    observer: &mut dyn Observer,
) -> Result<CoolerRange, CurveError> {
    let up = cooler_point(dev, h, "polarity", cold, observer)?;
    let down = cooler_point(dev, -h, "polarity", cold, observer)?;
    let direction = if up.cooling_power_w >= down.cooling_power_w {
        1.0
    } else {
        -1.0
    };
    let end = |k: usize, reason, not_converged_at_v| CoolerRange {
        end_v: direction * h * k as f64,
        steps: k,
        reason,
        limit_v: limit,
        not_converged_at_v,
    };
    // March out past the maximum.
    let mut q = vec![q0];
    let (mut best, mut best_k) = (q0, 0usize);
    let mut k = 1usize;
    Ok(loop {
        let p = if k == 1 {
            if direction > 0.0 { up } else { down }
        } else {
            cooler_point(dev, direction * h * k as f64, "range", cold, observer)?
        };
        if limit.is_some() && !p.converged {
            break end((k - 1).max(1), RangeEnd::NotConverged, Some(p.voltage_v));
        }
        q.push(p.cooling_power_w);
        if p.cooling_power_w > best {
            best = p.cooling_power_w;
            best_k = k;
        }
        let fallen = p.cooling_power_w < best - 0.5 * (best - q0);
        if k >= 4 && k > best_k && fallen {
            break end(k, RangeEnd::FellBack, None);
        }
        if let Some(limit) = limit {
            let rise = best - q0;
            let flat = |j: usize| (q[j] - q[j - 1]).abs() <= LEVEL_FRACTION * rise;
            if k >= 4 && rise > 0.0 && flat(k) && flat(k - 1) {
                break end(k, RangeEnd::LevelledOff, None);
            }
            if h * (k + 1) as f64 > limit {
                break end(k, RangeEnd::BiasLimit, None);
            }
        }
        if k >= 400 {
            break end(k, RangeEnd::StepLimit, None);
        }
        k += 1;
    })
}

/// The cooler curve of `n` voltages from 0 (the solved `zero`) to `end`,
/// its point of maximum cooling power and its best COP (if anything
/// cools), each refined between curve points. At equal lead temperatures
/// (`equal`) the best COP is not refined: it is unbounded as V → 0 (see
/// [`best_cop_of`]), so any cooling sample stands for it and no solve is
/// spent on it.
fn cooler_curve(
    dev: &mut BiasedCase,
    zero: CoolerPoint,
    (end, n, equal): (f64, usize, bool),
    cold: Side,
    observer: &mut dyn Observer,
) -> Result<(Vec<CoolerPoint>, CoolerPoint, Option<CoolerPoint>), CurveError> {
    let mut curve = Vec::with_capacity(n);
    for i in 0..n {
        let v = end * i as f64 / (n - 1) as f64;
        curve.push(if i == 0 {
            zero
        } else {
            cooler_point(dev, v, "curve", cold, observer)?
        });
    }
    let tol = REFINE_RELATIVE_WIDTH * end.abs();
    let mut sorted = curve.clone();
    sorted.sort_by(|p, q| p.voltage_v.total_cmp(&q.voltage_v));
    let at_max = refine_max(
        &sorted,
        &|p: &CoolerPoint| p.voltage_v,
        &|p: &CoolerPoint| p.cooling_power_w,
        tol,
        &mut |v| cooler_point(dev, v, "maximum cooling", cold, observer),
    )?
    .unwrap_or(zero);
    // The best COP: the curve and the point of maximum cooling (which lies
    // in the cooling range whenever anything cools) give the bracket.
    let mut samples = sorted;
    samples.push(at_max);
    samples.sort_by(|p, q| p.voltage_v.total_cmp(&q.voltage_v));
    samples.dedup_by(|p, q| p.voltage_v == q.voltage_v);
    let best_cop = if equal {
        let cop = |p: &&CoolerPoint| p.cop;
        (samples.iter().filter(|p| cop(p).is_finite()))
            .max_by(|p, q| cop(p).total_cmp(&cop(q)))
            .copied()
    } else {
        refine_max(
            &samples,
            &|p: &CoolerPoint| p.voltage_v,
            &|p: &CoolerPoint| p.cop,
            tol,
            &mut |v| cooler_point(dev, v, "best COP", cold, observer),
        )?
    };
    Ok((curve, at_max, best_cop))
}

/// Cooling power and COP of the device between a hot and a cold lead; see
/// the module notes for conventions.
pub fn cooler(
    case: &Case,
    settings: &CoolerSettings,
    observer: &mut dyn Observer,
) -> Result<CoolerReport, CurveError> {
    check_settings(settings)?;
    let (th, tc) = (settings.hot_k, settings.cold_k);
    let cold = settings.cold_lead;
    let (mu, _) = reference_point(case)?;
    let temps = match cold {
        Side::Right => LeadTemperatures {
            left_k: th,
            right_k: tc,
        },
        Side::Left => LeadTemperatures {
            left_k: tc,
            right_k: th,
        },
    };
    let tm = 0.5 * (th + tc);
    let (coefficients, coefficient_grid) = if settings.figure_of_merit {
        let (c, g) = super::generator::mean_temperature_coefficients(case, mu, tm)?;
        (Some(c), Some(g))
    } else {
        (None, None)
    };
    let mut dev = BiasedCase::new(case, mu, temps)?;
    let zero_solved = dev.at(0.0, "zero bias", observer)?;
    let zero = CoolerPoint::from(&zero_solved, cold);
    let h = crate::units::thermal_energy_ev(tm);
    let limit =
        (dev.electrostatics.is_some()).then(|| bias_limit(zero_solved.highest_band_edge_ev, mu, h));
    let range = march_end(&mut dev, zero.cooling_power_w, h, cold, limit, observer)?;
    let end = range.end_v;
    // The curve and the refinements run on the grid that covers the range
    // the march reached; the zero-bias point is solved again if the grid
    // grew since.
    let zero = CoolerPoint::from(&dev.current(zero_solved, "zero bias", observer)?, cold);
    let q0 = zero.cooling_power_w;
    let (curve, at_max, best_cop) = cooler_curve(
        &mut dev,
        zero,
        (end, settings.points, th == tc),
        cold,
        observer,
    )?;
    let ioffe = coefficients.as_ref().map(|c| ioffe_max_cop(c.zt, th, tc));
    let max_at_range_end = still_rising_at_end(&range, at_max.voltage_v, h);
    let (max_cop, voltage_at_max_cop_v) = best_cop_of(best_cop.as_ref(), th == tc);
    Ok(CoolerReport {
        settings: *settings,
        fermi_level_ev: mu,
        cooling_power_at_zero_bias_w: q0,
        max_cooling_power_w: at_max.cooling_power_w,
        voltage_at_max_v: at_max.voltage_v,
        current_at_max_a: at_max.current_a,
        max_at_range_end,
        cop_at_max: at_max.cop,
        max_cop,
        voltage_at_max_cop_v,
        carnot_cop: carnot_cop(th, tc),
        coefficients,
        ioffe_max_cop: ioffe,
        lattice_heat_leak_w: dev.heat_leak_w,
        phonon_conductance_source: case.resolve()?.phonon_conductance_source(),
        curve,
        energy_grid: dev.grid().clone(),
        coefficient_grid,
        converged: dev.all_converged,
        solves: dev.solves,
        electrostatics: dev.electrostatics,
        range,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn range(reason: RangeEnd) -> CoolerRange {
        CoolerRange {
            end_v: 0.0775,
            steps: 3,
            reason,
            limit_v: Some(0.48),
            not_converged_at_v: (reason == RangeEnd::NotConverged).then_some(0.1034),
        }
    }

    /// Only a range cut short (a solve that did not converge, the bias or
    /// step limit) with its maximum at its end gives a lower bound.
    #[test]
    fn a_maximum_at_a_cut_short_end_is_a_lower_bound() {
        let h = 0.02585;
        for (reason, cut) in [
            (RangeEnd::FellBack, false),
            (RangeEnd::LevelledOff, false),
            (RangeEnd::BiasLimit, true),
            (RangeEnd::NotConverged, true),
            (RangeEnd::StepLimit, true),
        ] {
            let r = range(reason);
            assert_eq!(still_rising_at_end(&r, 0.0775, h), cut, "{reason:?}");
            assert_eq!(still_rising_at_end(&r, 0.0775 + 1e-9, h), cut);
            assert!(!still_rising_at_end(&r, 0.0775 - 1e-4, h), "{reason:?}");
        }
    }
}
