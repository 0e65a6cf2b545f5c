//! Local electrochemical potential by density matching.
//!
//! µ_i is the Fermi level that, at the local temperature T_i, reproduces the
//! electron number of cell i: Σ_k G^n_ii(E_k) = Σ_k A_ii(E_k) f(E_k; µ_i, T_i)
//! (orbitals of the cell summed). The right side is monotone in µ_i, so a
//! bracketed (safeguarded Newton) search on the interval
//! [E_min − 60 k_B T, E_max + 60 k_B T] (E_min, E_max: ends of the energy
//! grid) finds it whenever it lies there.
//!
//! A cell whose electron number needs a µ_i outside that interval (for
//! example a cell whose states all sit far above a non-degenerate lead's
//! Fermi level at low temperature, or one whose in-window states are all
//! filled to rounding) is not clamped to the interval end: its µ_i is NaN
//! and its [`FermiLevelStatus`] says on which side the match lies.

use crate::scba::Solution;
use crate::units::{fermi, thermal_energy_ev};
use rayon::prelude::*;

/// How the density match of one cell ended.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum FermiLevelStatus {
    /// µ_i found inside the search interval.
    Matched,
    /// Even the lowest µ of the interval puts more electrons in the cell
    /// than it holds: the match lies below the interval (µ_i is NaN).
    BelowInterval,
    /// Even the highest µ of the interval puts no more electrons in the
    /// cell than it holds: the match lies above the interval (µ_i is NaN).
    AboveInterval,
    /// The cell has no states in the energy window (µ_i is NaN).
    NoStates,
}

impl FermiLevelStatus {
    /// Code written in sites.csv: 0 matched, −1 below the interval, +1
    /// above it, 2 no states in the window.
    pub fn code(self) -> f64 {
        match self {
            Self::Matched => 0.0,
            Self::BelowInterval => -1.0,
            Self::AboveInterval => 1.0,
            Self::NoStates => 2.0,
        }
    }
}

/// The result of one density match.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct FermiMatch {
    /// µ (eV); NaN unless `status` is [`FermiLevelStatus::Matched`].
    pub fermi_level_ev: f64,
    /// How the match ended.
    pub status: FermiLevelStatus,
}

/// The interval searched for a local Fermi level (eV): the grid widened by
/// 60 k_B T on both sides.
pub fn fermi_search_interval(energies: &[f64], temperature_k: f64) -> (f64, f64) {
    let kt = thermal_energy_ev(temperature_k);
    (
        energies.first().copied().unwrap_or(0.0) - 60.0 * kt,
        energies.last().copied().unwrap_or(0.0) + 60.0 * kt,
    )
}

/// Local Fermi levels and electron numbers per cell.
#[derive(Clone, Debug, PartialEq)]
pub struct LocalFermiLevel {
    /// µ_i (eV); NaN where the cell has no states in the energy window or
    /// its match lies outside the search interval (see `status`).
    pub fermi_level_ev: Vec<f64>,
    /// How the match of each cell ended.
    pub status: Vec<FermiLevelStatus>,
    /// The search interval (eV).
    pub interval_ev: (f64, f64),
    /// Electrons in the cell, g_s Σ_k G^n ΔE / 2π.
    pub electrons: Vec<f64>,
    /// Temperature used for the matching (K): the lattice temperature, or
    /// with a lattice-temperature profile the highest of the cells'
    /// temperatures (the one that sets the widest search interval).
    pub temperature_k: f64,
    /// Temperature used for the matching of each cell (K).
    pub cell_temperature_k: Vec<f64>,
}

/// The lattice temperature: the first phonon bath temperature, or the mean
/// of the contact temperatures without phonons.
pub fn lattice_temperature(sol: &Solution) -> f64 {
    let p = &sol.problem;
    p.scattering
        .phonons
        .first()
        .map(|m| m.bath_temperature_k)
        .unwrap_or(0.5 * (p.left.temperature_k + p.right.temperature_k))
}

/// The lattice temperature of each cell (K): with a lattice-temperature
/// profile on the solution, the mean over the cell's orbital sites;
/// otherwise [`lattice_temperature`] in every cell.
pub fn cell_lattice_temperatures(sol: &Solution) -> Vec<f64> {
    let p = &sol.problem;
    let b = p.device.orbitals.max(1);
    match sol.lattice_temperature_k.as_deref() {
        Some(t) => t
            .chunks(b)
            .map(|c| c.iter().sum::<f64>() / c.len() as f64)
            .collect(),
        None => vec![lattice_temperature(sol); p.device.cells()],
    }
}

/// Solve Σ_k a_k f(E_k; µ, T) = target for µ on
/// [`fermi_search_interval`]; NaN when there are no states or the match
/// lies outside the interval ([`match_fermi_level_checked`] says which).
pub fn match_fermi_level(
    energies: &[f64],
    spectral: &[f64],
    target: f64,
    temperature_k: f64,
) -> f64 {
    match_fermi_level_checked(energies, spectral, target, temperature_k).fermi_level_ev
}

/// The occupied weight Σ_k a_k f(E_k; µ, T) and its slope against µ,
/// Σ_k a_k f(1 − f)/k_B T, in one pass.
fn count_and_slope(energies: &[f64], spectral: &[f64], mu: f64, kt: f64) -> (f64, f64) {
    let (mut n, mut dn) = (0.0, 0.0);
    for (&e, &a) in energies.iter().zip(spectral) {
        let x = (e - mu) / kt;
        let f = if x > 0.0 {
            let q = (-x).exp();
            q / (1.0 + q)
        } else {
            1.0 / (1.0 + x.exp())
        };
        n += a * f;
        dn += a * f * (1.0 - f);
    }
    (n, dn / kt)
}

/// A grid spanning more than this many k_B T is not tabulated
/// ([`FermiTable`]): with µ anywhere in the search interval, E_0 − 60 k_B T
/// to E_last + 60 k_B T, every exp((E_k − µ)/k_B T) of a tabulated grid
/// then lies between e^−660 and e^660, far from overflow (e^709) and from
/// the subnormal numbers (below e^−708).
const TABLE_SPAN: f64 = 600.0;

/// The Fermi function of one temperature on one energy grid, prepared for
/// many evaluations of the occupied weight N(µ) = Σ_k a_k f(E_k; µ, T).
///
/// exp((E_k − µ)/k_B T) = exp((E_0 − µ)/k_B T) · exp((E_k − E_0)/k_B T):
/// the second factor does not depend on µ and is tabulated once, so an
/// evaluation costs one exponential in all, and per energy a multiply, an
/// add and a division, instead of an exponential and a division per
/// energy. Where the product could leave the range of normal numbers (a
/// grid wider than 600 k_B T, or µ far outside the grid) the
/// evaluation falls back to one exponential per energy.
#[derive(Clone, Debug)]
pub struct FermiTable {
    temperature_k: f64,
    kt: f64,
    /// E_0 (eV).
    first: f64,
    /// (E_last − E_0)/k_B T.
    span: f64,
    /// exp((E_k − E_0)/k_B T); empty when not tabulated.
    ratio: Vec<f64>,
}

impl FermiTable {
    /// The table of `energies` at `temperature_k`.
    pub fn new(energies: &[f64], temperature_k: f64) -> Self {
        let kt = thermal_energy_ev(temperature_k);
        let first = energies.first().copied().unwrap_or(0.0);
        let span = (energies.last().copied().unwrap_or(0.0) - first) / kt;
        let ratio = if span.is_finite() && span <= TABLE_SPAN {
            energies.iter().map(|&e| ((e - first) / kt).exp()).collect()
        } else {
            Vec::new()
        };
        Self {
            temperature_k,
            kt,
            first,
            span,
            ratio,
        }
    }

    /// N(µ) and its slope dN/dµ = Σ_k a_k f(1 − f)/k_B T in one pass.
    fn count_and_slope(&self, energies: &[f64], spectral: &[f64], mu: f64) -> (f64, f64) {
        let x0 = (self.first - mu) / self.kt;
        let safe = x0 >= -700.0 && x0 + self.span <= 700.0;
        if self.ratio.len() != spectral.len() || !safe {
            return count_and_slope(energies, spectral, mu, self.kt);
        }
        let c = x0.exp();
        let (mut n, mut dn) = (0.0, 0.0);
        for (&a, &r) in spectral.iter().zip(&self.ratio) {
            // f = 1/(1 + x), f(1 − f) = x f², with x = exp((E_k − µ)/k_B T);
            // x f ≤ 1, so x f f does not overflow.
            let x = c * r;
            let f = 1.0 / (1.0 + x);
            n += a * f;
            dn += a * (x * f * f);
        }
        (n, dn / self.kt)
    }
}

/// Fermi tables for the cells of a device ([`FermiTable`]): one per
/// distinct temperature when there are few of them; with many (a
/// temperature profile) each cell's table is built when it is matched, so
/// that no more than a few grid-sized tables are ever held.
pub(crate) struct FermiTables {
    tables: Vec<FermiTable>,
    /// Per cell, its table in `tables`; `None` when built on demand.
    index: Vec<Option<usize>>,
}

/// At most this many distinct temperatures are tabulated in advance.
const SHARED_TABLES: usize = 8;

impl FermiTables {
    /// Tables of `energies` for the cell temperatures `temps` (K).
    pub(crate) fn new(energies: &[f64], temps: &[f64]) -> Self {
        let mut distinct: Vec<f64> = Vec::new();
        let index = temps
            .iter()
            .map(|t| {
                if let Some(j) = distinct.iter().position(|d| d.to_bits() == t.to_bits()) {
                    return Some(j);
                }
                (distinct.len() < SHARED_TABLES).then(|| {
                    distinct.push(*t);
                    distinct.len() - 1
                })
            })
            .collect();
        Self {
            tables: distinct
                .iter()
                .map(|&t| FermiTable::new(energies, t))
                .collect(),
            index,
        }
    }

    /// The density match of cell `i` ([`match_fermi_level_in`]) at the
    /// temperature given for it to [`FermiTables::new`].
    pub(crate) fn match_cell(
        &self,
        i: usize,
        energies: &[f64],
        spectral: &[f64],
        target: f64,
        temperature_k: f64,
    ) -> FermiMatch {
        match self.index.get(i).copied().flatten() {
            Some(j) => match_fermi_level_in(&self.tables[j], energies, spectral, target),
            None => match_fermi_level_checked(energies, spectral, target, temperature_k),
        }
    }
}

/// Density match with the way it ended: µ (NaN unless matched) and its
/// [`FermiLevelStatus`].
///
/// The occupied weight N(µ) = Σ_k a_k f(E_k; µ, T) grows monotonically with
/// µ (a_k ≥ 0), so the root of N(µ) = target is bracketed by the search
/// interval once its ends straddle the target, and
/// [`crate::numerics::bracketed_newton`] finds it (N′ is known in closed
/// form): the same root bisection reaches, in about ten evaluations of N
/// instead of sixty. Each evaluation uses a [`FermiTable`] built for this
/// match; [`match_fermi_level_in`] takes one built beforehand.
pub fn match_fermi_level_checked(
    energies: &[f64],
    spectral: &[f64],
    target: f64,
    temperature_k: f64,
) -> FermiMatch {
    let table = FermiTable::new(energies, temperature_k);
    match_fermi_level_in(&table, energies, spectral, target)
}

fn no_states(spectral: &[f64]) -> Option<FermiMatch> {
    let total: f64 = spectral.iter().sum();
    (total <= 0.0 || !total.is_finite()).then_some(FermiMatch {
        fermi_level_ev: f64::NAN,
        status: FermiLevelStatus::NoStates,
    })
}

/// [`match_fermi_level_checked`] with the Fermi table of `energies` at the
/// temperature of the match built beforehand.
pub fn match_fermi_level_in(
    table: &FermiTable,
    energies: &[f64],
    spectral: &[f64],
    target: f64,
) -> FermiMatch {
    if let Some(none) = no_states(spectral) {
        return none;
    }
    let kt = table.kt;
    let (lo, hi) = fermi_search_interval(energies, table.temperature_k);
    let count = |mu: f64| table.count_and_slope(energies, spectral, mu);
    // The iteration below keeps lo at count < target and hi at
    // count ≥ target; if an end already violates that, the answer is not
    // inside and the bracket would only walk to that end.
    let outside = if count(lo).0 >= target {
        Some(FermiLevelStatus::BelowInterval)
    } else if count(hi).0 < target {
        Some(FermiLevelStatus::AboveInterval)
    } else {
        None
    };
    if let Some(status) = outside {
        return FermiMatch {
            fermi_level_ev: f64::NAN,
            status,
        };
    }
    let mu = crate::numerics::bracketed_newton(count, target, (lo, hi), kt);
    FermiMatch {
        fermi_level_ev: mu,
        status: FermiLevelStatus::Matched,
    }
}

/// Local Fermi level of every cell at the lattice temperature of that cell
/// ([`cell_lattice_temperatures`]). The reported search interval is the
/// widest one, that of the hottest cell.
pub fn local_fermi_levels(sol: &Solution) -> LocalFermiLevel {
    let p = &sol.problem;
    let b = p.device.orbitals;
    let n = p.device.cells();
    let ne = p.grid.count;
    let ns = n * b;
    let energies = p.grid.energies();
    let cell_t = cell_lattice_temperatures(sol);
    let t = cell_t.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let green = &sol.pass.green;
    let tables = FermiTables::new(&energies, &cell_t);
    // The arrays are energy-major: gather neighbouring cells together so
    // that each energy row is read in whole pages, not one number per line.
    let at_once = super::cells_per_task(n);
    let per_cell: Vec<(FermiMatch, f64)> = (0..n.div_ceil(at_once))
        .into_par_iter()
        .flat_map_iter(|chunk| {
            let first = chunk * at_once;
            let cells = at_once.min(n - first);
            let mut a = vec![0.0; cells * ne];
            let mut filled = vec![0.0; cells];
            for k in 0..ne {
                let row = k * ns + first * b;
                for (c, fill) in filled.iter_mut().enumerate() {
                    for o in 0..b {
                        let idx = row + c * b + o;
                        a[c * ne + k] += green.spectral(idx);
                        *fill += green.filled[idx];
                    }
                }
            }
            let energies = &energies;
            let cell_t = &cell_t;
            let tables = &tables;
            (0..cells).map(move |c| {
                let i = first + c;
                let row = &a[c * ne..(c + 1) * ne];
                let mu = tables.match_cell(i, energies, row, filled[c], cell_t[i]);
                let electrons =
                    p.spin_degeneracy * filled[c] * p.grid.step_ev / (2.0 * std::f64::consts::PI);
                (mu, electrons)
            })
        })
        .collect();
    LocalFermiLevel {
        fermi_level_ev: per_cell.iter().map(|x| x.0.fermi_level_ev).collect(),
        status: per_cell.iter().map(|x| x.0.status).collect(),
        interval_ev: fermi_search_interval(&energies, t),
        electrons: per_cell.iter().map(|x| x.1).collect(),
        temperature_k: t,
        cell_temperature_k: cell_t,
    }
}

/// Fit a local Fermi level and temperature to the number and the energy of
/// the electrons in a cell: Σ a_k f(E_k; µ, T) = n and
/// Σ E_k a_k f(E_k; µ, T) = u. For each T, µ(T) matches the number; the
/// energy at fixed number grows with T, so T follows by bisection on
/// [1 K, 10⁴ K]. Returns NaNs when no temperature in that range matches
/// (a distribution far from any Fermi function).
pub fn fit_fermi_level_and_temperature(
    energies: &[f64],
    spectral: &[f64],
    number: f64,
    energy: f64,
) -> (f64, f64) {
    let energy_at = |t: f64| -> (f64, f64) {
        let mu = match_fermi_level(energies, spectral, number, t);
        let u: f64 = energies
            .iter()
            .zip(spectral)
            .map(|(&e, &a)| e * a * fermi(e, mu, t))
            .sum();
        (mu, u)
    };
    let (mut lo, mut hi) = (1.0f64, 1.0e4f64);
    let (_, u_lo) = energy_at(lo);
    let (_, u_hi) = energy_at(hi);
    if !(u_lo <= energy && energy <= u_hi) {
        return (f64::NAN, f64::NAN);
    }
    for _ in 0..60 {
        let mid = (lo * hi).sqrt();
        if energy_at(mid).1 < energy {
            lo = mid;
        } else {
            hi = mid;
        }
        if hi / lo < 1.0 + 1e-10 {
            break;
        }
    }
    let t = (lo * hi).sqrt();
    (energy_at(t).0, t)
}

/// Local electron temperature of every cell (K), NaN where no Fermi
/// function matches.
pub fn local_electron_temperatures(sol: &Solution) -> Vec<f64> {
    let p = &sol.problem;
    let b = p.device.orbitals;
    let n = p.device.cells();
    let ne = p.grid.count;
    let ns = n * b;
    let energies = p.grid.energies();
    let green = &sol.pass.green;
    (0..n)
        .into_par_iter()
        .map(|i| {
            let mut a = vec![0.0; ne];
            let (mut number, mut energy) = (0.0, 0.0);
            for (k, ak) in a.iter_mut().enumerate() {
                for o in 0..b {
                    let idx = k * ns + i * b + o;
                    *ak += green.spectral(idx);
                    number += green.filled[idx];
                    energy += energies[k] * green.filled[idx];
                }
            }
            fit_fermi_level_and_temperature(&energies, &a, number, energy).1
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Plain bisection to adjacent floating-point numbers: the reference
    /// the bracketed Newton search must reproduce.
    fn bisect(energies: &[f64], a: &[f64], target: f64, t: f64) -> f64 {
        let (mut lo, mut hi) = fermi_search_interval(energies, t);
        let count = |mu: f64| -> f64 {
            energies
                .iter()
                .zip(a)
                .map(|(&e, &w)| w * fermi(e, mu, t))
                .sum()
        };
        loop {
            let mid = 0.5 * (lo + hi);
            if mid == lo || mid == hi {
                return mid;
            }
            if count(mid) < target {
                lo = mid;
            } else {
                hi = mid;
            }
        }
    }

    fn grid(n: usize, step: f64) -> Vec<f64> {
        (0..n).map(|k| -0.2 + step * k as f64).collect()
    }

    /// A weight built from a known µ* gives µ* back; smooth, peaked, gapped
    /// and sparse weights at room and low temperature agree with bisection.
    /// The tolerance, 1e-12 eV, is a few hundred units in the last place of
    /// µ: both searches stop at the root to rounding of the sum N(µ), which
    /// is flat to ~1e-16 relative over that width.
    #[test]
    fn bracketed_newton_matches_bisection() {
        let e = grid(801, 5e-4);
        let smooth: Vec<f64> = e.iter().map(|&x| (x + 0.25).sqrt()).collect();
        let peaked: Vec<f64> = e
            .iter()
            .map(|&x| 1e-3 + 1.0 / (1.0 + ((x - 0.05) / 1e-3).powi(2)))
            .collect();
        let gapped: Vec<f64> = e
            .iter()
            .map(|&x| if (-0.05..0.1).contains(&x) { 0.0 } else { 1.0 })
            .collect();
        let sparse: Vec<f64> = (0..e.len())
            .map(|k| if k % 97 == 3 { 1.0 + k as f64 } else { 0.0 })
            .collect();
        // 300 K and 8 K take the tabulated count (the grid spans 15 and
        // 580 k_B T), 4 K the exponential per energy (1160 k_B T).
        for a in [&smooth, &peaked, &gapped, &sparse] {
            for t in [300.0, 8.0, 4.0] {
                let total: f64 = a.iter().sum();
                for frac in [1e-9, 0.01, 0.3, 0.5, 0.77, 0.999] {
                    let target = frac * total;
                    let m = match_fermi_level_checked(&e, a, target, t);
                    assert_eq!(m.status, FermiLevelStatus::Matched);
                    let reference = bisect(&e, a, target, t);
                    assert!(
                        (m.fermi_level_ev - reference).abs() <= 1e-12,
                        "T {t} K, fraction {frac}: {} vs {reference}",
                        m.fermi_level_ev
                    );
                }
            }
        }
        let known = 0.0123;
        let target: f64 = e
            .iter()
            .zip(&smooth)
            .map(|(&x, &w)| w * fermi(x, known, 300.0))
            .sum();
        let m = match_fermi_level(&e, &smooth, target, 300.0);
        assert!((m - known).abs() < 1e-12, "{m}");
    }

    /// Targets no µ in the interval reaches are flagged, not clamped.
    #[test]
    fn targets_outside_the_interval_are_named() {
        let e = grid(101, 1e-3);
        let a = vec![1.0; e.len()];
        let total = e.len() as f64;
        let above = match_fermi_level_checked(&e, &a, total * (1.0 + 1e-9), 300.0);
        assert_eq!(above.status, FermiLevelStatus::AboveInterval);
        assert!(above.fermi_level_ev.is_nan());
        let below = match_fermi_level_checked(&e, &a, 0.0, 300.0);
        assert_eq!(below.status, FermiLevelStatus::BelowInterval);
        let none = match_fermi_level_checked(&e, &vec![0.0; e.len()], 1.0, 300.0);
        assert_eq!(none.status, FermiLevelStatus::NoStates);
    }

    /// The tabulated count agrees with one exponential per energy at every
    /// µ of the search interval and beyond it: each term's
    /// exp((E_k − µ)/k_B T) differs between the two forms by the rounding
    /// of an argument of up to 700 (≈ 1e-13 relative), so the counts agree
    /// to 1e-12 relative. The slope is compared with f(1 − f) written
    /// without cancellation (the per-energy form's 1 − f loses digits
    /// where f is near 1; the slope only steers the search). A grid wider than TABLE_SPAN k_B T
    /// is not tabulated and gives the per-energy numbers exactly.
    #[test]
    fn tabulated_count_agrees_with_the_exponential_per_energy() {
        let e = grid(801, 5e-4);
        let a: Vec<f64> = e.iter().map(|&x| 1.0 + (40.0 * x).sin().abs()).collect();
        for t in [300.0, 8.0, 1000.0] {
            let table = FermiTable::new(&e, t);
            assert_eq!(table.ratio.len(), e.len(), "T {t} K is tabulated");
            let kt = thermal_energy_ev(t);
            let (lo, hi) = fermi_search_interval(&e, t);
            for j in -20..=120 {
                let mu = lo + (hi - lo) * j as f64 / 100.0;
                let (n, dn) = table.count_and_slope(&e, &a, mu);
                let n0 = count_and_slope(&e, &a, mu, kt).0;
                // f(1 − f) = q/(1 + q)² with q = exp(−|E − µ|/k_B T), without
                // the cancellation of 1 − f where f is near 1.
                let dn0 = e
                    .iter()
                    .zip(&a)
                    .map(|(&x, &w)| {
                        let q = (-((x - mu) / kt).abs()).exp();
                        w * q / ((1.0 + q) * (1.0 + q))
                    })
                    .sum::<f64>()
                    / kt;
                assert!(n.is_finite() && dn.is_finite(), "T {t} K, µ {mu}");
                assert!(
                    (n - n0).abs() <= 1e-12 * n0.abs().max(1e-300),
                    "T {t} K, µ {mu}: {n} vs {n0}"
                );
                // Beyond the interval the per-energy form takes over, slope
                // and all.
                let inside = (0..=100).contains(&j);
                assert!(
                    !inside || (dn - dn0).abs() <= 1e-12 * dn0.abs().max(1e-300),
                    "T {t} K, µ {mu}: {dn} vs {dn0}"
                );
            }
        }
        let cold = FermiTable::new(&e, 4.0);
        assert!(cold.ratio.is_empty());
        let kt = thermal_energy_ev(4.0);
        for mu in [-0.3, -0.1, 0.05, 0.3] {
            assert_eq!(
                cold.count_and_slope(&e, &a, mu),
                count_and_slope(&e, &a, mu, kt)
            );
        }
    }

    /// Cells beyond the shared tables (more distinct temperatures than
    /// SHARED_TABLES) are matched with a table built for them: the same
    /// numbers as the shared ones.
    #[test]
    fn many_cell_temperatures_match_as_few() {
        let e = grid(401, 1e-3);
        let a: Vec<f64> = e.iter().map(|&x| (x + 0.25).sqrt()).collect();
        let temps: Vec<f64> = (0..20).map(|i| 250.0 + 5.0 * i as f64).collect();
        let tables = FermiTables::new(&e, &temps);
        assert_eq!(tables.tables.len(), SHARED_TABLES);
        let target = 0.4 * a.iter().sum::<f64>();
        for (i, &t) in temps.iter().enumerate() {
            let m = tables.match_cell(i, &e, &a, target, t);
            let own = match_fermi_level_in(&FermiTable::new(&e, t), &e, &a, target);
            assert_eq!(m, own, "cell {i}");
            assert_eq!(m.status, FermiLevelStatus::Matched);
        }
    }
}
