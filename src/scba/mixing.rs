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

#![allow(clippy::needless_range_loop)] // small dense linear algebra reads best with indices

use super::params::Mixing;
use crate::C64;
use crate::scattering::ScatteringSelfEnergy;
use std::collections::VecDeque;

/// Mixing state across Born iterations.
///
/// Memory: with L = 3·E·N·b mixed numbers and depth m, the Anderson state
/// holds the last input and residual plus m differences ΔX and m
/// differences ΔR: (2m + 2)·L f64, i.e. (2m + 2)·24 bytes per energy and
/// orbital site; one more residual vector is reused for the current step.
/// Linear mixing keeps nothing.
pub struct Mixer {
    kind: Mixing,
    /// Last input x_{k−1} and residual r_{k−1}, flat.
    prev: Option<(Vec<f64>, Vec<f64>)>,
    /// ΔX_j = x_{j+1} − x_j and ΔR_j, oldest first.
    dx: VecDeque<Vec<f64>>,
    dr: VecDeque<Vec<f64>>,
    /// Current residual r_k (reused buffer).
    r: Vec<f64>,
    last_norm: f64,
    /// Identity of each stored ΔR (for the Gram cache), oldest first.
    ids: VecDeque<u64>,
    next_id: u64,
    /// ΔR_i·ΔR_j of stored differences, keyed by (older id, newer id): each
    /// iteration adds one difference, so only its products are new.
    gram: std::collections::HashMap<(u64, u64), f64>,
}

/// The mixed vector (Re Σ^r_0, Im Σ^r_0, Σ^in_0) element `i` of `s`.
#[inline]
fn get(s: &ScatteringSelfEnergy, i: usize) -> f64 {
    let n = s.inscatter.len();
    match i / n {
        0 => s.retarded[i].re,
        1 => s.retarded[i - n].im,
        _ => s.inscatter[i - 2 * n],
    }
}

fn flatten_into(s: &ScatteringSelfEnergy, v: &mut Vec<f64>) {
    v.clear();
    v.extend(s.retarded.iter().map(|z| z.re));
    v.extend(s.retarded.iter().map(|z| z.im));
    v.extend_from_slice(&s.inscatter);
}

/// Dot product summed in fixed chunks (in parallel), then the chunk sums in
/// order: the same number for any thread count.
fn dot(a: &[f64], b: &[f64]) -> f64 {
    use rayon::prelude::*;
    const CHUNK: usize = 1 << 14;
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

impl Mixer {
    /// A fresh mixer.
    pub fn new(kind: Mixing) -> Self {
        Self {
            kind,
            prev: None,
            dx: VecDeque::new(),
            dr: VecDeque::new(),
            r: Vec::new(),
            last_norm: f64::INFINITY,
            ids: VecDeque::new(),
            next_id: 0,
            gram: std::collections::HashMap::new(),
        }
    }

    /// Replace `x` by the next input given its image `fx`; returns which
    /// step was taken ("linear", "anderson" or "restart" when the residual
    /// grew and the history was dropped for a damped linear step).
    pub fn update(
        &mut self,
        x: &mut ScatteringSelfEnergy,
        fx: &ScatteringSelfEnergy,
    ) -> &'static str {
        let n = x.inscatter.len();
        let (depth, beta) = match self.kind {
            Mixing::Linear { factor } => {
                for i in 0..n {
                    let xi = x.retarded[i];
                    x.retarded[i] = xi + (fx.retarded[i] - xi) * factor;
                    let xi = x.inscatter[i];
                    x.inscatter[i] = xi + factor * (fx.inscatter[i] - xi);
                }
                return "linear";
            }
            Mixing::Anderson { depth, damping } => (depth, damping),
        };
        let len = 3 * n;
        let mut r = std::mem::take(&mut self.r);
        r.clear();
        r.extend(
            fx.retarded
                .iter()
                .zip(&x.retarded)
                .map(|(f, v)| f.re - v.re),
        );
        r.extend(
            fx.retarded
                .iter()
                .zip(&x.retarded)
                .map(|(f, v)| f.im - v.im),
        );
        r.extend(fx.inscatter.iter().zip(&x.inscatter).map(|(f, v)| f - v));
        debug_assert_eq!(r.len(), len);
        let norm = dot(&r, &r).sqrt();
        let grew = norm > self.last_norm;
        self.last_norm = norm;
        if grew {
            self.dx.clear();
            self.dr.clear();
            self.ids.clear();
            self.gram.clear();
        } else if let Some((xp, rp)) = self.prev.as_ref()
            && depth > 0
        {
            // Reuse the oldest difference buffers once the history is full.
            let (mut dxv, mut drv) = if self.dx.len() >= depth {
                let gone = self.ids.pop_front().expect("non-empty");
                self.gram.retain(|&(a, _), _| a != gone);
                (
                    self.dx.pop_front().expect("non-empty"),
                    self.dr.pop_front().expect("non-empty"),
                )
            } else {
                (Vec::with_capacity(len), Vec::with_capacity(len))
            };
            dxv.clear();
            drv.clear();
            dxv.extend((0..len).map(|i| get(x, i) - xp[i]));
            drv.extend(r.iter().zip(rp).map(|(a, b)| a - b));
            self.dx.push_back(dxv);
            self.dr.push_back(drv);
            self.ids.push_back(self.next_id);
            self.next_id += 1;
        }
        // Least squares min ‖r − ΔR γ‖ by the normal equations with a
        // Cholesky factorisation that drops columns whose pivot falls below
        // 1e-14 of their squared norm (numerically dependent differences).
        let m = self.dr.len();
        let mut gamma = vec![0.0; m];
        if m > 0 {
            let mut a = vec![vec![0.0; m]; m];
            for i in 0..m {
                for j in 0..=i {
                    let key = (self.ids[j], self.ids[i]);
                    let v = match self.gram.get(&key) {
                        Some(&v) => v,
                        None => {
                            let v = dot(&self.dr[i], &self.dr[j]);
                            self.gram.insert(key, v);
                            v
                        }
                    };
                    a[i][j] = v;
                    a[j][i] = v;
                }
            }
            let rhs: Vec<f64> = self.dr.iter().map(|d| dot(d, &r)).collect();
            let mut l = vec![vec![0.0; m]; m];
            let mut kept = vec![false; m];
            for j in 0..m {
                let mut d = a[j][j];
                for k in 0..j {
                    if kept[k] {
                        d -= l[j][k] * l[j][k];
                    }
                }
                if d <= 1e-14 * a[j][j] || d <= 0.0 {
                    continue;
                }
                kept[j] = true;
                let dj = d.sqrt();
                l[j][j] = dj;
                for i in j + 1..m {
                    let mut s = a[i][j];
                    for k in 0..j {
                        if kept[k] {
                            s -= l[i][k] * l[j][k];
                        }
                    }
                    l[i][j] = s / dj;
                }
            }
            let mut y = vec![0.0; m];
            for i in 0..m {
                if kept[i] {
                    let mut s = rhs[i];
                    for k in 0..i {
                        if kept[k] {
                            s -= l[i][k] * y[k];
                        }
                    }
                    y[i] = s / l[i][i];
                }
            }
            for i in (0..m).rev() {
                if kept[i] {
                    let mut s = y[i];
                    for k in i + 1..m {
                        if kept[k] {
                            s -= l[k][i] * gamma[k];
                        }
                    }
                    gamma[i] = s / l[i][i];
                }
            }
        }
        // Remember x_k and r_k before x is overwritten.
        let (mut xp, rp) = self
            .prev
            .take()
            .unwrap_or_else(|| (Vec::with_capacity(len), Vec::new()));
        flatten_into(x, &mut xp);
        let step = if m == 0 && grew { 0.5 * beta } else { beta };
        // x_{k+1} = x_k + β r_k − Σ_j γ_j (ΔX_j + β ΔR_j), per element.
        let next = |i: usize| {
            let mut v = xp[i] + step * r[i];
            for j in 0..m {
                if gamma[j] != 0.0 {
                    v -= gamma[j] * (self.dx[j][i] + beta * self.dr[j][i]);
                }
            }
            v
        };
        {
            use rayon::prelude::*;
            x.retarded
                .par_iter_mut()
                .zip(x.inscatter.par_iter_mut())
                .enumerate()
                .for_each(|(i, (re, inn))| {
                    *re = C64::new(next(i), next(n + i));
                    *inn = next(2 * n + i);
                });
        }
        self.prev = Some((xp, r));
        self.r = rp;
        if m > 0 {
            "anderson"
        } else if grew {
            "restart"
        } else {
            "linear"
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn state(v: &[f64]) -> ScatteringSelfEnergy {
        let n = v.len() / 3;
        let mut s = ScatteringSelfEnergy::zeros(1, n);
        unflatten(v, &mut s);
        s
    }

    fn unflatten(v: &[f64], s: &mut ScatteringSelfEnergy) {
        let n = s.inscatter.len();
        for i in 0..n {
            s.retarded[i] = C64::new(v[i], v[n + i]);
            s.inscatter[i] = v[2 * n + i];
        }
    }

    fn flat(s: &ScatteringSelfEnergy) -> Vec<f64> {
        let mut v = Vec::new();
        flatten_into(s, &mut v);
        v
    }

    #[test]
    fn a_growing_residual_drops_the_history_and_damps_the_step() {
        let beta = 0.8;
        let mut m = Mixer::new(Mixing::Anderson {
            depth: 4,
            damping: beta,
        });
        let mut x = state(&[0.0; 6]);
        assert_eq!(m.update(&mut x, &state(&[1.0; 6])), "linear");
        // Residual 10 per element: larger than the first one (1).
        let x0 = flat(&x);
        let fx: Vec<f64> = x0.iter().map(|v| v + 10.0).collect();
        assert_eq!(m.update(&mut x, &state(&fx)), "restart");
        for (a, b) in flat(&x).iter().zip(&x0) {
            assert!((a - (b + 0.5 * beta * 10.0)).abs() < 1e-14);
        }
        // With a shrinking residual the history builds up again.
        let x1 = flat(&x);
        let fx: Vec<f64> = x1.iter().map(|v| v + 1.0).collect();
        assert_eq!(m.update(&mut x, &state(&fx)), "anderson");
    }

    /// F(x) = A x + c with a contraction A whose slowest mode decays by
    /// 0.95 per step: linear mixing crawls, Anderson solves the linear
    /// problem in about as many steps as A has distinct eigenvalues.
    #[test]
    fn anderson_beats_linear_mixing_on_a_linear_map() {
        let eig = [0.95, 0.5, -0.3, 0.1, 0.8, 0.0];
        let c = [1.0, -2.0, 0.5, 3.0, 0.25, -1.0];
        let f = |x: &[f64]| -> Vec<f64> { (0..6).map(|i| eig[i] * x[i] + c[i]).collect() };
        let fixed: Vec<f64> = (0..6).map(|i| c[i] / (1.0 - eig[i])).collect();
        let run = |kind: Mixing| {
            let mut m = Mixer::new(kind);
            let mut x = state(&[0.0; 6]);
            for it in 1..=2000 {
                let fx = f(&flat(&x));
                let err = flat(&x)
                    .iter()
                    .zip(&fixed)
                    .map(|(a, b)| (a - b).abs())
                    .fold(0.0, f64::max);
                if err < 1e-10 {
                    return it;
                }
                m.update(&mut x, &state(&fx));
            }
            usize::MAX
        };
        let anderson = run(Mixing::Anderson {
            depth: 6,
            damping: 0.8,
        });
        let linear = run(Mixing::Linear { factor: 1.0 });
        assert!(anderson <= 20, "anderson took {anderson}");
        assert!(
            linear > 5 * anderson,
            "linear {linear} vs anderson {anderson}"
        );
    }
}
