//! Coarse start: solve the same problem on coarser energy grids first.
//!
//! The slowest modes of the Born loop are the device's energy-relaxation
//! and diffusion modes, which are smooth in energy. When every phonon
//! energy is a whole number of coarse steps, the grid of every k-th
//! energy is a closed problem of its own (Σ0 at E needs G only at E ± ħω),
//! costing 1/k of a fine iteration. Its converged Σ0, interpolated
//! linearly in energy onto the next finer grid, starts that grid's loop
//! near the fixed point in those slow modes; the finest grid then runs its
//! usual loop with its usual stopping tests, so the answer is the fixed
//! point of the fine grid whatever the coarse levels gave.
//!
//! Σ^r_0 and Σ^in_0 are interpolated; Σ^out_0 = Γ0 − Σ^in_0 is not stored
//! and, being linear in both, is the interpolation of the coarse Σ^out_0.

use super::{LeadTable, ScbaParams, SolveError, solve_in_lattice};
use crate::grid::EnergyGrid;
use crate::model::Problem;
use crate::progress::Observer;
use crate::scattering::ScatteringSelfEnergy;

/// Size (energies × orbital sites) from which [`super::CoarseStart::Auto`]
/// turns the coarse start on. Measured (docs/performance.md, "Coarse
/// start"): on the 2000-cell, 2001-energy chain (4.0·10⁶) the coarse start
/// cost 17.3 fine-iteration equivalents against 22 plain, on the
/// 5000-cell, 2501-energy proxy 27.6 against 52. Smaller problems keep the
/// plain loop: their loops are short and the gain there was not measured.
pub const AUTO_MIN_VALUES: usize = 4_000_000;

/// A coarse level keeps at least this many of its steps in every phonon
/// energy, so that the phonon exchange it solves still resolves the
/// energy relaxation.
pub const MIN_PHONON_STEPS: usize = 8;

/// A coarse level keeps at least this many energies.
pub const MIN_ENERGIES: usize = 64;

/// The smallest factor between two levels: a factor of 2 or 3 saves too
/// little per level to pay for a level's extra iterations.
pub const MIN_FACTOR: usize = 4;

/// The tolerance of a coarse level is the fine tolerance times this (at
/// most 1e-3): the fine loop removes what is left. On the proxy, coarse
/// levels at 1e-5 instead of 1e-7 saved 4 fine-iteration equivalents and
/// left the fine iteration count unchanged (22).
pub const TOLERANCE_FACTOR: f64 = 100.0;

/// What one coarse level did.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct CoarseLevel {
    /// Every `factor`-th energy of the fine grid.
    pub factor: usize,
    /// Energies of this level.
    pub energies: usize,
    /// Born iterations of this level.
    pub iterations: usize,
    /// Whether this level met its (looser) tolerance.
    pub converged: bool,
}

/// The coarse levels the setting asks for on `problem`, coarsest first, as
/// factors k of the fine step ([`factors`]). Empty when off, for a problem
/// without phonons, or when the grid has no such level.
pub fn levels(problem: &Problem, params: &ScbaParams) -> Vec<usize> {
    let phonons = &problem.scattering.phonons;
    let on = match params.coarse_start {
        super::CoarseStart::Off => false,
        super::CoarseStart::On => true,
        super::CoarseStart::Auto => problem.grid.count * problem.sites() >= AUTO_MIN_VALUES,
    };
    if !on || phonons.is_empty() || problem.scattering.is_coherent() {
        return Vec::new();
    }
    let steps: Vec<usize> = phonons.iter().map(|m| m.steps).collect();
    factors(problem.grid.count.saturating_sub(1), &steps)
}

/// Coarse factors, coarsest first, for a grid of `steps` steps and phonons
/// of `phonon_steps` steps: each factor divides `steps` and every phonon's
/// steps, consecutive factors differ by at least [`MIN_FACTOR`], and each
/// level keeps [`MIN_PHONON_STEPS`] steps per phonon and [`MIN_ENERGIES`]
/// energies.
pub fn factors(steps: usize, phonon_steps: &[usize]) -> Vec<usize> {
    let mut common = phonon_steps.iter().fold(steps, |g, &m| gcd(g, m));
    let least_phonon = phonon_steps.iter().copied().min().unwrap_or(0);
    let mut out = Vec::new();
    let mut k = 1;
    while let Some(d) = (MIN_FACTOR..=common).find(|d| common.is_multiple_of(*d)) {
        let next = k * d;
        if least_phonon / next < MIN_PHONON_STEPS || steps / next + 1 < MIN_ENERGIES {
            break;
        }
        out.push(next);
        k = next;
        common /= d;
    }
    out.reverse();
    out
}

fn gcd(a: usize, b: usize) -> usize {
    if b == 0 { a } else { gcd(b, a % b) }
}

/// `problem` on every `k`-th energy of its grid, with the phonon energies
/// in the coarse steps. `k` must divide the steps of the grid and of every
/// phonon.
pub fn coarse_problem(problem: &Problem, k: usize) -> Problem {
    let g = &problem.grid;
    let mut p = problem.clone();
    p.grid = EnergyGrid::new(g.min_ev, g.step_ev * k as f64, (g.count - 1) / k + 1);
    for m in &mut p.scattering.phonons {
        m.steps /= k;
    }
    p
}

/// The lead self-energies of every `k`-th energy.
fn coarse_leads(leads: &LeadTable, k: usize) -> LeadTable {
    LeadTable {
        left: leads.left.iter().step_by(k).cloned().collect(),
        right: leads.right.iter().step_by(k).cloned().collect(),
    }
}

/// Σ0 of a grid with `energies` points, interpolated linearly in energy
/// from `coarse`, the Σ0 of its every `k`-th point (point j·k takes
/// coarse point j exactly).
pub fn interpolate(
    coarse: &ScatteringSelfEnergy,
    k: usize,
    energies: usize,
) -> ScatteringSelfEnergy {
    let s = coarse.sites;
    let mut out = ScatteringSelfEnergy {
        sites: s,
        retarded: Vec::with_capacity(energies * s),
        inscatter: Vec::with_capacity(energies * s),
        blocks: coarse.blocks,
    };
    for e in 0..energies {
        let (j, r) = (e / k, e % k);
        let t = r as f64 / k as f64;
        let (a, b) = (j * s, (j + usize::from(r > 0)) * s);
        for i in 0..s {
            let (ra, rb) = (coarse.retarded[a + i], coarse.retarded[b + i]);
            out.retarded.push(ra * (1.0 - t) + rb * t);
            let (ia, ib) = (coarse.inscatter[a + i], coarse.inscatter[b + i]);
            out.inscatter.push(ia * (1.0 - t) + ib * t);
        }
    }
    out
}

/// Run the coarse levels of `factors` (coarsest first) and return the
/// start of the fine loop: the last level's Σ0 interpolated onto the fine
/// grid. The observer hears which level runs and each level's iterations.
pub(super) fn start(
    problem: &Problem,
    leads: &LeadTable,
    lattice_temperature_k: Option<&[f64]>,
    params: &ScbaParams,
    factors: &[usize],
    observer: &mut dyn Observer,
) -> Result<(ScatteringSelfEnergy, Vec<CoarseLevel>), SolveError> {
    let tolerance = (params.tolerance * TOLERANCE_FACTOR)
        .min(1e-3)
        .max(params.tolerance);
    let coarse_params = params
        .with_tolerance(tolerance)
        .with_coarse_start(super::CoarseStart::Off);
    let mut sigma: Option<ScatteringSelfEnergy> = None;
    let mut previous = 0;
    let mut done = Vec::new();
    for &k in factors {
        let p = coarse_problem(problem, k);
        let l = coarse_leads(leads, k);
        let warm = sigma
            .take()
            .map(|s| interpolate(&s, previous / k, p.grid.count));
        observer.born_level(k, p.grid.count);
        let sol = solve_in_lattice(
            &p,
            &l,
            lattice_temperature_k,
            &coarse_params,
            warm.as_ref(),
            observer,
        )?;
        done.push(CoarseLevel {
            factor: k,
            energies: p.grid.count,
            iterations: sol.report.iterations,
            converged: sol.report.converged,
        });
        sigma = Some(sol.sigma);
        previous = k;
    }
    observer.born_level(1, problem.grid.count);
    let s = sigma.expect("start runs at least one level");
    Ok((interpolate(&s, previous, problem.grid.count), done))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::C64;

    #[test]
    fn factors_divide_the_grid_and_every_phonon() {
        // The proxy: 2500 steps, ħω = 180 steps; gcd 20 = 4·5.
        assert_eq!(factors(2500, &[180]), vec![20, 4]);
        // The 2000-cell chain: 2000 steps, 144 per phonon; gcd 16 = 4·4.
        assert_eq!(factors(2000, &[144]), vec![16, 4]);
        // The 10⁴ × 10⁴ case: 10⁴ steps, 720 per phonon; gcd 80 = 4·4·5.
        assert_eq!(factors(10_000, &[720]), vec![80, 16, 4]);
        // Two phonons: the gcd of both (36 and 60 → 12 = 4·3, and 3 < 4).
        assert_eq!(factors(1200, &[36, 60]), vec![4]);
        // ħω of 7 steps has no divisor ≥ 4 but itself, which leaves 1 step.
        assert!(factors(700, &[7]).is_empty());
        // 40 steps per phonon: factor 4 keeps 10 ≥ 8, factor 8 would keep 5.
        assert_eq!(factors(400, &[40]), vec![4]);
        // Too few energies: 200 steps / 4 = 51 < 64 energies.
        assert!(factors(200, &[40]).is_empty());
    }

    #[test]
    fn interpolation_keeps_coarse_points_and_is_linear_between() {
        // Two sites, coarse energies 0..4; values linear in energy plus a
        // kink at coarse point 2, so a straight line is reproduced exactly
        // and a kink lands where it is.
        let sites = 2;
        let coarse_n = 4;
        let f = |j: usize, i: usize| {
            let x = j as f64;
            (1.0 + x + i as f64, if j >= 2 { 3.0 * x } else { x })
        };
        let mut c = ScatteringSelfEnergy::zeros(coarse_n, sites);
        for j in 0..coarse_n {
            for i in 0..sites {
                let (a, b) = f(j, i);
                c.retarded[j * sites + i] = C64::new(b, -a);
                c.inscatter[j * sites + i] = a;
            }
        }
        let k = 4;
        let n = (coarse_n - 1) * k + 1;
        let fine = interpolate(&c, k, n);
        assert_eq!(fine.energies(), n);
        for e in 0..n {
            let x = e as f64 / k as f64;
            for i in 0..sites {
                let a = 1.0 + x + i as f64;
                // The kinked part: x below 1, 3x from 2 on, the chord
                // from 1 to 6 between coarse points 1 and 2.
                let b = if x <= 1.0 {
                    x
                } else if x >= 2.0 {
                    3.0 * x
                } else {
                    1.0 + 5.0 * (x - 1.0)
                };
                let idx = e * sites + i;
                assert!((fine.inscatter[idx] - a).abs() < 1e-14, "{e} {i}");
                assert!(
                    (fine.retarded[idx] - C64::new(b, -a)).norm() < 1e-14,
                    "{e} {i}"
                );
            }
        }
        // Coarse points are copied bit for bit.
        for j in 0..coarse_n {
            for i in 0..sites {
                assert_eq!(
                    fine.inscatter[j * k * sites + i],
                    c.inscatter[j * sites + i]
                );
                assert_eq!(fine.retarded[j * k * sites + i], c.retarded[j * sites + i]);
            }
        }
    }
}
