//! Figure-of-merit screening: a grid of case variants, each scored by ZT,
//! power factor or maximum cooling power, and ranked best first.

use super::{PointOutcome, PointTask, SweepError, SweepTable};
use crate::case::Case;
use crate::leads::Side;
use crate::progress::Silent;
use crate::thermo::cooler::{CoolerSettings, cooler};
use crate::thermo::of_case::{CoefficientError, case_coefficients};

/// What to rank by: the closed set of ranking quantities, written
/// `zt`, `power-factor`, `cooling` in text and JSON.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Rank {
    /// Linear-response ZT at the case's reference point.
    Zt,
    /// Power factor S² G at the case's reference point.
    PowerFactor,
    /// Maximum cooling power between a hot and a cold lead.
    Cooling,
}

impl Rank {
    /// Every ranking quantity, in the order of [`Rank::NAMES`].
    pub const ALL: [Rank; 3] = [Rank::Zt, Rank::PowerFactor, Rank::Cooling];
    /// The names of the ranking quantities as written in text and JSON.
    pub const NAMES: [&'static str; 3] = ["zt", "power-factor", "cooling"];

    /// The name as written in text and JSON.
    pub fn name(self) -> &'static str {
        match self {
            Rank::Zt => "zt",
            Rank::PowerFactor => "power-factor",
            Rank::Cooling => "cooling",
        }
    }

    /// The column ranked by.
    pub fn column(&self) -> &'static str {
        match self {
            Rank::Zt => "zt",
            Rank::PowerFactor => "power_factor_w_per_k2",
            Rank::Cooling => "max_cooling_power_w",
        }
    }
}

impl std::str::FromStr for Rank {
    type Err = String;

    fn from_str(s: &str) -> Result<Self, Self::Err> {
        Rank::ALL
            .into_iter()
            .find(|r| r.name() == s)
            .ok_or_else(|| format!("expected one of {}, found `{s}`", Rank::NAMES.join(", ")))
    }
}

/// The cooler curve run at each point of a cooling screen (the right lead
/// is the cold one).
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
pub struct CoolingCurve {
    /// Hot lead (lead 1) temperature (K).
    pub hot_k: f64,
    /// Cold lead (lead 2) temperature (K).
    pub cold_k: f64,
    /// Voltages on each cooler curve.
    pub points: usize,
}

/// Screening task: coefficients per point, or a cooler curve per point.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ScreenTask {
    rank: Rank,
    cooling: Option<CoolingCurve>,
    electrostatics: bool,
}

impl ScreenTask {
    /// A screen ranked by `rank`; `cooling` is the cooler curve of each
    /// point, given exactly when `rank` is [`Rank::Cooling`] (`None`
    /// otherwise: a cooling screen needs its curve, the others have none).
    pub fn new(rank: Rank, cooling: Option<CoolingCurve>) -> Option<Self> {
        (cooling.is_some() == (rank == Rank::Cooling)).then_some(Self {
            rank,
            cooling,
            electrostatics: false,
        })
    }

    /// The same task for a case that solves its potential with the
    /// transport (`[electrostatics]`): every point's coefficients or
    /// cooler curve then solve the potential at each of their runs, and
    /// the description (so the store fingerprint) says so.
    pub fn with_electrostatics(self, electrostatics: bool) -> Self {
        Self {
            electrostatics,
            ..self
        }
    }

    /// Whether the points solve their potential with the transport.
    pub fn electrostatics(&self) -> bool {
        self.electrostatics
    }

    /// The ranking quantity.
    pub fn rank(&self) -> Rank {
        self.rank
    }

    /// The cooler curve of each point of a cooling screen.
    pub fn cooling(&self) -> Option<CoolingCurve> {
        self.cooling
    }
}

/// Written as the ranking quantity's name, or for a cooling screen as
/// `{"cooling": {hot_k, cold_k, points}}`.
impl serde::Serialize for ScreenTask {
    fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        use serde::ser::SerializeMap;
        match self.cooling {
            Some(curve) => {
                let mut m = s.serialize_map(Some(1))?;
                m.serialize_entry(self.rank.name(), &curve)?;
                m.end()
            }
            None => self.rank.serialize(s),
        }
    }
}

const COEFFICIENT_COLUMNS: [&str; 10] = [
    "fermi_level_ev",
    "temperature_k",
    "conductance_s",
    "seebeck_v_per_k",
    "thermal_conductance_w_per_k",
    "power_factor_w_per_k2",
    "phonon_conductance_w_per_k",
    "zt",
    "kelvin_residual",
    "converged",
];

const COOLING_COLUMNS: [&str; 8] = [
    "fermi_level_ev",
    "max_cooling_power_w",
    "voltage_at_max_v",
    "current_at_max_a",
    "cop_at_max",
    "carnot_cop",
    "max_at_range_end",
    "converged",
];

impl PointTask for ScreenTask {
    fn columns(&self) -> Vec<String> {
        let cols: &[&str] = match self.cooling {
            None => &COEFFICIENT_COLUMNS,
            Some(_) => &COOLING_COLUMNS,
        };
        cols.iter().map(|s| s.to_string()).collect()
    }

    fn describe(&self) -> String {
        // ZT and power factor share their columns, so they share points
        // (κph joined the columns, and the range-end flag the cooling
        // columns: stores written before them are not reused).
        let d = match self.cooling {
            None => "screen coefficients with phonon conductance".to_string(),
            Some(CoolingCurve {
                hot_k,
                cold_k,
                points,
            }) => format!("screen cooling {hot_k:e} {cold_k:e} {points} with the range-end flag"),
        };
        match self.electrostatics {
            true => format!("{d} with the potential solved at every run"),
            false => d,
        }
    }

    fn run(
        &self,
        index: usize,
        case: &Case,
        _warm: crate::thermo::point::PointStart<'_>,
    ) -> Result<PointOutcome, SweepError> {
        let values = match self.cooling {
            None => match case_coefficients(case, &mut Silent) {
                Ok(set) => {
                    let c = set.coefficients;
                    vec![
                        c.fermi_level_ev,
                        c.temperature_k,
                        c.conductance_s,
                        c.seebeck_v_per_k,
                        c.thermal_conductance_w_per_k,
                        c.power_factor_w_per_k2,
                        c.phonon_conductance_w_per_k,
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
            Some(CoolingCurve {
                hot_k,
                cold_k,
                points,
            }) => {
                let settings = CoolerSettings::new(hot_k, cold_k, points)
                    .with_cold_lead(Side::Right)
                    .with_figure_of_merit(false);
                let r = cooler(case, &settings, &mut Silent).map_err(|e| SweepError::Task {
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
                    if r.max_at_range_end { 1.0 } else { 0.0 },
                    if r.converged { 1.0 } else { 0.0 },
                ]
            }
        };
        Ok(PointOutcome {
            values,
            sigma: None,
            potential_ev: None,
        })
    }
}

/// Where the κ_ph of a screening's ZT comes from: the case's own source,
/// or "given" when the grid varies `thermal.phonon_conductance_w_per_k`.
pub fn phonon_conductance_source(
    case: &Case,
    axes: &[super::Axis],
) -> Result<crate::case::PhononConductanceSource, crate::case::CaseError> {
    let varied = axes
        .iter()
        .flat_map(|a| &a.keys)
        .any(|k| matches!(k, crate::case::CaseKey::ThermalPhononConductance));
    if varied {
        return Ok(crate::case::PhononConductanceSource::Given);
    }
    Ok(case.resolve()?.phonon_conductance_source())
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

#[cfg(test)]
mod tests {
    use super::*;

    /// Text, JSON and the parser agree on every ranking quantity's name.
    #[test]
    fn rank_names_agree_everywhere() {
        for (rank, name) in Rank::ALL.into_iter().zip(Rank::NAMES) {
            assert_eq!(rank.name(), name);
            assert_eq!(serde_json::to_string(&rank).unwrap(), format!("\"{name}\""));
            assert_eq!(name.parse::<Rank>(), Ok(rank));
        }
        assert!("speed".parse::<Rank>().is_err());
    }

    /// A screen gets a cooler curve exactly when it ranks by cooling, and
    /// its JSON form is the one summaries have always carried.
    #[test]
    fn screen_task_pairs_rank_and_curve() {
        let curve = CoolingCurve {
            hot_k: 310.0,
            cold_k: 300.0,
            points: 5,
        };
        assert!(ScreenTask::new(Rank::Cooling, None).is_none());
        assert!(ScreenTask::new(Rank::Zt, Some(curve)).is_none());
        let zt = ScreenTask::new(Rank::Zt, None).unwrap();
        assert_eq!(serde_json::to_string(&zt).unwrap(), "\"zt\"");
        let cooling = ScreenTask::new(Rank::Cooling, Some(curve)).unwrap();
        assert_eq!(
            serde_json::to_string(&cooling).unwrap(),
            r#"{"cooling":{"hot_k":310.0,"cold_k":300.0,"points":5}}"#
        );
    }
}
