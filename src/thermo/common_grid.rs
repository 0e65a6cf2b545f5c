//! One energy grid for all the solves that make up one result.
//!
//! A case's default grid follows its operating point: the step is
//! kB·T_min/10, the window starts half a step above the lowest band edge and
//! ends 20 kB·T_max (plus the largest phonon energy) above the higher Fermi
//! level, and each phonon energy is snapped to a whole number of steps. The
//! runs of one finite-difference set, or the load points of one curve, sit
//! at different temperatures and voltages, so each would get a slightly
//! different grid. A difference quotient between two grids then measures
//! the change of grid as well as the change of operating point, and a
//! self-energy cannot be carried from one run to the next.
//!
//! [`CommonGrid::choose`] resolves every operating point with the case's
//! own grid settings and takes their envelope: the finest step, the lowest
//! first energy and the highest last energy (to within a quarter step).
//! [`CommonGrid::apply`] writes that grid into a case as explicit
//! `grid.step_ev`, `grid.min_ev` and `grid.max_ev`, so that every run built
//! from it has the same energies and the same snapped phonon energies. When
//! the runs already share one grid (for instance because the case gives all
//! three grid keys), the case is left as it is.

use crate::case::{Case, CaseError, CaseKey};
use crate::grid::EnergyGrid;
use crate::model::Problem;

/// The grid keys written into the case when the runs' own grids differ.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
pub struct GridKeys {
    /// `grid.step_ev` (eV).
    pub step_ev: f64,
    /// `grid.min_ev` (eV).
    pub min_ev: f64,
    /// `grid.max_ev` (eV).
    pub max_ev: f64,
}

/// The energy grid shared by every solve of one result.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct CommonGrid {
    /// The grid.
    pub grid: EnergyGrid,
    /// Last energy of the grid (eV).
    pub max_ev: f64,
    /// Phonon energies as snapped to the grid (eV), one per mode.
    pub phonon_energies_ev: Vec<f64>,
    /// How many operating points the grid was chosen to cover.
    pub operating_points: usize,
    /// The keys written into the case; `None` when the operating points
    /// already shared one grid and the case was left unchanged.
    pub case_keys: Option<GridKeys>,
}

/// The grid and snapped phonon energies of a problem.
fn grid_of(p: &Problem) -> (EnergyGrid, Vec<f64>) {
    (
        p.grid.clone(),
        p.scattering.phonons.iter().map(|m| m.energy_ev).collect(),
    )
}

impl CommonGrid {
    /// The envelope of the grids of `cases` (each the same device at another
    /// operating point). `cases` must not be empty.
    pub fn choose(cases: &[Case]) -> Result<CommonGrid, CaseError> {
        let mut grids = Vec::with_capacity(cases.len());
        for c in cases {
            grids.push(grid_of(&c.resolve()?.problem));
        }
        let Some(first) = grids.first().cloned() else {
            return Err(CaseError {
                origin: String::from("(common grid)"),
                location: None,
                key: None,
                message: "expected at least one operating point to choose a grid for, found none"
                    .into(),
                suggestion: None,
                kind: crate::case::CaseErrorKind::Invalid,
            });
        };
        if grids.iter().all(|g| *g == first) {
            return Ok(CommonGrid {
                max_ev: first.0.max_ev(),
                grid: first.0,
                phonon_energies_ev: first.1,
                operating_points: cases.len(),
                case_keys: None,
            });
        }
        let step = grids
            .iter()
            .map(|g| g.0.step_ev)
            .fold(f64::INFINITY, f64::min);
        let min = grids
            .iter()
            .map(|g| g.0.min_ev)
            .fold(f64::INFINITY, f64::min);
        let last = grids
            .iter()
            .map(|g| g.0.max_ev())
            .fold(f64::NEG_INFINITY, f64::max);
        // A quarter step below the highest last energy: a grid from `min`
        // with this step then ends at that energy when the grids are aligned
        // (rounding cannot add a point), and within a quarter step of it
        // otherwise.
        let keys = GridKeys {
            step_ev: step,
            min_ev: min,
            max_ev: last - 0.25 * step,
        };
        let fixed = apply_keys(&cases[0], &keys)?;
        let (grid, phonons) = grid_of(&fixed.resolve()?.problem);
        Ok(CommonGrid {
            max_ev: grid.max_ev(),
            grid,
            phonon_energies_ev: phonons,
            operating_points: cases.len(),
            case_keys: Some(keys),
        })
    }

    /// `case` with this grid written into it (unchanged when no keys are
    /// needed).
    pub fn apply(&self, case: &Case) -> Result<Case, CaseError> {
        match &self.case_keys {
            Some(k) => apply_keys(case, k),
            None => Ok(case.clone()),
        }
    }

    /// True when `problem` runs on this grid with these phonon energies.
    pub fn matches(&self, problem: &Problem) -> bool {
        let (g, ph) = grid_of(problem);
        g == self.grid && ph == self.phonon_energies_ev
    }

    /// The grid in words: step, window, points and snapped phonon energies.
    pub fn describe(&self) -> String {
        let mut s = format!(
            "step {:.4} meV, window {:.4} to {:.4} eV ({} points)",
            self.grid.step_ev * 1e3,
            self.grid.min_ev,
            self.max_ev,
            self.grid.count
        );
        if !self.phonon_energies_ev.is_empty() {
            let list: Vec<String> = self
                .phonon_energies_ev
                .iter()
                .map(|e| format!("{:.4}", e * 1e3))
                .collect();
            s.push_str(&format!(", ħω snapped to {} meV", list.join(", ")));
        }
        if self.case_keys.is_none() {
            s.push_str(" (already shared by every operating point)");
        }
        s
    }
}

fn apply_keys(case: &Case, k: &GridKeys) -> Result<Case, CaseError> {
    case.with(CaseKey::GridStep, k.step_ev)?
        .with(CaseKey::GridMin, k.min_ev)?
        .with(CaseKey::GridMax, k.max_ev)
}
