//! Hermitian part of a local self-energy from its broadening.
//!
//! With Γ0 constant on each grid bin [E_k − ΔE/2, E_k + ΔE/2] the principal
//! value P(E) = (1/2π) P∫ Γ0(E')/(E − E') dE' is exactly
//! P(E_k) = (1/2π) Σ_k' K(k − k') Γ0(E_k'), K(m) = ln|(m + ½)/(m − ½)|,
//! a linear convolution done by FFT with zero padding (no wrap-around);
//! Γ0 beyond the grid counts as zero.

use crate::C64;
use rustfft::{Fft, FftPlanner};
use std::sync::Arc;

/// A prepared convolution for a fixed number of energies.
pub struct HilbertTransform {
    n: usize,
    len: usize,
    kernel_hat: Vec<C64>,
    forward: Arc<dyn Fft<f64>>,
    inverse: Arc<dyn Fft<f64>>,
}

impl std::fmt::Debug for HilbertTransform {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("HilbertTransform")
            .field("n", &self.n)
            .finish()
    }
}

/// K(m) = ln|(m + ½)/(m − ½)|; K(0) = 0.
pub fn kernel(m: i64) -> f64 {
    if m == 0 {
        0.0
    } else {
        let m = m as f64;
        ((m + 0.5) / (m - 0.5)).abs().ln()
    }
}

impl HilbertTransform {
    /// Plan for `n` energies.
    pub fn new(n: usize) -> Self {
        let len = (3 * n).max(2).next_power_of_two();
        let mut planner = FftPlanner::new();
        let forward = planner.plan_fft_forward(len);
        let inverse = planner.plan_fft_inverse(len);
        let mut k = vec![C64::new(0.0, 0.0); len];
        for m in -(n as i64 - 1)..=(n as i64 - 1) {
            k[(m + n as i64 - 1) as usize] =
                C64::new(kernel(m) / (2.0 * std::f64::consts::PI), 0.0);
        }
        forward.process(&mut k);
        Self {
            n,
            len,
            kernel_hat: k,
            forward,
            inverse,
        }
    }

    /// Transform one series of `n` values.
    pub fn apply(&self, gamma: &[f64]) -> Vec<f64> {
        assert_eq!(gamma.len(), self.n);
        let mut buf = vec![C64::new(0.0, 0.0); self.len];
        for (b, g) in buf.iter_mut().zip(gamma) {
            *b = C64::new(*g, 0.0);
        }
        self.forward.process(&mut buf);
        for (b, k) in buf.iter_mut().zip(&self.kernel_hat) {
            *b *= k;
        }
        self.inverse.process(&mut buf);
        let scale = 1.0 / self.len as f64;
        (0..self.n)
            .map(|k| buf[k + self.n - 1].re * scale)
            .collect()
    }

    /// Transform each column s of a flat (energies × sites) array.
    pub fn apply_columns(&self, gamma: &[f64], energies: usize, sites: usize) -> Vec<f64> {
        use rayon::prelude::*;
        let cols: Vec<Vec<f64>> = (0..sites)
            .into_par_iter()
            .map(|s| {
                let col: Vec<f64> = (0..energies).map(|k| gamma[k * sites + s]).collect();
                self.apply(&col)
            })
            .collect();
        let mut out = vec![0.0; energies * sites];
        for (s, col) in cols.iter().enumerate() {
            for k in 0..energies {
                out[k * sites + s] = col[k];
            }
        }
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn fft_matches_direct_sum() {
        let n = 37;
        let g: Vec<f64> = (0..n)
            .map(|k| ((k as f64) * 0.37).sin().abs() + 0.1)
            .collect();
        let h = HilbertTransform::new(n);
        let fast = h.apply(&g);
        for (k, f) in fast.iter().enumerate() {
            let direct: f64 = (0..n)
                .map(|j| kernel(k as i64 - j as i64) * g[j])
                .sum::<f64>()
                / (2.0 * std::f64::consts::PI);
            assert!((f - direct).abs() < 1e-13, "{k}: {f} vs {direct}");
        }
    }
}
