//! Anderson mixing of lattice-temperature profiles.
//!
//! The vector mixed is the temperature profile T (one value per orbital
//! site, a few hundred numbers at most), so the history is kept whole and
//! the small least-squares problem is solved through its normal equations.
//! With residuals r_j = R(T_j) − T_j (R: the lattice's answer to the
//! powers of a Born solve at T_j) and the differences ΔT_j, Δr_j of the
//! last m iterates, γ minimises ‖r_k − Σ_j γ_j Δr_j‖ and
//! T_k+1 = T_k + β r_k − Σ_j γ_j (ΔT_j + β Δr_j)
//! (H. F. Walker, P. Ni, SIAM J. Numer. Anal. 49, 1715 (2011), after
//! D. G. Anderson, J. ACM 12, 547 (1965)). Depth 0 is linear mixing,
//! T_k+1 = T_k + β r_k.

use std::collections::VecDeque;

/// Mixing state across outer iterations.
pub(super) struct TemperatureMixer {
    depth: usize,
    beta: f64,
    prev: Option<(Vec<f64>, Vec<f64>)>,
    dt: VecDeque<Vec<f64>>,
    dr: VecDeque<Vec<f64>>,
}

fn dot(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).map(|(x, y)| x * y).sum()
}

impl TemperatureMixer {
    /// History depth `depth` (0: linear) and factor β = `beta`.
    pub(super) fn new(depth: usize, beta: f64) -> Self {
        Self {
            depth,
            beta,
            prev: None,
            dt: VecDeque::new(),
            dr: VecDeque::new(),
        }
    }

    /// The next profile from the current one `t` and its residual `r`.
    pub(super) fn next(&mut self, t: &[f64], r: &[f64]) -> Vec<f64> {
        if self.depth > 0 {
            if let Some((pt, pr)) = &self.prev {
                self.dt
                    .push_back(t.iter().zip(pt).map(|(a, b)| a - b).collect());
                self.dr
                    .push_back(r.iter().zip(pr).map(|(a, b)| a - b).collect());
                if self.dr.len() > self.depth {
                    self.dt.pop_front();
                    self.dr.pop_front();
                }
            }
            self.prev = Some((t.to_vec(), r.to_vec()));
        }
        let gamma = match self.coefficients(r) {
            Some(g) => g,
            None => {
                // Degenerate history (two equal residual steps): start over.
                self.dt.clear();
                self.dr.clear();
                Vec::new()
            }
        };
        let mut next: Vec<f64> = t.iter().zip(r).map(|(t, r)| t + self.beta * r).collect();
        for ((g, dt), dr) in gamma.iter().zip(&self.dt).zip(&self.dr) {
            for ((n, a), b) in next.iter_mut().zip(dt).zip(dr) {
                *n -= g * (a + self.beta * b);
            }
        }
        next
    }

    /// γ of the least-squares problem min ‖r − Σ γ_j Δr_j‖ by the normal
    /// equations and Gaussian elimination with partial pivoting; `None`
    /// when they are singular to rounding.
    fn coefficients(&self, r: &[f64]) -> Option<Vec<f64>> {
        let m = self.dr.len();
        let mut a: Vec<Vec<f64>> = (0..m)
            .map(|i| {
                let mut row: Vec<f64> = (0..m).map(|j| dot(&self.dr[i], &self.dr[j])).collect();
                row.push(dot(&self.dr[i], r));
                row
            })
            .collect();
        let scale = (0..m).map(|i| a[i][i]).fold(0.0, f64::max);
        for c in 0..m {
            let p = (c..m).max_by(|&x, &y| a[x][c].abs().total_cmp(&a[y][c].abs()))?;
            if a[p][c].abs() <= 1e-14 * scale {
                return None;
            }
            a.swap(c, p);
            let (upper, lower) = a.split_at_mut(c + 1);
            let pivot = &upper[c];
            for row in lower.iter_mut() {
                let f = row[c] / pivot[c];
                for (x, p) in row[c..].iter_mut().zip(&pivot[c..]) {
                    *x -= f * p;
                }
            }
        }
        let mut g = vec![0.0; m];
        for c in (0..m).rev() {
            let s: f64 = (c + 1..m).map(|j| a[c][j] * g[j]).sum();
            g[c] = (a[c][m] - s) / a[c][c];
        }
        Some(g)
    }
}

#[cfg(test)]
mod tests {
    use super::TemperatureMixer;

    /// On a linear map T → A T + b with a contraction A, Anderson mixing of
    /// depth ≥ the dimension reaches the fixed point (to rounding) in a few
    /// more steps than the dimension (common practice: on linear problems
    /// Anderson acceleration is equivalent to GMRES, Walker & Ni 2011), and
    /// far sooner than the plain iteration, whose error falls only as 0.8ᵏ.
    #[test]
    fn anderson_solves_a_small_linear_fixed_point() {
        let a = [[-0.8, 0.1], [0.05, 0.6]];
        let b = [300.0, 310.0];
        let map = |t: &[f64]| -> Vec<f64> {
            (0..2)
                .map(|i| a[i][0] * t[0] + a[i][1] * t[1] + b[i])
                .collect()
        };
        let run = |depth: usize| {
            let mut mixer = TemperatureMixer::new(depth, 1.0);
            let mut t = vec![300.0, 300.0];
            for k in 1..=60 {
                let r: Vec<f64> = map(&t).iter().zip(&t).map(|(f, x)| f - x).collect();
                if r.iter().all(|v| v.abs() < 1e-9) {
                    return k;
                }
                t = mixer.next(&t, &r);
            }
            61
        };
        let anderson = run(3);
        let linear = run(0);
        assert!(anderson <= 6, "Anderson needed {anderson} steps");
        assert!(linear > 40, "plain iteration needed {linear} steps");
    }
}
