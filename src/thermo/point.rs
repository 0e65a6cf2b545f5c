//! One operating point of a case: the seam every command that solves more
//! than one point (coefficients, generator, cooler, sweep, screen) goes
//! through.
//!
//! Without an electrostatics description the point is the plain Born solve
//! of the problem. With one, the electrostatic potential of the device's
//! own charge is solved again at that point together with the transport
//! ([`crate::electrostatics::solve_warm`]): the potential the charge puts
//! there under that bias and those temperatures, never the imposed one.
//! Either way a nearby point's converged Σ0 and (with electrostatics) its
//! potential may be offered as a start; a start that does not fit the
//! problem (another device size or energy grid) is ignored.

use crate::electrostatics::{self, Electrostatics, ElectrostaticsReport};
use crate::model::Problem;
use crate::progress::Observer;
use crate::scattering::ScatteringSelfEnergy;
use crate::scba::{ScbaParams, Solution, SolveError};

/// A start offered to the solve of a point, taken from a nearby point.
#[derive(Clone, Copy, Debug, Default)]
pub struct PointStart<'a> {
    /// Converged Σ0 of a nearby point.
    pub sigma: Option<&'a ScatteringSelfEnergy>,
    /// Converged electrostatic potential energy U_es (eV, one value per
    /// cell) of a nearby point.
    pub potential_ev: Option<&'a [f64]>,
}

impl<'a> PointStart<'a> {
    /// Start from `sigma` (no potential).
    pub fn sigma(sigma: Option<&'a ScatteringSelfEnergy>) -> Self {
        Self {
            sigma,
            potential_ev: None,
        }
    }
}

/// What the self-consistent electrostatics adds to a point.
#[derive(Clone, Debug)]
pub struct PointElectrostatics {
    /// U_es of each cell (eV).
    pub potential_ev: Vec<f64>,
    /// Electrons of each cell as the Poisson equation counts them.
    pub electrons: Vec<f64>,
    /// The outer loop's convergence record.
    pub report: ElectrostaticsReport,
}

impl PointElectrostatics {
    /// The computed drop φ(first cell) − φ(last cell) (V), which is
    /// U_es(last) − U_es(first) in eV.
    pub fn potential_drop_v(&self) -> f64 {
        let u = &self.potential_ev;
        u.last().copied().unwrap_or(0.0) - u.first().copied().unwrap_or(0.0)
    }
}

/// A solved operating point.
#[derive(Clone, Debug)]
pub struct PointSolution {
    /// The transport solution (with electrostatics: at the computed
    /// potential, which its problem carries).
    pub solution: Solution,
    /// The computed potential and its record, with electrostatics.
    pub electrostatics: Option<PointElectrostatics>,
}

impl PointSolution {
    /// The Born loop converged and, with electrostatics, so did the
    /// potential.
    pub fn converged(&self) -> bool {
        self.solution.report.converged
            && self
                .electrostatics
                .as_ref()
                .is_none_or(|e| e.report.converged)
    }

    /// The start this point offers to its neighbours: its Σ0 (not for a
    /// coherent device, whose Σ0 is empty) and its potential.
    pub fn as_start(&self) -> PointStart<'_> {
        let coherent = self.solution.problem.scattering.is_coherent();
        PointStart {
            sigma: (!coherent).then_some(&self.solution.sigma),
            potential_ev: self
                .electrostatics
                .as_ref()
                .map(|e| e.potential_ev.as_slice()),
        }
    }
}

/// Solve `problem` at its operating point: the Born loop, and with
/// `electrostatics` the potential of the device's charge with it. The
/// problem carries the imposed potential (for electrostatics: without any
/// bias drop inside the device, as a resolved case gives it).
pub fn solve_point(
    problem: &Problem,
    electrostatics: Option<&Electrostatics>,
    params: &ScbaParams,
    start: PointStart<'_>,
    observer: &mut dyn Observer,
) -> Result<PointSolution, SolveError> {
    let sigma = start
        .sigma
        .filter(|w| w.sites == problem.sites() && w.energies() == problem.grid.count);
    let Some(es) = electrostatics else {
        let solution = crate::scba::solve(problem, params, sigma, observer)?;
        return Ok(PointSolution {
            solution,
            electrostatics: None,
        });
    };
    let potential = start
        .potential_ev
        .filter(|u| u.len() == problem.device.cells());
    let sc = electrostatics::solve_warm(problem, es, params, None, potential, sigma, observer)?;
    Ok(PointSolution {
        solution: sc.solution,
        electrostatics: Some(PointElectrostatics {
            potential_ev: sc.potential_ev,
            electrons: sc.electrons,
            report: sc.report,
        }),
    })
}
