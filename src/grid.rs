//! The uniform energy grid E_k = E_min + k ΔE.
//!
//! Every integral over energy is the plain sum Σ_k g(E_k) ΔE (no end
//! weights): with this rule the phonon in/out exchange conserves particles
//! and energy exactly on the grid, because emission from E_k to E_k−n lands
//! on a grid point and is counted with the same weight as the absorption
//! that mirrors it.

/// A uniform energy grid.
#[derive(Clone, Debug, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct EnergyGrid {
    /// First energy (eV).
    pub min_ev: f64,
    /// Step ΔE (eV).
    pub step_ev: f64,
    /// Number of points.
    pub count: usize,
}

impl EnergyGrid {
    /// A grid from `min_ev` with `count` points spaced `step_ev`.
    pub fn new(min_ev: f64, step_ev: f64, count: usize) -> Self {
        Self {
            min_ev,
            step_ev,
            count,
        }
    }

    /// A grid that covers [min_ev, max_ev] with step `step_ev` (the last
    /// point is the first one at or above `max_ev`).
    pub fn covering(min_ev: f64, max_ev: f64, step_ev: f64) -> Self {
        let count = ((max_ev - min_ev) / step_ev).ceil().max(0.0) as usize + 1;
        Self::new(min_ev, step_ev, count)
    }

    /// Energy of point k (eV).
    #[inline]
    pub fn energy(&self, k: usize) -> f64 {
        self.min_ev + k as f64 * self.step_ev
    }

    /// Last energy (eV).
    pub fn max_ev(&self) -> f64 {
        self.energy(self.count.saturating_sub(1))
    }

    /// All energies.
    pub fn energies(&self) -> Vec<f64> {
        (0..self.count).map(|k| self.energy(k)).collect()
    }

    /// Number of grid steps nearest to `energy_ev` (for snapping phonon
    /// energies); at least 1.
    pub fn steps_for(&self, energy_ev: f64) -> usize {
        ((energy_ev / self.step_ev).round() as usize).max(1)
    }

    /// The plain-sum integral Σ_k g_k ΔE.
    pub fn integrate(&self, values: impl IntoIterator<Item = f64>) -> f64 {
        values.into_iter().sum::<f64>() * self.step_ev
    }
}
