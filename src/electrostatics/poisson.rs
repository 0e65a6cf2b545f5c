//! The discrete Poisson equation on the cells and its Newton solve on a
//! predicted density.
//!
//! With U the electrostatic potential energy (eV, numerically −φ in V),
//! ε_i the permittivity of cell i, A the cross-section, a the cell
//! spacing, D_i = (N_D − N_A)·A·a the net donors of the cell and n_i its
//! electrons, Poisson's equation integrated over cell i and written in
//! electrons per cell reads
//!
//! ```text
//! F_i = c_{i+½}(U_{i+1} − U_i) − c_{i−½}(U_i − U_{i−1}) − g_i (U_i − U_gate) − D_i + n_i = 0
//! c_{i+½} = ε_{i+½} A / (e a),   g_i = ε_i A a / (e λ²)
//! ```
//!
//! with ε_{i+½} the harmonic mean of the two cells (the one that keeps the
//! displacement flux continuous across a change of material), g_i = 0
//! without a gate, and at a charge-neutral end the missing flux term left
//! out (zero field). A fixed end replaces its row by U_end − U_fixed = 0.

use super::density::CellDensity;
use rayon::prelude::*;

/// The linear part of the discrete Poisson problem (see the module text).
#[derive(Clone, Debug)]
pub(crate) struct Poisson {
    /// c_{i+½} (electrons per eV), one per bond.
    pub coupling: Vec<f64>,
    /// g_i (electrons per eV), zero without a gate.
    pub screening: Vec<f64>,
    /// U_gate (eV).
    pub gate_ev: f64,
    /// D_i (electrons per cell).
    pub doping: Vec<f64>,
    /// Fixed potential energy of the left and right end cells (eV).
    pub fixed: (Option<f64>, Option<f64>),
}

/// The outcome of one Newton solve.
pub(crate) struct NewtonResult {
    pub potential: Vec<f64>,
    pub iterations: usize,
    pub converged: bool,
}

impl Poisson {
    fn cells(&self) -> usize {
        self.doping.len()
    }

    fn fixed_at(&self, i: usize) -> Option<f64> {
        let n = self.cells();
        match (i == 0, i + 1 == n) {
            (true, _) if self.fixed.0.is_some() => self.fixed.0,
            (_, true) if self.fixed.1.is_some() => self.fixed.1,
            _ => None,
        }
    }

    /// F_i for potential `u` and electrons `n` per cell; a fixed end's row
    /// is U_end − U_fixed.
    pub fn residual(&self, u: &[f64], n: &[f64]) -> Vec<f64> {
        let cells = self.cells();
        (0..cells)
            .map(|i| {
                if let Some(f) = self.fixed_at(i) {
                    return u[i] - f;
                }
                let mut r = -self.screening[i] * (u[i] - self.gate_ev) - self.doping[i] + n[i];
                if i + 1 < cells {
                    r += self.coupling[i] * (u[i + 1] - u[i]);
                }
                if i > 0 {
                    r -= self.coupling[i - 1] * (u[i] - u[i - 1]);
                }
                r
            })
            .collect()
    }

    /// The charge imbalance that F_i measures in a free cell, summed over
    /// all free cells: with charge-neutral ends and no gate this is
    /// −(total charge)/e, so it vanishes when Gauss's law holds.
    pub fn largest_residual(&self, u: &[f64], n: &[f64]) -> f64 {
        self.largest_free(&self.residual(u, n))
    }

    /// The largest |F_i| of the free (not fixed) cells.
    fn largest_free(&self, r: &[f64]) -> f64 {
        r.iter()
            .enumerate()
            .filter(|(i, _)| self.fixed_at(*i).is_none())
            .fold(0.0, |m, (_, r)| m.max(r.abs()))
    }

    /// Newton's method on F(U) = 0 with the electrons of the predictor:
    /// n_i = predicted n_i(U_i − U0_i), starting from U0 (the potential of
    /// the pass). Each step solves the tridiagonal Jacobian system and is
    /// halved until the sum of squared residuals falls; stops when the
    /// largest update is below `tolerance_ev`, or at once when no free
    /// cell is out of balance by more than `charge_floor` electrons (a
    /// device without doping and without electrons: any potential that
    /// keeps it empty is a solution, and the given one is kept).
    pub fn newton(
        &self,
        u0: &[f64],
        density: &CellDensity,
        tolerance_ev: f64,
        charge_floor: f64,
        max_iterations: usize,
    ) -> NewtonResult {
        let cells = self.cells();
        let eval = |u: &[f64]| -> (Vec<f64>, Vec<f64>) {
            // Cells are independent: counted in parallel (the count over
            // the energy grid is most of the cost of a Newton step).
            let (n, dn): (Vec<f64>, Vec<f64>) = (0..cells)
                .into_par_iter()
                .map(|i| density.predict(i, u[i] - u0[i]))
                .unzip();
            (self.residual(u, &n), dn)
        };
        let merit = |r: &[f64]| r.iter().map(|x| x * x).sum::<f64>();
        let mut u = u0.to_vec();
        let (mut r, mut dn) = eval(&u);
        if self.largest_free(&r) <= charge_floor {
            return NewtonResult {
                potential: u,
                iterations: 0,
                converged: true,
            };
        }
        for it in 1..=max_iterations {
            let step = self.newton_step(&r, &dn);
            let mut lambda = 1.0;
            let m0 = merit(&r);
            let (mut trial, mut tr, mut tdn): (Vec<f64>, Vec<f64>, Vec<f64>);
            loop {
                trial = u.iter().zip(&step).map(|(a, s)| a + lambda * s).collect();
                (tr, tdn) = eval(&trial);
                if merit(&tr) <= m0 || lambda < 1e-6 {
                    break;
                }
                lambda *= 0.5;
            }
            let largest = step.iter().fold(0.0, |m: f64, s| m.max(s.abs())) * lambda;
            (u, r, dn) = (trial, tr, tdn);
            if largest <= tolerance_ev {
                return NewtonResult {
                    potential: u,
                    iterations: it,
                    converged: true,
                };
            }
        }
        NewtonResult {
            potential: u,
            iterations: max_iterations,
            converged: false,
        }
    }

    /// Solve J δ = −F for the Newton update (J tridiagonal; Thomas
    /// algorithm). Without a gate and a fixed end the linear part leaves a
    /// uniform shift free; a diagonal term 10⁻¹² of the largest coupling
    /// keeps J regular when the density does not respond either (an empty
    /// device). It changes the step, never the solution F = 0.
    fn newton_step(&self, r: &[f64], dn: &[f64]) -> Vec<f64> {
        let cells = self.cells();
        let free_shift = self.fixed.0.is_none()
            && self.fixed.1.is_none()
            && self.screening.iter().all(|&g| g == 0.0);
        let reg = if free_shift {
            1e-12 * self.coupling.iter().copied().fold(1e-300, f64::max)
        } else {
            0.0
        };
        let mut lower = vec![0.0; cells];
        let mut diag = vec![0.0; cells];
        let mut upper = vec![0.0; cells];
        for i in 0..cells {
            if self.fixed_at(i).is_some() {
                diag[i] = 1.0;
                continue;
            }
            diag[i] = -self.screening[i] + dn[i] - reg;
            if i + 1 < cells {
                diag[i] -= self.coupling[i];
                upper[i] = self.coupling[i];
            }
            if i > 0 {
                diag[i] -= self.coupling[i - 1];
                lower[i] = self.coupling[i - 1];
            }
        }
        let rhs: Vec<f64> = r.iter().map(|x| -x).collect();
        thomas(&lower, &diag, &upper, &rhs)
    }
}

/// Solve a tridiagonal system (sub-diagonal `a`, diagonal `b`,
/// super-diagonal `c`, right side `d`) by forward elimination and back
/// substitution.
pub(crate) fn thomas(a: &[f64], b: &[f64], c: &[f64], d: &[f64]) -> Vec<f64> {
    let n = b.len();
    let mut cp = vec![0.0; n];
    let mut dp = vec![0.0; n];
    for i in 0..n {
        let (ai, ci_prev, di_prev) = if i == 0 {
            (0.0, 0.0, 0.0)
        } else {
            (a[i], cp[i - 1], dp[i - 1])
        };
        let m = b[i] - ai * ci_prev;
        cp[i] = c[i] / m;
        dp[i] = (d[i] - ai * di_prev) / m;
    }
    let mut x = vec![0.0; n];
    for i in (0..n).rev() {
        x[i] = dp[i] - if i + 1 < n { cp[i] * x[i + 1] } else { 0.0 };
    }
    x
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The Thomas solve against the product of the matrix and the answer.
    #[test]
    fn thomas_solves_a_tridiagonal_system() {
        let a = [0.0, 1.0, -2.0, 0.5];
        let b = [4.0, -5.0, 6.0, 3.0];
        let c = [1.0, 0.3, 1.5, 0.0];
        let x = [1.0, -2.0, 0.5, 3.0];
        let d: Vec<f64> = (0..4)
            .map(|i| {
                let mut s = b[i] * x[i];
                if i > 0 {
                    s += a[i] * x[i - 1];
                }
                if i < 3 {
                    s += c[i] * x[i + 1];
                }
                s
            })
            .collect();
        let y = thomas(&a, &b, &c, &d);
        for (p, q) in x.iter().zip(&y) {
            assert!((p - q).abs() < 1e-13, "{x:?} {y:?}");
        }
    }
}
