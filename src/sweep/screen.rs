//! Figure-of-merit screening: a grid of case variants, each scored by ZT,
//! power factor or maximum cooling power, and ranked best first.

use super::{PointOutcome, PointTask, SweepError, SweepTable};
use crate::case::Case;
use crate::scattering::ScatteringSelfEnergy;
use crate::scba::Silent;
use crate::thermo::cooler::{ColdLead, CoolerSettings, cooler};
use crate::thermo::generator::NoProgress;
use crate::thermo::of_case::{CoefficientError, case_coefficients};

/// What to rank by.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Rank {
    /// Linear-response ZT at the case's reference point.
    Zt,
    /// Power factor S² G at the case's reference point.
    PowerFactor,
    /// Maximum cooling power between a hot and a cold lead.
    Cooling {
        /// Hot lead temperature (K).
        hot_k: f64,
        /// Cold lead (lead 2) temperature (K).
        cold_k: f64,
        /// Voltages on each cooler curve.
        points: usize,
    },
}

impl Rank {
    /// The column ranked by.
    pub fn column(&self) -> &'static str {
        match self {
            Rank::Zt => "zt",
            Rank::PowerFactor => "power_factor_w_per_k2",
            Rank::Cooling { .. } => "max_cooling_power_w",
        }
    }
}

/// Screening task: coefficients per point, or a cooler curve per point.
pub struct ScreenTask {
    /// Ranking quantity.
    pub rank: Rank,
}

const COEFFICIENT_COLUMNS: [&str; 9] = [
    "fermi_level_ev",
    "temperature_k",
    "conductance_s",
    "seebeck_v_per_k",
    "thermal_conductance_w_per_k",
    "power_factor_w_per_k2",
    "zt",
    "kelvin_residual",
    "converged",
];

const COOLING_COLUMNS: [&str; 7] = [
    "fermi_level_ev",
    "max_cooling_power_w",
    "voltage_at_max_v",
    "current_at_max_a",
    "cop_at_max",
    "carnot_cop",
    "converged",
];

impl PointTask for ScreenTask {
    fn columns(&self) -> Vec<String> {
        let cols: &[&str] = match self.rank {
            Rank::Zt | Rank::PowerFactor => &COEFFICIENT_COLUMNS,
            Rank::Cooling { .. } => &COOLING_COLUMNS,
        };
        cols.iter().map(|s| s.to_string()).collect()
    }

    fn describe(&self) -> String {
        // ZT and power factor share their columns, so they share points.
        match self.rank {
            Rank::Zt | Rank::PowerFactor => "screen coefficients".into(),
            Rank::Cooling {
                hot_k,
                cold_k,
                points,
            } => format!("screen cooling {hot_k:e} {cold_k:e} {points}"),
        }
    }

    fn run(
        &self,
        index: usize,
        case: &Case,
        _warm: Option<&ScatteringSelfEnergy>,
    ) -> Result<PointOutcome, SweepError> {
        let values = match self.rank {
            Rank::Zt | Rank::PowerFactor => match case_coefficients(case, &mut Silent) {
                Ok(set) => {
                    let c = set.coefficients;
                    vec![
                        c.fermi_level_ev,
                        c.temperature_k,
                        c.conductance_s,
                        c.seebeck_v_per_k,
                        c.thermal_conductance_w_per_k,
                        c.power_factor_w_per_k2,
                        c.zt,
                        c.kelvin_residual,
                        1.0,
                    ]
                }
                // A point whose finite-difference runs did not converge is
                // kept in the table, flagged, and ranked last.
                Err(CoefficientError::Response(_)) => {
                    let mut v = vec![f64::NAN; COEFFICIENT_COLUMNS.len()];
                    v[COEFFICIENT_COLUMNS.len() - 1] = 0.0;
                    v
                }
                Err(e) => {
                    return Err(SweepError::Task {
                        point: index,
                        message: e.to_string(),
                    });
                }
            },
            Rank::Cooling {
                hot_k,
                cold_k,
                points,
            } => {
                let settings = CoolerSettings {
                    hot_k,
                    cold_k,
                    points,
                    cold_lead: ColdLead::Right,
                    figure_of_merit: false,
                };
                let r = cooler(case, &settings, &mut NoProgress).map_err(|e| SweepError::Task {
                    point: index,
                    message: e.to_string(),
                })?;
                vec![
                    r.fermi_level_ev,
                    r.max_cooling_power_w,
                    r.voltage_at_max_v,
                    r.current_at_max_a,
                    r.cop_at_max,
                    r.carnot_cop,
                    if r.converged { 1.0 } else { 0.0 },
                ]
            }
        };
        Ok(PointOutcome {
            values,
            sigma: None,
        })
    }
}

/// Point indices sorted best first by `column` (largest first); NaN and
/// unconverged points last; ties keep grid order.
pub fn ranking(table: &SweepTable, column: &str) -> Result<Vec<usize>, SweepError> {
    let c = table.column(column).ok_or_else(|| SweepError::Task {
        point: 0,
        message: format!("no column `{column}` to rank by"),
    })?;
    let conv = table.column("converged");
    let score = |i: usize| {
        let v = table.rows[i][c];
        let ok = conv.is_none_or(|k| table.rows[i][k] == 1.0);
        if ok && v.is_finite() {
            v
        } else {
            f64::NEG_INFINITY
        }
    };
    let mut order: Vec<usize> = (0..table.rows.len()).collect();
    order.sort_by(|&a, &b| score(b).total_cmp(&score(a)).then(a.cmp(&b)));
    Ok(order)
}

/// The ranking as a table: `rank`, `point`, then every column of `table`.
pub fn ranking_table(table: &SweepTable, order: &[usize]) -> (Vec<String>, Vec<Vec<f64>>) {
    let mut columns = vec!["rank".to_string(), "point".to_string()];
    columns.extend(table.columns.iter().cloned());
    let rows = order
        .iter()
        .enumerate()
        .map(|(r, &i)| {
            let mut row = vec![(r + 1) as f64, i as f64];
            row.extend_from_slice(&table.rows[i]);
            row
        })
        .collect();
    (columns, rows)
}
