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

/// The occupation map of a solution: shape (cells, energies), axis 0 the
/// cell (its position is `Problem::device.x_nm`), axis 1 the energy of the
/// grid; dimensionless, NaN where the cell has negligible states (see
/// [`OCCUPATION_THRESHOLD`]).
pub fn occupation_map(sol: &Solution) -> ndarray::Array2<f64> {
    let p = &sol.problem;
    let b = p.device.orbitals;
    let n = p.device.cells();
    let ne = p.grid.count;
    let ns = n * b;
    let green = &sol.pass.green;
    let cell_sum = |i: usize, k: usize, value: &dyn Fn(usize) -> f64| -> f64 {
        (0..b).map(|o| value(k * ns + i * b + o)).sum()
    };
    let mut map = ndarray::Array2::zeros((n, ne));
    let Some(out) = map.as_slice_mut() else {
        return map;
    };
    // Σ_o A_ii first (the threshold needs the largest), then the ratio in
    // place.
    par_cell_rows(out, ne, |i, row| {
        for (k, a) in row.iter_mut().enumerate() {
            *a = cell_sum(i, k, &|x| green.spectral(x));
        }
    });
    let largest = out
        .iter()
        .filter(|a| a.is_finite())
        .fold(0.0f64, |m, &a| m.max(a));
    let floor = OCCUPATION_THRESHOLD * largest;
    par_cell_rows(out, ne, |i, row| {
        for (k, f) in row.iter_mut().enumerate() {
            let a = *f;
            *f = if largest > 0.0 && a > floor {
                cell_sum(i, k, &|x| green.filled[x]) / a
            } else {
                f64::NAN
            };
        }
    });
    map
}
