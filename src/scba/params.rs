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

impl Default for Mixing {
    fn default() -> Self {
        Mixing::Anderson {
            depth: 6,
            damping: 0.8,
        }
    }
}

/// Parameters of the SCBA loop.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
pub struct ScbaParams {
    /// Relative tolerance on Σ^in_0 and Σ^out_0 and on the terminal currents.
    pub tolerance: f64,
    /// Absolute current floor (A) added to tolerance·|I_α|: equilibrium
    /// currents are zero, so a purely relative test never ends.
    pub current_floor_a: f64,
    /// Iteration limit; reaching it is a flagged, non-converged result.
    pub max_iterations: usize,
    /// Mixing scheme.
    pub mixing: Mixing,
}

impl Default for ScbaParams {
    fn default() -> Self {
        Self {
            tolerance: 1e-7,
            current_floor_a: 1e-18,
            max_iterations: 300,
            mixing: Mixing::default(),
        }
    }
}
