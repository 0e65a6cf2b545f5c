//! Anderson mixing of the outer potential iteration.
//!
//! The outer loop is a fixed-point problem U = N(U), with N the Newton
//! answer on the predicted density of a transport solve at U. The
//! predicted density is local in each cell while the true response of a
//! coherent device is not, so the plain iteration U ← N(U) can grow a
//! slowly amplified oscillation; Anderson acceleration over the last m
//! iterates removes it. With residuals r_j = N(U_j) − U_j and the
//! differences ΔU_j, Δr_j of the last m iterates, γ minimises
//! ‖r_k − Σ_j γ_j Δr_j‖ and U_k+1 = U_k + β r_k − Σ_j γ_j (ΔU_j + β Δr_j)
//! (D. G. Anderson, J. ACM 12, 547 (1965); H. F. Walker, P. Ni, SIAM J.
//! Numer. Anal. 49, 1715 (2011)). The history is small (one number per
//! cell), so the least-squares problem is solved by its normal equations
//! with Gaussian elimination.
//!
//! The joint scheme (`joint.rs`) mixes a longer vector, Σ0 and the
//! potential together, with a factor of its own for each part: β is then
//! a diagonal matrix B, U_k+1 = U_k + B r_k − Σ_j γ_j (ΔU_j + B Δr_j),
//! which is Anderson's method on the iteration preconditioned by B. The
//! dot products run over fixed chunks in parallel and add the chunk sums
//! in order, so the iterates do not depend on the thread count.

use rayon::prelude::*;
use std::collections::VecDeque;

/// Mixing state across outer iterations.
pub(super) struct PotentialMixer {
    depth: usize,
    /// β of the first `head` entries and of the rest.
    beta: (f64, f64),
    head: usize,
    prev: Option<(Vec<f64>, Vec<f64>)>,
    du: VecDeque<Vec<f64>>,
    dr: VecDeque<Vec<f64>>,
}

/// Entries per chunk of a dot product.
const CHUNK: usize = 1 << 14;

fn dot(a: &[f64], b: &[f64]) -> f64 {
    if a.len() <= CHUNK {
        return a.iter().zip(b).map(|(x, y)| x * y).sum();
    }
    let parts: Vec<f64> = a
        .par_chunks(CHUNK)
        .zip(b.par_chunks(CHUNK))
        .map(|(x, y)| x.iter().zip(y).map(|(p, q)| p * q).sum())
        .collect();
    parts.iter().sum()
}

impl PotentialMixer {
    /// History depth `depth` (0: linear) and factor β = `beta`.
    pub(super) fn new(depth: usize, beta: f64) -> Self {
        Self::split(depth, beta, beta, 0)
    }

    /// Depth `depth`, factor `beta_head` on the first `head` entries of
    /// the vector and `beta_tail` on the others.
    pub(super) fn split(depth: usize, beta_head: f64, beta_tail: f64, head: usize) -> Self {
        Self {
            depth,
            beta: (beta_head, beta_tail),
            head,
            prev: None,
            du: VecDeque::new(),
            dr: VecDeque::new(),
        }
    }

    /// The next potential from the current one `u` and its residual `r`.
    pub(super) fn next(&mut self, u: &[f64], r: &[f64]) -> Vec<f64> {
        if let Some((pu, pr)) = &self.prev {
            self.du
                .push_back(u.iter().zip(pu).map(|(a, b)| a - b).collect());
            self.dr
                .push_back(r.iter().zip(pr).map(|(a, b)| a - b).collect());
            if self.dr.len() > self.depth {
                self.du.pop_front();
                self.dr.pop_front();
            }
        }
        self.prev = Some((u.to_vec(), r.to_vec()));
        let gamma = self.coefficients(r).unwrap_or_else(|| {
            self.du.clear();
            self.dr.clear();
            Vec::new()
        });
        let (head, (bh, bt)) = (self.head, self.beta);
        let beta = |i: usize| if i < head { bh } else { bt };
        let mut next: Vec<f64> = (u.iter().zip(r).enumerate())
            .map(|(i, (a, b))| a + beta(i) * b)
            .collect();
        for (g, (du, dr)) in gamma.iter().zip(self.du.iter().zip(&self.dr)) {
            next.par_iter_mut().enumerate().for_each(|(i, x)| {
                *x -= g * (du[i] + beta(i) * dr[i]);
            });
        }
        next
    }

    /// γ of the least-squares problem (None when the normal equations are
    /// singular).
    // A small dense elimination reads best by index.
    #[allow(clippy::needless_range_loop)]
    fn coefficients(&self, r: &[f64]) -> Option<Vec<f64>> {
        let m = self.dr.len();
        let mut a = vec![vec![0.0; m + 1]; m];
        for i in 0..m {
            for j in 0..m {
                a[i][j] = dot(&self.dr[i], &self.dr[j]);
            }
            a[i][m] = dot(&self.dr[i], r);
        }
        for c in 0..m {
            let p = (c..m).max_by(|&x, &y| a[x][c].abs().total_cmp(&a[y][c].abs()))?;
            a.swap(c, p);
            let scale = a[c][c];
            if scale.abs() <= 1e-14 * a.iter().map(|row| row[c].abs()).fold(0.0, f64::max) {
                return None;
            }
            for row in c + 1..m {
                let f = a[row][c] / scale;
                for col in c..=m {
                    a[row][col] -= f * a[c][col];
                }
            }
        }
        let mut g = vec![0.0; m];
        for i in (0..m).rev() {
            let s: f64 = (i + 1..m).map(|j| a[i][j] * g[j]).sum();
            g[i] = (a[i][m] - s) / a[i][i];
        }
        g.iter().all(|x| x.is_finite()).then_some(g)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// On a linear contraction that plain iteration amplifies (factor −1.3
    /// in one direction), Anderson mixing still finds the fixed point.
    #[test]
    fn anderson_tames_an_amplified_mode() {
        let map = |u: &[f64]| vec![1.0 - 1.3 * (u[0] - 1.0), 0.5 * u[1] + 1.0];
        let mut mixer = PotentialMixer::new(4, 0.5);
        let mut u = vec![0.0, 0.0];
        for _ in 0..40 {
            let n = map(&u);
            let r: Vec<f64> = n.iter().zip(&u).map(|(a, b)| a - b).collect();
            u = mixer.next(&u, &r);
        }
        assert!(
            (u[0] - 1.0).abs() < 1e-10 && (u[1] - 2.0).abs() < 1e-10,
            "{u:?}"
        );
    }
}
