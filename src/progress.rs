//! Progress of long computations, reported through one observer trait.
//!
//! The Born loop reports each iteration, the joint electron–lattice loop
//! each outer iteration, generator and cooler curves each
//! solve, sweeps each finished grid point. Solvers never print: whoever
//! runs them passes an [`Observer`] (the command line draws progress bars
//! with it; tests and library users pass [`Silent`]). Every method has a
//! default that does nothing, so an observer implements only the events it
//! wants. An observer can also stop a Born loop between iterations
//! ([`Observer::cancelled`]).

/// What one Born iteration did.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
#[non_exhaustive]
pub struct IterationRecord {
    /// Iteration number (1-based).
    pub iteration: usize,
    /// Relative change of (Σ^in_0, Σ^out_0) between input and output.
    pub residual: f64,
    /// Current from the left lead with the input Σ0 (A).
    pub current_left_a: f64,
    /// Current from the right lead with the input Σ0 (A).
    pub current_right_a: f64,
    /// Largest change of a terminal current since the last iteration,
    /// relative to tol·|I| + floor (converged when ≤ 1).
    pub current_change: f64,
    /// Which update was used next ("linear", "anderson", "restart").
    pub step: &'static str,
}

/// What one outer iteration of the joint electron–lattice loop did (one
/// Born solve at a lattice-temperature profile, then the lattice's answer).
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
#[non_exhaustive]
pub struct LatticeIterationRecord {
    /// Outer iteration number (1-based).
    pub iteration: usize,
    /// Largest change of the lattice temperature the lattice asked for,
    /// max_s |T_L,s(response) − T_L,s(used)| (K).
    pub temperature_change_k: f64,
    /// Born iterations this outer iteration's solve needed.
    pub born_iterations: usize,
    /// Whether that Born solve converged.
    pub born_converged: bool,
    /// Total lattice power Σ_s P_s of that solve (W).
    pub lattice_power_w: f64,
}

/// A solved point of a generator or cooler curve, with what a progress
/// line needs to say about it.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
#[non_exhaustive]
pub struct CurvePointRecord {
    /// What the solve was for ("range", "curve", "open circuit", …).
    pub stage: &'static str,
    /// Bias or load voltage V (V).
    pub voltage_v: f64,
    /// Current I = I_1 (A).
    pub current_a: f64,
    /// Whether the Born loop (and with electrostatics the potential)
    /// converged.
    pub converged: bool,
    /// With electrostatics: outer iterations of the point's potential.
    pub outer_iterations: Option<usize>,
    /// With electrostatics: the computed drop φ(first cell) − φ(last
    /// cell) (V).
    pub potential_drop_v: Option<f64>,
    /// Wall time of the solve (s).
    pub seconds: f64,
}

/// A finished point of a sweep, reported after the point is stored.
#[derive(Clone, Copy, Debug, PartialEq)]
#[non_exhaustive]
pub struct PointEvent {
    /// Grid index of the point.
    pub index: usize,
    /// Points finished so far (this run and earlier runs).
    pub finished: usize,
    /// Points in the grid.
    pub total: usize,
    /// True when computed in this run, false when found in the store.
    pub computed: bool,
    /// Whether the point's Born loop converged.
    pub converged: bool,
}

/// Sees the progress of long computations (progress bars, logs).
///
/// A sweep runs its points on several threads but hands its events to the
/// observer one at a time (it holds the observer behind a lock), so an
/// implementation needs no synchronisation of its own; it must be `Send`
/// to be given to a sweep.
pub trait Observer {
    /// A Born iteration finished.
    fn iteration(&mut self, _record: &IterationRecord) {}
    /// The Born loop starts the level on every `factor`-th energy of the
    /// grid (`energies` of them); 1 is the grid itself. Heard only when
    /// coarse levels run, before each level.
    fn born_level(&mut self, _factor: usize, _energies: usize) {}
    /// An outer iteration of the joint electron–lattice loop finished.
    fn lattice_iteration(&mut self, _record: &LatticeIterationRecord) {}
    /// A solve of a generator or cooler curve at `voltage_v` (V) finished;
    /// `stage` says what it was for ("open circuit", "curve", …).
    fn curve_solved(&mut self, _stage: &'static str, _voltage_v: f64) {}
    /// The same solve as [`Observer::curve_solved`] (reported right after
    /// it), with its current, convergence, potential and wall time.
    fn curve_point(&mut self, _record: &CurvePointRecord) {}
    /// A sweep point is stored (computed now or found from an earlier run).
    fn point_finished(&mut self, _event: &PointEvent) {}
    /// Whether whoever runs the computation asked it to stop (an interrupt
    /// from the user). The Born loop asks once per iteration, right after
    /// reporting it, and stops with an error that says it was cancelled;
    /// nothing it computed is returned.
    fn cancelled(&self) -> bool {
        false
    }
}

/// The observer that ignores every event.
#[derive(Clone, Copy, Debug, Default)]
pub struct Silent;
impl Observer for Silent {}
