//! Mixing of successive scattering self-energies.
//!
//! The mixed quantity is the vector (Re Σ^r_0, Im Σ^r_0, Σ^in_0) over all
//! energies and orbital sites. Anderson acceleration in the form of
//! H. F. Walker and P. Ni, SIAM J. Numer. Anal. 49, 1715 (2011) (after
//! D. G. Anderson, J. ACM 12, 547 (1965)): with residuals r_j = F(x_j) − x_j
//! and differences ΔR, ΔX of the last m iterates, solve
//! min_γ ‖r_k − ΔR γ‖ and take x_k+1 = x_k + β r_k − (ΔX + β ΔR) γ.
//! Safeguard: when the residual norm grows, the history is dropped and a
//! damped linear step is taken.

use super::params::Mixing;
use crate::C64;
use crate::scattering::ScatteringSelfEnergy;
use std::collections::VecDeque;

/// Mixing state across Born iterations.
pub struct Mixer {
    kind: Mixing,
    xs: VecDeque<Vec<f64>>,
    rs: VecDeque<Vec<f64>>,
    last_norm: f64,
}

fn flatten(s: &ScatteringSelfEnergy) -> Vec<f64> {
    let n = s.inscatter.len();
    let mut v = Vec::with_capacity(3 * n);
    v.extend(s.retarded.iter().map(|z| z.re));
    v.extend(s.retarded.iter().map(|z| z.im));
    v.extend_from_slice(&s.inscatter);
    v
}

fn unflatten(v: &[f64], s: &mut ScatteringSelfEnergy) {
    let n = s.inscatter.len();
    for i in 0..n {
        s.retarded[i] = C64::new(v[i], v[n + i]);
        s.inscatter[i] = v[2 * n + i];
    }
}

fn dot(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).map(|(x, y)| x * y).sum()
}

impl Mixer {
    /// A fresh mixer.
    pub fn new(kind: Mixing) -> Self {
        Self {
            kind,
            xs: VecDeque::new(),
            rs: VecDeque::new(),
            last_norm: f64::INFINITY,
        }
    }

    /// Replace `x` by the next input given its image `fx`; returns which
    /// step was taken.
    pub fn update(
        &mut self,
        x: &mut ScatteringSelfEnergy,
        fx: &ScatteringSelfEnergy,
    ) -> &'static str {
        let xv = flatten(x);
        let fv = flatten(fx);
        let r: Vec<f64> = fv.iter().zip(&xv).map(|(f, x)| f - x).collect();
        let (depth, beta) = match self.kind {
            Mixing::Linear { factor } => {
                let next: Vec<f64> = xv.iter().zip(&r).map(|(x, r)| x + factor * r).collect();
                unflatten(&next, x);
                return "linear";
            }
            Mixing::Anderson { depth, damping } => (depth, damping),
        };
        let norm = dot(&r, &r).sqrt();
        let grew = norm > self.last_norm;
        self.last_norm = norm;
        if grew {
            self.xs.clear();
            self.rs.clear();
        }
        self.xs.push_back(xv);
        self.rs.push_back(r);
        while self.xs.len() > depth + 1 {
            self.xs.pop_front();
            self.rs.pop_front();
        }
        let m = self.xs.len() - 1;
        let xk = self.xs.back().expect("just pushed");
        let rk = self.rs.back().expect("just pushed");
        if m == 0 {
            let step = if grew { 0.5 * beta } else { beta };
            let next: Vec<f64> = xk.iter().zip(rk).map(|(x, r)| x + step * r).collect();
            unflatten(&next, x);
            return if grew { "restart" } else { "linear" };
        }
        // Differences of consecutive iterates.
        let dr: Vec<Vec<f64>> = (0..m)
            .map(|j| {
                self.rs[j + 1]
                    .iter()
                    .zip(&self.rs[j])
                    .map(|(a, b)| a - b)
                    .collect()
            })
            .collect();
        let dx: Vec<Vec<f64>> = (0..m)
            .map(|j| {
                self.xs[j + 1]
                    .iter()
                    .zip(&self.xs[j])
                    .map(|(a, b)| a - b)
                    .collect()
            })
            .collect();
        // Least squares by modified Gram-Schmidt QR of ΔR; columns that are
        // numerically dependent are dropped.
        let mut q: Vec<Vec<f64>> = Vec::with_capacity(m);
        let mut rmat = vec![vec![0.0; m]; m];
        let mut kept = Vec::with_capacity(m);
        for (j, col) in dr.iter().enumerate() {
            let mut v = col.clone();
            let orig = dot(&v, &v).sqrt();
            for (qi, qv) in q.iter().enumerate() {
                let c = dot(qv, &v);
                rmat[qi][j] = c;
                for (vi, qvi) in v.iter_mut().zip(qv) {
                    *vi -= c * qvi;
                }
            }
            let nv = dot(&v, &v).sqrt();
            if nv <= 1e-12 * orig.max(f64::MIN_POSITIVE) {
                continue;
            }
            rmat[q.len()][j] = nv;
            for vi in v.iter_mut() {
                *vi /= nv;
            }
            q.push(v);
            kept.push(j);
        }
        // Solve R γ = Qᵀ r over the kept columns (upper triangular).
        let kq = q.len();
        let rhs: Vec<f64> = q.iter().map(|qv| dot(qv, rk)).collect();
        let mut gamma = vec![0.0; m];
        for i in (0..kq).rev() {
            let ji = kept[i];
            let mut s = rhs[i];
            for l in i + 1..kq {
                s -= rmat[i][kept[l]] * gamma[kept[l]];
            }
            gamma[ji] = s / rmat[i][ji];
        }
        let mut next: Vec<f64> = xk.iter().zip(rk).map(|(x, r)| x + beta * r).collect();
        for j in 0..m {
            if gamma[j] == 0.0 {
                continue;
            }
            for ((n, dxv), drv) in next.iter_mut().zip(&dx[j]).zip(&dr[j]) {
                *n -= gamma[j] * (dxv + beta * drv);
            }
        }
        unflatten(&next, x);
        "anderson"
    }
}
