//! The tables and maps of a result as arrays in memory: the same columns
//! the CSV files hold, taken from the same column lists, and the
//! bond-current map with its axes.

use super::Solved;
use crate::observables::bond_current_map;
use crate::output::schema::tables::{self, SolvePoint};
use crate::output::schema::{Cell, Table};

/// The columns `table` writes for `data`, in file order, each as numbers:
/// whole numbers as their value, flags as 1 and 0. A CSV file written from
/// the same table reads back to exactly these numbers.
pub fn columns<S>(table: &Table<S>, data: &S) -> Vec<(&'static str, Vec<f64>)> {
    let rows = (table.len)(data);
    table
        .columns
        .iter()
        .filter(|c| c.only_when.is_none_or(|(_, present)| present(data)))
        .map(|c| {
            let values = (0..rows)
                .map(|i| match (c.value)(data, i) {
                    Cell::Num(v) => v,
                    Cell::Int(v) => v as f64,
                    Cell::Bool(b) => f64::from(u8::from(b)),
                })
                .collect();
            (c.name, values)
        })
        .collect()
}

/// The energy-resolved current across each bond between neighbouring
/// cells, with its axes (the map of bond_current.npz, never reduced).
#[derive(Clone, Debug, PartialEq)]
pub struct BondCurrentMap {
    /// Current per unit energy across bond i at energy k (A/eV), bonds ×
    /// energies, row-major.
    pub map: ndarray::Array2<f64>,
    /// Position of each bond: the midpoint between its two cells (nm).
    pub bond_x_nm: Vec<f64>,
    /// The energies of the grid (eV).
    pub energy_ev: Vec<f64>,
}

impl Solved {
    fn point(&self) -> SolvePoint<'_> {
        SolvePoint {
            sol: &self.solution,
            o: &self.observables,
            electrostatics: self.summary.electrostatics.as_ref(),
        }
    }

    /// The per-cell table (the columns of sites.csv).
    pub fn sites(&self) -> Vec<(&'static str, Vec<f64>)> {
        columns(&tables::sites(), &self.point())
    }

    /// The per-energy table (the columns of spectrum.csv).
    pub fn spectrum(&self) -> Vec<(&'static str, Vec<f64>)> {
        columns(&tables::spectrum(), &self.point())
    }

    /// The Born loop's record, one row per iteration (the columns of
    /// convergence.csv).
    pub fn convergence(&self) -> Vec<(&'static str, Vec<f64>)> {
        columns(&tables::convergence(), &self.point())
    }

    /// The per-cell and per-energy tables split by channel, when the case
    /// names channels.
    #[allow(clippy::type_complexity)]
    pub fn channel_tables(
        &self,
    ) -> Option<(Vec<(&'static str, Vec<f64>)>, Vec<(&'static str, Vec<f64>)>)> {
        self.observables.channels.as_ref()?;
        let p = self.point();
        Some((
            columns(&tables::channel_sites(), &p),
            columns(&tables::channel_spectrum(), &p),
        ))
    }

    /// The bond-current map with its axes.
    pub fn bond_current(&self) -> BondCurrentMap {
        let x = &self.observables.sites.x_nm;
        BondCurrentMap {
            map: bond_current_map(&self.solution),
            bond_x_nm: x.windows(2).map(|w| 0.5 * (w[0] + w[1])).collect(),
            energy_ev: self.solution.problem.grid.energies(),
        }
    }
}
