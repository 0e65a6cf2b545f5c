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
    /// Δr_i · Δr_j of the history, row i for the i-th entry of `dr`: each
    /// difference enters once, so its products are taken once instead of
    /// at every step while it stays in the history.
    gram: VecDeque<Vec<f64>>,
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
            gram: VecDeque::new(),
        }
    }

    /// The next potential from the current one `u` and its residual `r`.
    pub(super) fn next(&mut self, u: &[f64], r: &[f64]) -> Vec<f64> {
        if let Some((pu, pr)) = &self.prev {
            let du = u.iter().zip(pu).map(|(a, b)| a - b).collect();
            let dr = r.iter().zip(pr).map(|(a, b)| a - b).collect();
            self.push(du, dr);
        }
        self.prev = Some((u.to_vec(), r.to_vec()));
        let gamma = self.coefficients(r).unwrap_or_else(|| {
            self.du.clear();
            self.dr.clear();
            self.gram.clear();
            Vec::new()
        });
        let (head, (bh, bt)) = (self.head, self.beta);
        let beta = |i: usize| if i < head { bh } else { bt };
        let history: Vec<(f64, &[f64], &[f64])> = (gamma.iter().zip(self.du.iter().zip(&self.dr)))
            .map(|(&g, (du, dr))| (g, du.as_slice(), dr.as_slice()))
            .collect();
        // One pass over the vector; each entry takes its corrections in
        // the order of the history.
        let mut next: Vec<f64> = u.to_vec();
        next.par_iter_mut()
            .zip(r)
            .enumerate()
            .for_each(|(i, (x, b))| {
                *x += beta(i) * b;
                for &(g, du, dr) in &history {
                    *x -= g * (du[i] + beta(i) * dr[i]);
                }
            });
        next
    }

    /// Add the differences `du`, `dr` to the history (dropping the oldest
    /// beyond the depth) and their products with the others to `gram`.
    fn push(&mut self, du: Vec<f64>, dr: Vec<f64>) {
        let mut row: Vec<f64> = self.dr.iter().map(|d| dot(d, &dr)).collect();
        for (g, &v) in self.gram.iter_mut().zip(&row) {
            g.push(v);
        }
        row.push(dot(&dr, &dr));
        self.gram.push_back(row);
        self.du.push_back(du);
        self.dr.push_back(dr);
        if self.dr.len() > self.depth {
            self.du.pop_front();
            self.dr.pop_front();
            self.gram.pop_front();
            for g in &mut self.gram {
                g.remove(0);
            }
        }
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
                a[i][j] = self.gram[i][j];
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

    /// The products kept from step to step are those of the history held
    /// (an identity check: the same dot products taken afresh, bit for
    /// bit), through more steps than the depth so that old rows are
    /// dropped, on a vector long enough for the chunked dot product.
    #[test]
    fn kept_products_match_the_history() {
        let n = 3 * CHUNK + 7;
        let mut mixer = PotentialMixer::split(3, 0.3, 0.5, n / 2);
        let mut u: Vec<f64> = (0..n).map(|i| (i as f64 * 0.37).sin()).collect();
        for step in 0..7 {
            let r: Vec<f64> = (u.iter().enumerate())
                .map(|(i, &x)| (i as f64 * 0.011 + step as f64).cos() - 0.8 * x)
                .collect();
            u = mixer.next(&u, &r);
            assert_eq!(mixer.gram.len(), mixer.dr.len());
            for (i, row) in mixer.gram.iter().enumerate() {
                assert_eq!(row.len(), mixer.dr.len());
                for (j, &v) in row.iter().enumerate() {
                    assert_eq!(v, dot(&mixer.dr[i], &mixer.dr[j]), "step {step}");
                }
            }
        }
        assert_eq!(mixer.dr.len(), 3);
    }
}
