//! Settings of the self-consistent Born loop.

/// How the next Σ0 is formed from the last input and output.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
#[serde(tag = "kind", rename_all = "lowercase")]
pub enum Mixing {
    /// x ← x + α (F(x) − x).
    Linear {
        /// Mixing factor α in (0, 1].
        factor: f64,
    },
    /// Anderson acceleration (D. G. Anderson, J. ACM 12, 547 (1965);
    /// H. F. Walker, P. Ni, SIAM J. Numer. Anal. 49, 1715 (2011)) with a
    /// safeguard that falls back to damped linear mixing when a step
    /// increases the residual.
    Anderson {
        /// Number of previous iterates kept.
        depth: usize,
        /// Damping β applied to the Anderson update.
        damping: f64,
    },
}

impl Mixing {
    /// Default Anderson history depth.
    pub const DEFAULT_ANDERSON_DEPTH: usize = 6;
    /// Default Anderson damping β.
    pub const DEFAULT_ANDERSON_DAMPING: f64 = 1.0;
    /// Default factor α of linear mixing.
    pub const DEFAULT_LINEAR_FACTOR: f64 = 0.5;
}

impl Default for Mixing {
    fn default() -> Self {
        Mixing::Anderson {
            depth: Self::DEFAULT_ANDERSON_DEPTH,
            damping: Self::DEFAULT_ANDERSON_DAMPING,
        }
    }
}

/// How the Anderson mixer stores its history of residual differences and
/// steps. The residual and the base of each update stay in f64 either way,
/// so the fixed point, and so the converged answer, is the same.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum MixerHistory {
    /// In f32: half the memory and half the bytes streamed per iteration.
    Compact,
    /// In f64 (the default: on a device whose occupation is undetermined
    /// in places, the compact history let the loop wander longer before
    /// the watch stopped it).
    #[default]
    Full,
}

/// In which order the energies of one Born iteration are solved.
///
/// The phonon self-energy at E is built from G at E ± ħω only. Colour the
/// grid in bands of w steps (w = ħω / ΔE): band ⌊k/w⌋ even is red, odd is
/// black, so that every phonon couples red energies to black ones and back.
/// With `RedBlack`, an iteration solves the red energies with the current
/// Σ0, rebuilds Σ0 on the black energies from those fresh Green's functions,
/// then solves the black energies (red-black Gauss–Seidel ordering). One
/// iteration costs the same single pass over the grid as the simultaneous
/// order, but carries the phonon coupling twice: for this coupling pattern
/// the Jacobian's eigenvalues square (D. M. Young, Iterative Solution of
/// Large Linear Systems, Academic Press, 1971: for consistently ordered
/// systems Gauss–Seidel eigenvalues are the squares of the Jacobi ones).
/// The fixed point, and so the converged answer, is the same.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum EnergyOrder {
    /// Red-black when phonons give a two-colouring of the grid (every mode
    /// an odd multiple of the same number of steps), simultaneous otherwise.
    Auto,
    /// All energies from the same Σ0 (section 5 of the physics notes as
    /// written).
    Simultaneous,
    /// Red-black ordering whenever there are phonons; with modes that do
    /// not two-colour the grid it still converges to the same answer, with
    /// less gain.
    RedBlack,
}

/// Whether a Born loop started from Σ0 = 0 first solves the same problem
/// on coarser energy grids (see [`crate::scba::coarse`]).
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum CoarseStart {
    /// On for problems with phonons and at least
    /// [`crate::scba::coarse::AUTO_MIN_VALUES`] orbital-site energies,
    /// off otherwise.
    #[default]
    Auto,
    /// Never.
    Off,
    /// Whenever the grid has a coarser level (any size).
    On,
}

/// Parameters of the SCBA loop. Start from [`ScbaParams::default`] and
/// change what differs with the `with_…` methods (the struct may gain
/// settings, so it is not built field by field outside the crate).
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
#[non_exhaustive]
pub struct ScbaParams {
    /// Relative tolerance on Σ^in_0 and Σ^out_0 and on the terminal currents.
    pub tolerance: f64,
    /// Least absolute current (A) added to tolerance·|I_α| in the current
    /// test: equilibrium currents are zero, so a purely relative test never
    /// ends. The Born loop adds the larger of this and the rounding level
    /// of the current (the number of energies times the machine epsilon
    /// times the larger one-way flow of the two leads), so that a current
    /// that is rounding noise of the flows it is the difference of does not
    /// hold the loop once Σ0 has converged.
    pub current_floor_a: f64,
    /// Iteration limit; reaching it is a flagged, non-converged result.
    pub max_iterations: usize,
    /// Mixing scheme.
    pub mixing: Mixing,
    /// Order of the energies within an iteration.
    pub energy_order: EnergyOrder,
    /// Storage of the Anderson history.
    pub history: MixerHistory,
    /// Whether the loop first solves coarser energy grids
    /// ([`crate::scba::coarse`]).
    pub coarse_start: CoarseStart,
    /// Whether the loop also waits for the terminal currents to settle
    /// (true unless a caller turns it off): a Born solve whose only use is
    /// its density, such as an outer electrostatics iteration at a
    /// potential that is itself still moving, stops on the Σ0 residual
    /// alone. The current is the small difference of large one-way flows,
    /// so its relative change can stay above a loose tolerance long after
    /// Σ0, and with it the density, is as close as that tolerance asks.
    #[serde(skip)]
    pub settle_currents: bool,
}

impl ScbaParams {
    /// Default relative tolerance.
    pub const DEFAULT_TOLERANCE: f64 = 1e-7;
    /// Default absolute current floor (A).
    pub const DEFAULT_CURRENT_FLOOR_A: f64 = 1e-18;
    /// Default iteration limit.
    pub const DEFAULT_MAX_ITERATIONS: usize = 300;
}

impl Default for ScbaParams {
    fn default() -> Self {
        Self {
            tolerance: Self::DEFAULT_TOLERANCE,
            current_floor_a: Self::DEFAULT_CURRENT_FLOOR_A,
            max_iterations: Self::DEFAULT_MAX_ITERATIONS,
            mixing: Mixing::default(),
            energy_order: EnergyOrder::Auto,
            history: MixerHistory::default(),
            coarse_start: CoarseStart::default(),
            settle_currents: true,
        }
    }
}

impl ScbaParams {
    /// These settings with relative tolerance `tolerance`.
    pub fn with_tolerance(self, tolerance: f64) -> Self {
        Self { tolerance, ..self }
    }

    /// These settings with the current test on or off (see
    /// [`ScbaParams::settle_currents`]).
    pub fn with_settle_currents(self, settle_currents: bool) -> Self {
        Self {
            settle_currents,
            ..self
        }
    }

    /// These settings with absolute current floor `current_floor_a` (A).
    pub fn with_current_floor_a(self, current_floor_a: f64) -> Self {
        Self {
            current_floor_a,
            ..self
        }
    }

    /// These settings with iteration limit `max_iterations`.
    pub fn with_max_iterations(self, max_iterations: usize) -> Self {
        Self {
            max_iterations,
            ..self
        }
    }

    /// These settings with mixing scheme `mixing`.
    pub fn with_mixing(self, mixing: Mixing) -> Self {
        Self { mixing, ..self }
    }

    /// These settings with the Anderson history stored as `history`.
    pub fn with_history(self, history: MixerHistory) -> Self {
        Self { history, ..self }
    }

    /// These settings with coarse start `coarse_start`.
    pub fn with_coarse_start(self, coarse_start: CoarseStart) -> Self {
        Self {
            coarse_start,
            ..self
        }
    }

    /// These settings with energy order `energy_order`.
    pub fn with_energy_order(self, energy_order: EnergyOrder) -> Self {
        Self {
            energy_order,
            ..self
        }
    }
}
