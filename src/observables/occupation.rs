//! Occupation map: how full the states of each cell are at each energy.
//!
//! f(x_i, E) = Σ_o G^n_ii,oo(E) / Σ_o A_ii,oo(E), the orbitals of a cell
//! summed in numerator and denominator. In equilibrium every cell is filled
//! to the contacts' Fermi function; under bias the map shows where the
//! filling changes along the device and over which energies: a ballistic
//! region passes it through unchanged, a barrier splits it, and inelastic
//! scattering moves electrons between energies. The exclusion principle
//! keeps every value in [0, 1] (G^n and G^p = A − G^n are both
//! non-negative).
//!
//! Where a cell has (almost) no states the ratio is noise over noise: it
//! is NaN wherever Σ_o A_ii(E) is below [`OCCUPATION_THRESHOLD`] times the
//! largest Σ_o A_ii of the whole map.

use super::par_cell_rows;
use crate::scba::Solution;

/// Relative threshold on the cell's spectral weight below which the
/// occupation is not defined (NaN): 1e-8 of the largest Σ_o A_ii(E) over
/// all cells and energies. G^n and A are each accurate to about 1e-15 of
/// the largest values they are built from, so this leaves the ratio good
/// to about 1e-7 even where the states are weakest, while evanescent tails
/// deep under a barrier (many decades weaker) are masked.
pub const OCCUPATION_THRESHOLD: f64 = 1e-8;

/// The occupation of a solution read straight from its Green's functions,
/// value by value: what [`occupation_map`] holds, without storing it. The
/// largest Σ_o A_ii of the whole map (for the threshold) is found once,
/// energies in parallel.
#[derive(Clone, Copy)]
pub struct Occupation<'a> {
    sol: &'a Solution,
    /// Cells.
    pub cells: usize,
    /// Energies of the grid.
    pub energies: usize,
    largest: f64,
    floor: f64,
}

impl<'a> Occupation<'a> {
    /// The occupation of `sol`.
    pub fn of(sol: &'a Solution) -> Self {
        use rayon::prelude::*;
        let p = &sol.problem;
        let (cells, energies) = (p.device.cells(), p.grid.count);
        let mut o = Self {
            sol,
            cells,
            energies,
            largest: 0.0,
            floor: 0.0,
        };
        // The largest finite value: a maximum, so the same whatever the
        // order in which it is taken.
        o.largest = (0..energies)
            .into_par_iter()
            .map(|k| {
                (0..cells)
                    .map(|i| o.states(i, k))
                    .filter(|a| a.is_finite())
                    .fold(0.0f64, f64::max)
            })
            .reduce(|| 0.0, f64::max);
        o.floor = OCCUPATION_THRESHOLD * o.largest;
        o
    }

    /// Σ_o over the orbitals of cell i at energy index k of `value(site)`.
    fn cell_sum(&self, i: usize, k: usize, value: impl Fn(usize) -> f64) -> f64 {
        let b = self.sol.problem.device.orbitals;
        let at = k * self.cells * b + i * b;
        (0..b).map(|o| value(at + o)).sum()
    }

    /// Σ_o A_ii,oo of cell i at energy index k.
    fn states(&self, i: usize, k: usize) -> f64 {
        self.cell_sum(i, k, |x| self.sol.pass.green.spectral(x))
    }

    /// The occupation of cell i at energy index k (NaN without states).
    pub fn value(&self, i: usize, k: usize) -> f64 {
        let a = self.states(i, k);
        if self.largest > 0.0 && a > self.floor {
            self.cell_sum(i, k, |x| self.sol.pass.green.filled[x]) / a
        } else {
            f64::NAN
        }
    }
}

/// The occupation map of a solution: shape (cells, energies), axis 0 the
/// cell (its position is `Problem::device.x_nm`), axis 1 the energy of the
/// grid; dimensionless, NaN where the cell has negligible states (see
/// [`OCCUPATION_THRESHOLD`]).
pub fn occupation_map(sol: &Solution) -> ndarray::Array2<f64> {
    let occupation = Occupation::of(sol);
    let (n, ne) = (occupation.cells, occupation.energies);
    let mut map = ndarray::Array2::zeros((n, ne));
    if let Some(out) = map.as_slice_mut() {
        par_cell_rows(out, ne, |i, row| {
            for (k, f) in row.iter_mut().enumerate() {
                *f = occupation.value(i, k);
            }
        });
    }
    map
}
